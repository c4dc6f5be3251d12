package model

import (
	"fmt"
	"math"
	"slices"
	"sort"

	"strayleaf/placement"
	pb "strayleaf/proto/strayleaf/v1"
)

// Features are what a placement's confidence is read from. They are computed for every placement
// and, at training time, for simulated fragments whose right answer is known (package
// placement/calibrate), which is how the map from features to confidence is learnt.
type Features struct {
	// InformativeCoverage is the share of the model's total informativeness that the used units
	// carry (see Model.Informativeness).
	InformativeCoverage float64
	// Margin is the best group's share less the second's.
	Margin float64
	// Separation is the probability, under a normal approximation with the units' sandwich
	// covariance of the fit, that the best group stays ahead of its rivals if the witness's
	// units were drawn again (see Model.separation).
	Separation float64
	// RelativeResidual is the placement's Residual / ||v_C||^2.
	RelativeResidual float64
	// UsedUnits is the number of units that entered the fit.
	UsedUnits int
	// LogOdds is the log-likelihood ratio of the best group over the second under the groups'
	// reading probabilities (see ReadingProbabilities): sum over used units of
	// log P(reading | best) - log P(reading | second), clipped to [-LogOddsClip, LogOddsClip].
	LogOdds float64
	// PosteriorLogOdds is log(q_best / (1 - q_best)) for the best group under the groups'
	// reading probabilities and sizes (the distribution q that Suggest works with), clipped to
	// [-LogOddsClip, LogOddsClip].
	PosteriorLogOdds float64
}

// LogOddsClip bounds Features.LogOdds.
const LogOddsClip = 30

// MethodLogisticIsotonic names the calibration method: a logistic score of the features, then
// an isotonic map of the score (see pb.Calibration).
const MethodLogisticIsotonic = "logistic-isotonic"

// FeatureNames are the features a calibration uses by default, in coefficient order.
var FeatureNames = []string{
	"informative_coverage", "sqrt_informative_coverage", "margin", "separation",
	"relative_residual", "log1p_used_units", "log_odds", "posterior_log_odds",
}

// Values returns the named features, transformed as their names say.
func (f Features) Values(names []string) ([]float64, error) {
	out := make([]float64, len(names))
	for i, n := range names {
		switch n {
		case "informative_coverage":
			out[i] = f.InformativeCoverage
		case "sqrt_informative_coverage":
			out[i] = math.Sqrt(f.InformativeCoverage)
		case "margin":
			out[i] = f.Margin
		case "separation":
			out[i] = f.Separation
		case "relative_residual":
			out[i] = f.RelativeResidual
		case "log1p_used_units":
			out[i] = math.Log1p(float64(f.UsedUnits))
		case "log_odds":
			out[i] = f.LogOdds
		case "posterior_log_odds":
			out[i] = f.PosteriorLogOdds
		default:
			return nil, fmt.Errorf("unknown placement feature %q", n)
		}
	}
	return out, nil
}

// calibrationMap is a model's calibration, checked.
type calibrationMap struct {
	names              []string
	coef               []float64
	thresholds, values []float64
}

// parseCalibration returns the usable calibration of a model, or nil if it has none or one this
// build does not understand: another method, a feature it does not compute, features of a
// bootstrap (resamples > 0, learnt by an earlier build), a number that is not finite, or
// thresholds and values out of order (then the provisional confidence is used).
func parseCalibration(c *pb.Calibration) *calibrationMap {
	if c == nil || c.Method != MethodLogisticIsotonic || len(c.Coefficients) != len(c.Features)+1 ||
		len(c.Thresholds) == 0 || len(c.Thresholds) != len(c.Values) {
		return nil
	}
	// A map learnt from bootstrap features is not this build's.
	if c.Resamples != 0 {
		return nil
	}
	if _, err := (Features{}).Values(c.Features); err != nil {
		return nil
	}
	for _, list := range [][]float64{c.Coefficients, c.Thresholds, c.Values} {
		for _, v := range list {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil
			}
		}
	}
	for i := 1; i < len(c.Thresholds); i++ {
		if !(c.Thresholds[i] >= c.Thresholds[i-1]) || !(c.Values[i] >= c.Values[i-1]) {
			return nil
		}
	}
	return &calibrationMap{names: c.Features, coef: c.Coefficients, thresholds: c.Thresholds, values: c.Values}
}

// CalibrationScore returns the logistic score z = coef[0] + sum_i coef[i+1] * values[i].
func CalibrationScore(coef, values []float64) float64 {
	z := coef[0]
	for i, v := range values {
		z += coef[i+1] * v
	}
	return z
}

// InterpolateSteps reads the isotonic map given by increasing thresholds and their values at x:
// linear interpolation between neighbouring thresholds, the end values beyond them (as
// numpy.interp does, and so scikit-learn's IsotonicRegression with out_of_bounds="clip"). It
// returns NaN for no thresholds or x = NaN.
func InterpolateSteps(thresholds, values []float64, x float64) float64 {
	n := len(thresholds)
	if n == 0 || math.IsNaN(x) {
		return math.NaN()
	}
	if x <= thresholds[0] {
		return values[0]
	}
	if x >= thresholds[n-1] {
		return values[n-1]
	}
	i := sort.SearchFloat64s(thresholds, x) // thresholds[i-1] < x <= thresholds[i]
	if thresholds[i] == x {
		// numpy.interp takes the value of the last of equal thresholds.
		for i+1 < n && thresholds[i+1] == x {
			i++
		}
		return values[i]
	}
	x0, x1 := thresholds[i-1], thresholds[i]
	return values[i-1] + (values[i]-values[i-1])*(x-x0)/(x1-x0)
}

// confidenceOf maps features to the confidence: the calibrated map if the model has one,
// otherwise the provisional best share discounted by the number of units.
func (g *guide) confidenceOf(p *Placement) (float64, bool) {
	if p.BestGroup == "" {
		return 0, g.cal != nil
	}
	if g.cal != nil {
		v, err := p.Features.Values(g.cal.names)
		if err == nil {
			c := InterpolateSteps(g.cal.thresholds, g.cal.values, CalibrationScore(g.cal.coef, v))
			return math.Min(1, math.Max(0, c)), true
		}
	}
	return provisionalConfidence(p), false
}

// provisionalConfidence is the uncalibrated confidence of a model without a calibration: the
// best share, discounted by how few units were used (half weight at 10 units).
func provisionalConfidence(p *Placement) float64 {
	n := float64(p.UsedUnits)
	return p.Groups[0].Share * n / (n + 10)
}

// assess fills in what follows from a finished fit: informative coverage, features, confidence
// and the mixture test.
func (m *Model) assess(p *Placement, obs []placement.Observation, ws *placement.Workspace, s *placeScratch) {
	g := m.guide()
	k := g.k
	used := s.used[:0]
	for _, o := range obs {
		if m.hasRows[o.Unit] {
			used = append(used, o.Unit)
		}
	}
	s.used = used
	p.InformativeCoverage = g.coverage(used)
	f := Features{InformativeCoverage: p.InformativeCoverage, RelativeResidual: p.RelativeResidual, UsedUnits: p.UsedUnits}
	best, second := topTwo(p.Coefficients)
	if p.BestGroup != "" {
		f.Margin = p.Groups[0].Share
		if k > 1 {
			f.Margin -= p.Groups[1].Share
		}
		f.Separation = m.separation(g, obs, best, p.Coefficients, ws, &s.sep)
	}
	ll := s.ll[:k]
	clear(ll)
	for _, o := range obs {
		g.logLik(ll, o.Unit, o.Row, m)
	}
	if k > 1 && p.BestGroup != "" {
		f.LogOdds = clipOdds(ll[best] - ll[second])
		// log q_best - log(sum of the others), by log-sum-exp.
		mx := math.Inf(-1)
		for j := range ll {
			if j != best {
				mx = math.Max(mx, ll[j]+g.logPrior[j])
			}
		}
		rest := 0.0
		for j := range ll {
			if j != best {
				rest += math.Exp(ll[j] + g.logPrior[j] - mx)
			}
		}
		f.PosteriorLogOdds = clipOdds(ll[best] + g.logPrior[best] - mx - math.Log(rest))
	}
	p.Features = f
	p.Confidence, p.Calibrated = g.confidenceOf(p)
	if k > 1 && p.BestGroup != "" {
		p.Mixture = m.mixtureTest(g, obs, best, second, p.Groups[1].Share, ll, s)
		p.Mixed = p.Mixture.Mixed
	}
}

func clipOdds(x float64) float64 { return math.Max(-LogOddsClip, math.Min(LogOddsClip, x)) }

// topTwo returns the indexes of the largest and second largest entries (ties to the lower
// index), as the sort of Placement.Groups orders them.
func topTwo(h []float64) (int, int) {
	best, second := 0, -1
	for i := 1; i < len(h); i++ {
		if h[i] > h[best] {
			best, second = i, best
		} else if second < 0 || h[i] > h[second] {
			second = i
		}
	}
	if second < 0 {
		second = best
	}
	return best, second
}

// sepScratch is the memory of the separation feature (part of placeScratch).
type sepScratch struct {
	set   []int     // Q: the passive groups and the rival
	idx   []int     // idx[a*q+b]: index of (Q[a], Q[b]) in a packed unit Gram block
	gqq   []float64 // G_QQ
	chol  []float64 // its Cholesky factor
	hq    []float64 // the least-squares coefficients on Q
	meat  []float64 // sum over units of s_u s_u^T, lower triangle, row-major q x q
	score []float64
	y     []float64
}

// packedIndex is the index of entry (i, j), i <= j, of a k x k symmetric matrix packed as its
// upper triangle by rows (the layout of placement.Engine.UnitGram).
func packedIndex(i, j, k int) int { return i*k - i*(i-1)/2 + (j - i) }

// separation is the probability, under a normal approximation, that the best group b of the
// NNLS fit h stays ahead of its rivals if the witness's units were drawn again: a closed form
// in the place of a bootstrap of the units, without resampling noise.
//
// The rivals are the other passive groups P = {j : h_j > 0} and, when some group is held at
// zero, the one of those nearest to entering: the r off P with the largest w_r / G_rr, where
// w = c - G h is the negative gradient (w_r <= 0 at the minimiser; -w_r / G_rr is how far a
// step in r alone must go). On Q = P + {r} the least-squares coefficients solve
// G_QQ h_Q = c_Q (h_r comes out at or below zero). Unit u's score is s_u = G_u h_Q - c_u on Q,
// G_u = W_u^T W_u and c_u = W_u^T v_u its share of the normal equations, and the
// cluster-robust sandwich estimate of the covariance of h_Q, the units being the clusters, is
//
//	V = n/(n-q) G_QQ^{-1} (sum_u s_u s_u^T) G_QQ^{-1},   n used units, q = |Q|
//
// (White 1980, Econometrica 48; Liang & Zeger 1986, Biometrika 73; the n/(n-q) small-sample
// factor is the usual one; all from memory). For each rival j, z_j = (h_b - h_j) / sqrt(d^T V d)
// with d = e_b - e_j, and the result is the Bonferroni bound 1 - sum_j Phi(-z_j), clipped at
// 0. It is 1 for a one-group model, and 0 when the units cannot tell the spread (n <= q) or
// G_QQ is singular.
func (m *Model) separation(g *guide, obs []placement.Observation, best int, h []float64, ws *placement.Workspace, s *sepScratch) float64 {
	k := g.k
	G, c := ws.Gram(), ws.Cross()
	Q := s.set[:0]
	for j, v := range h {
		if v > 0 {
			Q = append(Q, j)
		}
	}
	rival, step := -1, math.Inf(-1)
	for j := range k {
		if h[j] > 0 || !(G[j*k+j] > 0) {
			continue
		}
		w := c[j]
		for _, i := range Q {
			w -= G[j*k+i] * h[i]
		}
		if v := w / G[j*k+j]; v > step {
			rival, step = j, v
		}
	}
	if rival >= 0 {
		Q = append(Q, rival)
		slices.Sort(Q)
	}
	s.set = Q
	q := len(Q)
	bi := slices.Index(Q, best)
	if q == 1 {
		if bi == 0 {
			return 1 // no rival
		}
		return 0
	}
	if bi < 0 {
		return 0
	}
	// Cholesky factor of G_QQ, then h_Q.
	gqq, L := s.gqq[:q*q], s.chol[:q*q]
	for a, i := range Q {
		for b, j := range Q {
			gqq[a*q+b] = G[i*k+j]
		}
	}
	if !cholesky(gqq, L, q) {
		return 0
	}
	hq := s.hq[:q]
	for a, i := range Q {
		hq[a] = c[i]
	}
	cholSolve(L, hq)
	// The scores, unit by unit.
	idx, meat, score := s.idx[:q*q], s.meat[:q*q], s.score[:q]
	for a, i := range Q {
		for b, j := range Q {
			idx[a*q+b] = packedIndex(min(i, j), max(i, j), k)
		}
	}
	clear(meat)
	prof := m.pb.Profile
	n := 0
	for _, o := range obs {
		if !m.hasRows[o.Unit] {
			continue
		}
		n++
		gu := m.engine.UnitGram(o.Unit)
		for a := range q {
			v := 0.0
			for b, at := range idx[a*q : a*q+q] {
				v += gu[at] * hq[b]
			}
			score[a] = v
		}
		if o.Row >= 0 {
			w := m.rowWeight[o.Row]
			row := prof[o.Row*k : o.Row*k+k]
			for a, j := range Q {
				score[a] -= w * row[j]
			}
		}
		addOuter(meat, score)
	}
	if n <= q {
		return 0
	}
	factor := float64(n) / float64(n-q)
	tail := 0.0
	y := s.y[:q]
	for a := range Q {
		if a == bi {
			continue
		}
		clear(y)
		y[bi], y[a] = 1, -1
		v := factor * sandwichQuad(L, meat, y)
		diff := hq[bi] - hq[a]
		switch {
		case v > 0:
			tail += 0.5 * math.Erfc(diff/math.Sqrt(v)/math.Sqrt2)
		case diff <= 0:
			tail++
		}
	}
	return math.Max(0, 1-tail)
}

// cholesky writes into L the lower Cholesky factor of the symmetric q x q matrix A (both
// row-major; only the lower triangle of L is written) and reports whether A is positive definite
// to working precision: every pivot above 1e-12 times its diagonal entry.
func cholesky(A, L []float64, q int) bool {
	for a := range q {
		for b := 0; b <= a; b++ {
			v := A[a*q+b]
			for t := 0; t < b; t++ {
				v -= L[a*q+t] * L[b*q+t]
			}
			if a == b {
				if !(v > 1e-12*A[a*q+a]) {
					return false
				}
				L[a*q+a] = math.Sqrt(v)
			} else {
				L[a*q+b] = v / L[b*q+b]
			}
		}
	}
	return true
}

// addOuter adds s s^T to the lower triangle of the len(s) x len(s) row-major matrix M.
func addOuter(M, s []float64) {
	q := len(s)
	for a, sa := range s {
		row := M[a*q : a*q+a+1]
		for b := range row {
			row[b] += sa * s[b]
		}
	}
}

// sandwichQuad returns d^T A^{-1} M A^{-1} d for A = L L^T (lower Cholesky factor L) and the
// symmetric M given by its lower triangle, both q x q row-major with q = len(d); d is
// overwritten with A^{-1} d.
func sandwichQuad(L, M, d []float64) float64 {
	cholSolve(L, d)
	v := 0.0
	for i, di := range d {
		for j := 0; j < i; j++ {
			v += 2 * di * M[i*len(d)+j] * d[j]
		}
		v += di * M[i*len(d)+i] * di
	}
	return v
}

// cholSolve overwrites x with A^{-1} x, for A = L L^T given by its lower Cholesky factor L
// (row-major, len(x) x len(x)).
func cholSolve(L, x []float64) {
	q := len(x)
	for a := range q {
		v := x[a]
		for t := 0; t < a; t++ {
			v -= L[a*q+t] * x[t]
		}
		x[a] = v / L[a*q+a]
	}
	for a := q - 1; a >= 0; a-- {
		v := x[a]
		for t := a + 1; t < q; t++ {
			v -= L[t*q+a] * x[t]
		}
		x[a] = v / L[a*q+a]
	}
}
