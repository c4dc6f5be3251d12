package cluster

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// The golden files are made by testdata/golden/nmf/gen_golden.py (scipy 1.10, scikit-learn 1.2).
func loadGolden(t *testing.T, name string, v any) {
	t.Helper()
	raw, err := os.ReadFile(filepath.Join("..", "..", "testdata", "golden", "nmf", name))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, v); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
}

// TestAdjustedRandMatchesScikitLearn compares with sklearn.metrics.adjusted_rand_score.
func TestAdjustedRandMatchesScikitLearn(t *testing.T) {
	var g struct {
		Cases []struct {
			A, B []int
			ARI  float64
		}
	}
	loadGolden(t, "ari.json", &g)
	if len(g.Cases) < 5 {
		t.Fatalf("%d cases", len(g.Cases))
	}
	for i, c := range g.Cases {
		got, err := AdjustedRand(c.A, c.B)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-c.ARI) > 1e-12 {
			t.Errorf("case %d: ARI %.15g; scikit-learn %.15g", i, got, c.ARI)
		}
	}
	if _, err := AdjustedRand([]int{1, 2}, []int{1}); err == nil {
		t.Error("partitions of different lengths: no error")
	}
}

// TestAdjustedRandWorkedExample: Hubert & Arabie's index by its (index - expected) / (max -
// expected) form, worked by hand for a = {0,0,0,1,1,1}, b = {0,0,1,1,2,2}: contingency cells
// 2,1,1,2 give index 2; row pairs 3+3 = 6, column pairs 1+1+1 = 3, 15 pairs in all, so expected
// = 6*3/15 = 1.2 and max = 4.5, ARI = 0.8/3.3.
func TestAdjustedRandWorkedExample(t *testing.T) {
	got, _ := AdjustedRand([]int{0, 0, 0, 1, 1, 1}, []int{0, 0, 1, 1, 2, 2})
	if want := 0.8 / 3.3; math.Abs(got-want) > 1e-15 {
		t.Errorf("ARI %.17g; expected %.17g", got, want)
	}
}

// TestAverageLinkageMatchesSciPy compares merges, cophenetic distances and the cophenetic
// correlation with scipy.cluster.hierarchy.linkage(y, method='average') and cophenet(Z, y), on
// Euclidean distances (no ties) and on 1 - a consensus matrix (many ties).
func TestAverageLinkageMatchesSciPy(t *testing.T) {
	var g struct {
		Cases []struct {
			Name       string
			D, Z       [][]float64
			Cophenetic [][]float64
			Corr       float64 `json:"cophenetic_correlation"`
		}
	}
	loadGolden(t, "linkage.json", &g)
	for _, c := range g.Cases {
		n := len(c.D)
		dist := func(i, j int) float64 { return c.D[i][j] }
		d, err := AverageLinkage(n, dist)
		if err != nil {
			t.Fatal(err)
		}
		if len(d.Merges) != n-1 {
			t.Fatalf("%s: %d merges", c.Name, len(d.Merges))
		}
		for i, z := range c.Z {
			m := d.Merges[i]
			if float64(m.A) != z[0] || float64(m.B) != z[1] || math.Abs(m.Height-z[2]) > 1e-12 || float64(m.Size) != z[3] {
				t.Errorf("%s: merge %d is %+v; scipy %v", c.Name, i, m, z)
			}
		}
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				if got := d.Cophenetic(i, j); math.Abs(got-c.Cophenetic[i][j]) > 1e-12 {
					t.Errorf("%s: cophenetic(%d, %d) = %g; scipy %g", c.Name, i, j, got, c.Cophenetic[i][j])
				}
			}
		}
		if got := d.CopheneticCorrelation(dist); math.Abs(got-c.Corr) > 1e-12 {
			t.Errorf("%s: cophenetic correlation %.15g; scipy %.15g", c.Name, got, c.Corr)
		}
	}
}

func TestAverageLinkageEdgeCases(t *testing.T) {
	// Two clean blocks: the dendrogram reproduces the distances exactly.
	block := func(i, j int) float64 {
		if (i < 3) == (j < 3) {
			return 0
		}
		return 1
	}
	d, err := AverageLinkage(6, block)
	if err != nil {
		t.Fatal(err)
	}
	if c := d.CopheneticCorrelation(block); math.Abs(c-1) > 1e-15 {
		t.Errorf("block distances: cophenetic correlation %g; expected 1", c)
	}
	// All distances equal: undefined correlation, reported as 1 (exact reproduction).
	flat := func(i, j int) float64 { return 0.5 }
	d, _ = AverageLinkage(4, flat)
	if c := d.CopheneticCorrelation(flat); c != 1 {
		t.Errorf("constant distances: %g; expected 1", c)
	}
	if d, err := AverageLinkage(1, flat); err != nil || len(d.Merges) != 0 || d.CopheneticCorrelation(flat) != 1 {
		t.Errorf("one item: %v", err)
	}
	if _, err := AverageLinkage(3, func(i, j int) float64 { return math.NaN() }); err == nil {
		t.Error("NaN distance: no error")
	}
	if _, err := AverageLinkage(0, flat); err == nil {
		t.Error("no items: no error")
	}
}
