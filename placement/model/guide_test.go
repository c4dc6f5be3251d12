package model

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"slices"
	"sync"
	"testing"

	"google.golang.org/protobuf/proto"

	"strayleaf/placement/collation"
	"strayleaf/placement/prepare"
	"strayleaf/placement/simulate"
	pb "strayleaf/proto/strayleaf/v1"
)

var (
	guideOnce  sync.Once
	guideModel *Model
	guideTrad  *simulate.Tradition
	guideErr   error
)

// smallModel is a model of a small simulated tradition (trained once per test run).
func smallModel(t *testing.T) (*Model, *simulate.Tradition) {
	t.Helper()
	guideOnce.Do(func() {
		cfg := simulate.DefaultConfig()
		cfg.Seed, cfg.Witnesses, cfg.Units = 41, 60, 160
		guideTrad, guideErr = simulate.Simulate(cfg)
		if guideErr != nil {
			return
		}
		var pm *pb.Model
		pm, _, guideErr = Train(guideTrad.Collation, TrainOptions{Groups: len(guideTrad.Truth.Groups), Seed: 3, Prepare: prepare.DefaultOptions()})
		if guideErr != nil {
			return
		}
		guideModel, guideErr = FromProto(pm)
	})
	if guideErr != nil {
		t.Fatal(guideErr)
	}
	return guideModel, guideTrad
}

func rowReadings(c *collation.Collation, row []int32) []Reading {
	var out []Reading
	for u, r := range row {
		if r != collation.Lacuna {
			out = append(out, Reading{Unit: c.Unit(u).ID, Reading: c.Unit(u).Readings[r]})
		}
	}
	return out
}

// Reference: sklearn.metrics.mutual_info_score on contingency tables
// (testdata/golden/calibrate/gen_calibrate.py): with prior_g = row share and cond[g][r] = the
// row's distribution, mutualInformation agrees to 1e-12.
func TestMutualInformationMatchesScikitLearn(t *testing.T) {
	b, err := os.ReadFile("../../testdata/golden/calibrate/calibrate_golden.json")
	if err != nil {
		t.Fatal(err)
	}
	var g struct {
		MutualInfo []struct {
			Table [][]float64
			MI    float64
		} `json:"mutual_info"`
		Chi2 map[string]float64
	}
	if err := json.Unmarshal(b, &g); err != nil {
		t.Fatal(err)
	}
	if len(g.MutualInfo) == 0 {
		t.Fatal("no mutual information cases")
	}
	for i, c := range g.MutualInfo {
		total := 0.0
		for _, row := range c.Table {
			for _, v := range row {
				total += v
			}
		}
		prior := make([]float64, len(c.Table))
		cond := make([][]float64, len(c.Table))
		for r, row := range c.Table {
			s := 0.0
			for _, v := range row {
				s += v
			}
			prior[r] = s / total
			for _, v := range row {
				cond[r] = append(cond[r], v/s)
			}
		}
		if got := mutualInformation(prior, cond); math.Abs(got-c.MI) > 1e-12 {
			t.Errorf("case %d: I = %v, scikit-learn %v", i, got, c.MI)
		}
	}
	// The boundary test's critical value is scipy's chi2.ppf(0.90, 1).
	if v := g.Chi2["ppf_0.90_df1"]; math.Abs(v-MixtureCritical) > 1e-12 {
		t.Errorf("MixtureCritical %v, scipy %v", MixtureCritical, v)
	}
}

// Invariants: reading probabilities of each group sum to 1 over a unit's outcomes and are
// positive; 0 <= I_u <= log k, 0 for units set aside; informative coverage of every unit is 1.
func TestInformativenessInvariants(t *testing.T) {
	m, tr := smallModel(t)
	k := float64(m.K())
	info := m.Informativeness()
	pos := 0
	for u, un := range m.Proto().Units {
		if un.RowStart == un.RowEnd {
			if info[u] != 0 {
				t.Errorf("unit %s set aside has informativeness %v", un.Id, info[u])
			}
			continue
		}
		if !(info[u] >= 0 && info[u] <= math.Log(k)+1e-12) {
			t.Errorf("unit %s: I = %v outside [0, log k]", un.Id, info[u])
		}
		if info[u] > 0.05 {
			pos++
		}
		_, probs := m.ReadingProbabilities(u)
		for g := 0; g < m.K(); g++ {
			s := 0.0
			for _, p := range probs {
				if !(p[g] > 0) {
					t.Fatalf("unit %s: probability %v", un.Id, p[g])
				}
				s += p[g]
			}
			if math.Abs(s-1) > 1e-12 {
				t.Errorf("unit %s group %d: probabilities sum to %v", un.Id, g, s)
			}
		}
	}
	if pos < len(info)/2 {
		t.Errorf("only %d of %d units separate the groups at all", pos, len(info))
	}
	p, err := m.Place("all", rowReadings(tr.Collation, tr.Collation.Row(0)), nil)
	if err != nil {
		t.Fatal(err)
	}
	if p.InformativeCoverage <= 0 || p.InformativeCoverage > 1 {
		t.Errorf("informative coverage %v", p.InformativeCoverage)
	}
	var every []Reading
	c := tr.Collation
	for u := 0; u < c.NumUnits(); u++ {
		every = append(every, Reading{Unit: c.Unit(u).ID, Reading: c.Unit(u).Readings[0]})
	}
	if p, err := m.Place("every", every, nil); err != nil || math.Abs(p.InformativeCoverage-1) > 1e-12 {
		t.Errorf("a witness at every unit: informative coverage %v (%v)", p.InformativeCoverage, err)
	}
}

// Worked example (by hand): a = (0.5, 0.1), b = (0.1, 0.5) is best fitted by s = 1/2, and
// LR = 2 (2 log 0.3 - log 0.05) = 2 log 1.8.
func TestMixtureLikelihoodRatio(t *testing.T) {
	s, lr := mixtureLR([]float64{0.5, 0.1}, []float64{0.1, 0.5})
	if math.Abs(s-0.5) > 1e-9 || math.Abs(lr-2*math.Log(1.8)) > 1e-9 {
		t.Errorf("s = %v, LR = %v; want 0.5, %v", s, lr, 2*math.Log(1.8))
	}
	// All evidence for a: s = 0 and LR = 0.
	if s, lr := mixtureLR([]float64{0.9, 0.8}, []float64{0.1, 0.2}); s != 0 || lr != 0 {
		t.Errorf("pure a: s = %v, LR = %v", s, lr)
	}
}

// Nearest agrees with collation.Agreement (common practice): a training witness's own readings
// find itself first at agreement 1, and every count equals Agreement on the collation's rows.
func TestNearestMatchesAgreement(t *testing.T) {
	m, tr := smallModel(t)
	c := tr.Collation
	for _, tw := range m.Proto().TrainingWitnesses[:5] {
		w, _ := c.WitnessIndex(tw.Witness)
		nb := m.Nearest(rowReadings(c, c.Row(w)), 5)
		if len(nb) == 0 || nb[0].Witness != tw.Witness || nb[0].Agreement != 1 {
			t.Fatalf("%s: nearest %+v", tw.Witness, nb)
		}
		for _, n := range nb {
			v, _ := c.WitnessIndex(n.Witness)
			agree, compared := c.Agreement(w, v)
			if agree != n.Agree || compared != n.Compared {
				t.Errorf("%s~%s: %d/%d, Agreement %d/%d", tw.Witness, n.Witness, n.Agree, n.Compared, agree, compared)
			}
		}
		for i := 1; i < len(nb); i++ {
			if nb[i].Agreement > nb[i-1].Agreement {
				t.Errorf("%s: nearest not in order: %+v", tw.Witness, nb)
			}
		}
	}
}

// The gain of a unit is the expected drop of the entropy of q: checked against Bayes' rule
// reading by reading, H(q) - sum_r P_q(r) H(q | r).
func TestGainIsExpectedEntropyDrop(t *testing.T) {
	m, tr := smallModel(t)
	g := m.guide()
	c := tr.Collation
	rd := rowReadings(c, simulate.CutRange(c.Row(3), 10, 4))
	q := append([]float64(nil), g.logPrior...)
	obs, _, err := m.Observe("x", rd, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, o := range obs {
		g.logLik(q, o.Unit, o.Row, m)
	}
	normaliseLog(q)
	entropy := func(p []float64) float64 {
		h := 0.0
		for _, v := range p {
			if v > 0 {
				h -= v * math.Log(v)
			}
		}
		return h
	}
	for u := 20; u < 30; u++ {
		_, probs := m.ReadingProbabilities(u)
		if len(probs) == 0 {
			continue
		}
		want := entropy(q)
		for _, pr := range probs {
			post := make([]float64, len(q))
			pz := 0.0
			for j := range q {
				post[j] = q[j] * pr[j]
				pz += post[j]
			}
			for j := range post {
				post[j] /= pz
			}
			want -= pz * entropy(post)
		}
		if got := g.gain(m, u, q); math.Abs(got-want) > 1e-12 {
			t.Errorf("unit %d: gain %v, Bayes %v", u, got, want)
		}
	}
}

// Suggest: nothing checked gives the probe list; checked units and units outside the
// candidates are never suggested; gains are non-negative; bad candidates are input errors.
func TestSuggest(t *testing.T) {
	m, tr := smallModel(t)
	c := tr.Collation
	s, err := m.Suggest("empty", nil, SuggestOptions{Top: 5})
	if err != nil {
		t.Fatal(err)
	}
	probes := m.ProbeUnits()
	if !s.Probe || len(s.Units) != 5 || len(probes) != DefaultProbeUnits {
		t.Fatalf("probe answer %+v (%d probes)", s, len(probes))
	}
	for i, us := range s.Units {
		if us.Unit != m.Proto().Units[probes[i]].Id {
			t.Errorf("probe %d is %s; the probe list has %s", i, us.Unit, m.Proto().Units[probes[i]].Id)
		}
	}
	rd := rowReadings(c, simulate.CutRange(c.Row(5), 0, 6))
	var cand []string
	for u := 0; u < 40; u++ {
		cand = append(cand, c.Unit(u).ID)
	}
	s, err = m.Suggest("w", rd, SuggestOptions{Top: 8, Candidates: cand})
	if err != nil {
		t.Fatal(err)
	}
	if s.Probe || len(s.Units) != 8 {
		t.Fatalf("%+v", s)
	}
	inCand := map[string]bool{}
	for _, id := range cand {
		inCand[id] = true
	}
	for _, r := range rd {
		inCand[r.Unit] = false
	}
	for _, us := range s.Units {
		if !inCand[us.Unit] || us.Gain < 0 {
			t.Errorf("suggested %s (gain %v): checked or not a candidate", us.Unit, us.Gain)
		}
		for _, h := range us.Hints {
			if m.groupIndex(h.Favours) < 0 || h.Probability < 0.05 {
				t.Errorf("hint %+v", h)
			}
		}
	}
	sum := 0.0
	for _, p := range s.Posterior {
		sum += p.Share
	}
	if math.Abs(sum-1) > 1e-12 {
		t.Errorf("posterior sums to %v", sum)
	}
	var ie *InputError
	if _, err := m.Suggest("w", rd, SuggestOptions{Candidates: []string{"nowhere"}}); !errors.As(err, &ie) {
		t.Errorf("unknown candidate: %v", err)
	}
	if _, err := m.Suggest("w", []Reading{{Unit: "nowhere", Reading: "a"}}, SuggestOptions{}); !errors.As(err, &ie) {
		t.Errorf("unknown unit: %v", err)
	}
}

// The probe list drives the pairwise Bhattacharyya bound below that of the same number of units
// taken in text order, and names distinct units that carry rows.
func TestProbeListSeparatesGroups(t *testing.T) {
	m, _ := smallModel(t)
	g := m.guide()
	k := m.K()
	probes := m.ProbeUnits()
	bound := func(units []int) float64 {
		total := 0.0
		for a := 0; a < k; a++ {
			for b := a + 1; b < k; b++ {
				p := 1 / float64(k)
				for _, u := range units {
					un := m.Proto().Units[u]
					s := math.Sqrt(g.other[u*k+a] * g.other[u*k+b])
					for r := int(un.RowStart); r < int(un.RowEnd); r++ {
						s += math.Sqrt(g.prob[r*k+a] * g.prob[r*k+b])
					}
					p *= s
				}
				total += p
			}
		}
		return total
	}
	seen := map[int]bool{}
	for _, u := range probes {
		un := m.Proto().Units[u]
		if seen[u] || un.RowStart == un.RowEnd {
			t.Errorf("probe %d repeated or without rows", u)
		}
		seen[u] = true
	}
	var first []int
	for u, un := range m.Proto().Units {
		if un.RowStart < un.RowEnd && len(first) < len(probes) {
			first = append(first, u)
		}
	}
	if bp, bf := bound(probes), bound(first); !(bp < bf) {
		t.Errorf("probe bound %v not below %v", bp, bf)
	}
}

// Features are reproducible: the same readings in another order give the same features (up to
// the rounding of sums taken in another order).
func TestFeaturesReproducible(t *testing.T) {
	m, tr := smallModel(t)
	c := tr.Collation
	rd := rowReadings(c, simulate.CutRange(c.Row(7), 30, 12))
	p1, err := m.Place("a", rd, nil)
	if err != nil {
		t.Fatal(err)
	}
	rev := make([]Reading, len(rd))
	for i, r := range rd {
		rev[len(rd)-1-i] = r
	}
	p2, err := m.Place("a", rev, nil)
	if err != nil {
		t.Fatal(err)
	}
	f1, f2 := p1.Features, p2.Features
	close := func(a, b float64) bool { return math.Abs(a-b) <= 1e-9*(1+math.Abs(a)) }
	if !close(f1.Separation, f2.Separation) || f1.UsedUnits != f2.UsedUnits || !close(f1.InformativeCoverage, f2.InformativeCoverage) ||
		!close(f1.Margin, f2.Margin) || !close(f1.RelativeResidual, f2.RelativeResidual) || !close(f1.LogOdds, f2.LogOdds) ||
		!close(f1.PosteriorLogOdds, f2.PosteriorLogOdds) || !close(p1.Confidence, p2.Confidence) {
		t.Errorf("features differ with the order of readings: %+v vs %+v", p1.Features, p2.Features)
	}
	if p1.Features.Separation < 0 || p1.Features.Separation > 1 || p1.Calibrated {
		t.Errorf("features %+v, calibrated %v (the model has no calibration)", p1.Features, p1.Calibrated)
	}
}

// A model whose calibration names a feature this build does not know falls back to the
// provisional confidence instead of misreading it.
func TestUnknownCalibrationFallsBack(t *testing.T) {
	m, tr := smallModel(t)
	pm := proto.Clone(m.Proto()).(*pb.Model)
	pm.Calibration = &pb.Calibration{Method: MethodLogisticIsotonic, Features: []string{"moon_phase"}, Coefficients: []float64{0, 1}, Thresholds: []float64{0, 1}, Values: []float64{0.1, 0.9}}
	m2, err := FromProto(pm)
	if err != nil {
		t.Fatal(err)
	}
	p, err := m2.Place("a", rowReadings(tr.Collation, tr.Collation.Row(1)), nil)
	if err != nil {
		t.Fatal(err)
	}
	if p.Calibrated {
		t.Error("unknown calibration feature used")
	}
	pm.Calibration.Features = []string{"margin"}
	m3, _ := FromProto(pm)
	p, _ = m3.Place("a", rowReadings(tr.Collation, tr.Collation.Row(1)), nil)
	if want := InterpolateSteps([]float64{0, 1}, []float64{0.1, 0.9}, p.Features.Margin); !p.Calibrated || math.Abs(p.Confidence-want) > 1e-12 {
		t.Errorf("confidence %v (calibrated %v); the map gives %v", p.Confidence, p.Calibrated, want)
	}
	// The same map, learnt from the bootstrap features of an earlier build.
	pm.Calibration.Resamples = 12
	m4, _ := FromProto(pm)
	if p, _ = m4.Place("a", rowReadings(tr.Collation, tr.Collation.Row(1)), nil); p.Calibrated {
		t.Error("a calibration learnt from bootstrap resamples was used")
	}
}

// A model whose units carry no sections cannot place by section.
func TestPlaceBySectionNeedsSections(t *testing.T) {
	m, tr := smallModel(t)
	pm := proto.Clone(m.Proto()).(*pb.Model)
	for _, u := range pm.Units {
		u.Section = ""
	}
	m2, err := FromProto(pm)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := m2.PlaceBySection("a", rowReadings(tr.Collation, tr.Collation.Row(1)), nil); !errors.Is(err, ErrNoSections) {
		t.Errorf("err %v; want ErrNoSections", err)
	}
	sp, err := m.PlaceBySection("a", rowReadings(tr.Collation, tr.Collation.Row(1)), nil)
	if err != nil || len(sp.Sections) != len(m.Sections()) {
		t.Errorf("%+v, %v", sp, err)
	}
}

// A Model is safe for concurrent use: placements and suggestions from many goroutines on a
// freshly decoded model (whose derived data is built on first use) agree with one made alone.
func TestConcurrentGuidance(t *testing.T) {
	m0, tr := smallModel(t)
	m, err := FromProto(proto.Clone(m0.Proto()).(*pb.Model))
	if err != nil {
		t.Fatal(err)
	}
	c := tr.Collation
	rd := rowReadings(c, simulate.CutRange(c.Row(2), 40, 10))
	want, err := m0.Place("w", rd, nil)
	if err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make(chan error, 8)
	for i := 0; i < 8; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			p, err := m.Place("w", rd, nil)
			if err == nil && (p.Confidence != want.Confidence || p.Features.Separation != want.Features.Separation) {
				err = errors.New("concurrent placement differs")
			}
			if err == nil {
				_, err = m.Suggest("w", rd, SuggestOptions{Top: 3})
			}
			errs <- err
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		if err != nil {
			t.Error(err)
		}
	}
}

// A calibration with a non-finite number in it (a damaged or hand-made bundle) is not used, and
// reading an isotonic map at NaN gives NaN instead of indexing past its end.
func TestNonFiniteCalibrationFallsBack(t *testing.T) {
	m, tr := smallModel(t)
	nan := math.NaN()
	for _, c := range []*pb.Calibration{
		{Coefficients: []float64{nan, 1}, Thresholds: []float64{0, 1}, Values: []float64{0.1, 0.9}},
		{Coefficients: []float64{0, 1}, Thresholds: []float64{nan}, Values: []float64{0.5}},
		{Coefficients: []float64{0, 1}, Thresholds: []float64{0, 1}, Values: []float64{0.1, math.Inf(1)}},
	} {
		pm := proto.Clone(m.Proto()).(*pb.Model)
		c.Method, c.Features = MethodLogisticIsotonic, []string{"margin"}
		pm.Calibration = c
		m2, err := FromProto(pm)
		if err != nil {
			t.Fatal(err)
		}
		p, err := m2.Place("a", rowReadings(tr.Collation, tr.Collation.Row(1)), nil)
		if err != nil {
			t.Fatal(err)
		}
		if p.Calibrated || math.IsNaN(p.Confidence) {
			t.Errorf("calibration %v: calibrated %v, confidence %v; want the provisional confidence", c, p.Calibrated, p.Confidence)
		}
	}
	for _, th := range [][]float64{{0}, {0, 1}, {0, 1, 2}} {
		if v := InterpolateSteps(th, th, nan); !math.IsNaN(v) {
			t.Errorf("InterpolateSteps(%v, NaN) = %v; want NaN", th, v)
		}
	}
}

// Ground truth (the simulator): the separation feature is near 1 for every whole pure witness,
// lower for the most evenly mixed one, no higher for a short leaf than for a long one, and 0
// for a single unit (too few units to tell any spread).
func TestSeparationTracksEvidence(t *testing.T) {
	m, tr := smallModel(t)
	c := tr.Collation
	sep := func(rd []Reading) float64 {
		t.Helper()
		p, err := m.PlaceWith("x", rd, nil, PlaceOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if s := p.Features.Separation; !(s >= 0 && s <= 1) {
			t.Fatalf("separation %v outside [0, 1]", s)
		}
		return p.Features.Separation
	}
	minPure, pure, even, evenGap := 1.0, -1, -1, 1.0
	for w, wt := range tr.Truth.Witnesses {
		top := slices.Sorted(slices.Values(wt.Shares))
		top1, top2 := top[len(top)-1], top[len(top)-2]
		if top1 >= 0.999 {
			minPure = min(minPure, sep(rowReadings(c, c.Row(w))))
			pure = w
		} else if top1-top2 < evenGap {
			even, evenGap = w, top1-top2
		}
	}
	if pure < 0 || even < 0 {
		t.Fatal("the tradition needs pure and mixed witnesses")
	}
	se := sep(rowReadings(c, c.Row(even)))
	var leaves []float64
	for _, n := range []int{40, 10, 4} {
		leaves = append(leaves, sep(rowReadings(c, simulate.CutRange(c.Row(pure), 20, n))))
	}
	t.Logf("separation: pure witnesses at least %.4f; %s (shares %.2f) %.4f; leaves of 40/10/4 units %.4f",
		minPure, c.Witness(even), tr.Truth.Witnesses[even].Shares, se, leaves)
	if minPure < 0.99 {
		t.Errorf("a whole pure witness has separation %.4f; expected at least 0.99", minPure)
	}
	if se >= minPure || se > 0.95 {
		t.Errorf("the most evenly mixed witness has separation %.4f; expected below the pure witnesses' %.4f and 0.95", se, minPure)
	}
	if !(leaves[0] >= leaves[2]) {
		t.Errorf("separation of a 40-unit leaf %.4f below that of a 4-unit leaf %.4f", leaves[0], leaves[2])
	}
	if s := sep(rowReadings(c, c.Row(pure))[:1]); s != 0 {
		t.Errorf("one unit: separation %.4f; expected 0", s)
	}
}
