package nmf

import (
	"context"
	"errors"
	"math"
	"runtime"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// maskedObjective computes ||M .* (X - W H)||_F^2 directly, for checks.
func maskedObjective(X, M, W, H *mat.Dense) float64 {
	var WH mat.Dense
	WH.Mul(W, H)
	m, n := X.Dims()
	s := 0.0
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			if M == nil || M.At(i, j) == 1 {
				d := X.At(i, j) - WH.At(i, j)
				s += d * d
			}
		}
	}
	return s
}

func TestObjectiveNeverIncreases(t *testing.T) {
	X := lowRank(5, 40, 30, 4, 0.3)
	M := randomMask(6, 40, 30, 0.2)
	for _, init := range []string{InitNNDSVD, InitRandom} {
		opt := DefaultOptions(4)
		opt.Init = init
		opt.Tolerance = -1 // run the full 60 iterations
		opt.MaxIterations = 60
		res, err := Factorize(X, M, opt)
		if err != nil {
			t.Fatal(err)
		}
		if len(res.History) != 61 || res.Iterations != 60 || res.Converged {
			t.Fatalf("%s: %d history entries, %d iterations, converged %v; expected 61, 60, false", init, len(res.History), res.Iterations, res.Converged)
		}
		for i := 1; i < len(res.History); i++ {
			if res.History[i] > res.History[i-1]*(1+1e-12) {
				t.Errorf("%s: objective rose at iteration %d: %.17g -> %.17g", init, i, res.History[i-1], res.History[i])
			}
		}
		if res.History[60] >= res.History[0] {
			t.Errorf("%s: no progress: %g -> %g", init, res.History[0], res.History[60])
		}
		direct := maskedObjective(X, M, res.W, res.H)
		if math.Abs(direct-res.Objective) > 1e-10*direct || math.Abs(res.History[60]-direct) > 1e-9*direct {
			t.Errorf("%s: Objective %.15g, last history %.15g, direct %.15g", init, res.Objective, res.History[60], direct)
		}
	}
}

// TestKKT checks the Karush-Kuhn-Tucker conditions of the last block solved (the rows of W,
// given H): with g = G_r w_r - c_r the gradient of row r's masked least-squares problem,
// g_i = 0 where w_ri > 0 and g_i >= 0 where w_ri = 0 (up to rounding). Rescaling W and H
// (W D, D^-1 H) keeps them, as g scales by D^-1.
func TestKKT(t *testing.T) {
	X := lowRank(7, 35, 25, 3, 0.5)
	M := randomMask(8, 35, 25, 0.15)
	res, err := Factorize(X, M, DefaultOptions(3))
	if err != nil {
		t.Fatal(err)
	}
	m, n := X.Dims()
	k := 3
	for r := 0; r < m; r++ {
		grad := make([]float64, k)
		scale := 0.0
		for j := 0; j < n; j++ {
			if M.At(r, j) == 0 {
				continue
			}
			pred := 0.0
			for g := 0; g < k; g++ {
				pred += res.W.At(r, g) * res.H.At(g, j)
			}
			for g := 0; g < k; g++ {
				grad[g] += (pred - X.At(r, j)) * res.H.At(g, j)
				scale += math.Abs(X.At(r, j) * res.H.At(g, j))
			}
		}
		for g := 0; g < k; g++ {
			w := res.W.At(r, g)
			if w < 0 {
				t.Fatalf("W[%d][%d] = %g < 0", r, g, w)
			}
			if w > 0 && math.Abs(grad[g]) > 1e-9*scale || w == 0 && grad[g] < -1e-9*scale {
				t.Errorf("row %d, component %d: w = %g, gradient %g (scale %g)", r, g, w, grad[g], scale)
			}
		}
	}
	if mat.Min(res.H) < 0 {
		t.Errorf("H has a negative entry")
	}
}

// TestUnobservedCellsAreIgnored: whatever X holds where M = 0 (here a huge value, or NaN) the
// factorisation is the same, bit for bit.
func TestUnobservedCellsAreIgnored(t *testing.T) {
	X := lowRank(9, 30, 20, 3, 0.2)
	M := randomMask(10, 30, 20, 0.25)
	opt := DefaultOptions(3)
	opt.MaxIterations = 30
	ref, err := Factorize(X, M, opt)
	if err != nil {
		t.Fatal(err)
	}
	for _, fill := range []float64{1e6, math.NaN()} {
		Y := mat.DenseCopyOf(X)
		for i := 0; i < 30; i++ {
			for j := 0; j < 20; j++ {
				if M.At(i, j) == 0 {
					Y.Set(i, j, fill)
				}
			}
		}
		res, err := Factorize(Y, M, opt)
		if err != nil {
			t.Fatal(err)
		}
		if !mat.Equal(res.W, ref.W) || !mat.Equal(res.H, ref.H) {
			t.Errorf("filling lacunae with %g changed the factors", fill)
		}
	}
}

// TestExactLowRankWithLacunae: an exactly rank-3 matrix with 20% of cells missing is fitted
// exactly on its observed cells, and the missing cells are recovered (matrix completion).
func TestExactLowRankWithLacunae(t *testing.T) {
	X := lowRank(11, 40, 30, 3, 0)
	M := randomMask(12, 40, 30, 0.2)
	opt := DefaultOptions(3)
	opt.Tolerance = 1e-12
	opt.MaxIterations = 2000
	res, err := Factorize(X, M, opt)
	if err != nil {
		t.Fatal(err)
	}
	total := mat.Norm(X, 2)
	if res.Objective > 1e-10*total*total { // the exact-fit stop (package doc)
		t.Errorf("objective %g; expected an exact fit (||X||^2 = %g)", res.Objective, total*total)
	}
	var WH mat.Dense
	WH.Mul(res.W, res.H)
	worst := 0.0
	for i := 0; i < 40; i++ {
		for j := 0; j < 30; j++ {
			if M.At(i, j) == 0 {
				worst = math.Max(worst, math.Abs(WH.At(i, j)-X.At(i, j)))
			}
		}
	}
	if worst > 1e-3*mat.Max(X) {
		t.Errorf("missing cells recovered to within %g; expected better than %g", worst, 1e-3*mat.Max(X))
	}
}

// TestSameResultWhateverGOMAXPROCS: the factors, history and restart objectives are identical
// with one core and with two, on a matrix large enough for the randomized NNDSVD.
func TestSameResultWhateverGOMAXPROCS(t *testing.T) {
	X, M := simTable(3, 220, 90, 3, 4, 0.3, 0.05, 0.1)
	if m, n := X.Dims(); min(m, n) <= exactSVDLimit {
		t.Fatalf("%d x %d does not exercise the randomized SVD", m, n)
	}
	opt := DefaultOptions(4)
	opt.Restarts = 3
	opt.Seed = 99
	run := func(procs int) *Result {
		old := runtime.GOMAXPROCS(procs)
		defer runtime.GOMAXPROCS(old)
		res, err := Factorize(X, M, opt)
		if err != nil {
			t.Fatal(err)
		}
		return res
	}
	a, b := run(1), run(2)
	if !mat.Equal(a.W, b.W) || !mat.Equal(a.H, b.H) {
		t.Errorf("factors differ between GOMAXPROCS 1 and 2")
	}
	if a.Objective != b.Objective || a.Restart != b.Restart || len(a.History) != len(b.History) {
		t.Fatalf("runs differ: objective %v vs %v, restart %d vs %d, %d vs %d iterations", a.Objective, b.Objective, a.Restart, b.Restart, len(a.History), len(b.History))
	}
	for i := range a.History {
		if a.History[i] != b.History[i] {
			t.Errorf("history[%d]: %v vs %v", i, a.History[i], b.History[i])
		}
	}
	for i := range a.RestartObjectives {
		if a.RestartObjectives[i] != b.RestartObjectives[i] {
			t.Errorf("restart %d: %v vs %v", i, a.RestartObjectives[i], b.RestartObjectives[i])
		}
	}
}

func TestRestartsKeepTheBest(t *testing.T) {
	X := lowRank(13, 30, 25, 4, 0.4)
	opt := DefaultOptions(4)
	opt.Restarts = 5
	opt.Seed = 7
	opt.MaxIterations = 40
	var progress []int
	opt.Progress = func(done, total int) {
		if total != 5 {
			t.Errorf("progress total %d; expected 5", total)
		}
		progress = append(progress, done)
	}
	res, err := Factorize(X, nil, opt)
	if err != nil {
		t.Fatal(err)
	}
	if len(progress) != 5 || progress[4] != 5 {
		t.Errorf("progress calls %v", progress)
	}
	if len(res.RestartObjectives) != 5 {
		t.Fatalf("%d restart objectives", len(res.RestartObjectives))
	}
	distinct := map[float64]bool{}
	for i, f := range res.RestartObjectives {
		distinct[f] = true
		if f < res.Objective || f == res.Objective && i < res.Restart {
			t.Errorf("restart %d has objective %g but restart %d (%g) was kept", i, f, res.Restart, res.Objective)
		}
	}
	if res.RestartObjectives[res.Restart] != res.Objective {
		t.Errorf("kept restart %d: objective %g, recorded %g", res.Restart, res.Objective, res.RestartObjectives[res.Restart])
	}
	if len(distinct) < 2 {
		t.Errorf("all restarts reached the same objective %v: they did not start apart", res.RestartObjectives)
	}
	// Same seed, same result; another seed, other random restarts.
	again, _ := Factorize(X, nil, opt)
	if !mat.Equal(again.W, res.W) || again.Objective != res.Objective {
		t.Errorf("same seed gave a different model")
	}
	opt.Seed = 8
	other, _ := Factorize(X, nil, opt)
	if other.RestartObjectives[1] == res.RestartObjectives[1] {
		t.Errorf("seeds 7 and 8 gave the same second restart")
	}
	if other.RestartObjectives[0] != res.RestartObjectives[0] {
		t.Errorf("the NNDSVD restart depends on the seed of a small matrix")
	}
}

// TestNormalisation: W's columns have unit L2 norm and components come in decreasing order of
// the norm of their H row.
func TestNormalisation(t *testing.T) {
	X := lowRank(14, 30, 20, 3, 0.1)
	res, err := Factorize(X, nil, DefaultOptions(3))
	if err != nil {
		t.Fatal(err)
	}
	prev := math.Inf(1)
	for g := 0; g < 3; g++ {
		if nrm := mat.Norm(res.W.ColView(g), 2); math.Abs(nrm-1) > 1e-12 {
			t.Errorf("column %d of W has norm %g", g, nrm)
		}
		h := mat.Norm(res.H.RowView(g), 2)
		if h > prev {
			t.Errorf("row %d of H has norm %g > %g of the row before", g, h, prev)
		}
		prev = h
	}
}

// TestDegenerateData: zero rows and columns, a witness with no observed cell, a reading with
// none, and more components than the data has rank.
func TestDegenerateData(t *testing.T) {
	X := lowRank(15, 20, 15, 2, 0)
	M := mat.NewDense(20, 15, nil)
	for i := 0; i < 20; i++ {
		for j := 0; j < 15; j++ {
			M.Set(i, j, 1)
		}
	}
	for j := 0; j < 15; j++ {
		X.Set(3, j, 0) // an all-zero reading
		M.Set(7, j, 0) // a reading observed nowhere
	}
	for i := 0; i < 20; i++ {
		X.Set(i, 4, 0) // an all-zero witness
		M.Set(i, 9, 0) // a witness observed nowhere
	}
	for _, init := range []string{InitNNDSVD, InitRandom} {
		opt := DefaultOptions(6) // rank 2 data
		opt.Init = init
		res, err := Factorize(X, M, opt)
		if err != nil {
			t.Fatalf("%s: %v", init, err)
		}
		for _, v := range append(res.W.RawMatrix().Data, res.H.RawMatrix().Data...) {
			if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
				t.Fatalf("%s: factor entry %g", init, v)
			}
		}
		if res.Objective > 1e-10*mat.Sum(X) {
			t.Errorf("%s: objective %g on rank-2 data with 6 components", init, res.Objective)
		}
		for g := 0; g < 6; g++ {
			if res.W.At(7, g) != 0 || res.H.At(g, 9) != 0 {
				t.Errorf("%s: unobserved reading or witness got a non-zero loading", init)
			}
			if res.H.At(g, 4) > 1e-12 {
				t.Errorf("%s: all-zero witness has coefficient %g", init, res.H.At(g, 4))
			}
		}
	}
	// More components than rows or columns: only a random start can do that.
	opt := DefaultOptions(16)
	if _, err := Factorize(X, M, opt); err == nil {
		t.Errorf("NNDSVD with k = 16 > min(20, 15) did not fail")
	}
	opt.Init = InitRandom
	if res, err := Factorize(X, M, opt); err != nil || res.Objective > 1e-10*mat.Sum(X) {
		t.Errorf("random start with k = 16: %v", err)
	}
}

// TestSmallScale: data scaled down by 1e-12 give the same factorisation scaled down alike (the
// NNDSVD's zero threshold follows the scale of the data).
func TestSmallScale(t *testing.T) {
	X := lowRank(17, 25, 20, 3, 0.1)
	ref, err := Factorize(X, nil, DefaultOptions(3))
	if err != nil {
		t.Fatal(err)
	}
	var tiny mat.Dense
	tiny.Scale(1e-12, X)
	res, err := Factorize(&tiny, nil, DefaultOptions(3))
	if err != nil {
		t.Fatal(err)
	}
	if r := res.Objective / ref.Objective; math.Abs(r-1e-24) > 1e-3*1e-24 {
		t.Errorf("objective %g at scale 1e-12; %g at scale 1 (ratio %g)", res.Objective, ref.Objective, r)
	}
	for g := 0; g < 3; g++ {
		if mat.Norm(res.H.RowView(g), 2) == 0 {
			t.Errorf("component %d lost at small scale", g)
		}
	}
}

func TestBadInput(t *testing.T) {
	X := lowRank(16, 5, 4, 2, 0.1)
	bad := func(name string, X, M *mat.Dense, opt Options) {
		t.Helper()
		if _, err := Factorize(X, M, opt); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
	opt := DefaultOptions(2)
	neg := mat.DenseCopyOf(X)
	neg.Set(1, 1, -0.5)
	bad("negative observed cell", neg, nil, opt)
	nan := mat.DenseCopyOf(X)
	nan.Set(0, 2, math.NaN())
	bad("NaN observed cell", nan, nil, opt)
	M := mat.NewDense(5, 4, nil)
	M.Set(0, 0, 0.5)
	bad("mask value 0.5", X, M, opt)
	bad("mask of other shape", X, mat.NewDense(4, 5, nil), opt)
	bad("empty X", &mat.Dense{}, nil, opt)
	bad("k = 0", X, nil, Options{})
	bad("unknown init", X, nil, Options{K: 2, Init: "svd"})
	bad("negative restarts", X, nil, Options{K: 2, Restarts: -1})
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := FactorizeContext(ctx, X, nil, opt); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled context: %v", err)
	}
}
