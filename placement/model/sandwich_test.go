package model

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// The cluster-robust sandwich behind the separation feature, checked against statsmodels 0.13
// (Debian's python3-statsmodels): OLS(y, X).fit(cov_type="cluster", use_correction=False) on
// seeded random problems whose rows fall into clusters, written by
// testdata/golden/sandwich/gen_sandwich.py. The coefficients come from cholesky and cholSolve on
// the normal equations, each cluster's score X_g^T (X_g b - y_g) enters by addOuter, and every
// covariance entry V_ij is read back from sandwichQuad: V_ii = q(e_i), V_ij = (q(e_i + e_j) -
// q(e_i) - q(e_j)) / 2.
func TestSandwichMatchesStatsmodels(t *testing.T) {
	raw, err := os.ReadFile("../../testdata/golden/sandwich/sandwich_golden.json")
	if err != nil {
		t.Fatal(err)
	}
	var golden struct {
		Cases []struct {
			X      [][]float64 `json:"x"`
			Y      []float64   `json:"y"`
			Groups []int       `json:"groups"`
			Params []float64   `json:"params"`
			Cov    [][]float64 `json:"cov"`
		} `json:"cases"`
	}
	if err := json.Unmarshal(raw, &golden); err != nil {
		t.Fatal(err)
	}
	if len(golden.Cases) == 0 {
		t.Fatal("no cases in the golden file")
	}
	for ci, tc := range golden.Cases {
		q := len(tc.Params)
		G, c := make([]float64, q*q), make([]float64, q)
		for r, row := range tc.X {
			for a := range q {
				c[a] += row[a] * tc.Y[r]
				for b := range q {
					G[a*q+b] += row[a] * row[b]
				}
			}
		}
		L := make([]float64, q*q)
		if !cholesky(G, L, q) {
			t.Fatalf("case %d: X^T X not positive definite", ci)
		}
		h := append([]float64(nil), c...)
		cholSolve(L, h)
		for a := range q {
			if d := math.Abs(h[a] - tc.Params[a]); d > 1e-10*(1+math.Abs(tc.Params[a])) {
				t.Errorf("case %d: coefficient %d = %.15g; statsmodels %.15g", ci, a, h[a], tc.Params[a])
			}
		}
		meat, score := make([]float64, q*q), make([]float64, q)
		for r := 0; r < len(tc.X); {
			clear(score)
			g := tc.Groups[r]
			for ; r < len(tc.X) && tc.Groups[r] == g; r++ {
				e := -tc.Y[r]
				for a := range q {
					e += tc.X[r][a] * h[a]
				}
				for a := range q {
					score[a] += tc.X[r][a] * e
				}
			}
			addOuter(meat, score)
		}
		quad := func(i, j int) float64 {
			d := make([]float64, q)
			d[i]++
			if j >= 0 {
				d[j]++
			}
			return sandwichQuad(L, meat, d)
		}
		for i := range q {
			for j := range q {
				var v float64
				switch {
				case i == j:
					v = quad(i, -1)
				default:
					v = (quad(i, j) - quad(i, -1) - quad(j, -1)) / 2
				}
				want := tc.Cov[i][j]
				if d := math.Abs(v - want); d > 1e-9*(math.Abs(tc.Cov[i][i])+math.Abs(tc.Cov[j][j])) {
					t.Errorf("case %d: V[%d][%d] = %.15g; statsmodels %.15g", ci, i, j, v, want)
				}
			}
		}
	}
}
