package placement

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"testing"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/nnls"
)

// model is a random profile matrix with its unit layout, for tests and benchmarks.
type model struct {
	W        *mat.Dense
	unitRows [][2]int
	weights  []float64
}

// randomModel draws nUnits units with 2 to 4 rows each (a share `empty` of them with none),
// k groups, W uniform on [0, 1) with a share `sparse` of exact zeros, and weights on [0.1, 3).
func randomModel(rng *rand.Rand, nUnits, k int, empty, sparse float64) model {
	var m model
	rows := 0
	for range nUnits {
		n := 0
		if rng.Float64() >= empty {
			n = 2 + rng.IntN(3)
		}
		m.unitRows = append(m.unitRows, [2]int{rows, rows + n})
		rows += n
	}
	if rows == 0 { // keep at least one unit with rows
		m.unitRows[0] = [2]int{0, 2}
		for u := 1; u < nUnits; u++ {
			m.unitRows[u] = [2]int{2, 2}
		}
		rows = 2
	}
	m.W = mat.NewDense(rows, k, nil)
	m.weights = make([]float64, rows)
	for r := range rows {
		for j := range k {
			if rng.Float64() >= sparse {
				m.W.Set(r, j, rng.Float64())
			}
		}
		m.weights[r] = 0.1 + 2.9*rng.Float64()
	}
	return m
}

// randomWitness covers each unit with probability `cover` (in shuffled order); at a covered
// unit with rows it has one of the unit's readings, or with probability `unknown` a reading the
// model does not know.
func randomWitness(rng *rand.Rand, m model, cover, unknown float64) []Observation {
	var obs []Observation
	for _, u := range rng.Perm(len(m.unitRows)) {
		if rng.Float64() >= cover {
			continue
		}
		lo, hi := m.unitRows[u][0], m.unitRows[u][1]
		row := -1
		if hi > lo && rng.Float64() >= unknown {
			row = lo + rng.IntN(hi-lo)
		}
		obs = append(obs, Observation{Unit: u, Row: row})
	}
	return obs
}

// explicitProblem builds the masked problem of the package doc row by row: A = W_C (the rows of
// the covered units) and b = v_C (the row weight on the witness's reading, 0 on the unit's other
// rows). With mult, the rows of observation i are scaled by sqrt(mult[i]), so that ||A h - b||^2
// is the weighted sum of squares PlaceWeighted minimises; observations with mult[i] = 0 are
// left out.
func explicitProblem(m model, obs []Observation, mult []float64) (*mat.Dense, []float64) {
	_, k := m.W.Dims()
	var data, b []float64
	for i, o := range obs {
		s := 1.0
		if mult != nil {
			if mult[i] == 0 {
				continue
			}
			s = math.Sqrt(mult[i])
		}
		for r := m.unitRows[o.Unit][0]; r < m.unitRows[o.Unit][1]; r++ {
			for _, v := range m.W.RawRowView(r) {
				data = append(data, s*v)
			}
			v := 0.0
			if r == o.Row {
				v = s * m.weights[r]
			}
			b = append(b, v)
		}
	}
	if len(b) == 0 {
		return nil, nil
	}
	return mat.NewDense(len(b), k, data), b
}

func sq(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x * x
	}
	return s
}

func residualOf(A *mat.Dense, b, h []float64) []float64 {
	r := make([]float64, len(b))
	hv := mat.NewVecDense(len(h), append([]float64(nil), h...))
	rv := mat.NewVecDense(len(b), r)
	rv.MulVec(A, hv)
	for i := range r {
		r[i] -= b[i]
	}
	return r
}

// checkAgainstSolve compares a placement with nnls.Solve on the explicitly built problem: the
// residual, ||v_C||^2, the fitted values W_C h (unique for any W_C), h itself where W_C has full
// column rank (then h is unique), the KKT conditions of h on the explicit problem, and the
// normal equations kept in the workspace.
func checkAgainstSolve(t *testing.T, label string, m model, obs []Observation, mult []float64, fit Fit, ws *Workspace) {
	t.Helper()
	A, b := explicitProblem(m, obs, mult)
	ref, err := nnls.Solve(A, b)
	if err != nil {
		t.Fatalf("%s: reference Solve: %v", label, err)
	}
	bb := sq(b)
	scale := math.Max(1, bb)
	if math.Abs(fit.Norm2-bb) > 1e-12*scale {
		t.Errorf("%s: Norm2 = %v, ||v_C||^2 = %v", label, fit.Norm2, bb)
	}
	rRef := sq(residualOf(A, b, ref))
	rGot := residualOf(A, b, fit.H)
	if d := sq(rGot); math.Abs(d-rRef) > 1e-9*scale || math.Abs(fit.Residual-d) > 1e-9*scale {
		t.Errorf("%s: residual: Fit %v, direct %v, reference %v", label, fit.Residual, d, rRef)
	}
	if fit.Residual > fit.Norm2*(1+1e-12) {
		t.Errorf("%s: residual %v exceeds ||v||^2 %v", label, fit.Residual, fit.Norm2)
	}
	fitRef := residualOf(A, b, ref)
	diff := 0.0
	for i := range rGot {
		diff += (rGot[i] - fitRef[i]) * (rGot[i] - fitRef[i])
	}
	if math.Sqrt(diff) > 1e-7*math.Sqrt(scale) {
		t.Errorf("%s: fitted values differ from the reference by %v", label, math.Sqrt(diff))
	}
	rows, k := A.Dims()
	var svd mat.SVD
	if rows >= k && svd.Factorize(A, mat.SVDNone) {
		sv := svd.Values(nil)
		if sv[k-1] > 1e-4*sv[0] {
			hs := 1.0
			for _, v := range ref {
				hs = math.Max(hs, math.Abs(v))
			}
			for j := range ref {
				if math.Abs(fit.H[j]-ref[j]) > 1e-8*hs*sv[0]/sv[k-1] {
					t.Errorf("%s: h[%d] = %.15g, reference %.15g (full column rank, cond %.3g)", label, j, fit.H[j], ref[j], sv[0]/sv[k-1])
				}
			}
		}
	}
	// KKT on the explicit problem, g = A^T (A h - b), tolerance 1e-9 ||a_j|| ||b|| as in the
	// nnls tests.
	for j := range k {
		g, an := 0.0, 0.0
		for i := range rows {
			g += A.At(i, j) * rGot[i]
			an += A.At(i, j) * A.At(i, j)
		}
		tol := 1e-9 * math.Sqrt(an*bb)
		if fit.H[j] < 0 || (fit.H[j] == 0 && g < -tol) || (fit.H[j] > 0 && math.Abs(g) > tol) {
			t.Errorf("%s: KKT fails at group %d: h = %v, gradient %v, tol %v", label, j, fit.H[j], g, tol)
		}
	}
	// The normal equations kept in the workspace are W_C^T W_C and W_C^T v_C.
	G, c := ws.Gram(), ws.Cross()
	for i := range k {
		for j := range k {
			s, n := 0.0, 0.0
			for r := range rows {
				s += A.At(r, i) * A.At(r, j)
			}
			for r := range rows {
				n += A.At(r, i) * A.At(r, i)
			}
			if math.Abs(G[i*k+j]-s) > 1e-10*math.Max(1, n) {
				t.Errorf("%s: Gram[%d][%d] = %v, W_C^T W_C = %v", label, i, j, G[i*k+j], s)
			}
		}
		s := 0.0
		for r := range rows {
			s += A.At(r, i) * b[r]
		}
		if math.Abs(c[i]-s) > 1e-12*math.Max(1, math.Abs(s)) {
			t.Errorf("%s: Cross[%d] = %v, W_C^T v_C = %v", label, i, c[i], s)
		}
	}
}

func TestPlaceMatchesExplicitNNLS(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for trial := range 60 {
		k := 1 + rng.IntN(16)
		nUnits := 5 + rng.IntN(120)
		m := randomModel(rng, nUnits, k, 0.1, 0.3*rng.Float64())
		e, err := NewEngine(m.W, m.unitRows, m.weights)
		if err != nil {
			t.Fatal(err)
		}
		ws := e.NewWorkspace()
		for _, cover := range []float64{0.03, 0.2, 0.45, 0.55, 0.8, 1} {
			obs := randomWitness(rng, m, cover, 0.15)
			label := fmt.Sprintf("trial %d (k=%d, %d units, cover %.2f)", trial, k, nUnits, cover)
			fit, err := e.Place(obs, ws)
			A, _ := explicitProblem(m, obs, nil)
			if A == nil {
				if !errors.Is(err, ErrNoCoverage) {
					t.Errorf("%s: no unit with rows covered: err = %v, want ErrNoCoverage", label, err)
				}
				continue
			}
			if err != nil {
				t.Fatalf("%s: %v", label, err)
			}
			used, unknown := 0, 0
			for _, o := range obs {
				if lo, hi := m.unitRows[o.Unit][0], m.unitRows[o.Unit][1]; hi > lo {
					used++
					if o.Row < 0 {
						unknown++
					}
				}
			}
			if fit.CoveredUnits != len(obs) || fit.UsedUnits != used || fit.UnknownReadings != unknown {
				t.Errorf("%s: counts %d/%d/%d, want %d/%d/%d", label, fit.CoveredUnits, fit.UsedUnits, fit.UnknownReadings, len(obs), used, unknown)
			}
			checkAgainstSolve(t, label, m, obs, nil, fit, ws)
			// ResidualAt agrees with the residual computed row by row at an arbitrary h.
			h := make([]float64, k)
			for j := range h {
				h[j] = rng.Float64()
			}
			A, b := explicitProblem(m, obs, nil)
			got, err := ws.ResidualAt(h)
			if err != nil {
				t.Fatal(err)
			}
			if want := sq(residualOf(A, b, h)); math.Abs(got-want) > 1e-9*math.Max(1, want) {
				t.Errorf("%s: ResidualAt = %v, direct %v", label, got, want)
			}
		}
	}
}

// TestPlaceWeighted checks PlaceWeighted against nnls.Solve on the explicit problem with rows
// scaled by sqrt(mult), and against Place where every multiplicity is 1.
func TestPlaceWeighted(t *testing.T) {
	rng := rand.New(rand.NewPCG(19, 20))
	for trial := range 30 {
		k := 1 + rng.IntN(14)
		m := randomModel(rng, 10+rng.IntN(80), k, 0.1, 0.2)
		e, err := NewEngine(m.W, m.unitRows, m.weights)
		if err != nil {
			t.Fatal(err)
		}
		ws := e.NewWorkspace()
		obs := randomWitness(rng, m, 0.2+0.8*rng.Float64(), 0.1)
		mult := make([]float64, len(obs))
		used, unknown := 0, 0
		for i, o := range obs {
			switch rng.IntN(4) {
			case 0: // left out
			case 1:
				mult[i] = float64(1 + rng.IntN(3)) // a bootstrap count
			default:
				mult[i] = 2 * rng.Float64()
			}
			if lo, hi := m.unitRows[o.Unit][0], m.unitRows[o.Unit][1]; hi > lo && mult[i] > 0 {
				used++
				if o.Row < 0 {
					unknown++
				}
			}
		}
		label := fmt.Sprintf("weighted trial %d (k=%d)", trial, k)
		fit, err := e.PlaceWeighted(obs, mult, ws)
		if used == 0 {
			if !errors.Is(err, ErrNoCoverage) {
				t.Errorf("%s: nothing used: err = %v, want ErrNoCoverage", label, err)
			}
			continue
		}
		if err != nil {
			t.Fatalf("%s: %v", label, err)
		}
		if fit.UsedUnits != used || fit.UnknownReadings != unknown || fit.CoveredUnits != len(obs) {
			t.Errorf("%s: counts %d/%d/%d, want %d/%d/%d", label, fit.CoveredUnits, fit.UsedUnits, fit.UnknownReadings, len(obs), used, unknown)
		}
		checkAgainstSolve(t, label, m, obs, mult, fit, ws)

		for i := range mult {
			mult[i] = 1
		}
		fw, err := e.PlaceWeighted(obs, mult, ws)
		if err != nil {
			t.Fatal(err)
		}
		hw := append([]float64(nil), fw.H...)
		fp, err := e.Place(obs, ws)
		if err != nil {
			t.Fatal(err)
		}
		for j := range hw {
			if math.Abs(hw[j]-fp.H[j]) > 1e-9*math.Max(1, math.Abs(fp.H[j])) {
				t.Errorf("%s: unit multiplicities: h[%d] = %v, Place %v", label, j, hw[j], fp.H[j])
			}
		}
	}
	m := randomModel(rng, 20, 3, 0, 0)
	e, _ := NewEngine(m.W, m.unitRows, m.weights)
	ws := e.NewWorkspace()
	obs := randomWitness(rng, m, 1, 0)
	for _, bad := range [][]float64{make([]float64, len(obs)-1), append(make([]float64, len(obs)-1), -1),
		append(make([]float64, len(obs)-1), math.NaN()), append(make([]float64, len(obs)-1), math.Inf(1))} {
		if _, err := e.PlaceWeighted(obs, bad, ws); err == nil || errors.Is(err, ErrNoCoverage) {
			t.Errorf("PlaceWeighted with multiplicities %v: err = %v, want a validation error", bad, err)
		}
	}
	if _, err := e.PlaceWeighted(obs, make([]float64, len(obs)), ws); !errors.Is(err, ErrNoCoverage) {
		t.Errorf("all multiplicities 0: err = %v, want ErrNoCoverage", err)
	}
	mult := make([]float64, len(obs))
	for i := range mult {
		mult[i] = float64(i % 3)
	}
	if a := testing.AllocsPerRun(20, func() {
		if _, err := e.PlaceWeighted(obs, mult, ws); err != nil {
			t.Fatal(err)
		}
	}); a != 0 {
		t.Errorf("PlaceWeighted allocated %v times per run, want 0", a)
	}
}

// TestPlaceColumnAbsentFromCoverage makes one group's profile zero everywhere but on a few
// units and places witnesses that cover most units except those: the subtracted Gram then holds
// only rounding residue in that column, which must not disturb the fit.
func TestPlaceColumnAbsentFromCoverage(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	m := randomModel(rng, 200, 6, 0, 0)
	for r := m.unitRows[10][0]; r < m.W.RawMatrix().Rows; r++ {
		m.W.Set(r, 3, 0)
	}
	for r := range m.unitRows[10][0] {
		m.W.Set(r, 3, 50*m.W.At(r, 3)) // large, so rounding residue is large in absolute terms
	}
	e, err := NewEngine(m.W, m.unitRows, m.weights)
	if err != nil {
		t.Fatal(err)
	}
	ws := e.NewWorkspace()
	for trial := range 10 {
		var obs []Observation
		for u := 10; u < 200; u++ {
			if rng.Float64() < 0.9 {
				lo, hi := m.unitRows[u][0], m.unitRows[u][1]
				obs = append(obs, Observation{Unit: u, Row: lo + rng.IntN(hi-lo)})
			}
		}
		fit, err := e.Place(obs, ws)
		if err != nil {
			t.Fatal(err)
		}
		if fit.H[3] != 0 {
			t.Errorf("trial %d: group 3 has no profile on the covered units but h[3] = %v", trial, fit.H[3])
		}
		checkAgainstSolve(t, fmt.Sprintf("absent column, trial %d", trial), m, obs, nil, fit, ws)
	}
}

func TestPlaceSpecialWitnesses(t *testing.T) {
	// Three units: unit 0 with rows 0-1, unit 1 set aside (no rows), unit 2 with rows 2-3.
	W := mat.NewDense(4, 2, []float64{
		1, 0, // unit 0, reading a: group 0
		0, 1, // unit 0, reading b: group 1
		1, 0, // unit 2, reading a: group 0
		0, 1, // unit 2, reading b: group 1
	})
	e, err := NewEngine(W, [][2]int{{0, 2}, {2, 2}, {2, 4}}, []float64{2, 2, 1, 1})
	if err != nil {
		t.Fatal(err)
	}
	ws := e.NewWorkspace()
	// Reading a at both units (worked by hand): the rows (1,0), (0,1), (1,0), (0,1) are to
	// reproduce v = (2, 0, 1, 0), so h_0 = (2+1)/2 = 1.5, h_1 = 0, residual 0.5^2 + 0.5^2 = 0.5
	// and ||v||^2 = 5. The unit without rows (1) counts as covered but not used.
	fit, err := e.Place([]Observation{{0, 0}, {2, 2}, {1, -1}}, ws)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(fit.H[0]-1.5) > 1e-15 || fit.H[1] != 0 || math.Abs(fit.Residual-0.5) > 1e-14 || fit.Norm2 != 5 {
		t.Errorf("fit = %+v, want h = (1.5, 0), residual 0.5, norm2 5", fit)
	}
	if fit.CoveredUnits != 3 || fit.UsedUnits != 2 || fit.UnknownReadings != 0 {
		t.Errorf("counts %+v", fit)
	}
	// An unknown reading at unit 2 keeps its rows with v = 0: the fit at unit 0 alone is h_0 = 2,
	// but the zero rows of unit 2 pull it to 2/2 = 1 (rows (1,0)->2 and (1,0)->0).
	fit, err = e.Place([]Observation{{0, 0}, {2, -1}}, ws)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(fit.H[0]-1) > 1e-15 || fit.H[1] != 0 || fit.UnknownReadings != 1 {
		t.Errorf("unknown reading: fit = %+v, want h = (1, 0)", fit)
	}
	// Only unknown readings: h = 0, nothing explained.
	fit, err = e.Place([]Observation{{0, -1}}, ws)
	if err != nil {
		t.Fatal(err)
	}
	if fit.H[0] != 0 || fit.H[1] != 0 || fit.Residual != 0 || fit.Norm2 != 0 {
		t.Errorf("all unknown: fit = %+v, want zeros", fit)
	}
	// No coverage at all, or only a unit without rows.
	for _, obs := range [][]Observation{nil, {{1, -1}}} {
		if _, err := e.Place(obs, ws); !errors.Is(err, ErrNoCoverage) {
			t.Errorf("Place(%v): err = %v, want ErrNoCoverage", obs, err)
		}
	}
	if _, err := ws.ResidualAt([]float64{1, 1}); err == nil {
		t.Error("ResidualAt after a failed Place did not fail")
	}
}

func TestPlaceErrors(t *testing.T) {
	W := mat.NewDense(4, 2, []float64{1, 0, 0, 1, 1, 0, 0, 1})
	e, err := NewEngine(W, [][2]int{{0, 2}, {2, 2}, {2, 4}}, []float64{1, 1, 1, 1})
	if err != nil {
		t.Fatal(err)
	}
	ws := e.NewWorkspace()
	bad := [][]Observation{
		{{-1, -1}},
		{{3, -1}},
		{{0, 0}, {0, 1}},   // unit twice
		{{0, 2}},           // row of another unit
		{{0, -2}},          // not -1
		{{1, 0}},           // a unit with no rows has no row 0
		{{2, 0}, {0, 0}},   // row 0 belongs to unit 0
		{{2, 2}, {2, -1}},  // twice again
		{{0, 0}, {2, 100}}, // out of range
	}
	for _, obs := range bad {
		if _, err := e.Place(obs, ws); err == nil || errors.Is(err, ErrNoCoverage) {
			t.Errorf("Place(%v): err = %v, want a validation error", obs, err)
		}
	}
	// After failures the workspace still works, and marks from a failed call do not leak.
	if _, err := e.Place([]Observation{{0, 0}, {2, 3}}, ws); err != nil {
		t.Errorf("valid placement after failures: %v", err)
	}
	other, _ := NewEngine(W, [][2]int{{0, 2}, {2, 2}, {2, 4}}, []float64{1, 1, 1, 1})
	if _, err := e.Place([]Observation{{0, 0}}, other.NewWorkspace()); err == nil {
		t.Error("Place with another engine's workspace did not fail")
	}
	if _, err := e.Place([]Observation{{0, 0}}, nil); err == nil {
		t.Error("Place with a nil workspace did not fail")
	}
	if _, err := ws.ResidualAt([]float64{1}); err == nil {
		t.Error("ResidualAt with a short h did not fail")
	}

	nan := math.NaN()
	engines := []struct {
		name string
		W    *mat.Dense
		ur   [][2]int
		wt   []float64
	}{
		{"nil W", nil, [][2]int{{0, 1}}, []float64{1}},
		{"negative W", mat.NewDense(2, 1, []float64{1, -1}), [][2]int{{0, 2}}, []float64{1, 1}},
		{"NaN in W", mat.NewDense(2, 1, []float64{1, nan}), [][2]int{{0, 2}}, []float64{1, 1}},
		{"Inf in W", mat.NewDense(2, 1, []float64{1, math.Inf(1)}), [][2]int{{0, 2}}, []float64{1, 1}},
		{"short weights", mat.NewDense(2, 1, []float64{1, 1}), [][2]int{{0, 2}}, []float64{1}},
		{"negative weight", mat.NewDense(2, 1, []float64{1, 1}), [][2]int{{0, 2}}, []float64{1, -1}},
		{"NaN weight", mat.NewDense(2, 1, []float64{1, 1}), [][2]int{{0, 2}}, []float64{nan, 1}},
		{"no units", mat.NewDense(2, 1, []float64{1, 1}), nil, []float64{1, 1}},
		{"range past W", mat.NewDense(2, 1, []float64{1, 1}), [][2]int{{0, 3}}, []float64{1, 1}},
		{"reversed range", mat.NewDense(2, 1, []float64{1, 1}), [][2]int{{2, 1}}, []float64{1, 1}},
		{"negative start", mat.NewDense(2, 1, []float64{1, 1}), [][2]int{{-1, 1}}, []float64{1, 1}},
		{"overlap", mat.NewDense(3, 1, []float64{1, 1, 1}), [][2]int{{0, 2}, {1, 3}}, []float64{1, 1, 1}},
		{"no unit with rows", mat.NewDense(2, 1, []float64{1, 1}), [][2]int{{1, 1}}, []float64{1, 1}},
	}
	for _, tc := range engines {
		if _, err := NewEngine(tc.W, tc.ur, tc.wt); err == nil {
			t.Errorf("NewEngine with %s did not fail", tc.name)
		}
	}
}

// TestPlaceConcurrent places many witnesses from several goroutines, each with its own
// Workspace, and checks the results equal those of a sequential run (run with -race).
func TestPlaceConcurrent(t *testing.T) {
	rng := rand.New(rand.NewPCG(15, 16))
	m := randomModel(rng, 300, 8, 0.05, 0.2)
	e, err := NewEngine(m.W, m.unitRows, m.weights)
	if err != nil {
		t.Fatal(err)
	}
	var witnesses [][]Observation
	for range 64 {
		witnesses = append(witnesses, randomWitness(rng, m, 0.05+0.9*rng.Float64(), 0.1))
	}
	want := make([][]float64, len(witnesses))
	ws := e.NewWorkspace()
	for i, obs := range witnesses {
		fit, err := e.Place(obs, ws)
		if err != nil {
			t.Fatal(err)
		}
		want[i] = append([]float64(nil), fit.H...)
	}
	var wg sync.WaitGroup
	errs := make(chan error, 8)
	for g := range 8 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			ws := e.NewWorkspace()
			for rep := range 4 {
				for i := range witnesses {
					i := (i + g*7 + rep) % len(witnesses)
					fit, err := e.Place(witnesses[i], ws)
					if err != nil {
						errs <- err
						return
					}
					for j := range fit.H {
						if fit.H[j] != want[i][j] {
							errs <- fmt.Errorf("goroutine %d, witness %d: h[%d] = %v, sequential %v", g, i, j, fit.H[j], want[i][j])
							return
						}
					}
				}
			}
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
}

func TestPlaceAllocatesNothing(t *testing.T) {
	rng := rand.New(rand.NewPCG(17, 18))
	m := randomModel(rng, 500, 12, 0.05, 0.1)
	e, err := NewEngine(m.W, m.unitRows, m.weights)
	if err != nil {
		t.Fatal(err)
	}
	ws := e.NewWorkspace()
	few := randomWitness(rng, m, 0.3, 0.1)
	most := randomWitness(rng, m, 0.9, 0.1)
	allocs := testing.AllocsPerRun(50, func() {
		if _, err := e.Place(few, ws); err != nil {
			t.Fatal(err)
		}
		if _, err := e.Place(most, ws); err != nil {
			t.Fatal(err)
		}
	})
	if allocs != 0 {
		t.Errorf("Place allocated %v times per run, want 0", allocs)
	}
}
