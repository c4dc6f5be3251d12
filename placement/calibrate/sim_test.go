package calibrate

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"strayleaf/placement/collation"
	"strayleaf/placement/model"
	"strayleaf/placement/simulate"
)

// tradition is a simulated tradition split into the witnesses a model is trained on and
// witnesses held out of training, with the trained, calibrated model.
type tradition struct {
	name     string
	tr       *simulate.Tradition
	kept     *simulate.Tradition
	held     *simulate.Tradition
	model    *model.Model
	report   *Report
	toTruth  map[string]int // model group -> simulated group (majority of its training witnesses)
	ofTruth  map[int]string // simulated group -> model group
	numUnits int
}

type tradSpec struct {
	name             string
	seed             uint64
	witnesses, units int
	families         []simulate.Family
	mixed, block     float64
	heldPure         int
	// famDiv and grpDiv, if set, replace the simulator's divergences (lower is harder).
	famDiv, grpDiv float64
	// sections, if set, replaces the simulator's number of sections; holdMixed holds every
	// mixed and block-mixed witness out of training too.
	sections  int
	holdMixed bool
}

var specs = []tradSpec{
	{"sub-groups", 22, 70, 200, nil, 0.05, 0.05, 10, 0, 0, 0, false},
	{"four-families", 23, 80, 200, []simulate.Family{{Groups: 2, Share: 0.4}, {Groups: 1, Share: 0.2}, {Groups: 1, Share: 0.2}, {Groups: 1, Share: 0.2}}, 0.05, 0.05, 10, 0, 0, 0, false},
	{"close-groups", 24, 80, 300, nil, 0.05, 0.05, 12, 0.08, 0.04, 0, false},
	// Many close sub-groups: a random unit rarely tells two sister groups apart.
	{"fine-groups", 25, 144, 150, []simulate.Family{{Groups: 3, Share: 0.25}, {Groups: 3, Share: 0.25}, {Groups: 3, Share: 0.25}, {Groups: 3, Share: 0.25}}, 0.05, 0.05, 12, 0.04, 0.02, 0, false},
	// Many mixed and block-mixed witnesses, all held out with 30 pure ones.
	{"mixtures", 26, 140, 200, nil, 0.15, 0.15, 30, 0, 0, 6, true},
}

var tradCache = map[string]*tradition{}

// testLevels are the coverage levels of the calibration fragments in these tests: fewer than
// DefaultLevels, to keep the tests fast, and none of them a level the held-out check uses.
var testLevels = []float64{0.01, 0.03, 0.07, 0.15, 0.3, 0.6}

// build simulates, splits and trains (cached across tests of one run).
func build(t testing.TB, s tradSpec) *tradition {
	t.Helper()
	if tc, ok := tradCache[s.name]; ok {
		return tc
	}
	cfg := simulate.DefaultConfig()
	cfg.Seed, cfg.Witnesses, cfg.Units = s.seed, s.witnesses, s.units
	if s.families != nil {
		cfg.Families = s.families
	}
	cfg.Mixed, cfg.BlockMixed, cfg.Fragmentary = s.mixed, s.block, 0
	if s.sections > 0 {
		cfg.Sections = s.sections
	}
	if s.famDiv > 0 {
		cfg.FamilyDivergence, cfg.GroupDivergence = s.famDiv, s.grpDiv
	}
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	// Hold out the first heldPure pure witnesses, in collation order (and the mixed ones if asked).
	var held []string
	pure := 0
	for _, w := range tr.Truth.Witnesses {
		switch {
		case w.Kind == simulate.KindPure && pure < s.heldPure:
			held = append(held, w.Siglum)
			pure++
		case s.holdMixed && (w.Kind == simulate.KindMixed || w.Kind == simulate.KindBlockMixed):
			held = append(held, w.Siglum)
		}
	}
	kept, out, err := tr.Split(held)
	if err != nil {
		t.Fatal(err)
	}
	k := len(tr.Truth.Groups)
	m, rep, err := Train(kept.Collation, model.TrainOptions{Groups: k, Seed: 5}, Options{Seed: 9, Levels: testLevels, Witnesses: 45})
	if err != nil {
		t.Fatal(err)
	}
	dm, err := model.FromProto(m)
	if err != nil {
		t.Fatal(err)
	}
	tc := &tradition{name: s.name, tr: tr, kept: kept, held: out, model: dm, report: rep, toTruth: map[string]int{}, ofTruth: map[int]string{}, numUnits: s.units}
	votes := map[string]map[int]int{}
	for _, tw := range m.TrainingWitnesses {
		wt, ok := kept.Truth.Witness(tw.Witness)
		if !ok {
			t.Fatalf("no truth for %s", tw.Witness)
		}
		if votes[tw.BestGroup] == nil {
			votes[tw.BestGroup] = map[int]int{}
		}
		votes[tw.BestGroup][wt.Group]++
	}
	for g, v := range votes {
		best, n := -1, -1
		for tg, c := range v {
			if c > n || (c == n && tg < best) {
				best, n = tg, c
			}
		}
		tc.toTruth[g] = best
		tc.ofTruth[best] = g
	}
	tradCache[s.name] = tc
	return tc
}

func readings(c *collation.Collation, row []int32) []model.Reading {
	var out []model.Reading
	for u, r := range row {
		if r != collation.Lacuna {
			un := c.Unit(u)
			out = append(out, model.Reading{Unit: un.ID, Reading: un.Readings[r]})
		}
	}
	return out
}

// Ground truth (the simulator): fragments cut at 2, 5, 10, 20 and 40% coverage, as leaves and
// as scattered units, out of pure witnesses held out of training, on three traditions: the
// confidence is calibrated, expected calibration error over 10 bins at most 0.05 over all of them.
func TestCalibrationOnHeldOutWitnesses(t *testing.T) {
	var conf []float64
	var correct []bool
	for _, s := range specs[:3] {
		tc := build(t, s)
		t.Logf("%s: %d calibration fragments, cross-fitted ECE %.3f, train %.2fs, calibration %.2fs (x%.1f)", s.name,
			tc.report.Samples, tc.report.ECE, tc.report.TrainSeconds, tc.report.CalibrationSeconds, tc.report.CalibrationSeconds/tc.report.TrainSeconds)
		c := tc.held.Collation
		rng := rand.New(rand.NewPCG(s.seed, 77))
		nc, nr := 0, 0
		for w := 0; w < c.NumWitnesses(); w++ {
			truth := tc.held.Truth.Witnesses[w].Group
			for _, level := range []float64{0.02, 0.05, 0.1, 0.2, 0.4} {
				n := max(1, int(math.Round(level*float64(c.NumUnits()))))
				for cut := 0; cut < 4; cut++ {
					for _, frag := range [][]int32{simulate.CutContiguous(c.Row(w), n, rng), simulate.CutScattered(c.Row(w), n, rng)} {
						p, err := tc.model.Place(c.Witness(w), readings(c, frag), nil)
						if err != nil {
							continue
						}
						if !p.Calibrated {
							t.Fatal("placement not calibrated")
						}
						ok := p.BestGroup != "" && tc.toTruth[p.BestGroup] == truth
						conf = append(conf, p.Confidence)
						correct = append(correct, ok)
						nc++
						if ok {
							nr++
						}
					}
				}
			}
		}
		t.Logf("%s: %d test fragments, %.1f%% correct", s.name, nc, 100*float64(nr)/float64(nc))
	}
	bins, ece, err := Reliability(conf, correct)
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range bins {
		if b.Count > 0 {
			t.Logf("bin (%.1f, %.1f]: %4d fragments, confidence %.3f, correct %.3f", b.Lo, b.Hi, b.Count, b.Confidence, b.Accuracy)
		}
	}
	brier := 0.0
	for i, c := range conf {
		if correct[i] {
			c = 1 - c
		}
		brier += c * c
	}
	t.Logf("held-out ECE %.4f, Brier score %.4f over %d fragments", ece, brier/float64(len(conf)), len(conf))
	if ece > 0.05 {
		t.Errorf("expected calibration error %.4f > 0.05", ece)
	}
}

// checkingRun simulates a cataloguer who starts from a fragment of a held-out witness and checks
// five more of its extant units at a time, chosen by choose, until the placement is right with
// confidence >= 0.9; it returns the units checked after the start (all remaining ones if never).
func checkingRun(t *testing.T, tc *tradition, w int, start []int, choose func(checked map[int]bool, rd []model.Reading) []int) int {
	c := tc.held.Collation
	row := c.Row(w)
	truth := tc.held.Truth.Witnesses[w].Group
	checked := map[int]bool{}
	var rd []model.Reading
	add := func(u int) {
		if checked[u] || row[u] == collation.Lacuna {
			return
		}
		checked[u] = true
		un := c.Unit(u)
		rd = append(rd, model.Reading{Unit: un.ID, Reading: un.Readings[row[u]]})
	}
	for _, u := range start {
		add(u)
	}
	extra := 0
	for {
		if p, err := tc.model.Place(c.Witness(w), rd, nil); err == nil && p.Confidence >= 0.9 && tc.toTruth[p.BestGroup] == truth {
			return extra
		}
		next := choose(checked, rd)
		if len(next) == 0 {
			return extra
		}
		for _, u := range next {
			add(u)
			extra++
		}
	}
}

func median(v []int) float64 {
	s := append([]int(nil), v...)
	for i := range s {
		for j := i + 1; j < len(s); j++ {
			if s[j] < s[i] {
				s[i], s[j] = s[j], s[i]
			}
		}
	}
	n := len(s)
	if n%2 == 1 {
		return float64(s[n/2])
	}
	return float64(s[n/2-1]+s[n/2]) / 2
}

// Ground truth (the simulator): a cataloguer who starts from a 2%-coverage fragment of a held-out
// witness and checks the suggested units five at a time reaches a correct placement with
// confidence >= 0.9 after at most half the units (median) that checking random units needs.
func TestSuggestionsBeatRandomChecking(t *testing.T) {
	for _, s := range []tradSpec{specs[3]} {
		tc := build(t, s)
		c := tc.held.Collation
		nu := c.NumUnits()
		rng := rand.New(rand.NewPCG(s.seed, 99))
		var sugg, random []int
		for w := 0; w < c.NumWitnesses(); w++ {
			row := c.Row(w)
			var extant []int
			for u, r := range row {
				if r != collation.Lacuna {
					extant = append(extant, u)
				}
			}
			for rep := 0; rep < 3; rep++ {
				frag := simulate.CutScattered(row, max(1, int(math.Round(0.02*float64(nu)))), rng)
				var start []int
				for u, r := range frag {
					if r != collation.Lacuna {
						start = append(start, u)
					}
				}
				unchecked := func(checked map[int]bool) []string {
					var ids []string
					for _, u := range extant {
						if !checked[u] {
							ids = append(ids, c.Unit(u).ID)
						}
					}
					return ids
				}
				ns := checkingRun(t, tc, w, start, func(checked map[int]bool, rd []model.Reading) []int {
					cand := unchecked(checked)
					if len(cand) == 0 {
						return nil
					}
					sg, err := tc.model.Suggest(c.Witness(w), rd, model.SuggestOptions{Top: 5, Candidates: cand})
					if err != nil {
						t.Fatal(err)
					}
					var next []int
					for _, us := range sg.Units {
						u, _ := c.UnitIndex(us.Unit)
						next = append(next, u)
					}
					return next
				})
				nr := checkingRun(t, tc, w, start, func(checked map[int]bool, _ []model.Reading) []int {
					var left []int
					for _, u := range extant {
						if !checked[u] {
							left = append(left, u)
						}
					}
					rng.Shuffle(len(left), func(i, j int) { left[i], left[j] = left[j], left[i] })
					return left[:min(5, len(left))]
				})
				sugg = append(sugg, ns)
				random = append(random, nr)
			}
		}
		ms, mr := median(sugg), median(random)
		t.Logf("%s: %d runs; units checked, median: suggested %.1f, random %.1f", s.name, len(sugg), ms, mr)
		t.Logf("suggested %v\nrandom    %v", sugg, random)
		if mr < 10 {
			t.Fatalf("random checking needs only %.1f units: the tradition is too easy to tell the strategies apart", mr)
		}
		if ms > 0.5*mr {
			t.Errorf("suggested checking needs %.1f units (median), more than half of random checking's %.1f", ms, mr)
		}
	}
}

// Ground truth (the simulator): mixed witnesses held out of training; the mean absolute error of
// the secondary group's share is at most 0.1, and pure held-out witnesses are flagged mixed at
// most 5% of the time.
func TestMixtureShares(t *testing.T) {
	tc := build(t, specs[4])
	c := tc.held.Collation
	var errSum float64
	var nMixed, flaggedMixed, nPure, flaggedPure int
	for w := 0; w < c.NumWitnesses(); w++ {
		wt := tc.held.Truth.Witnesses[w]
		if wt.Kind != simulate.KindMixed && wt.Kind != simulate.KindPure {
			continue
		}
		p, err := tc.model.Place(c.Witness(w), readings(c, c.Row(w)), nil)
		if err != nil {
			t.Fatal(err)
		}
		if wt.Kind == simulate.KindPure {
			nPure++
			if p.Mixed {
				flaggedPure++
			}
			continue
		}
		second := -1
		for g, s := range wt.Shares {
			if g != wt.Group && s > 0 {
				second = g
			}
		}
		est := 0.0
		for _, gs := range p.Groups {
			if tc.toTruth[gs.Group] == second {
				est += gs.Share
			}
		}
		errSum += math.Abs(est - wt.Shares[second])
		nMixed++
		if p.Mixed {
			flaggedMixed++
		}
	}
	if nMixed < 10 || nPure < 20 {
		t.Fatalf("only %d mixed and %d pure held-out witnesses", nMixed, nPure)
	}
	mae := errSum / float64(nMixed)
	t.Logf("%d mixed witnesses: secondary share MAE %.3f, %d flagged mixed; %d pure: %d flagged", nMixed, mae, flaggedMixed, nPure, flaggedPure)
	if mae > 0.1 {
		t.Errorf("secondary share MAE %.3f > 0.1", mae)
	}
	if float64(flaggedPure) > 0.05*float64(nPure) {
		t.Errorf("%d of %d pure witnesses flagged mixed (> 5%%)", flaggedPure, nPure)
	}
}

// Ground truth (the simulator): block-mixed witnesses held out of training are flagged in at
// least 80% of cases with the change placed within one section of the true one; pure held-out
// witnesses are flagged at most 5% of the time.
func TestBlockMixture(t *testing.T) {
	tc := build(t, specs[4])
	c := tc.held.Collation
	sectionIndex := map[string]int{}
	for i, s := range tc.held.Truth.Sections {
		sectionIndex[s] = i
	}
	var nBlock, found, nPure, flaggedPure int
	for w := 0; w < c.NumWitnesses(); w++ {
		wt := tc.held.Truth.Witnesses[w]
		if wt.Kind != simulate.KindBlockMixed && wt.Kind != simulate.KindPure {
			continue
		}
		sp, err := tc.model.PlaceBySection(c.Witness(w), readings(c, c.Row(w)), nil)
		if err != nil {
			t.Fatal(err)
		}
		if wt.Kind == simulate.KindPure {
			nPure++
			if sp.BlockMixture {
				flaggedPure++
				t.Logf("pure %s flagged: %+v", wt.Siglum, sp.Changes)
			}
			continue
		}
		nBlock++
		ok := false
		for _, ch := range sp.Changes {
			if d := sectionIndex[ch.At] - wt.Switch.SectionIndex; d >= -1 && d <= 1 {
				ok = true
			}
		}
		if ok {
			found++
		} else {
			var secs []string
			for _, s := range sp.Sections {
				secs = append(secs, fmt.Sprintf("%s:%s/%.2f", s.Section, s.BestGroup, s.Confidence))
			}
			t.Logf("block-mixed %s (switch at %s, %s -> %s) missed: %v", wt.Siglum, wt.Switch.Section, tc.ofTruth[wt.Group], tc.ofTruth[wt.Switch.To], secs)
		}
	}
	if nBlock < 10 || nPure < 20 {
		t.Fatalf("only %d block-mixed and %d pure held-out witnesses", nBlock, nPure)
	}
	t.Logf("%d block-mixed: %d flagged with the change within one section; %d pure: %d flagged", nBlock, found, nPure, flaggedPure)
	if float64(found) < 0.8*float64(nBlock) {
		t.Errorf("%d of %d block-mixed witnesses found (< 80%%)", found, nBlock)
	}
	if float64(flaggedPure) > 0.05*float64(nPure) {
		t.Errorf("%d of %d pure witnesses flagged (> 5%%)", flaggedPure, nPure)
	}
}

// The training summary's reliability diagram is an SVG document with the diagram's title.
func TestReliabilityPlot(t *testing.T) {
	tc := build(t, specs[0])
	var buf bytes.Buffer
	if err := tc.report.Plot(&buf); err != nil {
		t.Fatal(err)
	}
	out := buf.String()
	if !strings.HasPrefix(strings.TrimSpace(out), "<?xml") || !strings.Contains(out, "<svg") || !strings.Contains(out, "Reliability of the confidence") {
		t.Errorf("not an SVG reliability diagram: %.200s", out)
	}
	if os.Getenv("STRAYLEAF_WRITE_PLOT") != "" {
		if err := os.WriteFile(os.Getenv("STRAYLEAF_WRITE_PLOT"), buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}
