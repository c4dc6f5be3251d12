package calibrate

import (
	"fmt"
	"math"
	"sort"
)

// FitIsotonic fits the non-decreasing function of x closest to y in weighted least squares,
//
//	minimise sum_i w_i (y_i - f(x_i))^2  subject to  f non-decreasing,
//
// by the pool-adjacent-violators algorithm (Ayer, Brunk, Ewing, Reid & Silverman 1955, Ann.
// Math. Statist. 26; Barlow, Bartholomew, Bremner & Brunk 1972, Statistical Inference under
// Order Restrictions; from memory). Samples with equal x are first pooled into one point with
// their weighted mean y and summed weight. The fitted function is returned as in scikit-learn's
// IsotonicRegression: the x values that bound its steps (thresholds, increasing) and the fitted
// values there; between thresholds it is read by linear interpolation, and outside them it is
// clipped to the end values (see model.InterpolateSteps). Points whose value equals both
// neighbours' are dropped, which changes no prediction.
//
// w may be nil (all weights 1). Weights must be positive and every value finite.
func FitIsotonic(x, y, w []float64) (thresholds, values []float64, err error) {
	n := len(x)
	if n == 0 {
		return nil, nil, fmt.Errorf("isotonic regression: no samples")
	}
	if len(y) != n || (w != nil && len(w) != n) {
		return nil, nil, fmt.Errorf("isotonic regression: %d x values, %d y values, %d weights", n, len(y), len(w))
	}
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		if math.IsNaN(x[i]) || math.IsInf(x[i], 0) || math.IsNaN(y[i]) || math.IsInf(y[i], 0) || !(wi > 0) || math.IsInf(wi, 0) {
			return nil, nil, fmt.Errorf("isotonic regression: sample %d is (x %v, y %v, weight %v); expected finite values and a positive weight", i, x[i], y[i], wi)
		}
	}
	sort.SliceStable(idx, func(a, b int) bool { return x[idx[a]] < x[idx[b]] })

	// Pool equal x.
	type block struct{ x, sum, weight float64 }
	var pts []block
	for _, i := range idx {
		wi := 1.0
		if w != nil {
			wi = w[i]
		}
		if len(pts) > 0 && pts[len(pts)-1].x == x[i] {
			pts[len(pts)-1].sum += wi * y[i]
			pts[len(pts)-1].weight += wi
			continue
		}
		pts = append(pts, block{x: x[i], sum: wi * y[i], weight: wi})
	}

	// Pool adjacent violators: a stack of blocks with increasing means.
	type pool struct {
		sum, weight float64
		first, last int // range of pts
	}
	var st []pool
	for i, p := range pts {
		st = append(st, pool{p.sum, p.weight, i, i})
		for len(st) > 1 {
			a, b := st[len(st)-2], st[len(st)-1]
			if a.sum/a.weight <= b.sum/b.weight {
				break
			}
			st = st[:len(st)-2]
			st = append(st, pool{a.sum + b.sum, a.weight + b.weight, a.first, b.last})
		}
	}
	fitted := make([]float64, len(pts))
	for _, b := range st {
		v := b.sum / b.weight
		for i := b.first; i <= b.last; i++ {
			fitted[i] = v
		}
	}
	// Keep the first and last point and every point whose value differs from a neighbour's.
	for i := range pts {
		if i > 0 && i < len(pts)-1 && fitted[i] == fitted[i-1] && fitted[i] == fitted[i+1] {
			continue
		}
		thresholds = append(thresholds, pts[i].x)
		values = append(values, fitted[i])
	}
	return thresholds, values, nil
}
