package rank

import (
	"bytes"
	"encoding/xml"
	"math"
	"runtime"
	"strings"
	"testing"

	"strayleaf/placement/prepare"
	"strayleaf/placement/simulate"
)

// TestSparseness checks Hoyer's formula (Hoyer 2004, JMLR 5, from memory) at its ends and on a
// value worked by hand: for (1, 2), sqrt(2) - 3/sqrt(5) over sqrt(2) - 1.
func TestSparseness(t *testing.T) {
	cases := []struct {
		x    []float64
		want float64
	}{
		{[]float64{0, 0, 3, 0}, 1},
		{[]float64{2, 2, 2, 2}, 0},
		{[]float64{-1, 1}, 0},
		{[]float64{1, 2}, (math.Sqrt2 - 3/math.Sqrt(5)) / (math.Sqrt2 - 1)},
	}
	for _, c := range cases {
		got, ok := Sparseness(c.x)
		if !ok || math.Abs(got-c.want) > 1e-15 {
			t.Errorf("Sparseness(%v) = %v, %v; expected %v", c.x, got, ok, c.want)
		}
	}
	for _, x := range [][]float64{{0, 0, 0}, {5}, nil} {
		if _, ok := Sparseness(x); ok {
			t.Errorf("Sparseness(%v) is defined", x)
		}
	}
}

// TestConsensusAndDispersion: the consensus matrix is the mean connectivity (Brunet et al. 2004)
// and the dispersion (1/n^2) sum 4 (C_ij - 1/2)^2 (Kim & Park 2007), worked by hand for three
// items over two groupings.
func TestConsensusAndDispersion(t *testing.T) {
	c := NewConsensus(3)
	if err := c.Add([]int{0, 0, 1}); err != nil {
		t.Fatal(err)
	}
	if err := c.Add([]int{5, 7, 7}); err != nil {
		t.Fatal(err)
	}
	want := [3][3]float64{{1, 0.5, 0}, {0.5, 1, 0.5}, {0, 0.5, 1}}
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			if c.At(i, j) != want[i][j] {
				t.Errorf("C[%d][%d] = %g; expected %g", i, j, c.At(i, j), want[i][j])
			}
		}
	}
	// Diagonal 3 x 1, the two pairs at 0 contribute 2 x 1, the four entries at 1/2 nothing.
	if d := c.Dispersion(); math.Abs(d-5.0/9) > 1e-15 {
		t.Errorf("dispersion %g; expected 5/9", d)
	}
	// An item with no group (-1) is together with nobody, not even another -1.
	u := NewConsensus(3)
	_ = u.Add([]int{-1, -1, 0})
	if u.At(0, 1) != 0 || u.At(0, 0) != 1 {
		t.Errorf("unassigned items: C01 = %g, C00 = %g", u.At(0, 1), u.At(0, 0))
	}
	if err := u.Add([]int{1}); err == nil {
		t.Error("grouping of the wrong length: no error")
	}
	// Identical groupings: cophenetic correlation and dispersion are 1.
	s := NewConsensus(6)
	for r := 0; r < 3; r++ {
		_ = s.Add([]int{0, 0, 1, 1, 2, 2})
	}
	if coph, err := s.Cophenetic(); err != nil || math.Abs(coph-1) > 1e-15 || s.Dispersion() != 1 {
		t.Errorf("identical groupings: cophenetic %g (%v), dispersion %g", coph, err, s.Dispersion())
	}
}

func TestAssign(t *testing.T) {
	H := matOf([][]float64{{0.1, 0, 2, 0}, {0.3, 0, 2, 0}, {0.2, 0, 1, 0.5}})
	got := Assign(H)
	for j, want := range []int{1, -1, 0, 2} {
		if got[j] != want {
			t.Errorf("column %d assigned %d; expected %d", j, got[j], want)
		}
	}
}

// TestRecommend checks the rule on made-up measures: the stable k with the largest elbow score,
// falling back to the largest elbow score when nothing is stable.
func TestRecommend(t *testing.T) {
	mk := func(obj []float64, coph, disp []float64) []KResult {
		ks := make([]KResult, len(obj))
		for i := range ks {
			ks[i] = KResult{K: i + 2, Objective: obj[i], Cophenetic: coph[i], Dispersion: disp[i]}
		}
		elbows(100, ks)
		return ks
	}
	// k = 2..7 with gains 40, 20, 20, 2, 2, 1 from the base 100: the elbow is at k = 4, with
	// score 20 / mean(2, 2, 1) = 12; k = 2 scores 40 / mean(20, 20, 2, 2, 1) = 4.44.
	obj := []float64{60, 40, 20, 18, 16, 15}
	all := []float64{1, 1, 1, 1, 1, 1}
	ks := mk(obj, all, all)
	if math.Abs(ks[2].Elbow-12) > 1e-12 || math.Abs(ks[0].Elbow-40/9.0) > 1e-12 || !math.IsNaN(ks[5].Elbow) {
		t.Errorf("elbow scores %v", []float64{ks[0].Elbow, ks[2].Elbow, ks[5].Elbow})
	}
	if k, why := Recommend(ks, DefaultRule()); k != 4 || !strings.Contains(why, "stable") {
		t.Errorf("recommended %d (%s); expected 4", k, why)
	}
	// k = 4 unstable (cophenetic correlation 0.5): the next best stable elbow, k = 2.
	ks = mk(obj, []float64{1, 1, 0.5, 1, 1, 1}, all)
	if k, _ := Recommend(ks, DefaultRule()); k != 2 {
		t.Errorf("with k = 4 unstable, recommended %d; expected 2", k)
	}
	// Nothing stable (dispersion 0.5 everywhere): the largest elbow anyway, and the reason says so.
	low := []float64{0.5, 0.5, 0.5, 0.5, 0.5, 0.5}
	if k, why := Recommend(mk(obj, all, low), DefaultRule()); k != 4 || !strings.Contains(why, "disagree") {
		t.Errorf("nothing stable: %d (%s)", k, why)
	}
	if k, _ := Recommend(mk([]float64{50}, []float64{1}, []float64{1}), DefaultRule()); k != 2 {
		t.Errorf("single k: %d", k)
	}
}

// simulated returns the prepared matrices of an invented tradition (package simulate) and its
// true number of groups.
func simulated(t *testing.T, cfg simulate.Config) (*prepare.Prepared, int) {
	t.Helper()
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	p, err := prepare.Prepare(tr.Collation, prepare.DefaultOptions())
	if err != nil {
		t.Fatal(err)
	}
	return p, cfg.NumGroups()
}

// TestSweepFindsSimulatedGroups: on a simulated tradition of five groups (three sub-groups of one
// family and two further families, with mixed, block-mixed and fragmentary witnesses and
// lacunae) the rule recovers the number of groups, within one.
func TestSweepFindsSimulatedGroups(t *testing.T) {
	cfg := simulate.DefaultConfig()
	cfg.Units = 120
	p, groups := simulated(t, cfg)
	var calls, total int
	res, err := Sweep(p.X, p.M, 3, 7, 4, SweepOptions(), func(done, tot int) { calls, total = done, tot })
	if err != nil {
		t.Fatal(err)
	}
	if total != 6*4 || calls != total { // k = 2..7, k = 2 for the gain of k = 3
		t.Errorf("progress ended at %d of %d; expected 24 of 24", calls, total)
	}
	for _, kr := range res.Ks {
		t.Logf("k=%d objective %.1f gain %.1f elbow %.3g cophenetic %.4f dispersion %.4f sparseness W %.3f H %.3f",
			kr.K, kr.Objective, kr.Gain, kr.Elbow, kr.Cophenetic, kr.Dispersion, kr.SparsenessW, kr.SparsenessH)
	}
	t.Log(res.Reason)
	if d := res.Recommended - groups; d < -1 || d > 1 {
		t.Errorf("recommended k = %d for %d simulated groups", res.Recommended, groups)
	}
	if res.BaseK != 2 || !(res.BaseObjective > res.Ks[0].Objective) {
		t.Errorf("base k %d objective %g; k = 2 objective %g", res.BaseK, res.BaseObjective, res.Ks[0].Objective)
	}
	for i, kr := range res.Ks {
		if kr.Consensus.Runs() != 4 || len(kr.Objectives) != 4 || kr.Best == nil || kr.Best.Objective != kr.Objective {
			t.Fatalf("k = %d: %d runs in the consensus, %d objectives", kr.K, kr.Consensus.Runs(), len(kr.Objectives))
		}
		if i > 0 && kr.Objective > res.Ks[i-1].Objective*1.001 {
			t.Errorf("best objective rose from k = %d to %d: %g -> %g", kr.K-1, kr.K, res.Ks[i-1].Objective, kr.Objective)
		}
	}

	var svg bytes.Buffer
	if err := res.Plot(&svg); err != nil {
		t.Fatal(err)
	}
	dec := xml.NewDecoder(bytes.NewReader(svg.Bytes()))
	for {
		if _, err := dec.Token(); err != nil {
			if err.Error() != "EOF" {
				t.Fatalf("plot is not well-formed XML: %v", err)
			}
			break
		}
	}
	if !bytes.Contains(svg.Bytes(), []byte("<svg")) {
		t.Error("plot has no <svg> element")
	}
}

// TestSweepSameWhateverGOMAXPROCS: a sweep gives the same figures with one core and with two.
func TestSweepSameWhateverGOMAXPROCS(t *testing.T) {
	cfg := simulate.DefaultConfig()
	cfg.Witnesses, cfg.Units, cfg.Seed = 40, 80, 3
	p, _ := simulated(t, cfg)
	run := func(procs int) *SweepResult {
		old := runtime.GOMAXPROCS(procs)
		defer runtime.GOMAXPROCS(old)
		opt := SweepOptions()
		opt.Seed = 11
		res, err := Sweep(p.X, p.M, 3, 5, 3, opt, nil)
		if err != nil {
			t.Fatal(err)
		}
		return res
	}
	a, b := run(1), run(2)
	if a.Recommended != b.Recommended || a.BaseObjective != b.BaseObjective {
		t.Fatalf("recommended %d vs %d, base %v vs %v", a.Recommended, b.Recommended, a.BaseObjective, b.BaseObjective)
	}
	for i := range a.Ks {
		x, y := a.Ks[i], b.Ks[i]
		if x.Objective != y.Objective || x.Cophenetic != y.Cophenetic || x.Dispersion != y.Dispersion ||
			x.SparsenessW != y.SparsenessW || x.SparsenessH != y.SparsenessH {
			t.Errorf("k = %d differs: %+v vs %+v", x.K, x, y)
		}
		for r := range x.Objectives {
			if x.Objectives[r] != y.Objectives[r] {
				t.Errorf("k = %d start %d: %v vs %v", x.K, r, x.Objectives[r], y.Objectives[r])
			}
		}
	}
}

func TestSweepBadInput(t *testing.T) {
	p, _ := simulated(t, simulate.DefaultConfig())
	opt := SweepOptions()
	for _, c := range []struct {
		name             string
		kMin, kMax, runs int
	}{{"k_min 0", 0, 3, 3}, {"k_max < k_min", 4, 3, 3}, {"one start", 2, 3, 1}} {
		if _, err := Sweep(p.X, p.M, c.kMin, c.kMax, c.runs, opt, nil); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
	if _, err := Sweep(nil, nil, 2, 3, 3, opt, nil); err == nil {
		t.Error("nil X: no error")
	}
}
