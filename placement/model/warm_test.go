package model

import (
	"math"
	"math/rand/v2"
	"testing"

	"strayleaf/placement/nnls"
)

// warmSolve, whenever it accepts a passive set, returns the NNLS minimiser that the active-set
// method (nnls.Solver.SolveGram) finds, on random problems perturbed from one whose solution
// gave the passive set (as bootstrap resamples are), including rank-deficient ones.
func TestWarmSolveMatchesActiveSet(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	const k = 8
	accepted, refused := 0, 0
	for trial := 0; trial < 2000; trial++ {
		rows := 3 + rng.IntN(20) // fewer rows than k: G is singular
		A := make([]float64, rows*k)
		for i := range A {
			if rng.Float64() < 0.6 {
				A[i] = rng.Float64()
			}
		}
		if trial%7 == 0 { // a zero column
			for i := 0; i < rows; i++ {
				A[i*k+3] = 0
			}
		}
		b := make([]float64, rows)
		for i := range b {
			b[i] = rng.Float64()
		}
		gram := func(scale []float64) ([]float64, []float64) {
			G, c := make([]float64, k*k), make([]float64, k)
			for i := 0; i < rows; i++ {
				for p := 0; p < k; p++ {
					c[p] += scale[i] * A[i*k+p] * b[i]
					for q := 0; q < k; q++ {
						G[p*k+q] += scale[i] * A[i*k+p] * A[i*k+q]
					}
				}
			}
			return G, c
		}
		ones := make([]float64, rows)
		for i := range ones {
			ones[i] = 1
		}
		solver := nnls.NewSolver(k)
		G, c := gram(ones)
		h := make([]float64, k)
		if err := solver.SolveGram(G, c, h); err != nil {
			t.Fatal(err)
		}
		s := &bootScratch{z: make([]float64, k), w: make([]float64, k), l: make([]float64, k*k), h: make([]float64, k)}
		for j, v := range h {
			if v > 0 {
				s.passive = append(s.passive, j)
			}
		}
		// A resample: each row drawn a Poisson-like number of times.
		mult := make([]float64, rows)
		for i := range mult {
			mult[i] = float64(rng.IntN(3))
		}
		s.g, s.c = gram(mult)
		if !s.warmSolve(k) {
			refused++
			continue
		}
		accepted++
		want := make([]float64, k)
		if err := solver.SolveGram(s.g, s.c, want); err != nil {
			t.Fatal(err)
		}
		for j := range want {
			if math.Abs(s.h[j]-want[j]) > 1e-8*(1+math.Abs(want[j])) {
				t.Fatalf("trial %d: warm start %v (objective %v, w %v), active-set method %v (objective %v)", trial, s.h, nnls.Objective(s.g, s.c, 0, s.h), s.w, want, nnls.Objective(s.g, s.c, 0, want))
			}
		}
	}
	if accepted < 200 || refused < 200 {
		t.Errorf("warm start accepted %d and refused %d of the problems; expected both often", accepted, refused)
	}
}
