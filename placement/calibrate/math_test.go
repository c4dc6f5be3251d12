package calibrate

import (
	"encoding/json"
	"math"
	"os"
	"testing"

	"strayleaf/placement/model"
)

// golden is testdata/golden/calibrate/calibrate_golden.json, written by gen_calibrate.py beside
// it (scikit-learn 1.2 and scipy 1.10 from Debian).
type golden struct {
	Isotonic []struct {
		X, Y, W            []float64
		Thresholds, Values []float64
		Query, Predict     []float64
	}
	Logistic []struct {
		X         [][]float64
		Y         []float64
		C         float64
		Intercept float64
		Coef      []float64
	}
	ECE []struct {
		Prob []float64
		Y    []float64
		ECE  float64
	}
}

func readGolden(t *testing.T) golden {
	t.Helper()
	b, err := os.ReadFile("../../testdata/golden/calibrate/calibrate_golden.json")
	if err != nil {
		t.Fatal(err)
	}
	var g golden
	if err := json.Unmarshal(b, &g); err != nil {
		t.Fatal(err)
	}
	if len(g.Isotonic) == 0 || len(g.Logistic) == 0 || len(g.ECE) == 0 {
		t.Fatal("golden file lacks a section")
	}
	return g
}

// Reference: sklearn.isotonic.IsotonicRegression(out_of_bounds="clip") on weighted samples with
// ties; thresholds, values and interpolated predictions agree to 1e-12.
func TestFitIsotonicMatchesScikitLearn(t *testing.T) {
	for i, c := range readGolden(t).Isotonic {
		th, val, err := FitIsotonic(c.X, c.Y, c.W)
		if err != nil {
			t.Fatal(err)
		}
		if len(th) != len(c.Thresholds) {
			t.Fatalf("case %d: %d thresholds, scikit-learn keeps %d", i, len(th), len(c.Thresholds))
		}
		for j := range th {
			if math.Abs(th[j]-c.Thresholds[j]) > 1e-12 || math.Abs(val[j]-c.Values[j]) > 1e-12 {
				t.Errorf("case %d threshold %d: (%v, %v), scikit-learn (%v, %v)", i, j, th[j], val[j], c.Thresholds[j], c.Values[j])
			}
		}
		for j := 1; j < len(val); j++ {
			if val[j] < val[j-1] {
				t.Errorf("case %d: values decrease at %d", i, j)
			}
		}
		for j, q := range c.Query {
			if got := model.InterpolateSteps(th, val, q); math.Abs(got-c.Predict[j]) > 1e-12 {
				t.Errorf("case %d: f(%v) = %v, scikit-learn %v", i, q, got, c.Predict[j])
			}
		}
	}
}

// PAV on a worked example (from memory, checkable by hand): y = 1 3 2 4 3 5 pools (3,2) and
// (4,3) into 2.5 and 3.5.
func TestFitIsotonicWorkedExample(t *testing.T) {
	th, val, err := FitIsotonic([]float64{1, 2, 3, 4, 5, 6}, []float64{1, 3, 2, 4, 3, 5}, nil)
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{1, 2.5, 2.5, 3.5, 3.5, 5}
	if len(val) != len(want) {
		t.Fatalf("values %v; want %v", val, want)
	}
	for i := range want {
		if val[i] != want[i] || th[i] != float64(i+1) {
			t.Errorf("point %d: (%v, %v); want (%d, %v)", i, th[i], val[i], i+1, want[i])
		}
	}
	if _, _, err := FitIsotonic([]float64{1}, []float64{math.NaN()}, nil); err == nil {
		t.Error("NaN accepted")
	}
}

// Reference: sklearn.linear_model.LogisticRegression(C, newton-cg) with an unpenalised intercept;
// coefficients agree to 1e-6; the gradient of the penalised objective vanishes.
func TestFitLogisticMatchesScikitLearn(t *testing.T) {
	for i, c := range readGolden(t).Logistic {
		b0, b, err := FitLogistic(c.X, c.Y, nil, 1/c.C)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(b0-c.Intercept) > 1e-6 {
			t.Errorf("case %d: intercept %v, scikit-learn %v", i, b0, c.Intercept)
		}
		for j := range b {
			if math.Abs(b[j]-c.Coef[j]) > 1e-6 {
				t.Errorf("case %d: coefficient %d is %v, scikit-learn %v", i, j, b[j], c.Coef[j])
			}
		}
		// First-order condition (the invariant): sum (mu - y) = 0 and sum (mu - y) x_j + b_j/C = 0.
		g := make([]float64, len(b)+1)
		for r, row := range c.X {
			z := b0
			for j, v := range row {
				z += b[j] * v
			}
			d := sigmoid(z) - c.Y[r]
			g[0] += d
			for j, v := range row {
				g[j+1] += d * v
			}
		}
		for j := range b {
			g[j+1] += b[j] / c.C
		}
		for j, v := range g {
			if math.Abs(v) > 1e-8 {
				t.Errorf("case %d: gradient %d is %v", i, j, v)
			}
		}
	}
}

// Reference: sklearn.calibration.calibration_curve(n_bins=10, strategy="uniform") with its bin
// counts; probabilities on the bin edges included.
func TestReliabilityMatchesScikitLearn(t *testing.T) {
	for i, c := range readGolden(t).ECE {
		correct := make([]bool, len(c.Y))
		for j, y := range c.Y {
			correct[j] = y == 1
		}
		bins, ece, err := Reliability(c.Prob, correct)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(ece-c.ECE) > 1e-12 {
			t.Errorf("case %d: ECE %v, scikit-learn %v", i, ece, c.ECE)
		}
		n := 0
		for _, b := range bins {
			n += b.Count
		}
		if n != len(c.Prob) {
			t.Errorf("case %d: bins hold %d of %d", i, n, len(c.Prob))
		}
	}
	// Worked example: two bins, confidences 0.25 (x2, one right) and 0.95 (x2, both right):
	// ECE = 0.5*|0.5-0.25| + 0.5*|1-0.95| = 0.15.
	_, ece, err := Reliability([]float64{0.25, 0.25, 0.95, 0.95}, []bool{true, false, true, true})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(ece-0.15) > 1e-12 {
		t.Errorf("worked example ECE %v; want 0.15", ece)
	}
}
