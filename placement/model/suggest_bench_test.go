package model

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"strayleaf/placement/simulate"
)

// benchModel trains a model of the size the speed goal names: 750 units of 4 readings (about
// 3,000 kept readings), k = 12, from 300 simulated witnesses.
func benchModel(b *testing.B) (*Model, *simulate.Tradition) {
	b.Helper()
	cfg := simulate.DefaultConfig()
	cfg.Seed, cfg.Witnesses, cfg.Units, cfg.Sections = 31, 300, 750, 6
	cfg.Families = []simulate.Family{{Groups: 3, Share: 0.3}, {Groups: 3, Share: 0.3}, {Groups: 2, Share: 0.2}, {Groups: 2, Share: 0.1}, {Groups: 1, Share: 0.05}, {Groups: 1, Share: 0.05}}
	cfg.Fragmentary = 0
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		b.Fatal(err)
	}
	pm, _, err := Train(tr.Collation, TrainOptions{Groups: 12, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	m, err := FromProto(pm)
	if err != nil {
		b.Fatal(err)
	}
	return m, tr
}

// BenchmarkSuggest: Suggest (top 10) for a 2%-coverage witness against a 3,000-reading, k = 12
// model. Goal: under 5 ms.
func BenchmarkSuggest(b *testing.B) {
	m, tr := benchModel(b)
	c := tr.Collation
	rng := rand.New(rand.NewPCG(1, 2))
	frag := simulate.CutScattered(c.Row(0), 15, rng)
	rd := rowReadings(c, frag)
	b.ReportMetric(float64(len(m.Proto().Rows)), "rows")
	m.guide() // derived data is built once per model, not per call
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := m.Suggest("W", rd, SuggestOptions{Top: 10}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkPlaceFragment: Place (with confidence features, mixture test and nearest witnesses)
// for the same 2%-coverage witness.
func BenchmarkPlaceFragment(b *testing.B) {
	m, tr := benchModel(b)
	c := tr.Collation
	rng := rand.New(rand.NewPCG(1, 2))
	frag := simulate.CutScattered(c.Row(0), 15, rng)
	rd := rowReadings(c, frag)
	ws := m.Engine().NewWorkspace()
	m.guide()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := m.Place("W", rd, ws); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkPlace400: PlaceWith (with confidence features and mixture test, with and without the
// nearest training witnesses) of a 400-unit witness against the 3,000-reading, k = 12 model.
// Goal: about 40 µs or less per call without nearest witnesses, as the service places (its
// unary and streaming goals in api/bench_test.go rest on it), and few allocations.
func BenchmarkPlace400(b *testing.B) {
	m, tr := benchModel(b)
	c := tr.Collation
	rng := rand.New(rand.NewPCG(4, 5))
	frag := simulate.CutScattered(c.Row(3), 400, rng)
	rd := rowReadings(c, frag)
	if len(rd) != 400 {
		b.Fatalf("witness has %d readings; expected 400", len(rd))
	}
	ws := m.Engine().NewWorkspace()
	m.guide()
	for _, near := range []int{0, NearestWitnesses} {
		b.Run(fmt.Sprintf("nearest=%d", near), func(b *testing.B) {
			b.ReportMetric(float64(len(m.Proto().Rows)), "rows")
			b.ReportAllocs()
			for b.Loop() {
				if _, err := m.PlaceWith("W400", rd, ws, PlaceOptions{Nearest: near}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
