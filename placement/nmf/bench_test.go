package nmf

import (
	"context"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// benchTable returns the 3000 x 600 benchmark table: readings x witnesses, 12 groups, 10% of
// cells in lacunae. If NMF_BENCH_X and NMF_BENCH_M name files of little-endian float64 values
// (row-major, 3000 x 600), as written by testdata/golden/nmf/bench_side_by_side.py, those are
// used instead, so that the Go and scikit-learn timings see the same matrix.
func benchTable(b *testing.B) (X, M *mat.Dense) {
	xf, mf := os.Getenv("NMF_BENCH_X"), os.Getenv("NMF_BENCH_M")
	if xf == "" || mf == "" {
		return simTable(1, 600, 1000, 3, 12, 0.3, 0.08, 0.10)
	}
	load := func(name string) *mat.Dense {
		raw, err := os.ReadFile(name)
		if err != nil {
			b.Fatal(err)
		}
		if len(raw) != 8*3000*600 {
			b.Fatalf("%s has %d bytes; expected 3000 x 600 float64", name, len(raw))
		}
		d := make([]float64, 3000*600)
		for i := range d {
			d[i] = math.Float64frombits(binary.LittleEndian.Uint64(raw[8*i:]))
		}
		return mat.NewDense(3000, 600, d)
	}
	return load(xf), load(mf)
}

// BenchmarkFactorize600x3000k12 trains k = 12 on 600 witnesses x 3,000 readings with 10% of
// cells masked, with the default options (NNDSVD start, one restart, tolerance 1e-5).
func BenchmarkFactorize600x3000k12(b *testing.B) {
	X, M := benchTable(b)
	opt := DefaultOptions(12)
	var res *Result
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		var err error
		res, err = Factorize(X, M, opt)
		if err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	b.ReportMetric(float64(res.Iterations), "iterations")
	b.ReportMetric(res.Objective, "objective")
	if os.Getenv("NMF_BENCH_VERBOSE") != "" {
		fmt.Printf("go: iterations %d objective %.6f\n", res.Iterations, res.Objective)
	}
}

// BenchmarkFactorizeRandom600x3000k12 is one start of a rank sweep: k = 12 from random factors,
// on one core.
func BenchmarkFactorizeRandom600x3000k12(b *testing.B) {
	X, M := benchTable(b)
	p, err := NewProblem(X, M)
	if err != nil {
		b.Fatal(err)
	}
	opt := DefaultOptions(12)
	opt.Init, opt.Workers = InitRandom, 1
	iters := 0
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		opt.Seed = uint64(i)
		res, err := p.Factorize(context.Background(), opt)
		if err != nil {
			b.Fatal(err)
		}
		iters += res.Iterations
	}
	b.ReportMetric(float64(iters)/float64(b.N), "iterations")
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(iters)/1e6, "ms/iteration")
}
