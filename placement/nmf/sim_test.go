package nmf

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/mat"
)

// simTable makes an invented readings x witnesses table shaped like prepared collation data:
// units variation units of nr readings each, witnesses drawn from g groups whose exemplars
// depart from a common ancestor at a share mut of the units, copyists erring at a share err;
// a share lac of the witness-unit cells is lost (the unit's readings all unobserved). Cells are
// IDF-weighted, w = log(N/n) over the extant witnesses (common practice).
func simTable(seed uint64, witnesses, units, nr, g int, mut, err, lac float64) (X, M *mat.Dense) {
	rng := rand.New(rand.NewPCG(seed, 7))
	anc := make([]int, units)
	for u := range anc {
		anc[u] = rng.IntN(nr)
	}
	arch := make([][]int, g)
	for a := range arch {
		arch[a] = make([]int, units)
		for u := range arch[a] {
			arch[a][u] = anc[u]
			if rng.Float64() < mut {
				arch[a][u] = rng.IntN(nr)
			}
		}
	}
	read := make([][]int, witnesses) // -1: lacuna
	for j := range read {
		grp := j % g
		read[j] = make([]int, units)
		for u := range read[j] {
			read[j][u] = arch[grp][u]
			if rng.Float64() < err {
				read[j][u] = rng.IntN(nr)
			}
			if rng.Float64() < lac {
				read[j][u] = -1
			}
		}
	}
	X = mat.NewDense(units*nr, witnesses, nil)
	M = mat.NewDense(units*nr, witnesses, nil)
	for u := 0; u < units; u++ {
		extant := 0
		count := make([]int, nr)
		for j := range read {
			if read[j][u] >= 0 {
				extant++
				count[read[j][u]]++
			}
		}
		for j := range read {
			if read[j][u] < 0 {
				continue
			}
			for r := 0; r < nr; r++ {
				M.Set(u*nr+r, j, 1)
			}
			r := read[j][u]
			X.Set(u*nr+r, j, math.Log(float64(extant)/float64(count[r])))
		}
	}
	return X, M
}

// lowRank returns W H + noise*U(0,1) for random non-negative W (m x k) and H (k x n).
func lowRank(seed uint64, m, n, k int, noise float64) *mat.Dense {
	rng := rand.New(rand.NewPCG(seed, 11))
	W := mat.NewDense(m, k, nil)
	H := mat.NewDense(k, n, nil)
	for i := 0; i < m; i++ {
		for g := 0; g < k; g++ {
			W.Set(i, g, rng.Float64())
		}
	}
	for g := 0; g < k; g++ {
		for j := 0; j < n; j++ {
			H.Set(g, j, rng.Float64())
		}
	}
	var X mat.Dense
	X.Mul(W, H)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			X.Set(i, j, X.At(i, j)+noise*rng.Float64())
		}
	}
	return &X
}

// randomMask returns an m x n mask with each cell unobserved with probability p.
func randomMask(seed uint64, m, n int, p float64) *mat.Dense {
	rng := rand.New(rand.NewPCG(seed, 13))
	M := mat.NewDense(m, n, nil)
	for i := 0; i < m; i++ {
		for j := 0; j < n; j++ {
			if rng.Float64() >= p {
				M.Set(i, j, 1)
			}
		}
	}
	return M
}
