package rank

import (
	"encoding/binary"
	"math"
	"os"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/prepare"
	"strayleaf/placement/simulate"
)

// benchData is about 3,000 readings x 600 witnesses: the matrix written by
// testdata/golden/nmf/bench_side_by_side.py if NMF_BENCH_X and NMF_BENCH_M name its files, else a
// simulated tradition of 12 groups (1,000 units of 3 readings, lacunae) prepared as usual.
func benchData(b *testing.B) (X, M *mat.Dense) {
	if xf, mf := os.Getenv("NMF_BENCH_X"), os.Getenv("NMF_BENCH_M"); xf != "" && mf != "" {
		load := func(name string) *mat.Dense {
			raw, err := os.ReadFile(name)
			if err != nil || len(raw) != 8*3000*600 {
				b.Fatalf("%s: %v (%d bytes; expected 3000 x 600 float64)", name, err, len(raw))
			}
			d := make([]float64, 3000*600)
			for i := range d {
				d[i] = math.Float64frombits(binary.LittleEndian.Uint64(raw[8*i:]))
			}
			return mat.NewDense(3000, 600, d)
		}
		return load(xf), load(mf)
	}
	cfg := simulate.DefaultConfig()
	cfg.Witnesses, cfg.Units, cfg.Sections, cfg.Readings = 600, 1000, 10, 3
	cfg.Families = []simulate.Family{{Groups: 4, Share: 3}, {Groups: 3, Share: 2}, {Groups: 2, Share: 2}, {Groups: 1, Share: 1}, {Groups: 1, Share: 1}, {Groups: 1, Share: 1}}
	cfg.LacunaRuns = 10
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		b.Fatal(err)
	}
	p, err := prepare.Prepare(tr.Collation, prepare.DefaultOptions())
	if err != nil {
		b.Fatal(err)
	}
	return p.X, p.M
}

// BenchmarkSweep600x3000k2to16 sweeps k = 2..16 with 10 random starts each (plus k = 1 for the
// gain of k = 2) on all cores, with SweepOptions.
func BenchmarkSweep600x3000k2to16(b *testing.B) {
	X, M := benchData(b)
	m, n := X.Dims()
	b.Logf("%d readings x %d witnesses", m, n)
	for i := 0; i < b.N; i++ {
		start := time.Now()
		res, err := Sweep(X, M, 2, 16, 10, SweepOptions(), nil)
		if err != nil {
			b.Fatal(err)
		}
		b.Logf("sweep took %v; recommended %s", time.Since(start).Round(time.Millisecond), res.Reason)
		runs, iters := 0, 0
		for _, kr := range res.Ks {
			for _, it := range kr.Iterations {
				runs++
				iters += it
			}
			b.Logf("k=%2d objective %.6g elbow %.3g cophenetic %.4f dispersion %.4f iterations %v", kr.K, kr.Objective, kr.Elbow, kr.Cophenetic, kr.Dispersion, kr.Iterations)
		}
		b.ReportMetric(float64(res.Recommended), "recommended_k")
		b.ReportMetric(float64(iters)/float64(runs), "iterations/run")
	}
}
