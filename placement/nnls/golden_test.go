package nnls

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// goldenFile holds reference solutions from scipy.optimize.nnls (scipy 1.10, Debian
// python3-scipy), written by testdata/golden/nnls/gen_nnls.py; see that script for how the
// problems were drawn and how uniqueness of each x_i was decided (linear programmes over the
// solution set).
const goldenFile = "../../testdata/golden/nnls/nnls_golden.json"

type goldenProblem struct {
	Name   string    `json:"name"`
	M      int       `json:"m"`
	K      int       `json:"k"`
	A      []float64 `json:"a"`
	B      []float64 `json:"b"`
	X      []float64 `json:"x"`
	RNorm  float64   `json:"rnorm"`
	AX     []float64 `json:"ax"`
	Fixed  []bool    `json:"fixed"`
	Unique bool      `json:"unique"`
}

// goldenAgree is the agreement required with scipy: absolute 1e-8 on quantities scaled to
// max(1, ||x||_inf) for x and max(1, ||b||) for the residual norm and fitted values.
const goldenAgree = 1e-8

func TestGoldenScipy(t *testing.T) {
	raw, err := os.ReadFile(filepath.FromSlash(goldenFile))
	if err != nil {
		t.Fatalf("reading golden file: %v", err)
	}
	var g struct {
		Source   string          `json:"source"`
		Problems []goldenProblem `json:"problems"`
	}
	if err := json.Unmarshal(raw, &g); err != nil {
		t.Fatalf("parsing %s: %v", goldenFile, err)
	}
	if len(g.Problems) < 20 {
		t.Fatalf("golden file has %d problems, want at least 20", len(g.Problems))
	}
	t.Logf("reference: %s", g.Source)
	s := NewSolver(50)
	sawNonUnique, sawK50 := false, false
	for _, p := range g.Problems {
		if len(p.A) != p.M*p.K || len(p.B) != p.M || len(p.X) != p.K || len(p.Fixed) != p.K {
			t.Fatalf("%s: inconsistent golden record", p.Name)
		}
		sawNonUnique = sawNonUnique || !p.Unique
		sawK50 = sawK50 || p.K == 50
		A := mat.NewDense(p.M, p.K, p.A)
		xs, err := Solve(A, p.B)
		if err != nil {
			t.Fatalf("%s: Solve: %v", p.Name, err)
		}
		G, c := gram(A, p.B)
		xg := make([]float64, p.K)
		if err := s.SolveGram(G, c, xg); err != nil {
			t.Fatalf("%s: SolveGram: %v", p.Name, err)
		}
		xScale := 1.0
		for _, v := range p.X {
			xScale = math.Max(xScale, math.Abs(v))
		}
		bScale := math.Max(1, norm2(p.B))
		for form, x := range map[string][]float64{"Solve": xs, "SolveGram": xg} {
			checkKKT(t, p.Name+" "+form, A, p.B, x)
			for j := range x {
				if p.Fixed[j] && math.Abs(x[j]-p.X[j]) > goldenAgree*xScale {
					t.Errorf("%s %s: x[%d] = %.17g, scipy %.17g", p.Name, form, j, x[j], p.X[j])
				}
			}
			if r := residual(A, p.B, x); math.Abs(r-p.RNorm) > goldenAgree*bScale {
				t.Errorf("%s %s: residual norm %.17g, scipy %.17g", p.Name, form, r, p.RNorm)
			}
			ax := fitted(A, x)
			for i := range ax {
				if math.Abs(ax[i]-p.AX[i]) > goldenAgree*bScale {
					t.Errorf("%s %s: (Ax)[%d] = %.17g, scipy %.17g", p.Name, form, i, ax[i], p.AX[i])
					break
				}
			}
		}
	}
	if !sawNonUnique || !sawK50 {
		t.Errorf("golden set lacks a non-unique problem (%v) or a k = 50 problem (%v)", sawNonUnique, sawK50)
	}
}
