//go:build unix

package nnls

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"strayleaf/placement/internal/benchcpu"

	"gonum.org/v1/gonum/mat"
)

// mixtureProblem returns a non-negative m x k matrix A with entries uniform on [0, 1) and
// b = A x0 + noise, with x0 >= 0 having `active` positive entries: the shape of a placement
// against group profiles.
func mixtureProblem(rng *rand.Rand, m, k, active int) (*mat.Dense, []float64) {
	A := mat.NewDense(m, k, nil)
	for i := range m {
		for j := range k {
			A.Set(i, j, rng.Float64())
		}
	}
	x0 := make([]float64, k)
	for _, j := range rng.Perm(k)[:active] {
		x0[j] = 0.2 + rng.Float64()
	}
	b := fitted(A, x0)
	for i := range b {
		b[i] += 0.1 * rng.NormFloat64()
	}
	return A, b
}

// BenchmarkSolveGram times one SolveGram call on a precomputed Gram matrix, for k = 12 and
// k = 50, with solutions that have few positive entries ("sparse": k/4) and many ("dense":
// b drawn with every group present).
func BenchmarkSolveGram(b *testing.B) {
	for _, k := range []int{12, 50} {
		for _, act := range []struct {
			name string
			n    int
		}{{"sparse", k / 4}, {"dense", k}} {
			rng := rand.New(rand.NewPCG(uint64(k), uint64(act.n)))
			A, rhs := mixtureProblem(rng, 3*k*10, k, act.n)
			G, c := gram(A, rhs)
			x := make([]float64, k)
			s := NewSolver(k)
			b.Run(fmt.Sprintf("k=%d/%s", k, act.name), func(b *testing.B) {
				b.ReportAllocs()
				cpu := benchcpu.Start()
				for b.Loop() {
					if err := s.SolveGram(G, c, x); err != nil {
						b.Fatal(err)
					}
				}
				cpu.Report(b)
			})
		}
	}
}

// BenchmarkSolve times the QR form on the same kind of problem (it copies A and allocates its
// workspace on each call).
func BenchmarkSolve(b *testing.B) {
	for _, k := range []int{12, 50} {
		rng := rand.New(rand.NewPCG(uint64(k), 99))
		A, rhs := mixtureProblem(rng, 3*k*10, k, k/4)
		b.Run(fmt.Sprintf("k=%d", k), func(b *testing.B) {
			b.ReportAllocs()
			cpu := benchcpu.Start()
			for b.Loop() {
				if _, err := Solve(A, rhs); err != nil {
					b.Fatal(err)
				}
			}
			cpu.Report(b)
		})
	}
}

// BenchmarkSolveGramFrom times SolveGramFrom on the problems of BenchmarkSolveGram, started
// from a perturbed problem's solution (b with extra noise of the same size, as a resample's
// neighbour would give), beside SolveGram on the same problem.
func BenchmarkSolveGramFrom(b *testing.B) {
	for _, k := range []int{12, 50} {
		for _, act := range []struct {
			name string
			n    int
		}{{"sparse", k / 4}, {"dense", k}} {
			rng := rand.New(rand.NewPCG(uint64(k), uint64(act.n)))
			A, rhs := mixtureProblem(rng, 3*k*10, k, act.n)
			G, c := gram(A, rhs)
			near := make([]float64, len(rhs))
			for i := range near {
				near[i] = rhs[i] + 0.1*rng.NormFloat64()
			}
			_, c0 := gram(A, near)
			s := NewSolver(k)
			x0 := make([]float64, k)
			if err := s.SolveGram(G, c0, x0); err != nil {
				b.Fatal(err)
			}
			x := make([]float64, k)
			b.Run(fmt.Sprintf("k=%d/%s/cold", k, act.name), func(b *testing.B) {
				b.ReportAllocs()
				cpu := benchcpu.Start()
				for b.Loop() {
					if err := s.SolveGram(G, c, x); err != nil {
						b.Fatal(err)
					}
				}
				cpu.Report(b)
			})
			b.Run(fmt.Sprintf("k=%d/%s/warm", k, act.name), func(b *testing.B) {
				b.ReportAllocs()
				cpu := benchcpu.Start()
				for b.Loop() {
					copy(x, x0)
					if err := s.SolveGramFrom(G, c, x); err != nil {
						b.Fatal(err)
					}
				}
				cpu.Report(b)
			})
		}
	}
}
