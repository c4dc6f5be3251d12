package nnls

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// kktTol is the relative tolerance of the KKT checks: for column a_i the gradient
// g_i = a_i^T (A x - b) is judged against 1e-9 * ||a_i|| * ||b||. By Cauchy-Schwarz
// |g_i| <= ||a_i|| * ||A x - b|| and the optimal residual is at most ||b|| (x = 0 is feasible),
// so this compares g_i with the largest value it can take.
const kktTol = 1e-9

// checkKKT verifies the Karush-Kuhn-Tucker conditions of min ||A x - b||^2, x >= 0 (Lawson &
// Hanson 1974, ch. 23, from memory): x >= 0; g_i >= -tol_i where x_i = 0; |g_i| <= tol_i where
// x_i > 0, with g = A^T (A x - b) computed directly from A and b.
func checkKKT(t *testing.T, label string, A *mat.Dense, b, x []float64) {
	t.Helper()
	m, k := A.Dims()
	a := A.RawMatrix()
	r := fitted(A, x)
	for i := range r {
		r[i] -= b[i]
	}
	bn := norm2(b)
	g := make([]float64, k)
	an := make([]float64, k)
	for i := range m {
		row := a.Data[i*a.Stride : i*a.Stride+k]
		for j, v := range row {
			g[j] += v * r[i]
			an[j] += v * v
		}
	}
	for j := range k {
		if !(x[j] >= 0) {
			t.Errorf("%s: x[%d] = %v is not >= 0", label, j, x[j])
		}
		tol := kktTol * math.Sqrt(an[j]) * bn
		if x[j] == 0 && g[j] < -tol {
			t.Errorf("%s: x[%d] = 0 but gradient %v < -%v", label, j, g[j], tol)
		}
		if x[j] > 0 && math.Abs(g[j]) > tol {
			t.Errorf("%s: x[%d] = %v > 0 but |gradient| = %v > %v", label, j, x[j], math.Abs(g[j]), tol)
		}
	}
}

func norm2(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return math.Sqrt(s)
}

// residual returns ||A x - b||.
func residual(A *mat.Dense, b, x []float64) float64 {
	ax := fitted(A, x)
	for i := range ax {
		ax[i] -= b[i]
	}
	return norm2(ax)
}

func fitted(A *mat.Dense, x []float64) []float64 {
	m, k := A.Dims()
	a := A.RawMatrix()
	out := make([]float64, m)
	for i := range m {
		s := 0.0
		for j, v := range a.Data[i*a.Stride : i*a.Stride+k] {
			s += v * x[j]
		}
		out[i] = s
	}
	return out
}

// gram returns G = A^T A (row-major) and c = A^T b, accumulated row by row of A.
func gram(A *mat.Dense, b []float64) (G, c []float64) {
	m, k := A.Dims()
	a := A.RawMatrix()
	G = make([]float64, k*k)
	c = make([]float64, k)
	for r := range m {
		row := a.Data[r*a.Stride : r*a.Stride+k]
		for i, vi := range row {
			if vi == 0 {
				continue
			}
			gi := G[i*k : i*k+k]
			for j, vj := range row {
				gi[j] += vi * vj
			}
			c[i] += vi * b[r]
		}
	}
	return G, c
}

type problem struct {
	name string
	A    *mat.Dense
	b    []float64
}

// randomProblems returns seeded random problems of many shapes, degenerate ones included.
func randomProblems(rng *rand.Rand, n int) []problem {
	kinds := []string{"dense", "nonneg", "duplicate", "zero-column", "rank-deficient", "b-in-span",
		"b-in-cone", "b-zero", "wide", "scaled", "negative-b", "nonneg-rank-deficient"}
	var out []problem
	for t := range n {
		kind := kinds[t%len(kinds)]
		k := 1 + rng.IntN(50)
		m := k + rng.IntN(2*k+5)
		if kind == "wide" {
			m = 1 + rng.IntN(k)
		}
		A := mat.NewDense(m, k, nil)
		b := make([]float64, m)
		for i := range m {
			for j := range k {
				switch kind {
				case "dense", "b-in-span", "scaled", "rank-deficient":
					A.Set(i, j, rng.NormFloat64())
				default:
					A.Set(i, j, rng.Float64())
				}
			}
			b[i] = rng.NormFloat64()
		}
		switch kind {
		case "duplicate":
			for d := 0; d < 1+k/5 && k > 1; d++ {
				src, dst := rng.IntN(k), rng.IntN(k)
				for i := range m {
					A.Set(i, dst, A.At(i, src))
				}
			}
		case "zero-column":
			for d := 0; d < 1+k/6; d++ {
				j := rng.IntN(k)
				for i := range m {
					A.Set(i, j, 0)
				}
			}
		case "rank-deficient", "nonneg-rank-deficient":
			r := 1 + rng.IntN(max(1, min(m, k)-1))
			B := mat.NewDense(m, r, nil)
			C := mat.NewDense(r, k, nil)
			for i := range m {
				for j := range r {
					if kind == "rank-deficient" {
						B.Set(i, j, rng.NormFloat64())
					} else {
						B.Set(i, j, rng.Float64())
					}
				}
			}
			for i := range r {
				for j := range k {
					if kind == "rank-deficient" {
						C.Set(i, j, rng.NormFloat64())
					} else {
						C.Set(i, j, rng.Float64())
					}
				}
			}
			A.Mul(B, C)
		case "b-in-span":
			y := make([]float64, k)
			for j := range y {
				y[j] = rng.NormFloat64()
			}
			b = fitted(A, y)
		case "b-in-cone":
			y := make([]float64, k)
			for j := range y {
				if rng.IntN(3) == 0 {
					y[j] = rng.Float64()
				}
			}
			b = fitted(A, y)
		case "b-zero":
			b = make([]float64, m)
		case "scaled":
			for j := range k {
				s := math.Pow(10, 4*rng.Float64()-2)
				for i := range m {
					A.Set(i, j, A.At(i, j)*s)
				}
			}
		case "negative-b":
			for i := range b {
				b[i] = -rng.Float64()
			}
		}
		out = append(out, problem{name: fmt.Sprintf("%s#%d(m=%d,k=%d)", kind, t, m, k), A: A, b: b})
	}
	return out
}

// TestRandomKKT checks the KKT conditions of Solve and SolveGram on seeded random problems,
// and that both forms reach the same optimal residual and the same fitted values A x (which
// are unique even where x is not: the optimal fit is the projection of b onto the cone of A's
// columns, and ||b - y||^2 - ||b - y*||^2 >= ||y - y*||^2 for y in the cone).
func TestRandomKKT(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	s := NewSolver(50)
	for _, p := range randomProblems(rng, 156) {
		x1, err := Solve(p.A, p.b)
		if err != nil {
			t.Fatalf("%s: Solve: %v", p.name, err)
		}
		checkKKT(t, p.name+" Solve", p.A, p.b, x1)
		G, c := gram(p.A, p.b)
		x2 := make([]float64, len(c))
		if err := s.SolveGram(G, c, x2); err != nil {
			t.Fatalf("%s: SolveGram: %v", p.name, err)
		}
		checkKKT(t, p.name+" SolveGram", p.A, p.b, x2)
		bn := norm2(p.b)
		r1, r2 := residual(p.A, p.b, x1), residual(p.A, p.b, x2)
		if math.Abs(r1*r1-r2*r2) > 1e-9*bn*bn {
			t.Errorf("%s: residuals differ: Solve %v, SolveGram %v", p.name, r1, r2)
		}
		f1, f2 := fitted(p.A, x1), fitted(p.A, x2)
		for i := range f1 {
			f1[i] -= f2[i]
		}
		if d := norm2(f1); d > 1e-7*bn {
			t.Errorf("%s: fitted values differ by %v (||b|| = %v)", p.name, d, bn)
		}
		if bn == 0 {
			for j := range x1 {
				if x1[j] != 0 || x2[j] != 0 {
					t.Errorf("%s: b = 0 but x[%d] = %v / %v", p.name, j, x1[j], x2[j])
				}
			}
		}
	}
}

// TestSpecialCases checks solutions that follow directly from the KKT conditions.
func TestSpecialCases(t *testing.T) {
	// A = I: the solution is the projection of b onto the non-negative orthant, max(b, 0).
	A := mat.NewDense(3, 3, []float64{1, 0, 0, 0, 1, 0, 0, 0, 1})
	b := []float64{1, -2, 3}
	want := []float64{1, 0, 3}
	x, err := Solve(A, b)
	if err != nil {
		t.Fatal(err)
	}
	G, c := gram(A, b)
	xg := make([]float64, 3)
	if err := NewSolver(3).SolveGram(G, c, xg); err != nil {
		t.Fatal(err)
	}
	for i := range want {
		if math.Abs(x[i]-want[i]) > 1e-15 || math.Abs(xg[i]-want[i]) > 1e-15 {
			t.Errorf("identity: x[%d] = %v / %v, want %v", i, x[i], xg[i], want[i])
		}
	}
	// A = [[1,0],[0,1],[1,1]], b = (2,-1,0): the unconstrained solution (5/3, -4/3) is
	// infeasible; with x_2 = 0, x_1 = a_1^T b / ||a_1||^2 = 1 and the gradient of x_2 is
	// a_2^T (A x - b) = 2 >= 0, so x = (1, 0) (worked by hand from the KKT conditions).
	A = mat.NewDense(3, 2, []float64{1, 0, 0, 1, 1, 1})
	b = []float64{2, -1, 0}
	x, err = Solve(A, b)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(x[0]-1) > 1e-15 || x[1] != 0 {
		t.Errorf("hand example: x = %v, want (1, 0)", x)
	}
	// Zero columns leave x_j = 0 and do not disturb the rest; b = 0 gives x = 0.
	A = mat.NewDense(3, 3, []float64{0, 1, 0, 0, 2, 0, 0, 3, 0})
	x, err = Solve(A, []float64{1, 2, 3})
	if err != nil {
		t.Fatal(err)
	}
	if x[0] != 0 || x[2] != 0 || math.Abs(x[1]-1) > 1e-15 {
		t.Errorf("zero columns: x = %v, want (0, 1, 0)", x)
	}
	G = make([]float64, 9)
	xg = []float64{7, 7, 7}
	if err := NewSolver(3).SolveGram(G, make([]float64, 3), xg); err != nil {
		t.Fatal(err)
	}
	for i, v := range xg {
		if v != 0 {
			t.Errorf("G = 0, c = 0: x[%d] = %v, want 0", i, v)
		}
	}
}

// TestSolverReuse checks that one Solver gives the same answers across problems of different
// sizes as fresh Solvers do, so no state leaks from one call to the next.
func TestSolverReuse(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	shared := NewSolver(50)
	for _, p := range randomProblems(rng, 40) {
		G, c := gram(p.A, p.b)
		x1 := make([]float64, len(c))
		x2 := make([]float64, len(c))
		if err := shared.SolveGram(G, c, x1); err != nil {
			t.Fatal(err)
		}
		if err := NewSolver(len(c)).SolveGram(G, c, x2); err != nil {
			t.Fatal(err)
		}
		for i := range x1 {
			if x1[i] != x2[i] {
				t.Fatalf("%s: reused solver x[%d] = %v, fresh solver %v", p.name, i, x1[i], x2[i])
			}
		}
	}
}

func TestErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	if _, err := Solve(nil, nil); err == nil {
		t.Error("Solve(nil) did not fail")
	}
	A := mat.NewDense(2, 2, []float64{1, 0, 0, 1})
	if _, err := Solve(A, []float64{1}); err == nil {
		t.Error("Solve with short b did not fail")
	}
	if _, err := Solve(A, []float64{1, nan}); err == nil {
		t.Error("Solve with NaN in b did not fail")
	}
	if _, err := Solve(mat.NewDense(2, 2, []float64{1, inf, 0, 1}), []float64{1, 1}); err == nil {
		t.Error("Solve with Inf in A did not fail")
	}
	s := NewSolver(2)
	G := []float64{1, 0, 0, 1}
	cases := []struct {
		name    string
		G, c, x []float64
	}{
		{"empty c", G, nil, nil},
		{"too many unknowns", make([]float64, 9), make([]float64, 3), make([]float64, 3)},
		{"short G", []float64{1, 0, 0}, []float64{1, 1}, make([]float64, 2)},
		{"short x", G, []float64{1, 1}, make([]float64, 1)},
		{"NaN in c", G, []float64{1, nan}, make([]float64, 2)},
		{"Inf in c", G, []float64{inf, 1}, make([]float64, 2)},
		{"NaN in G", []float64{1, nan, nan, 1}, []float64{1, 1}, make([]float64, 2)},
		{"NaN on diagonal", []float64{nan, 0, 0, 1}, []float64{1, 1}, make([]float64, 2)},
		{"negative diagonal", []float64{-1, 0, 0, 1}, []float64{1, 1}, make([]float64, 2)},
		{"asymmetric", []float64{1, 0.5, 0, 1}, []float64{1, 1}, make([]float64, 2)},
	}
	for _, tc := range cases {
		if err := s.SolveGram(tc.G, tc.c, tc.x); err == nil {
			t.Errorf("SolveGram with %s did not fail", tc.name)
		}
	}
}

// TestIterationLimit checks that the iteration cap is enforced and reported.
func TestIterationLimit(t *testing.T) {
	// b = A * (1,...,1) with A well conditioned and positive: all five variables are positive at
	// the solution, so at least five outer iterations are needed.
	rng := rand.New(rand.NewPCG(5, 6))
	A := mat.NewDense(10, 5, nil)
	for i := range 10 {
		for j := range 5 {
			A.Set(i, j, rng.Float64())
		}
		A.Set(i, i%5, A.At(i, i%5)+3)
	}
	b := fitted(A, []float64{1, 1, 1, 1, 1})
	G, c := gram(A, b)
	s := NewSolver(5)
	s.SetMaxIter(2)
	x := make([]float64, 5)
	if err := s.SolveGram(G, c, x); !errors.Is(err, ErrNoConvergence) {
		t.Fatalf("with a limit of 2 iterations: err = %v, want ErrNoConvergence", err)
	}
	s.SetMaxIter(0)
	if err := s.SolveGram(G, c, x); err != nil {
		t.Fatalf("default limit: %v", err)
	}
	for j, v := range x {
		if math.Abs(v-1) > 1e-10 {
			t.Errorf("x[%d] = %v, want 1", j, v)
		}
	}
}

func TestSolveGramAllocatesNothing(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	ps := randomProblems(rng, 12)
	s := NewSolver(50)
	type gc struct{ G, c, x []float64 }
	var in []gc
	for _, p := range ps {
		G, c := gram(p.A, p.b)
		in = append(in, gc{G, c, make([]float64, len(c))})
	}
	allocs := testing.AllocsPerRun(5, func() {
		for _, v := range in {
			if err := s.SolveGram(v.G, v.c, v.x); err != nil {
				t.Fatal(err)
			}
		}
	})
	if allocs != 0 {
		t.Errorf("SolveGram allocated %v times per run, want 0", allocs)
	}
}

func TestObjective(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	for _, p := range randomProblems(rng, 24) {
		_, k := p.A.Dims()
		G, c := gram(p.A, p.b)
		x := make([]float64, k)
		for j := range x {
			if rng.IntN(2) == 0 {
				x[j] = rng.Float64()
			}
		}
		r := residual(p.A, p.b, x)
		bb := norm2(p.b)
		bb *= bb
		got := Objective(G, c, bb, x)
		if math.Abs(got-r*r) > 1e-10*(r*r+bb+1) {
			t.Errorf("%s: Objective = %v, ||Ax-b||^2 = %v", p.name, got, r*r)
		}
	}
}

// fullRank reports whether A has full column rank with a condition number below 1e6, from its
// singular values.
func fullRank(A *mat.Dense) bool {
	m, k := A.Dims()
	if m < k {
		return false
	}
	var svd mat.SVD
	if !svd.Factorize(A, mat.SVDNone) {
		return false
	}
	sv := svd.Values(nil)
	return sv[len(sv)-1] > 1e-6*sv[0]
}

// TestSolveGramFromMatchesSolveGram checks SolveGramFrom from several starting points on the
// seeded random problems (degenerate ones included): random supports with random values, every
// variable, the support of the solution, and the solution's support with a few variables
// flipped. Every result must satisfy the KKT conditions; where A has full column rank the NNLS
// minimiser is unique (f is strictly convex), so every result must equal SolveGram's.
func TestSolveGramFromMatchesSolveGram(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	s := NewSolver(50)
	unique, compared := 0, 0
	for _, p := range randomProblems(rng, 240) {
		G, c := gram(p.A, p.b)
		k := len(c)
		want := make([]float64, k)
		if err := s.SolveGram(G, c, want); err != nil {
			t.Fatalf("%s: SolveGram: %v", p.name, err)
		}
		full := fullRank(p.A)
		if full {
			unique++
		}
		scale := 0.0
		for _, v := range want {
			scale = math.Max(scale, v)
		}
		starts := map[string]func(x []float64){
			"random": func(x []float64) {
				for j := range x {
					if rng.IntN(2) == 0 {
						x[j] = rng.Float64() * 10
					}
				}
			},
			"all": func(x []float64) {
				for j := range x {
					x[j] = 1
				}
			},
			"solution": func(x []float64) { copy(x, want) },
			"flipped": func(x []float64) {
				copy(x, want)
				for range 1 + k/8 {
					j := rng.IntN(k)
					if x[j] > 0 {
						x[j] = 0
					} else {
						x[j] = rng.Float64()
					}
				}
			},
		}
		for _, name := range []string{"random", "all", "solution", "flipped"} {
			x := make([]float64, k)
			starts[name](x)
			label := p.name + " from " + name
			if err := s.SolveGramFrom(G, c, x); err != nil {
				t.Fatalf("%s: SolveGramFrom: %v", label, err)
			}
			checkKKT(t, label, p.A, p.b, x)
			if !full {
				continue
			}
			compared++
			for j := range x {
				if math.Abs(x[j]-want[j]) > 1e-10*math.Max(1, scale) {
					t.Errorf("%s: x[%d] = %v, SolveGram %v (difference %v)", label, j, x[j], want[j], x[j]-want[j])
				}
			}
		}
	}
	if unique < 50 || compared < 200 {
		t.Errorf("only %d full-rank problems (%d comparisons); the test needs more", unique, compared)
	}
}

// TestSolveGramFromSkipsIterations: started from the solution's support, SolveGramFrom needs no
// entering step, so it succeeds under an iteration limit that stops SolveGram (all five
// variables of the TestIterationLimit problem are positive at the solution).
func TestSolveGramFromSkipsIterations(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	A := mat.NewDense(10, 5, nil)
	for i := range 10 {
		for j := range 5 {
			A.Set(i, j, rng.Float64())
		}
		A.Set(i, i%5, A.At(i, i%5)+3)
	}
	b := fitted(A, []float64{1, 1, 1, 1, 1})
	G, c := gram(A, b)
	s := NewSolver(5)
	s.SetMaxIter(1)
	x := make([]float64, 5)
	if err := s.SolveGram(G, c, x); !errors.Is(err, ErrNoConvergence) {
		t.Fatalf("SolveGram with a limit of 1 iteration: err = %v, want ErrNoConvergence", err)
	}
	x = []float64{0.5, 2, 0.1, 3, 1e-3}
	if err := s.SolveGramFrom(G, c, x); err != nil {
		t.Fatalf("SolveGramFrom from the solution's support: %v", err)
	}
	for j, v := range x {
		if math.Abs(v-1) > 1e-10 {
			t.Errorf("x[%d] = %v, want 1", j, v)
		}
	}
}

func TestSolveGramFromErrors(t *testing.T) {
	s := NewSolver(2)
	G, c := []float64{1, 0, 0, 1}, []float64{1, 1}
	for _, x := range [][]float64{{-1, 0}, {math.NaN(), 1}, {math.Inf(1), 0}, {1}} {
		if err := s.SolveGramFrom(G, c, x); err == nil {
			t.Errorf("SolveGramFrom from %v did not fail", x)
		}
	}
	if err := s.SolveGramFrom([]float64{1, 0.5, 0, 1}, c, []float64{1, 1}); err == nil {
		t.Error("SolveGramFrom with an asymmetric G did not fail")
	}
	// After a refused start the Solver still works.
	x := []float64{0, 3}
	if err := s.SolveGramFrom(G, c, x); err != nil || x[0] != 1 || x[1] != 1 {
		t.Errorf("G = I, c = (1, 1): x = %v, err %v; want (1, 1)", x, err)
	}
}

func TestSolveGramFromAllocatesNothing(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	s := NewSolver(50)
	type gc struct{ G, c, x0, x []float64 }
	var in []gc
	for _, p := range randomProblems(rng, 12) {
		G, c := gram(p.A, p.b)
		x0 := make([]float64, len(c))
		for j := range x0 {
			if rng.IntN(2) == 0 {
				x0[j] = rng.Float64()
			}
		}
		in = append(in, gc{G, c, x0, make([]float64, len(c))})
	}
	allocs := testing.AllocsPerRun(5, func() {
		for _, v := range in {
			copy(v.x, v.x0)
			if err := s.SolveGramFrom(v.G, v.c, v.x); err != nil {
				t.Fatal(err)
			}
		}
	})
	if allocs != 0 {
		t.Errorf("SolveGramFrom allocated %v times per run, want 0", allocs)
	}
}
