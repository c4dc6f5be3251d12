package model

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
)

// What to check next.
//
// The groups' reading probabilities (see ReadingProbabilities) and the readings checked so far
// give a distribution over the group of the witness, by Bayes' rule with the units taken as
// independent given the group:
//
//	q_g  proportional to  pi_g prod_{checked u} P(r_u | g),
//
// pi_g the group sizes (add-one). A unit u not yet checked would show reading r with the
// predicted probability P_q(r) = sum_g q_g P(r | g), and the expected reduction of the entropy of
// q from checking it is the conditional mutual information
//
//	gain_u = I(G; R_u | checked) = H(P_q(R_u)) - sum_g q_g H(R_u | g)
//
// (the expected information gain, Lindley 1956, Ann. Math. Statist. 27; Cover & Thomas 2006,
// ch. 2; from memory), reported in bits. Units are ranked by it, best first. The per-group
// entropies H(R_u | g) are computed once per model, so a suggestion costs O(rows x k) with no
// allocation beyond the answer.
//
// # The probe list
//
// With nothing checked every witness is alike, and the best first units are a fixed list. It is
// built greedily to drive down an upper bound on the error of telling any two groups apart: by the
// Bhattacharyya bound (Bhattacharyya 1943; Kailath 1967, IEEE Trans. Commun. Technol. 15; from
// memory), with units independent given the group, the probability of mistaking g for h after
// checking the set S is at most sqrt(pi_g pi_h) prod_{u in S} BC_u(g, h), with
// BC_u(g, h) = sum_r sqrt(P(r|g) P(r|h)). Each step adds the unit that most lowers the sum of the
// bounds over all pairs (groups equally likely), so that later probes separate the pairs the
// earlier ones left close.

// DefaultProbeUnits is the length of the probe list computed at training.
const DefaultProbeUnits = 24

// SuggestOptions are the settings of Suggest.
type SuggestOptions struct {
	// Top is the number of units to return (default 10).
	Top int
	// Candidates, if not nil, are the unit ids the cataloguer can still check (the text that
	// survives on a leaf, say); other units are never suggested.
	Candidates []string
	// MinHint is the least predicted probability of a reading to be given as a hint (default
	// 0.05).
	MinHint float64
}

// Hint is a likely reading of a suggested unit and the group it would favour: the group most
// probable once that reading is seen.
type Hint struct {
	Reading     string
	Probability float64
	Favours     string
}

// UnitSuggestion is one unit worth checking.
type UnitSuggestion struct {
	Unit string
	// Gain is the expected reduction of the uncertainty about the group, in bits.
	Gain float64
	// Hints are the unit's likely readings, most probable first.
	Hints []Hint
}

// Suggestions is the answer of Suggest.
type Suggestions struct {
	Witness string
	// Posterior is the distribution over groups given the readings checked so far, most probable
	// first; Entropy its entropy in bits.
	Posterior []GroupShare
	Entropy   float64
	// Probe reports that nothing was checked yet and Units is the model's probe list.
	Probe bool
	Units []UnitSuggestion
}

// conditionalEntropies returns H(R_u | g) in nats for every unit and group, units x k.
func conditionalEntropies(g *guide, m *Model) []float64 {
	k := g.k
	out := make([]float64, len(m.pb.Units)*k)
	for u, un := range m.pb.Units {
		if un.RowStart == un.RowEnd {
			continue
		}
		for j := 0; j < k; j++ {
			h := -g.other[u*k+j] * g.logOther[u*k+j]
			for r := int(un.RowStart); r < int(un.RowEnd); r++ {
				h -= g.prob[r*k+j] * g.logProb[r*k+j]
			}
			out[u*k+j] = h
		}
	}
	return out
}

// Suggest ranks the units the witness has not yet been checked at by expected gain, given the
// readings checked so far (which may be none: then the answer is the probe list). Readings are
// checked as for Place; a witness may be given with no readings at all.
func (m *Model) Suggest(witness string, readings []Reading, opt SuggestOptions) (*Suggestions, error) {
	if opt.Top <= 0 {
		opt.Top = 10
	}
	if opt.MinHint <= 0 {
		opt.MinHint = 0.05
	}
	g := m.guide()
	q, err := m.posterior(witness, readings)
	if err != nil {
		return nil, err
	}
	checked := make([]bool, len(m.pb.Units))
	for _, r := range readings {
		checked[m.unitIndex[r.Unit]] = true
	}
	var allowed []bool // nil: every unit may be suggested
	if opt.Candidates != nil {
		allowed = make([]bool, len(m.pb.Units))
		var bad []Violation
		for i, id := range opt.Candidates {
			u, ok := m.unitIndex[id]
			if !ok {
				bad = append(bad, Violation{Field: fmt.Sprintf("candidates[%d]", i), Description: fmt.Sprintf("unit %q is not in the model", id)})
				continue
			}
			allowed[u] = true
		}
		if len(bad) > 0 {
			return nil, &InputError{Witness: witness, Violations: bad}
		}
	}
	usable := func(u int) bool {
		un := m.pb.Units[u]
		return !checked[u] && un.RowStart < un.RowEnd && (allowed == nil || allowed[u])
	}

	out := &Suggestions{Witness: witness, Probe: len(readings) == 0}
	for j, v := range q {
		out.Posterior = append(out.Posterior, GroupShare{Group: m.groupIDs[j], Share: v})
		if v > 0 {
			out.Entropy -= v * math.Log2(v)
		}
	}
	sort.SliceStable(out.Posterior, func(a, b int) bool { return out.Posterior[a].Share > out.Posterior[b].Share })

	var list []ranked
	if out.Probe {
		for _, u := range g.probeUnits(m) {
			if usable(u) {
				list = append(list, ranked{u, g.gain(m, u, q)})
			}
		}
	}
	if len(list) < opt.Top {
		inList := make(map[int]bool, len(list))
		for _, r := range list {
			inList[r.u] = true
		}
		start := len(list)
		for u := range m.pb.Units {
			if !inList[u] && usable(u) {
				list = append(list, ranked{u, g.gain(m, u, q)})
			}
		}
		slices.SortStableFunc(list[start:], func(a, b ranked) int { return cmp.Compare(b.gain, a.gain) })
	}
	if !out.Probe && len(list) > 1 {
		list = g.batch(m, list, q, opt.Top, readings)
	}
	if len(list) > opt.Top {
		list = list[:opt.Top]
	}
	for _, r := range list {
		out.Units = append(out.Units, UnitSuggestion{Unit: m.pb.Units[r.u].Id, Gain: r.gain / math.Ln2, Hints: g.hints(m, r.u, q, opt.MinHint)})
	}
	return out, nil
}

// gain returns I(G; R_u | q) in nats: H(P_q(R_u)) - sum_g q_g H(R_u | g).
func (g *guide) gain(m *Model, u int, q []float64) float64 {
	k := g.k
	un := m.pb.Units[u]
	h := 0.0
	for r := int(un.RowStart); r <= int(un.RowEnd); r++ {
		var row []float64
		if r < int(un.RowEnd) {
			row = g.prob[r*k : r*k+k]
		} else {
			row = g.other[u*k : u*k+k]
		}
		p := 0.0
		for j, qj := range q {
			p += qj * row[j]
		}
		if p > 0 {
			h -= p * math.Log(p)
		}
	}
	ce := g.condEnt[u*k : u*k+k]
	for j, qj := range q {
		h -= qj * ce[j]
	}
	return math.Max(0, h)
}

// hints lists the readings of unit u with predicted probability at least minP, most probable
// first, each with the group of largest q_g P(r | g).
func (g *guide) hints(m *Model, u int, q []float64, minP float64) []Hint {
	k := g.k
	un := m.pb.Units[u]
	var out []Hint
	for r := int(un.RowStart); r < int(un.RowEnd); r++ {
		row := g.prob[r*k : r*k+k]
		p, best, bestV := 0.0, 0, -1.0
		for j, qj := range q {
			v := qj * row[j]
			p += v
			if v > bestV {
				best, bestV = j, v
			}
		}
		if p >= minP {
			out = append(out, Hint{Reading: un.Readings[m.pb.Rows[r].Reading], Probability: p, Favours: m.groupIDs[best]})
		}
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].Probability > out[b].Probability })
	return out
}

// normaliseLog turns log-weights into probabilities, in place.
func normaliseLog(v []float64) {
	mx := math.Inf(-1)
	for _, x := range v {
		mx = math.Max(mx, x)
	}
	s := 0.0
	for i, x := range v {
		v[i] = math.Exp(x - mx)
		s += v[i]
	}
	for i := range v {
		v[i] /= s
	}
}

// ProbeUnits returns the model's probe list as unit indexes, best first: the list stored in the
// model if it carries one, else the one computed from W (see the notes on the probe list). The
// caller must not modify the slice.
func (m *Model) ProbeUnits() []int { return m.guide().probeUnits(m) }

// ComputeProbeUnits computes a probe list of at most n units from W, ignoring any stored one.
func (m *Model) ComputeProbeUnits(n int) []int { return probeList(m.guide(), m, n) }

// probeList builds the greedy Bhattacharyya probe list of at most n units.
func probeList(g *guide, m *Model, n int) []int {
	k := g.k
	if k < 2 || n <= 0 {
		return nil
	}
	type pair struct{ a, b int }
	var pairs []pair
	for a := 0; a < k; a++ {
		for b := a + 1; b < k; b++ {
			pairs = append(pairs, pair{a, b})
		}
	}
	var units []int
	var bc []float64 // units x pairs
	for u, un := range m.pb.Units {
		if un.RowStart == un.RowEnd {
			continue
		}
		units = append(units, u)
		for _, pr := range pairs {
			s := math.Sqrt(g.other[u*k+pr.a] * g.other[u*k+pr.b])
			for r := int(un.RowStart); r < int(un.RowEnd); r++ {
				s += math.Sqrt(g.prob[r*k+pr.a] * g.prob[r*k+pr.b])
			}
			bc = append(bc, math.Min(1, s))
		}
	}
	np := len(pairs)
	bound := make([]float64, np)
	for i := range bound {
		bound[i] = 1 / float64(k) // sqrt(pi_a pi_b) with equal priors
	}
	taken := make([]bool, len(units))
	var out []int
	for len(out) < min(n, len(units)) {
		best, bestV := -1, math.Inf(1)
		for i := range units {
			if taken[i] {
				continue
			}
			v := 0.0
			row := bc[i*np : (i+1)*np]
			for p, b := range bound {
				v += b * row[p]
			}
			if v < bestV {
				best, bestV = i, v
			}
		}
		taken[best] = true
		out = append(out, units[best])
		row := bc[best*np : (best+1)*np]
		for p := range bound {
			bound[p] *= row[p]
		}
	}
	return out
}

// ranked is a unit with its gain (nats).
type ranked struct {
	u    int
	gain float64
}

// Batch scenarios and pool (see batch).
const (
	batchScenarios = 16
	batchPool      = 2
)

// batch orders the units to check together. The first is the unit of largest gain. Each next
// one is the unit of largest expected gain given that the ones before it in the list will have
// been checked too, E[I(G; R_u | checked, R_{u_1}, ..., R_{u_i})], so that a batch does not
// spend several units on the same question. The expectation is taken over batchScenarios
// scenarios drawn once: a group g from q and, for each listed unit, a reading from P(. | g); in
// each the gain is computed exactly under the scenario's posterior, and the scenarios' gains are
// averaged (a Rao-Blackwellised Monte Carlo estimate). Only the batchPool x top units of largest
// gain alone are considered, which holds the cost to O(top^2 x pool x scenarios x readings). The
// draws are seeded by the readings, so the same question always gets the same answer. list is
// sorted by gain alone; its gains are replaced by the conditional gains.
func (g *guide) batch(m *Model, list []ranked, q []float64, top int, readings []Reading) []ranked {
	k := g.k
	pool := list[:min(len(list), batchPool*max(top, 1))]
	if top <= 1 || len(pool) <= 1 {
		return list
	}
	seed := uint64(0xba7c4)
	for _, r := range readings {
		seed += mix64(hashString(r.Unit) ^ hashString(r.Reading)<<1)
	}
	rng := rand.New(rand.NewPCG(seed, 0x6261746368)) // "batch"
	post := make([]float64, batchScenarios*k)
	group := make([]int, batchScenarios)
	for s := range group {
		group[s] = drawIndex(rng, q)
		copy(post[s*k:(s+1)*k], q)
	}
	out := []ranked{pool[0]}
	used := make([]bool, len(pool))
	used[0] = true
	probs := make([]float64, 0, 8)
	for len(out) < min(top, len(pool)) {
		// Condition each scenario on its reading at the unit last listed.
		last := out[len(out)-1].u
		un := m.pb.Units[last]
		for s := range group {
			probs = probs[:0]
			for r := int(un.RowStart); r < int(un.RowEnd); r++ {
				probs = append(probs, g.prob[r*k+group[s]])
			}
			probs = append(probs, g.other[last*k+group[s]])
			i := drawIndex(rng, probs)
			ps := post[s*k : (s+1)*k]
			var lik []float64
			if r := int(un.RowStart) + i; r < int(un.RowEnd) {
				lik = g.prob[r*k : r*k+k]
			} else {
				lik = g.other[last*k : last*k+k]
			}
			sum := 0.0
			for j := range ps {
				ps[j] *= lik[j]
				sum += ps[j]
			}
			for j := range ps {
				ps[j] /= sum
			}
		}
		best, bestGain := -1, -1.0
		for i, r := range pool {
			if used[i] {
				continue
			}
			gain := 0.0
			for s := range group {
				gain += g.gain(m, r.u, post[s*k:(s+1)*k])
			}
			gain /= batchScenarios
			if gain > bestGain {
				best, bestGain = i, gain
			}
		}
		used[best] = true
		out = append(out, ranked{pool[best].u, bestGain})
	}
	return out
}

// drawIndex draws i with probability p[i] / sum(p).
func drawIndex(rng *rand.Rand, p []float64) int {
	t := 0.0
	for _, v := range p {
		t += v
	}
	x := rng.Float64() * t
	for i, v := range p {
		if x < v {
			return i
		}
		x -= v
	}
	return len(p) - 1
}

// hashString is FNV-1a, 64 bits (Fowler, Noll & Vo; from memory).
func hashString(s string) uint64 {
	h := uint64(14695981039346656037)
	for i := 0; i < len(s); i++ {
		h ^= uint64(s[i])
		h *= 1099511628211
	}
	return h
}

// posterior returns q, the distribution over the groups (in group order) given the readings,
// checked as for Place: the prior times each reading's likelihood, normalised.
func (m *Model) posterior(witness string, readings []Reading) ([]float64, error) {
	g := m.guide()
	q := append([]float64(nil), g.logPrior...)
	if len(readings) > 0 {
		obs, _, err := m.Observe(witness, readings, nil)
		if err != nil {
			return nil, err
		}
		for _, o := range obs {
			g.logLik(q, o.Unit, o.Row, m)
		}
	}
	normaliseLog(q)
	return q, nil
}

// GroupPosterior returns q, the distribution over the groups given the readings (see the notes
// on what to check next), most probable first. Readings are checked as for Place; none gives
// the prior.
func (m *Model) GroupPosterior(witness string, readings []Reading) ([]GroupShare, error) {
	q, err := m.posterior(witness, readings)
	if err != nil {
		return nil, err
	}
	out := make([]GroupShare, len(q))
	for j, v := range q {
		out[j] = GroupShare{Group: m.groupIDs[j], Share: v}
	}
	sort.SliceStable(out, func(a, b int) bool { return out[a].Share > out[b].Share })
	return out, nil
}

// SectionOf returns the section label of unit id ("" if it has none or is unknown).
func (m *Model) SectionOf(id string) string {
	u, ok := m.unitIndex[id]
	if !ok {
		return ""
	}
	return m.pb.Units[u].Section
}

// mix64 is the splitmix64 finaliser (Steele, Lea & Flood 2014; from memory).
func mix64(z uint64) uint64 {
	z += 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}
