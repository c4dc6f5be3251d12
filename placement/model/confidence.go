package model

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"

	"strayleaf/placement"
	"strayleaf/placement/nnls"
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
	// Stability is the share of bootstrap resamples of the used units (drawn with replacement,
	// as many as there are, in random blocks for a witness of many units; Efron 1979, Ann.
	// Statist. 7; from memory) whose placement has the same best group.
	Stability float64
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

// Resamples is the number of bootstrap resamples behind Features.Stability.
const Resamples = 12

// BootstrapBlocks is the most blocks of units the stability bootstrap resamples (see stability).
const BootstrapBlocks = 20

// LogOddsClip bounds Features.LogOdds.
const LogOddsClip = 30

// MethodLogisticIsotonic names the calibration method: a logistic score of the features, then
// an isotonic map of the score (see pb.Calibration).
const MethodLogisticIsotonic = "logistic-isotonic"

// FeatureNames are the features a calibration uses by default, in coefficient order.
var FeatureNames = []string{
	"informative_coverage", "sqrt_informative_coverage", "margin", "stability",
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
		case "stability":
			out[i] = f.Stability
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
// build does not understand: another method, a feature it does not compute, another number of
// resamples, a number that is not finite, or thresholds and values out of order (then the
// provisional confidence is used).
func parseCalibration(c *pb.Calibration) *calibrationMap {
	if c == nil || c.Method != MethodLogisticIsotonic || len(c.Coefficients) != len(c.Features)+1 ||
		len(c.Thresholds) == 0 || len(c.Thresholds) != len(c.Values) {
		return nil
	}
	// The stability feature of a map learnt with another number of resamples is not this
	// build's stability.
	if c.Resamples != 0 && c.Resamples != Resamples {
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
func (m *Model) assess(p *Placement, obs []placement.Observation, s *placeScratch) {
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
		f.Stability = m.stability(g, obs, best, p.Coefficients, &s.boot)
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

// bootScratch is the memory of the stability resampling (part of placeScratch).
type bootScratch struct {
	blocks, cross []float64 // per block: packed Gram sum and sum of W_u^T v_u
	packed        []float64
	g, c, h       []float64
	// z, w and l are the warm start's solution on the passive set, negative gradient and
	// Cholesky factor of G_PP (row-major, stride k); passive is P.
	z, w, l []float64
	passive []int
	order   []int // the random permutation that deals the units into blocks
	counts  []int
	start   []int       // grams[start[b]:start[b+1]] are the unit Gram blocks dealt to block b
	grams   [][]float64 // unit Gram blocks, by block
	nz      []int       // blocks drawn in the current resample
	obs     []placement.Observation
	solver  *nnls.Solver
}

// stability is the share of Resamples bootstrap resamples of the used observations whose NNLS
// placement has its largest coefficient in group best. The used units are dealt at random into
// m = min(n, BootstrapBlocks) blocks of near-equal size, and each resample draws m blocks with
// replacement, a block drawn c times entering the normal equations c times:
//
//	G* = sum_b c_b G_b,   c* = sum_b c_b W_b^T v_b,   G_b = sum_{u in b} W_u^T W_u.
//
// With m = n (up to BootstrapBlocks units) this is the plain bootstrap of the units; beyond, it
// is the bootstrap of random groups of units, whose sums are independent and alike, so the
// spread of the resampled fit is preserved while a resample costs O(m k^2) however many units
// the witness has. The draws are seeded by the observations themselves, so the same witness
// always gets the same value.
//
// Each resample is solved first from the passive set P = {j : h_j > 0} of the full fit h (see
// warmSolve), which a resample usually keeps; only when the KKT conditions fail there is it
// solved from scratch by the active-set method. Either way the answer is the resample's NNLS
// minimiser.
func (m *Model) stability(g *guide, obs []placement.Observation, best int, h []float64, s *bootScratch) float64 {
	k := g.k
	tri := k * (k + 1) / 2
	prof := m.pb.Profile
	seed := uint64(0x5eed)
	n := 0
	for _, o := range obs {
		if m.hasRows[o.Unit] {
			seed += mix64(uint64(o.Unit)<<32 ^ uint64(uint32(o.Row)))
			n++
		}
	}
	if n == 0 {
		return 0
	}
	rng := rand.New(rand.NewPCG(seed, 0x73746162696c6974)) // "stabilit"
	nb := min(n, BootstrapBlocks)
	// Deal in unit order, so that the order the readings came in does not matter.
	byUnit := func(a, b placement.Observation) int { return cmp.Compare(a.Unit, b.Unit) }
	if !slices.IsSortedFunc(obs, byUnit) {
		s.obs = append(s.obs[:0], obs...)
		slices.SortFunc(s.obs, byUnit)
		obs = s.obs
	}
	s.blocks = grow(s.blocks, nb*tri)
	s.cross = grow(s.cross, nb*k)
	s.order = growInts(s.order, n)
	s.counts = growInts(s.counts, nb)
	s.start = growInts(s.start, nb+1)
	if cap(s.grams) < n {
		s.grams = make([][]float64, n)
	}
	blocks, cross, grams := s.blocks[:nb*tri], s.cross[:nb*k], s.grams[:n]
	clear(blocks)
	clear(cross)
	// Deal the units into blocks: a random permutation of positions, position i to block i mod nb.
	order := s.order[:n]
	for i := range order {
		order[i] = i
	}
	for i := n - 1; i > 0; i-- {
		j := rng.IntN(i + 1)
		order[i], order[j] = order[j], order[i]
	}
	// Block b gets the positions i with order[i] mod nb = b: sizes n/nb or n/nb + 1.
	start := s.start[:nb+1]
	start[0] = 0
	for b := range nb {
		start[b+1] = start[b] + n/nb
		if b < n%nb {
			start[b+1]++
		}
	}
	fill := s.counts[:nb]
	copy(fill, start[:nb])
	i := 0
	for _, o := range obs {
		if !m.hasRows[o.Unit] {
			continue
		}
		b := order[i] % nb
		i++
		grams[fill[b]] = m.engine.UnitGram(o.Unit)
		fill[b]++
		if o.Row >= 0 {
			w := m.rowWeight[o.Row]
			row := prof[o.Row*k : o.Row*k+k]
			cb := cross[b*k : (b+1)*k]
			for j, v := range row {
				cb[j] += w * v
			}
		}
	}
	for b := range nb {
		addSlices(blocks[b*tri:(b+1)*tri], grams[start[b]:start[b+1]])
	}
	s.passive = s.passive[:0]
	for j, v := range h {
		if v > 0 {
			s.passive = append(s.passive, j)
		}
	}
	counts := s.counts[:nb]
	same := 0
	for r := 0; r < Resamples; r++ {
		clear(counts)
		for i := 0; i < nb; i++ {
			counts[rng.IntN(nb)]++
		}
		nz := s.nz[:0]
		for b, c := range counts {
			if c > 0 {
				nz = append(nz, b)
			}
		}
		s.nz = nz
		addScaledBlocks(s.packed, blocks, tri, nz, counts)
		addScaledBlocks(s.c, cross, k, nz, counts)
		p := 0
		for a := 0; a < k; a++ {
			for c := a; c < k; c++ {
				s.g[a*k+c] = s.packed[p]
				s.g[c*k+a] = s.packed[p]
				p++
			}
		}
		if !s.warmSolve(k) {
			if err := s.solver.SolveGram(s.g, s.c, s.h); err != nil {
				continue
			}
		}
		top, _ := topTwo(s.h)
		if s.h[top] > 0 && top == best {
			same++
		}
	}
	return float64(same) / Resamples
}

// warmMargin is the relative margin by which warmSolve needs the negative gradient off the
// passive set to be below zero: w_j < -warmMargin ||a_j|| sum_P ||a_i|| z_i, far beyond the
// rounding of w, so that a w_j that is zero in exact arithmetic (a column in the span of the
// passive ones, where the minimiser is not unique) is never taken for negative.
const warmMargin = 1e-9

// warmSolve tries the passive set P of the full fit for the resample's problem
// min x^T G x - 2 c^T x over x >= 0 (G = s.g, c = s.c): it solves G_PP z = c_P by Cholesky and
// accepts x = (z on P, 0 elsewhere), writing it to s.h, when it satisfies the KKT conditions
// strictly: z > 0, and w_j = c_j - (G x)_j < 0 off P, by the margin warmMargin (or w_j <= 0 for a column with G_jj = 0,
// which the active-set method can never admit). The problem is convex, so such an x is a
// minimiser; every minimiser has the same G x, hence the same w, so w_j < 0 forces x_j = 0 off
// P, and G_PP positive definite makes x unique: it is what nnls.Solver.SolveGram returns, up
// to rounding. A Cholesky pivot at most 1e-12 G_jj (the solver's dependence test) refuses P.
// It reports whether x was accepted.
func (s *bootScratch) warmSolve(k int) bool {
	P, G, c, L, z := s.passive, s.g, s.c, s.l, s.z
	np := len(P)
	if np == 0 {
		return false
	}
	for a, j := range P {
		la := L[a*k : a*k+a+1]
		d := G[j*k+j]
		for b := 0; b < a; b++ {
			lb := L[b*k : b*k+b+1]
			v := G[j*k+P[b]]
			for t := 0; t < b; t++ {
				v -= la[t] * lb[t]
			}
			v /= lb[b]
			la[b] = v
			d -= v * v
		}
		if !(d > 1e-12*G[j*k+j]) {
			return false
		}
		la[a] = math.Sqrt(d)
	}
	// L y = c_P, then L^T z = y (y kept in z).
	for a, j := range P {
		v := c[j]
		for b := 0; b < a; b++ {
			v -= L[a*k+b] * z[b]
		}
		z[a] = v / L[a*k+a]
	}
	for a := np - 1; a >= 0; a-- {
		v := z[a]
		for b := a + 1; b < np; b++ {
			v -= L[b*k+a] * z[b]
		}
		z[a] = v / L[a*k+a]
		if !(z[a] > 0) {
			return false
		}
	}
	w := s.w
	copy(w, c)
	scale := 0.0 // sum_P ||a_j|| z_j, the size of the terms cancelled in w
	for a, j := range P {
		col := G[j*k : j*k+k] // row j = column j by symmetry
		for i := range w {
			w[i] -= col[i] * z[a]
		}
		scale += math.Sqrt(G[j*k+j]) * z[a]
	}
	q := 0
	for j := range k {
		if q < np && P[q] == j {
			q++
			continue
		}
		d := G[j*k+j]
		if d == 0 {
			if !(w[j] <= 0) {
				return false
			}
			continue
		}
		if !(w[j] < -warmMargin*math.Sqrt(d)*scale) {
			return false
		}
	}
	clear(s.h)
	for a, j := range P {
		s.h[j] = z[a]
	}
	return true
}

// addSlices adds the vectors srcs[q] (each at least len(dst) long) to dst, four per pass over
// dst, so that dst is loaded and stored once per four.
func addSlices(dst []float64, srcs [][]float64) {
	q := 0
	for ; q+4 <= len(srcs); q += 4 {
		a, b, c, d := srcs[q][:len(dst)], srcs[q+1][:len(dst)], srcs[q+2][:len(dst)], srcs[q+3][:len(dst)]
		for i := range dst {
			dst[i] += (a[i] + b[i]) + (c[i] + d[i])
		}
	}
	for ; q < len(srcs); q++ {
		a := srcs[q][:len(dst)]
		for i := range dst {
			dst[i] += a[i]
		}
	}
}

// addScaledBlocks sets dst to sum over b in which of counts[b] * src[b*n : (b+1)*n], with
// n = len(dst), four blocks per pass over dst.
func addScaledBlocks(dst, src []float64, n int, which, counts []int) {
	clear(dst)
	dst = dst[:n]
	q := 0
	for ; q+4 <= len(which); q += 4 {
		b0, b1, b2, b3 := which[q], which[q+1], which[q+2], which[q+3]
		f0, f1, f2, f3 := float64(counts[b0]), float64(counts[b1]), float64(counts[b2]), float64(counts[b3])
		a, b, c, d := src[b0*n:b0*n+n], src[b1*n:b1*n+n], src[b2*n:b2*n+n], src[b3*n:b3*n+n]
		for i := range dst {
			dst[i] += (f0*a[i] + f1*b[i]) + (f2*c[i] + f3*d[i])
		}
	}
	for ; q < len(which); q++ {
		b0 := which[q]
		f0 := float64(counts[b0])
		a := src[b0*n : b0*n+n]
		for i := range dst {
			dst[i] += f0 * a[i]
		}
	}
}

// grow returns s with length n, reallocated if its capacity is short (contents not kept).
func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

// growInts is grow for ints.
func growInts(s []int, n int) []int {
	if cap(s) < n {
		return make([]int, n)
	}
	return s[:n]
}

// mix64 is the splitmix64 finaliser (Steele, Lea & Flood 2014; from memory).
func mix64(z uint64) uint64 {
	z += 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}
