package model

import (
	"math"
	"sync"
)

// Reading probabilities per group.
//
// W's rows for a unit u, divided by their weights, read as the shares of a group's members that
// have each kept reading there: after training's rescaling a pure member of group g has
// coefficient ~1 in g alone, so its weighted reading indicator x_r = w_r [reading r] is fitted by
// W[r, g], and a_r(g) = W[r, g] / w_r estimates P(reading r | group g). Whatever share of the
// group the kept readings do not account for, 1 - sum_r a_r(g) (readings set aside as singular,
// or never seen), goes to one further outcome, "another reading". The estimates are smoothed
// towards the uniform distribution by additive (Lidstone) smoothing with the Jeffreys pseudo-count
// 1/2 per outcome (Lidstone 1920; Jeffreys 1946; the Krichevsky-Trofimov estimator; from memory):
//
//	P(r | g) = (n_g a_r(g) + 1/2) / (n_g + (R_u + 1)/2),
//
// where n_g is the number of training witnesses in group g (at least 1) and R_u the kept
// readings of u, so that no reading has probability zero and a small group's profile is trusted
// less than a large one's.
//
// # Informativeness
//
// A unit's informativeness is the mutual information between the group and the reading there,
// with the groups equally likely (each group counts alike, whatever its size):
//
//	I_u = sum_g pi_g sum_r P(r|g) log(P(r|g) / P(r)),   P(r) = sum_g pi_g P(r|g),   pi_g = 1/k,
//
// in nats (Shannon 1948; Cover & Thomas 2006, Elements of Information Theory, eq. 2.28; from
// memory). It is 0 for a unit every group reads alike and at most log k. Units set aside at
// training have informativeness 0.

// jeffreys is the pseudo-count per outcome of the smoothed reading probabilities.
const jeffreys = 0.5

// guide holds what the model derives from W for confidence, guidance and mixture: reading
// probabilities per group, their logarithms, informativeness, and reading indexes by label. It is
// built once per Model and read concurrently.
type guide struct {
	k int
	// prob[r*k+g] = P(row r's reading | g); other[u*k+g] = P(another reading at u | g).
	prob, other       []float64
	logProb, logOther []float64
	// logPrior[g] = log pi_g with pi_g proportional to n_g + 1 (the group sizes, add-one).
	logPrior []float64
	// info[u] is unit u's informativeness (nats); infoTotal their sum.
	info      []float64
	infoTotal float64
	// readingIndex[u] maps a reading label of unit u to its index in the unit's readings.
	readingIndex []map[string]int32
	// sectionOf[u] indexes sections (the distinct non-empty section labels in text order), or -1.
	sectionOf []int
	sections  []string
	// probes is the probe list (unit indexes), from the model or computed on first use.
	probesOnce sync.Once
	probes     []int
	// condEnt[u*k+g] = H(R_u | g), nats.
	condEnt []float64
	cal     *calibrationMap
	// cells holds the training witnesses' readings unit-major (see trainingCells).
	cellsOnce sync.Once
	cells     []int32
}

// guide returns m's derived data (reading probabilities, informativeness, sections, the
// calibration map), building it on first use: decoding a model stays cheap for callers that only
// place.
func (m *Model) guide() *guide {
	m.guideOnce.Do(func() { m.derived = newGuide(m) })
	return m.derived
}

func newGuide(m *Model) *guide {
	pm := m.pb
	k := m.K()
	nr, nu := len(pm.Rows), len(pm.Units)
	g := &guide{
		k: k, prob: make([]float64, nr*k), other: make([]float64, nu*k),
		logProb: make([]float64, nr*k), logOther: make([]float64, nu*k),
		logPrior: make([]float64, k), info: make([]float64, nu),
		readingIndex: make([]map[string]int32, nu), sectionOf: make([]int, nu),
	}
	size := make([]float64, k)
	tot := 0.0
	for j, gs := range pm.Groups {
		size[j] = math.Max(1, float64(gs.Size))
		tot += float64(gs.Size) + 1
	}
	for j := range g.logPrior {
		g.logPrior[j] = math.Log((math.Max(0, float64(pm.Groups[j].Size)) + 1) / tot)
	}
	secIndex := map[string]int{}
	for u, un := range pm.Units {
		ri := make(map[string]int32, len(un.Readings))
		for i, l := range un.Readings {
			ri[l] = int32(i)
		}
		g.readingIndex[u] = ri
		g.sectionOf[u] = -1
		if un.Section != "" {
			s, ok := secIndex[un.Section]
			if !ok {
				s = len(g.sections)
				secIndex[un.Section] = s
				g.sections = append(g.sections, un.Section)
			}
			g.sectionOf[u] = s
		}
		lo, hi := int(un.RowStart), int(un.RowEnd)
		if lo == hi {
			continue
		}
		outcomes := float64(hi-lo) + 1
		for j := 0; j < k; j++ {
			sum := 0.0
			for r := lo; r < hi; r++ {
				a := 0.0
				if w := pm.Rows[r].Weight; w > 0 {
					a = math.Min(1, pm.Profile[r*k+j]/w)
				}
				g.prob[r*k+j] = a
				sum += a
			}
			if sum > 1 { // the kept readings account for the whole group
				for r := lo; r < hi; r++ {
					g.prob[r*k+j] /= sum
				}
				sum = 1
			}
			den := size[j] + jeffreys*outcomes
			for r := lo; r < hi; r++ {
				p := (size[j]*g.prob[r*k+j] + jeffreys) / den
				g.prob[r*k+j] = p
				g.logProb[r*k+j] = math.Log(p)
			}
			o := (size[j]*(1-sum) + jeffreys) / den
			g.other[u*k+j] = o
			g.logOther[u*k+j] = math.Log(o)
		}
	}
	if len(pm.Informativeness) == nu {
		copy(g.info, pm.Informativeness)
	} else {
		uniform := make([]float64, k)
		for j := range uniform {
			uniform[j] = 1 / float64(k)
		}
		cond := make([][]float64, k)
		for u, un := range pm.Units {
			lo, hi := int(un.RowStart), int(un.RowEnd)
			if lo == hi {
				continue
			}
			for j := 0; j < k; j++ {
				row := cond[j][:0]
				for r := lo; r < hi; r++ {
					row = append(row, g.prob[r*k+j])
				}
				cond[j] = append(row, g.other[u*k+j])
			}
			g.info[u] = mutualInformation(uniform, cond)
		}
	}
	for _, v := range g.info {
		g.infoTotal += v
	}
	g.cal = parseCalibration(pm.Calibration)
	g.condEnt = conditionalEntropies(g, m)
	return g
}

// mutualInformation returns I(G; R) = sum_g prior_g sum_r cond[g][r] log(cond[g][r] / P(r)) in
// nats, with P(r) = sum_g prior_g cond[g][r]; terms with cond[g][r] = 0 count 0.
func mutualInformation(prior []float64, cond [][]float64) float64 {
	if len(cond) == 0 {
		return 0
	}
	nr := len(cond[0])
	mi := 0.0
	for r := 0; r < nr; r++ {
		pr := 0.0
		for g, pg := range prior {
			pr += pg * cond[g][r]
		}
		if pr <= 0 {
			continue
		}
		for g, pg := range prior {
			if c := cond[g][r]; c > 0 && pg > 0 {
				mi += pg * c * math.Log(c/pr)
			}
		}
	}
	return math.Max(0, mi)
}

// Informativeness returns each unit's informativeness (nats; see the package notes above), in
// the model's unit order: the values stored in the model if it carries them, else computed from
// W. The caller must not modify the slice.
func (m *Model) Informativeness() []float64 { return m.guide().info }

// ReadingProbabilities returns, for unit u, the reading labels the model keeps there (plus ""
// for "another reading") and P(reading | group) for each, probs[i][g].
func (m *Model) ReadingProbabilities(u int) (labels []string, probs [][]float64) {
	gd := m.guide()
	un := m.pb.Units[u]
	k := gd.k
	for r := int(un.RowStart); r < int(un.RowEnd); r++ {
		labels = append(labels, un.Readings[m.pb.Rows[r].Reading])
		probs = append(probs, append([]float64(nil), gd.prob[r*k:r*k+k]...))
	}
	if un.RowStart < un.RowEnd {
		labels = append(labels, "")
		probs = append(probs, append([]float64(nil), gd.other[u*k:u*k+k]...))
	}
	return labels, probs
}

// coverage is the share of the model's total informativeness carried by the given units (each
// listed once).
func (g *guide) coverage(units []int) float64 {
	if g.infoTotal <= 0 {
		return 0
	}
	s := 0.0
	for _, u := range units {
		s += g.info[u]
	}
	return math.Min(1, s/g.infoTotal)
}

// logLik adds to ll[g] the log-probability, under each group's reading profile, of the
// observed reading: row r at unit u, or another reading (r < 0). Units with no rows add nothing.
func (g *guide) logLik(ll []float64, u, r int, m *Model) {
	if !m.hasRows[u] {
		return
	}
	k := g.k
	if r >= 0 {
		lp := g.logProb[r*k : r*k+k]
		for j := range ll {
			ll[j] += lp[j]
		}
		return
	}
	lo := g.logOther[u*k : u*k+k]
	for j := range ll {
		ll[j] += lo[j]
	}
}

// probeUnits returns the probe list: the model's own, or one computed from W on first use.
func (g *guide) probeUnits(m *Model) []int {
	g.probesOnce.Do(func() {
		if len(m.pb.ProbeUnits) > 0 {
			for _, u := range m.pb.ProbeUnits {
				if u >= 0 && int(u) < len(m.pb.Units) {
					g.probes = append(g.probes, int(u))
				}
			}
			return
		}
		g.probes = probeList(g, m, DefaultProbeUnits)
	})
	return g.probes
}
