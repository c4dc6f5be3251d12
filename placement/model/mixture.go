package model

import (
	"math"

	"strayleaf/placement"
)

// Mixture (contamination, common practice): a copyist who took readings from two exemplars leaves
// a witness between groups, and its NNLS shares estimate the mixture. A placement is flagged
// mixed when the second share is substantial and the readings support it:
//
//  1. substantial: the second group's share is at least MixedShare;
//  2. supported: a likelihood-ratio test of "a mixture of the top two groups" against "either of
//     them alone" rejects at level 0.05. Under the groups' reading probabilities (see
//     ReadingProbabilities) a witness taking each unit from the second group with probability s
//     has log-likelihood
//
//     l(s) = sum_u log((1 - s) P(r_u | first) + s P(r_u | second)),
//
//     concave in s. The statistic is LR = 2 (max_s l(s) - max(l(0), l(1))). With the null on the
//     boundary of the parameter space LR is distributed as the 50:50 mixture of chi^2_0 and
//     chi^2_1 (Chernoff 1954, Ann. Math. Statist. 25; Self & Liang 1987, JASA 82; from memory),
//     whose 0.95 quantile is the 0.90 quantile of chi^2_1, MixtureCritical.

// MixedShare is the least second share for a placement to be flagged mixed.
const MixedShare = 0.15

// MixtureCritical is the chi^2_1 0.90 quantile (scipy.stats.chi2.ppf(0.9, 1)), the 0.05 critical
// value of the boundary likelihood-ratio test.
const MixtureCritical = 2.705543454095404

// Mixture is the mixture reading of a placement.
type Mixture struct {
	// Primary and Secondary are the groups of the two largest shares; Share is the secondary's.
	Primary, Secondary string
	Share              float64
	// LikelihoodShare is the maximum-likelihood share of the secondary group under the reading
	// probabilities; LikelihoodRatio the test statistic LR.
	LikelihoodShare float64
	LikelihoodRatio float64
	// Mixed is Share >= MixedShare and LikelihoodRatio >= MixtureCritical.
	Mixed bool
}

// mixtureTest runs the test for the groups a (first) and b (second) over the used observations.
// ll[a] and ll[b] must be l(0) and l(1), the sums of log P(r_u | a) and log P(r_u | b) over the
// same observations in the same order (as assess computes them from the stored logarithms).
func (m *Model) mixtureTest(g *guide, obs []placement.Observation, a, b int, share float64, ll []float64, sc *placeScratch) *Mixture {
	k := g.k
	pa, pbv := sc.pa[:0], sc.pb[:0]
	for _, o := range obs {
		if !m.hasRows[o.Unit] {
			continue
		}
		var row []float64
		if o.Row >= 0 {
			row = g.prob[o.Row*k : o.Row*k+k]
		} else {
			row = g.other[o.Unit*k : o.Unit*k+k]
		}
		pa = append(pa, row[a])
		pbv = append(pbv, row[b])
	}
	sc.pa, sc.pb = pa, pbv
	s, lr := mixtureLRFrom(pa, pbv, ll[a], ll[b])
	mx := &Mixture{Primary: m.groupIDs[a], Secondary: m.groupIDs[b], Share: share, LikelihoodShare: s, LikelihoodRatio: lr}
	mx.Mixed = share >= MixedShare && lr >= MixtureCritical
	return mx
}

// mixtureLR maximises l(s) = sum_i log((1-s) a_i + s b_i) over s in [0, 1] and returns the
// maximiser and 2 (l(s) - max(l(0), l(1))). l is concave, so its derivative decreases; the root
// of the derivative is found by Newton's method kept inside a shrinking bracket (a bisection
// step whenever Newton's would leave it). All a_i, b_i must be positive.
func mixtureLR(a, b []float64) (float64, float64) {
	l0, l1 := 0.0, 0.0
	for i := range a {
		l0 += math.Log(a[i])
		l1 += math.Log(b[i])
	}
	return mixtureLRFrom(a, b, l0, l1)
}

// mixtureLRFrom is mixtureLR given l(0) = sum_i log a_i and l(1) = sum_i log b_i, which a
// placement has already summed from the stored log-probabilities (the same values: at s = 0
// and 1 the mixed probability is a_i or b_i exactly).
func mixtureLRFrom(a, b []float64, l0, l1 float64) (float64, float64) {
	if len(a) == 0 {
		return 0, 0
	}
	ll := func(s float64) float64 {
		t := 0.0
		for i := range a {
			t += math.Log((1-s)*a[i] + s*b[i])
		}
		return t
	}
	// d returns l'(s) and l''(s).
	d := func(s float64) (float64, float64) {
		d1, d2 := 0.0, 0.0
		for i := range a {
			diff := b[i] - a[i]
			x := diff / ((1-s)*a[i] + s*b[i])
			d1 += x
			d2 -= x * x
		}
		return d1, d2
	}
	var s float64
	d0, _ := d(0)
	d1, _ := d(1)
	switch {
	case d0 <= 0:
		s = 0
	case d1 >= 0:
		s = 1
	default:
		lo, hi := 0.0, 1.0
		s = 0.5
		for it := 0; it < 100 && hi-lo > 1e-12; it++ {
			g, h := d(s)
			if g > 0 {
				lo = s
			} else {
				hi = s
			}
			next := s - g/h
			if !(h < 0) || !(next > lo && next < hi) {
				next = (lo + hi) / 2
			}
			if math.Abs(next-s) < 1e-13 {
				s = next
				break
			}
			s = next
		}
	}
	var ls float64
	switch s {
	case 0:
		ls = l0
	case 1:
		ls = l1
	default:
		ls = ll(s)
	}
	return s, math.Max(0, 2*(ls-math.Max(l0, l1)))
}

// NearestWitnesses is the number of nearest training witnesses a placement names.
const NearestWitnesses = 5

// Neighbour is a training witness compared with a placed witness by agreement (common practice):
// Agree of the Compared units at which both have a reading are the same reading.
type Neighbour struct {
	Witness   string
	BestGroup string
	Agree     int
	Compared  int
	// Agreement is Agree / Compared.
	Agreement float64
}

// Nearest returns the n training witnesses that agree most with the given readings, the trade's
// familiar cross-check of a placement. Every unit counts, set-aside readings and units included;
// a reading the model has never seen agrees with no one. A share over few units means little, so
// only training witnesses compared at no fewer than half as many units as the best-compared one
// are ranked; among them higher agreement comes first, then more units compared, then the
// siglum. Readings at units the model does not know are ignored.
func (m *Model) Nearest(readings []Reading, n int) []Neighbour {
	if n <= 0 || len(m.pb.TrainingWitnesses) == 0 {
		return nil
	}
	g := m.guide()
	type cell struct {
		u int
		r int32
	}
	cells := make([]cell, 0, len(readings))
	for _, rd := range readings {
		u, ok := m.unitIndex[rd.Unit]
		if !ok {
			continue
		}
		r, ok := g.readingIndex[u][rd.Reading]
		if !ok {
			r = -2 // a reading no training witness has
		}
		cells = append(cells, cell{u, r})
	}
	// Unit by unit, the training witnesses' readings lie side by side (see guide.trainingCells),
	// so each cell of the witness reads one contiguous stretch.
	nw := len(m.pb.TrainingWitnesses)
	cols := g.trainingCells(m)
	type count struct{ agree, compared int32 }
	counts := make([]count, nw)
	for _, c := range cells {
		col := cols[c.u*nw : c.u*nw+nw]
		counts := counts[:len(col)]
		r := c.r
		for i, t := range col {
			// Without branches (agreement is a coin toss to the branch predictor):
			// extant = [t >= 0], and x | -x has its sign bit set exactly when x = t ^ r != 0.
			// A lacuna (t < 0) never equals r, which is a reading index or -2.
			x := t ^ r
			counts[i].compared += 1 - int32(uint32(t)>>31)
			counts[i].agree += 1 - int32(uint32(x|-x)>>31)
		}
	}
	maxCompared := int32(0)
	for _, ct := range counts {
		maxCompared = max(maxCompared, ct.compared)
	}
	if maxCompared == 0 {
		return nil
	}
	// better reports whether a ranks before b.
	better := func(a, b Neighbour) bool {
		if a.Agreement != b.Agreement {
			return a.Agreement > b.Agreement
		}
		if a.Compared != b.Compared {
			return a.Compared > b.Compared
		}
		return a.Witness < b.Witness
	}
	out := make([]Neighbour, 0, n+1)
	for i, ct := range counts {
		if ct.compared == 0 || 2*ct.compared < maxCompared {
			continue
		}
		tw := m.pb.TrainingWitnesses[i]
		nb := Neighbour{Witness: tw.Witness, BestGroup: tw.BestGroup, Agree: int(ct.agree), Compared: int(ct.compared),
			Agreement: float64(ct.agree) / float64(ct.compared)}
		if len(out) == n && !better(nb, out[n-1]) {
			continue
		}
		// Insert in order, dropping the last if the list is full.
		j := len(out)
		out = append(out, nb)
		for j > 0 && better(nb, out[j-1]) {
			out[j] = out[j-1]
			j--
		}
		out[j] = nb
		if len(out) > n {
			out = out[:n]
		}
	}
	return out
}

// trainingCells returns the training witnesses' reading indexes unit-major: cells[u*nw + i] is
// training witness i's reading at unit u (-1 for a lacuna, or a unit beyond its cells), nw the
// number of training witnesses. Built on first use.
func (g *guide) trainingCells(m *Model) []int32 {
	g.cellsOnce.Do(func() {
		tws := m.pb.TrainingWitnesses
		nw, nu := len(tws), len(m.pb.Units)
		cells := make([]int32, nu*nw)
		for i := range cells {
			cells[i] = -1
		}
		for i, tw := range tws {
			for u, t := range tw.Cells[:min(len(tw.Cells), nu)] {
				cells[u*nw+i] = max(t, -1) // every lacuna as -1, never equal to a reading
			}
		}
		g.cells = cells
	})
	return g.cells
}
