//go:build unix

package placement

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"strayleaf/placement/internal/benchcpu"

	"gonum.org/v1/gonum/mat"
)

// groupedModel draws a model shaped like a learnt one: nUnits units of `readings` readings each,
// k groups, each group favouring one reading per unit. Row r of unit u gets an IDF-like weight
// w_r in [0.3, 2.5) and W[r][g] = w_r * 0.85 where group g favours r, w_r * U(0, 0.1) otherwise.
// It returns the model and favoured[u][g], the reading index group g favours at unit u.
func groupedModel(rng *rand.Rand, nUnits, readings, k int) (model, [][]int) {
	m := model{W: mat.NewDense(nUnits*readings, k, nil)}
	favoured := make([][]int, nUnits)
	for u := range nUnits {
		m.unitRows = append(m.unitRows, [2]int{u * readings, (u + 1) * readings})
		favoured[u] = make([]int, k)
		for g := range k {
			favoured[u][g] = rng.IntN(readings)
		}
		for i := range readings {
			r := u*readings + i
			w := 0.3 + 2.2*rng.Float64()
			m.weights = append(m.weights, w)
			for g := range k {
				v := w * 0.1 * rng.Float64()
				if favoured[u][g] == i {
					v = w * 0.85
				}
				m.W.Set(r, g, v)
			}
		}
	}
	return m, favoured
}

// groupedWitness draws a witness covering `cover` units at random: a mixture of two groups (the
// second taking a share of 0 to 0.4 of the units), following its group's favoured reading with
// probability 0.85, otherwise any reading, and 3% of its readings unknown to the model.
func groupedWitness(rng *rand.Rand, m model, favoured [][]int, cover int) []Observation {
	k := len(favoured[0])
	g1, g2 := rng.IntN(k), rng.IntN(k)
	share := 0.4 * rng.Float64()
	var obs []Observation
	for _, u := range rng.Perm(len(m.unitRows))[:cover] {
		lo, hi := m.unitRows[u][0], m.unitRows[u][1]
		g := g1
		if rng.Float64() < share {
			g = g2
		}
		row := lo + favoured[u][g]
		switch x := rng.Float64(); {
		case x < 0.03:
			row = -1
		case x < 0.18:
			row = lo + rng.IntN(hi-lo)
		}
		obs = append(obs, Observation{Unit: u, Row: row})
	}
	return obs
}

func benchPlace(b *testing.B, nUnits, readings, k, cover int) {
	rng := rand.New(rand.NewPCG(uint64(nUnits), uint64(cover)))
	m, fav := groupedModel(rng, nUnits, readings, k)
	e, err := NewEngine(m.W, m.unitRows, m.weights)
	if err != nil {
		b.Fatal(err)
	}
	witnesses := make([][]Observation, 16)
	for i := range witnesses {
		witnesses[i] = groupedWitness(rng, m, fav, cover)
	}
	ws := e.NewWorkspace()
	for _, obs := range witnesses { // warm-up
		if _, err := e.Place(obs, ws); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportAllocs()
	i := 0
	explained := 0.0
	cpu := benchcpu.Start()
	for b.Loop() {
		fit, err := e.Place(witnesses[i%len(witnesses)], ws)
		if err != nil {
			b.Fatal(err)
		}
		explained += 1 - fit.Residual/fit.Norm2
		i++
	}
	cpu.Report(b)
	if math.IsNaN(explained) {
		b.Fatal("NaN fit")
	}
}

// BenchmarkPlace is the speed goal: k = 12 groups, a 3,000-reading W (1,000 units x 3
// readings), a witness covering 400 units. Goal: at most 30 µs/op and 0 allocs/op after
// warm-up. Sixteen different witnesses are placed in turn.
func BenchmarkPlace(b *testing.B) { benchPlace(b, 1000, 3, 12, 400) }

// BenchmarkPlaceCoverage varies the coverage of the same model: a short fragment (40 units),
// half the text, and a near-complete witness (900 units, placed by subtracting the 100 missing
// blocks from the full Gram).
func BenchmarkPlaceCoverage(b *testing.B) {
	for _, cover := range []int{40, 500, 900, 1000} {
		b.Run(fmt.Sprintf("units=%d", cover), func(b *testing.B) { benchPlace(b, 1000, 3, 12, cover) })
	}
}
