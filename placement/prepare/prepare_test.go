package prepare

import (
	"fmt"
	"math"
	"reflect"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/collation"
)

// fromTable builds a collation from a table: one string per witness, "siglum: r1 r2 ...", one
// reading label per unit (units u1, u2, ...), "-" for a lacuna. Cells are added unit by unit,
// witnesses in table order, so reading indexes follow first appearance down each column.
func fromTable(t *testing.T, rows ...string) *collation.Collation {
	t.Helper()
	return tableBuilder(t, rows...).Build()
}

// tableBuilder is fromTable without the final Build.
func tableBuilder(t *testing.T, rows ...string) *collation.Builder {
	t.Helper()
	var b collation.Builder
	var sigla []string
	var cells [][]string
	for _, row := range rows {
		siglum, rest, ok := strings.Cut(row, ":")
		if !ok {
			t.Fatalf("bad table row %q", row)
		}
		siglum = strings.TrimSpace(siglum)
		sigla = append(sigla, siglum)
		cells = append(cells, strings.Fields(rest))
		b.AddWitness(siglum)
	}
	for u := range cells[0] {
		id := fmt.Sprintf("u%d", u+1)
		if _, err := b.AddUnit(id, ""); err != nil {
			t.Fatal(err)
		}
		for w := range sigla {
			if len(cells[w]) != len(cells[0]) {
				t.Fatalf("table row %d has %d cells, row 0 has %d", w, len(cells[w]), len(cells[0]))
			}
			if r := cells[w][u]; r != "-" {
				if err := b.Add(sigla[w], id, r, ""); err != nil {
					t.Fatal(err)
				}
			}
		}
	}
	return &b
}

// handWorked is the small invented tradition every figure below was worked out on by hand.
//
//	        u1 u2 u3 u4 u5 u6
//	Ald:    a  a  a  a  a  a
//	Bir:    a  a  a  b  a  b
//	Ced:    a  b  a  c  a  a
//	Dog:    b  b  x  -  b  b
//	Elm:    b  c  a  -  b  -
//	Fir:    b  -  a  -  -  b
//	Gor:    a  -  -  -  -  -
//
// Support (witnesses having each reading) and N_u (witnesses extant at the unit), counted over
// all seven witnesses:
//
//	u1: a 4 (Ald Bir Ced Gor), b 3 (Dog Elm Fir); N = 7
//	u2: a 2 (Ald Bir), b 2 (Ced Dog), c 1 (Elm, singular); N = 5 (Fir, Gor lacunose)
//	u3: a 5, x 1 (Dog, singular); N = 6: one reading left, set aside
//	u4: a, b, c 1 each (Ald, Bir, Ced): all singular, no reading left, set aside
//	u5: a 3 (Ald Bir Ced), b 2 (Dog Elm); N = 5
//	u6: a 2 (Ald Ced), b 3 (Bir Dog Fir); N = 5
//
// Kept units u1 u2 u5 u6 (4). Extant among them: Ald Bir Ced Dog 4, Elm 3 (u1 u2 u5: at u2 it is
// extant, with its singular reading), Fir 2 (u1 u6), Gor 1 (u1).
func handWorked(t *testing.T) *collation.Collation {
	return fromTable(t,
		"Ald: a a a a a a",
		"Bir: a a a b a b",
		"Ced: a b a c a a",
		"Dog: b b x - b b",
		"Elm: b c a - b -",
		"Fir: b - a - - b",
		"Gor: a - - - - -",
	)
}

const tol = 1e-12

// checkMatrix compares m with want entry by entry.
func checkMatrix(t *testing.T, name string, m *mat.Dense, want [][]float64) {
	t.Helper()
	r, c := m.Dims()
	if r != len(want) || c != len(want[0]) {
		t.Fatalf("%s is %dx%d, want %dx%d", name, r, c, len(want), len(want[0]))
	}
	for i := range want {
		for j := range want[i] {
			if got := m.At(i, j); math.Abs(got-want[i][j]) > tol {
				t.Errorf("%s[%d][%d] = %.15g, want %.15g", name, i, j, got, want[i][j])
			}
		}
	}
}

// TestPrepareHandWorked checks every figure of Prepare with the default options (min_support 2,
// min_coverage 0.5, IDF) on the hand-worked collation. The steps are common practice (trade
// notes); the weights are IDF, w = log(N_u / n_r) (Spärck Jones 1972, J. Documentation 28).
func TestPrepareHandWorked(t *testing.T) {
	c := handWorked(t)
	p, err := Prepare(c, DefaultOptions())
	if err != nil {
		t.Fatal(err)
	}

	wantSingular := []SingularReading{
		{Unit: "u2", Reading: "c", Witnesses: []string{"Elm"}},
		{Unit: "u3", Reading: "x", Witnesses: []string{"Dog"}},
		{Unit: "u4", Reading: "a", Witnesses: []string{"Ald"}},
		{Unit: "u4", Reading: "b", Witnesses: []string{"Bir"}},
		{Unit: "u4", Reading: "c", Witnesses: []string{"Ced"}},
	}
	if !reflect.DeepEqual(p.Report.SingularReadings, wantSingular) {
		t.Errorf("singular readings\n got %+v\nwant %+v", p.Report.SingularReadings, wantSingular)
	}
	wantUninformative := []UninformativeUnit{
		{Unit: "u3", Kept: 1, Reason: "only one reading is attested by 2 or more witnesses"},
		{Unit: "u4", Kept: 0, Reason: "no reading is attested by 2 or more witnesses"},
	}
	if !reflect.DeepEqual(p.Report.UninformativeUnits, wantUninformative) {
		t.Errorf("uninformative units\n got %+v\nwant %+v", p.Report.UninformativeUnits, wantUninformative)
	}
	// Gor is extant at 1 of the 4 kept units; Fir at 2 of 4 = 0.5 is not below 0.5 and stays.
	wantFragmentary := []FragmentaryWitness{{Witness: "Gor", Extant: 1, Coverage: 0.25}}
	if !reflect.DeepEqual(p.Report.FragmentaryWitnesses, wantFragmentary) {
		t.Errorf("fragmentary witnesses\n got %+v\nwant %+v", p.Report.FragmentaryWitnesses, wantFragmentary)
	}

	if want := []int{0, 1, 2, 3, 4, 5}; !reflect.DeepEqual(p.Train, want) {
		t.Errorf("Train = %v, want %v (Ald..Fir)", p.Train, want)
	}
	if want := []int{0, 1, 4, 5}; !reflect.DeepEqual(p.KeptUnits, want) {
		t.Errorf("KeptUnits = %v, want %v (u1 u2 u5 u6)", p.KeptUnits, want)
	}
	// u3 and u4 are remembered with an empty range at the place their rows would have been.
	if want := [][2]int{{0, 2}, {2, 4}, {4, 4}, {4, 4}, {4, 6}, {6, 8}}; !reflect.DeepEqual(p.UnitRows, want) {
		t.Errorf("UnitRows = %v, want %v", p.UnitRows, want)
	}

	// Gor is set aside from training but its reading a at u1 still counts: N = 7, n_a = 4.
	wantRows := []Row{
		{Unit: 0, Reading: 0, Support: 4, Weight: math.Log(7.0 / 4)}, // u1 a: 4 of 7
		{Unit: 0, Reading: 1, Support: 3, Weight: math.Log(7.0 / 3)}, // u1 b: 3 of 7
		{Unit: 1, Reading: 0, Support: 2, Weight: math.Log(5.0 / 2)}, // u2 a: 2 of 5 (Elm's c counts in N)
		{Unit: 1, Reading: 1, Support: 2, Weight: math.Log(5.0 / 2)}, // u2 b: 2 of 5
		{Unit: 4, Reading: 0, Support: 3, Weight: math.Log(5.0 / 3)}, // u5 a: 3 of 5
		{Unit: 4, Reading: 1, Support: 2, Weight: math.Log(5.0 / 2)}, // u5 b: 2 of 5
		{Unit: 5, Reading: 0, Support: 2, Weight: math.Log(5.0 / 2)}, // u6 a: 2 of 5
		{Unit: 5, Reading: 1, Support: 3, Weight: math.Log(5.0 / 3)}, // u6 b: 3 of 5
	}
	if len(p.Rows) != len(wantRows) {
		t.Fatalf("%d rows, want %d: %+v", len(p.Rows), len(wantRows), p.Rows)
	}
	for i, w := range wantRows {
		g := p.Rows[i]
		if g.Unit != w.Unit || g.Reading != w.Reading || g.Support != w.Support || math.Abs(g.Weight-w.Weight) > tol {
			t.Errorf("row %d = %+v, want %+v", i, g, w)
		}
	}

	A, B, C, D := math.Log(7.0/4), math.Log(7.0/3), math.Log(5.0/2), math.Log(5.0/3)
	checkMatrix(t, "X", p.X, [][]float64{
		// Ald Bir Ced Dog Elm Fir
		{A, A, A, 0, 0, 0}, // u1 a
		{0, 0, 0, B, B, B}, // u1 b
		{C, C, 0, 0, 0, 0}, // u2 a
		{0, 0, C, C, 0, 0}, // u2 b (Elm's singular c is neither)
		{D, D, D, 0, 0, 0}, // u5 a
		{0, 0, 0, C, C, 0}, // u5 b
		{C, 0, C, 0, 0, 0}, // u6 a
		{0, D, 0, D, 0, D}, // u6 b
	})
	checkMatrix(t, "M", p.M, [][]float64{
		// Ald Bir Ced Dog Elm Fir
		{1, 1, 1, 1, 1, 1}, // u1: all extant
		{1, 1, 1, 1, 1, 1},
		{1, 1, 1, 1, 1, 0}, // u2: Fir lacunose; Elm extant (singular reading): observed, X = 0
		{1, 1, 1, 1, 1, 0},
		{1, 1, 1, 1, 1, 0}, // u5: Fir lacunose
		{1, 1, 1, 1, 1, 0},
		{1, 1, 1, 1, 0, 1}, // u6: Elm lacunose
		{1, 1, 1, 1, 0, 1},
	})

	// RowOf: a kept reading, a singular reading at a kept unit, a reading at a set-aside unit.
	for _, tc := range []struct{ u, r, want int }{{5, 1, 7}, {0, 0, 0}, {1, 2, -1}, {2, 0, -1}, {3, 1, -1}} {
		if got := p.RowOf(tc.u, tc.r); got != tc.want {
			t.Errorf("RowOf(%d, %d) = %d, want %d", tc.u, tc.r, got, tc.want)
		}
	}
}

// Property that must hold for any preparation: X is zero wherever M is, every observed witness
// has exactly one kept reading or none (a singular one) at each kept unit, and X's entries are
// the row weights.
func checkXM(t *testing.T, p *Prepared) {
	t.Helper()
	for _, u := range p.KeptUnits {
		lo, hi := p.UnitRows[u][0], p.UnitRows[u][1]
		for j := range p.Train {
			nonzero := 0
			for i := lo; i < hi; i++ {
				x, m := p.X.At(i, j), p.M.At(i, j)
				if m != p.M.At(lo, j) {
					t.Errorf("M differs within unit %d for column %d", u, j)
				}
				if x != 0 {
					nonzero++
					if m != 1 || x != p.Rows[i].Weight {
						t.Errorf("X[%d][%d] = %g with M %g, weight %g", i, j, x, m, p.Rows[i].Weight)
					}
				}
			}
			if nonzero > 1 {
				t.Errorf("column %d has %d readings at unit %d", j, nonzero, u)
			}
		}
	}
}

func TestPrepareIDFOff(t *testing.T) {
	opt := DefaultOptions()
	opt.IDF = false
	p, err := Prepare(handWorked(t), opt)
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range p.Rows {
		if r.Weight != 1 {
			t.Errorf("row %d weight %g, want 1 with IDF off", i, r.Weight)
		}
	}
	checkMatrix(t, "X", p.X, [][]float64{
		{1, 1, 1, 0, 0, 0},
		{0, 0, 0, 1, 1, 1},
		{1, 1, 0, 0, 0, 0},
		{0, 0, 1, 1, 0, 0},
		{1, 1, 1, 0, 0, 0},
		{0, 0, 0, 1, 1, 0},
		{1, 0, 1, 0, 0, 0},
		{0, 1, 0, 1, 0, 1},
	})
	checkXM(t, p)
}

// With min_support 1 nothing is singular: all six units are kept, and coverage is out of 6.
func TestPrepareMinSupportOne(t *testing.T) {
	opt := DefaultOptions()
	opt.MinSupport = 1
	p, err := Prepare(handWorked(t), opt)
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Report.SingularReadings) != 0 || len(p.Report.UninformativeUnits) != 0 {
		t.Errorf("set aside %+v, want nothing but fragmentary witnesses", p.Report)
	}
	// Fir is extant at u1 u3 u6 = 3 of 6 and stays; Gor at u1 only.
	if want := []FragmentaryWitness{{Witness: "Gor", Extant: 1, Coverage: 1.0 / 6}}; !reflect.DeepEqual(p.Report.FragmentaryWitnesses, want) {
		t.Errorf("fragmentary %+v, want %+v", p.Report.FragmentaryWitnesses, want)
	}
	// Rows: u1 0-1, u2 2-4, u3 5-6, u4 7-9, u5 10-11, u6 12-13.
	if want := [][2]int{{0, 2}, {2, 5}, {5, 7}, {7, 10}, {10, 12}, {12, 14}}; !reflect.DeepEqual(p.UnitRows, want) {
		t.Errorf("UnitRows = %v, want %v", p.UnitRows, want)
	}
	for _, tc := range []struct {
		u, r int
		want float64
		why  string
	}{
		{1, 2, math.Log(5.0 / 1), "u2 c: Elm alone of 5"},
		{2, 1, math.Log(6.0 / 1), "u3 x: Dog alone of 6"},
		{2, 0, math.Log(6.0 / 5), "u3 a: 5 of 6"},
		{3, 2, math.Log(3.0 / 1), "u4 c: Ced alone of 3"},
	} {
		i := p.RowOf(tc.u, tc.r)
		if i < 0 || math.Abs(p.Rows[i].Weight-tc.want) > tol {
			t.Errorf("%s: row %d, want weight %g", tc.why, i, tc.want)
		}
	}
	checkXM(t, p)
}

// With min_support 3 only u1 keeps two readings; every witness is extant there, Gor included,
// so all seven train.
func TestPrepareMinSupportThree(t *testing.T) {
	opt := DefaultOptions()
	opt.MinSupport = 3
	p, err := Prepare(handWorked(t), opt)
	if err != nil {
		t.Fatal(err)
	}
	wantUninformative := []UninformativeUnit{
		{Unit: "u2", Kept: 0, Reason: "no reading is attested by 3 or more witnesses"},
		{Unit: "u3", Kept: 1, Reason: "only one reading is attested by 3 or more witnesses"},
		{Unit: "u4", Kept: 0, Reason: "no reading is attested by 3 or more witnesses"},
		{Unit: "u5", Kept: 1, Reason: "only one reading is attested by 3 or more witnesses"},
		{Unit: "u6", Kept: 1, Reason: "only one reading is attested by 3 or more witnesses"},
	}
	if !reflect.DeepEqual(p.Report.UninformativeUnits, wantUninformative) {
		t.Errorf("uninformative units\n got %+v\nwant %+v", p.Report.UninformativeUnits, wantUninformative)
	}
	wantSingular := []SingularReading{
		{Unit: "u2", Reading: "a", Witnesses: []string{"Ald", "Bir"}},
		{Unit: "u2", Reading: "b", Witnesses: []string{"Ced", "Dog"}},
		{Unit: "u2", Reading: "c", Witnesses: []string{"Elm"}},
		{Unit: "u3", Reading: "x", Witnesses: []string{"Dog"}},
		{Unit: "u4", Reading: "a", Witnesses: []string{"Ald"}},
		{Unit: "u4", Reading: "b", Witnesses: []string{"Bir"}},
		{Unit: "u4", Reading: "c", Witnesses: []string{"Ced"}},
		{Unit: "u5", Reading: "b", Witnesses: []string{"Dog", "Elm"}},
		{Unit: "u6", Reading: "a", Witnesses: []string{"Ald", "Ced"}},
	}
	if !reflect.DeepEqual(p.Report.SingularReadings, wantSingular) {
		t.Errorf("set-aside readings\n got %+v\nwant %+v", p.Report.SingularReadings, wantSingular)
	}
	if len(p.Report.FragmentaryWitnesses) != 0 || len(p.Train) != 7 {
		t.Errorf("fragmentary %+v, train %v; want none set aside", p.Report.FragmentaryWitnesses, p.Train)
	}
	A, B := math.Log(7.0/4), math.Log(7.0/3)
	checkMatrix(t, "X", p.X, [][]float64{
		// Ald Bir Ced Dog Elm Fir Gor
		{A, A, A, 0, 0, 0, A},
		{0, 0, 0, B, B, B, 0},
	})
	checkMatrix(t, "M", p.M, [][]float64{{1, 1, 1, 1, 1, 1, 1}, {1, 1, 1, 1, 1, 1, 1}})
}

func TestPrepareMinCoverage(t *testing.T) {
	opt := DefaultOptions()
	opt.MinCoverage = 1
	p, err := Prepare(handWorked(t), opt)
	if err != nil {
		t.Fatal(err)
	}
	if want := []int{0, 1, 2, 3}; !reflect.DeepEqual(p.Train, want) {
		t.Errorf("Train = %v, want %v (Ald Bir Ced Dog)", p.Train, want)
	}
	want := []FragmentaryWitness{
		{Witness: "Elm", Extant: 3, Coverage: 0.75},
		{Witness: "Fir", Extant: 2, Coverage: 0.5},
		{Witness: "Gor", Extant: 1, Coverage: 0.25},
	}
	if !reflect.DeepEqual(p.Report.FragmentaryWitnesses, want) {
		t.Errorf("fragmentary\n got %+v\nwant %+v", p.Report.FragmentaryWitnesses, want)
	}
	// Weights are counted over all witnesses, whoever trains: u1 a is still log(7/4).
	if got := p.Rows[0].Weight; math.Abs(got-math.Log(7.0/4)) > tol {
		t.Errorf("u1 a weight %g, want log(7/4)", got)
	}
	if r, c := p.X.Dims(); r != 8 || c != 4 {
		t.Errorf("X is %dx%d, want 8x4", r, c)
	}
	checkXM(t, p)

	// min_coverage 0 trains everyone: Gor's column has its reading at u1 and is unobserved
	// elsewhere.
	opt.MinCoverage = 0
	p, err = Prepare(handWorked(t), opt)
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Train) != 7 || len(p.Report.FragmentaryWitnesses) != 0 {
		t.Fatalf("train %v, fragmentary %+v", p.Train, p.Report.FragmentaryWitnesses)
	}
	A := math.Log(7.0 / 4)
	for i, want := range [][2]float64{{A, 1}, {0, 1}, {0, 0}, {0, 0}, {0, 0}, {0, 0}, {0, 0}, {0, 0}} {
		if x, m := p.X.At(i, 6), p.M.At(i, 6); math.Abs(x-want[0]) > tol || m != want[1] {
			t.Errorf("Gor row %d: X %g M %g, want X %g M %g", i, x, m, want[0], want[1])
		}
	}
}

// The reason given for a unit set aside says what is true of it whatever min_support is.
func TestUninformativeReasons(t *testing.T) {
	b := tableBuilder(t,
		//    u1   u2 u3 u4 u5 u6
		"Ald: same -  A  p  q  x",
		"Bir: same -  B  -  q  x",
		"Ced: same -  C  -  r  y",
		"Dog: same -  D  -  s  y",
	)
	b.AddReading(1, "unheld") // u2: a reading declared that no witness has
	c := b.Build()

	opt := DefaultOptions()
	opt.MinSupport = 1
	p, err := Prepare(c, opt)
	if err != nil {
		t.Fatal(err)
	}
	want := []UninformativeUnit{
		{Unit: "u1", Kept: 1, Reason: "every extant witness has the same reading"},
		{Unit: "u2", Kept: 0, Reason: "no witness is extant at the unit"},
		{Unit: "u4", Kept: 1, Reason: "only one witness is extant at the unit"},
	}
	if !reflect.DeepEqual(p.Report.UninformativeUnits, want) {
		t.Errorf("min_support 1:\n got %+v\nwant %+v", p.Report.UninformativeUnits, want)
	}
	// A reading no witness has is not a singular reading and is not reported as one.
	if len(p.Report.SingularReadings) != 0 {
		t.Errorf("min_support 1: set-aside readings %+v, want none", p.Report.SingularReadings)
	}
	if want := []int{2, 4, 5}; !reflect.DeepEqual(p.KeptUnits, want) {
		t.Errorf("min_support 1: kept units %v, want %v (u3 u5 u6)", p.KeptUnits, want)
	}

	p, err = Prepare(c, DefaultOptions())
	if err != nil {
		t.Fatal(err)
	}
	want = []UninformativeUnit{
		{Unit: "u1", Kept: 1, Reason: "every extant witness has the same reading"},
		{Unit: "u2", Kept: 0, Reason: "no witness is extant at the unit"},
		{Unit: "u3", Kept: 0, Reason: "no reading is attested by 2 or more witnesses"},
		{Unit: "u4", Kept: 0, Reason: "only one witness is extant at the unit"},
		{Unit: "u5", Kept: 1, Reason: "only one reading is attested by 2 or more witnesses"},
	}
	if !reflect.DeepEqual(p.Report.UninformativeUnits, want) {
		t.Errorf("min_support 2:\n got %+v\nwant %+v", p.Report.UninformativeUnits, want)
	}
	if want := []int{5}; !reflect.DeepEqual(p.KeptUnits, want) {
		t.Errorf("min_support 2: kept units %v, want %v (u6)", p.KeptUnits, want)
	}
}

func TestOptionsValidate(t *testing.T) {
	if got, want := DefaultOptions(), (Options{MinSupport: 2, MinCoverage: 0.5, IDF: true}); got != want {
		t.Errorf("DefaultOptions() = %+v, want %+v", got, want)
	}
	for _, tc := range []struct {
		opt  Options
		want string // "" for valid
	}{
		{Options{MinSupport: 1, MinCoverage: 0}, ""},
		{Options{MinSupport: 5, MinCoverage: 1}, ""},
		{Options{MinSupport: 0, MinCoverage: 0.5}, "min_support is 0; expected a whole number of witnesses >= 1"},
		{Options{MinSupport: -3, MinCoverage: 0.5}, "min_support is -3"},
		{Options{MinSupport: 2, MinCoverage: -0.1}, "min_coverage is -0.1; expected a share between 0 and 1"},
		{Options{MinSupport: 2, MinCoverage: 1.5}, "min_coverage is 1.5"},
		{Options{MinSupport: 2, MinCoverage: math.NaN()}, "min_coverage is NaN"},
		{Options{MinSupport: 2, MinCoverage: math.Inf(1)}, "min_coverage is +Inf"},
		{Options{}, "min_support is 0"}, // the zero value is not the defaults
	} {
		err := tc.opt.Validate()
		switch {
		case tc.want == "" && err != nil:
			t.Errorf("%+v: %v, want valid", tc.opt, err)
		case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)):
			t.Errorf("%+v: error %v, want %q", tc.opt, err, tc.want)
		}
		if tc.want != "" {
			if _, perr := Prepare(handWorked(t), tc.opt); perr == nil || perr.Error() != err.Error() {
				t.Errorf("Prepare with %+v: %v, want the validation error", tc.opt, perr)
			}
		}
	}
}

func TestPrepareNothingLeft(t *testing.T) {
	// No unit keeps two readings: min_support above the number of witnesses.
	opt := DefaultOptions()
	opt.MinSupport = 8
	_, err := Prepare(handWorked(t), opt)
	if err == nil || err.Error() != "no variation unit has two readings each shared by at least 8 witnesses: nothing to group by" {
		t.Errorf("min_support 8: %v", err)
	}
	// Every reading singular.
	_, err = Prepare(fromTable(t, "Ald: a b", "Bir: b a", "Ced: c c"), DefaultOptions())
	if err == nil || !strings.Contains(err.Error(), "nothing to group by") {
		t.Errorf("all singular: %v", err)
	}
	// An empty collation.
	var b collation.Builder
	if _, err := Prepare(b.Build(), DefaultOptions()); err == nil || !strings.Contains(err.Error(), "nothing to group by") {
		t.Errorf("empty collation: %v", err)
	}

	// No witness left to train on: each of eight witnesses is extant at one of the two kept
	// units, coverage 0.5 each, below min_coverage 0.6.
	halves := fromTable(t,
		"Ald: a -", "Bir: a -", "Ced: b -", "Dog: b -",
		"Elm: - a", "Fir: - a", "Gor: - b", "Hol: - b",
	)
	opt = DefaultOptions()
	opt.MinCoverage = 0.6
	_, err = Prepare(halves, opt)
	if err == nil || err.Error() != "every witness is extant at fewer than 60% of the 2 kept units: no witness is left to train on (lower min_coverage?)" {
		t.Errorf("min_coverage 0.6: %v", err)
	}
	// At 0.5 they all train.
	p, err := Prepare(halves, DefaultOptions())
	if err != nil || len(p.Train) != 8 {
		t.Errorf("min_coverage 0.5: %v, %v", p, err)
	}
}
