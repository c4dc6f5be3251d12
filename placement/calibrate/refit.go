package calibrate

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement"
	"strayleaf/placement/nnls"
	"strayleaf/placement/prepare"
)

// A warm refit learns a fold's profiles without the fold's witnesses by alternating
// non-negative least squares (ANLS; Kim & Park 2008, SIAM J. Matrix Anal. Appl. 30; from memory)
// started from the model itself rather than from scratch:
//
//	H_0   = the coefficients of the fold's training witnesses placed against the model's W,
//	W_t   = argmin_{W >= 0} ||M_F .* (X_F - W H_{t-1})||^2   (one NNLS per row),
//	H_t   = the coefficients of the same witnesses placed against W_t,
//
// for t = 1..steps, F the training witnesses outside the fold. The first W-step already leaves
// the held-out witnesses out of every profile row: W_1 is fitted to the other witnesses alone.
// What remains of them is second order, through the coefficients H_0 of the others, which were
// read against a W they helped to shape. A warm refit costs a few ANLS half-steps instead of a
// full factorisation with its SVD start, and it keeps the model's group order.

// warmRefit returns the fold's W (rows x k) and the final coefficients of its witnesses (k x
// len(cols)).
func warmRefit(full *placement.Engine, W0 *mat.Dense, prep *prepare.Prepared, cols []int, steps int) (*mat.Dense, *mat.Dense, error) {
	nr, k := W0.Dims()
	obs := make([][]placement.Observation, len(cols))
	for c, j := range cols {
		obs[c] = observations(prep, j)
	}
	H := mat.NewDense(k, len(cols), nil)
	place := func(e *placement.Engine) error {
		ws := e.NewWorkspace()
		for c := range cols {
			fit, err := e.Place(obs[c], ws)
			if err != nil {
				return fmt.Errorf("placing training witness %s: %w", prep.Collation.Witness(prep.Train[cols[c]]), err)
			}
			for g := 0; g < k; g++ {
				H.Set(g, c, fit.H[g])
			}
		}
		return nil
	}
	if err := place(full); err != nil {
		return nil, nil, err
	}
	unitRows := prep.UnitRows
	weights := make([]float64, nr)
	for r, row := range prep.Rows {
		weights[r] = row.Weight
	}
	W := mat.NewDense(nr, k, nil)
	solver := nnls.NewSolver(k)
	G := make([]float64, k*k)
	cv := make([]float64, k)
	x := make([]float64, k)
	all := make([]float64, k*k)    // sum over the fold's witnesses of h h^T
	cross := make([]float64, nr*k) // row r: sum over witnesses with reading r of x_rj h_j
	for t := 0; t < steps; t++ {
		// W-step. The rows of a unit share their mask, hence their Gram matrix: the sum of h h^T
		// over the witnesses extant at the unit, formed as the sum over all of them less the few
		// that have a lacuna there.
		clear(all)
		clear(cross)
		for c := range cols {
			h := H.RawMatrix()
			for a := 0; a < k; a++ {
				ha := h.Data[a*h.Stride+c]
				if ha == 0 {
					continue
				}
				for b := a; b < k; b++ {
					all[a*k+b] += ha * h.Data[b*h.Stride+c]
				}
				for _, o := range obs[c] {
					if o.Row >= 0 {
						cross[o.Row*k+a] += weights[o.Row] * ha
					}
				}
			}
		}
		for _, u := range prep.KeptUnits {
			lo, hi := unitRows[u][0], unitRows[u][1]
			copy(G, all)
			for c, j := range cols {
				if prep.M.At(lo, j) != 0 {
					continue
				}
				for a := 0; a < k; a++ {
					ha := H.At(a, c)
					if ha == 0 {
						continue
					}
					for b := a; b < k; b++ {
						G[a*k+b] -= ha * H.At(b, c)
					}
				}
			}
			for a := 0; a < k; a++ {
				G[a*k+a] = math.Max(0, G[a*k+a])
				for b := 0; b < a; b++ {
					G[a*k+b] = G[b*k+a]
				}
			}
			for r := lo; r < hi; r++ {
				copy(cv, cross[r*k:r*k+k])
				if err := solver.SolveGram(G, cv, x); err != nil {
					return nil, nil, fmt.Errorf("refitting profile row %d: %w", r, err)
				}
				W.SetRow(r, x)
			}
		}
		e, err := placement.NewEngine(W, unitRows, weights)
		if err != nil {
			return nil, nil, err
		}
		if err := place(e); err != nil {
			return nil, nil, err
		}
	}
	return W, H, nil
}

// observations returns training witness j's readings as engine observations.
func observations(prep *prepare.Prepared, j int) []placement.Observation {
	c := prep.Collation
	row := c.Row(prep.Train[j])
	var out []placement.Observation
	for _, u := range prep.KeptUnits {
		if r := row[u]; r >= 0 {
			out = append(out, placement.Observation{Unit: u, Row: prep.RowOf(u, int(r))})
		}
	}
	return out
}
