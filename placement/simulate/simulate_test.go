package simulate

import (
	"bytes"
	"math"
	"reflect"
	"runtime"
	"strings"
	"testing"

	"strayleaf/placement/collation"
)

// smallConfig is a tradition small enough for quick tests but with every kind of witness.
func smallConfig(seed uint64) Config {
	cfg := DefaultConfig()
	cfg.Seed = seed
	cfg.Witnesses = 48
	cfg.Units = 160
	cfg.Mixed = 0.1
	cfg.BlockMixed = 0.1
	cfg.Fragmentary = 0.1
	cfg.LacunaRuns = 1.5
	return cfg
}

func mustSimulate(t *testing.T, cfg Config) *Tradition {
	t.Helper()
	tr, err := Simulate(cfg)
	if err != nil {
		t.Fatalf("Simulate: %v", err)
	}
	return tr
}

func render(t *testing.T, tr *Tradition) (csv, truth []byte) {
	t.Helper()
	var a, b bytes.Buffer
	if err := collation.WriteCSV(&a, tr.Collation); err != nil {
		t.Fatal(err)
	}
	if err := tr.WriteTruth(&b); err != nil {
		t.Fatal(err)
	}
	return a.Bytes(), b.Bytes()
}

func TestSameSeedSameBytes(t *testing.T) {
	csv1, truth1 := render(t, mustSimulate(t, smallConfig(7)))
	prev := runtime.GOMAXPROCS(1)
	csv2, truth2 := render(t, mustSimulate(t, smallConfig(7)))
	runtime.GOMAXPROCS(prev)
	if !bytes.Equal(csv1, csv2) || !bytes.Equal(truth1, truth2) {
		t.Fatal("the same seed gave different output")
	}
	csv3, truth3 := render(t, mustSimulate(t, smallConfig(8)))
	if bytes.Equal(csv1, csv3) || bytes.Equal(truth1, truth3) {
		t.Fatal("different seeds gave the same output")
	}
}

// meanAgreement is witness w's mean agreement with the pure witnesses of group g (w itself left
// out) over units [lo, hi), agreement being the share of units with the same reading among the
// units at which both are extant (common practice; collation.Agreement).
func meanAgreement(tr *Tradition, w, g, lo, hi int) float64 {
	c := tr.Collation
	sum, n := 0.0, 0
	for v, wt := range tr.Truth.Witnesses {
		if v == w || wt.Group != g || wt.Kind != KindPure {
			continue
		}
		if agree, compared := collation.Agreement(c.Row(w)[lo:hi], c.Row(v)[lo:hi]); compared > 0 {
			sum += float64(agree) / float64(compared)
			n++
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return sum / float64(n)
}

func TestPureWitnessesAgreeMostWithTheirOwnGroup(t *testing.T) {
	for seed := uint64(1); seed <= 3; seed++ {
		tr := mustSimulate(t, smallConfig(seed))
		nu := tr.Collation.NumUnits()
		for w, wt := range tr.Truth.Witnesses {
			if wt.Kind != KindPure {
				continue
			}
			own := meanAgreement(tr, w, wt.Group, 0, nu)
			if own < 0.85 {
				t.Errorf("seed %d: pure witness %s agrees %.3f with its own group; expected about 1 - 2*scribal_rate", seed, wt.Siglum, own)
			}
			for g := range tr.Truth.Groups {
				if g == wt.Group {
					continue
				}
				if other := meanAgreement(tr, w, g, 0, nu); !(own > other) {
					t.Errorf("seed %d: pure witness %s agrees %.3f with its own group %d and %.3f with group %d", seed, wt.Siglum, own, wt.Group, other, g)
				}
			}
		}
	}
}

func TestBlockMixedWitnessesFollowTheirExemplarsSectionBySection(t *testing.T) {
	checked := 0
	for seed := uint64(1); seed <= 3; seed++ {
		tr := mustSimulate(t, smallConfig(seed))
		nu := tr.Collation.NumUnits()
		for w, wt := range tr.Truth.Witnesses {
			if wt.Kind != KindBlockMixed {
				continue
			}
			sw := wt.Switch
			if sw == nil {
				t.Fatalf("seed %d: block-mixed witness %s has no switch", seed, wt.Siglum)
			}
			if sw.Section != tr.Truth.Sections[sw.SectionIndex] || tr.Collation.Unit(sw.Unit).Section != sw.Section ||
				(sw.Unit > 0 && tr.Collation.Unit(sw.Unit-1).Section == sw.Section) {
				t.Fatalf("seed %d: switch %+v of %s does not fall at the start of its section", seed, sw, wt.Siglum)
			}
			a1, b1 := meanAgreement(tr, w, sw.From, 0, sw.Unit), meanAgreement(tr, w, sw.To, 0, sw.Unit)
			a2, b2 := meanAgreement(tr, w, sw.From, sw.Unit, nu), meanAgreement(tr, w, sw.To, sw.Unit, nu)
			if !(a1 > b1 && b2 > a2) {
				t.Errorf("seed %d: block-mixed %s (group %d, then %d from section %s): before the switch %.3f vs %.3f, after %.3f vs %.3f",
					seed, wt.Siglum, sw.From, sw.To, sw.Section, a1, b1, a2, b2)
			}
			wantEarly := float64(sw.Unit) / float64(nu)
			if sw.From == sw.To || math.Abs(wt.Shares[sw.From]-wantEarly) > 1e-12 || math.Abs(wt.Shares[sw.To]-(1-wantEarly)) > 1e-12 {
				t.Errorf("seed %d: block-mixed %s (%d then %d) shares %v; expected %.3f and %.3f", seed, wt.Siglum, sw.From, sw.To, wt.Shares, wantEarly, 1-wantEarly)
			}
			if primary := map[bool]int{true: sw.From, false: sw.To}[wantEarly >= 0.5]; wt.Group != primary {
				t.Errorf("seed %d: block-mixed %s has group %d; the larger share is group %d's", seed, wt.Siglum, wt.Group, primary)
			}
			checked++
		}
	}
	if checked == 0 {
		t.Fatal("no block-mixed witness was simulated")
	}
}

func TestMixedWitnessesDrawTheirShare(t *testing.T) {
	checked := 0
	for seed := uint64(1); seed <= 3; seed++ {
		tr := mustSimulate(t, smallConfig(seed))
		nu := tr.Collation.NumUnits()
		for w, wt := range tr.Truth.Witnesses {
			if wt.Kind != KindMixed {
				continue
			}
			second := -1
			for g, s := range wt.Shares {
				if g != wt.Group && s > 0 {
					second = g
				}
			}
			if second < 0 {
				t.Fatalf("seed %d: mixed witness %s has shares %v", seed, wt.Siglum, wt.Shares)
			}
			s := wt.Shares[second]
			if s < 0.2 || s > 0.5 || wt.Shares[wt.Group] < s {
				t.Errorf("seed %d: mixed %s shares %v outside the configured mixture range", seed, wt.Siglum, wt.Shares)
			}
			// Each extant unit came from the second exemplar with probability s: the realised
			// count is Binomial(extant, s); allow 4 standard deviations.
			n := float64(wt.Extant)
			if got := float64(wt.Drawn[second]); math.Abs(got-n*s) > 4*math.Sqrt(n*s*(1-s)) {
				t.Errorf("seed %d: mixed %s drew %v of %v units from group %d; expected about %.1f", seed, wt.Siglum, got, n, second, n*s)
			}
			// It agrees with the second group more than its own group's pure members do.
			mine := meanAgreement(tr, w, second, 0, nu)
			sum, k := 0.0, 0
			for v, vt := range tr.Truth.Witnesses {
				if vt.Kind == KindPure && vt.Group == wt.Group {
					sum += meanAgreement(tr, v, second, 0, nu)
					k++
				}
			}
			if !(mine > sum/float64(k)) {
				t.Errorf("seed %d: mixed %s agrees %.3f with group %d, no more than pure members of its group (%.3f)", seed, wt.Siglum, mine, second, sum/float64(k))
			}
			checked++
		}
	}
	if checked == 0 {
		t.Fatal("no mixed witness was simulated")
	}
}

func TestTruthHangsTogether(t *testing.T) {
	cfg := smallConfig(5)
	tr := mustSimulate(t, cfg)
	c := tr.Collation
	if c.NumWitnesses() != cfg.Witnesses || c.NumUnits() != cfg.Units || len(tr.Truth.Witnesses) != cfg.Witnesses {
		t.Fatalf("got %d witnesses, %d units, %d truths", c.NumWitnesses(), c.NumUnits(), len(tr.Truth.Witnesses))
	}
	if got := c.Sections(); !reflect.DeepEqual(got, []string{"1", "2", "3", "4"}) {
		t.Errorf("sections %v", got)
	}
	kinds := map[Kind]int{}
	members := make([]int, len(tr.Truth.Groups))
	planned := make([]int, len(tr.Truth.Groups)) // by the group each witness was first copied from
	for w, wt := range tr.Truth.Witnesses {
		kinds[wt.Kind]++
		members[wt.Group]++
		if wt.Switch != nil {
			planned[wt.Switch.From]++
		} else {
			planned[wt.Group]++
		}
		if wt.Siglum != c.Witness(w) {
			t.Errorf("truth %d is for %s, collation witness %d is %s", w, wt.Siglum, w, c.Witness(w))
		}
		sum, drawn := 0.0, 0
		for g := range wt.Shares {
			sum += wt.Shares[g]
			drawn += wt.Drawn[g]
		}
		if math.Abs(sum-1) > 1e-9 {
			t.Errorf("%s: shares %v sum to %g", wt.Siglum, wt.Shares, sum)
		}
		if drawn != wt.Extant || wt.Extant != c.Extant(w) {
			t.Errorf("%s: drawn %v, extant %d, collation extant %d", wt.Siglum, wt.Drawn, wt.Extant, c.Extant(w))
		}
		fromSources := make([]int, len(wt.Drawn))
		for u, g := range tr.Sources[w] {
			if c.Reading(w, u) != collation.Lacuna {
				fromSources[g]++
			}
		}
		if !reflect.DeepEqual(fromSources, wt.Drawn) {
			t.Errorf("%s: drawn %v, sources give %v", wt.Siglum, wt.Drawn, fromSources)
		}
		if (wt.Kind == KindPure || wt.Kind == KindFragmentary) && wt.Shares[wt.Group] != 1 {
			t.Errorf("%s (%s): shares %v", wt.Siglum, wt.Kind, wt.Shares)
		}
	}
	for g, gt := range tr.Truth.Groups {
		if gt.Members != members[g] {
			t.Errorf("group %s: %d members recorded, %d found", gt.Name, gt.Members, members[g])
		}
	}
	// 48 witnesses: 60% in a1-a3 (9.6 each), 25% in b (12), 15% in c (7.2), by largest remainder.
	if got := planned; !reflect.DeepEqual(got, []int{10, 10, 9, 12, 7}) {
		t.Errorf("group sizes %v, expected [10 10 9 12 7]", got)
	}
	names := []string{tr.Truth.Groups[0].Name, tr.Truth.Groups[3].Name, tr.Truth.Groups[4].Name}
	if !reflect.DeepEqual(names, []string{"a1", "b", "c"}) || tr.Truth.Groups[2].Family != 0 || tr.Truth.Groups[3].Family != 1 {
		t.Errorf("groups %+v", tr.Truth.Groups)
	}
	want := map[Kind]int{KindPure: 48 - 15, KindMixed: 5, KindBlockMixed: 5, KindFragmentary: 5}
	if !reflect.DeepEqual(kinds, want) {
		t.Errorf("kinds %v, expected %v", kinds, want)
	}
	// Nearly every unit is a real variation unit: at least two readings each shared by two
	// witnesses (a departing exemplar with few copies can be blurred by copyists' changes).
	informative := 0
	for u := 0; u < c.NumUnits(); u++ {
		shared := 0
		for _, s := range c.Support(u) {
			if s >= 2 {
				shared++
			}
		}
		if shared >= 2 {
			informative++
		}
	}
	if informative < c.NumUnits()*9/10 {
		t.Errorf("%d of %d units have two shared readings", informative, c.NumUnits())
	}
}

func TestLacunaeAreContiguousRuns(t *testing.T) {
	tr := mustSimulate(t, smallConfig(11))
	total := 0
	for w, wt := range tr.Truth.Witnesses {
		if wt.Kind == KindFragmentary {
			if wt.Lacunae != nil {
				t.Errorf("fragmentary %s has lacunae recorded", wt.Siglum)
			}
			continue
		}
		row := tr.Collation.Row(w)
		for i, r := range wt.Lacunae {
			if r.Len() < 1 || (i > 0 && r.Start <= wt.Lacunae[i-1].End) {
				t.Errorf("%s: lacunae %v are not disjoint separated runs", wt.Siglum, wt.Lacunae)
			}
			total += r.Len()
		}
		// Every cell inside a recorded run is a lacuna and every cell outside has a reading.
		if got := LacunaRuns(row); !reflect.DeepEqual(got, wt.Lacunae) {
			t.Errorf("%s: lacunae in the row %v, recorded %v", wt.Siglum, got, wt.Lacunae)
		}
	}
	if total == 0 {
		t.Error("no lacuna was simulated")
	}
}

func TestFragmentCoverageAsConfigured(t *testing.T) {
	cfg := smallConfig(3)
	cfg.Fragmentary = 0.2
	cfg.ScatteredShare = 0.5
	tr := mustSimulate(t, cfg)
	lo := int(math.Round(cfg.FragmentMin * float64(cfg.Units)))
	hi := int(math.Round(cfg.FragmentMax * float64(cfg.Units)))
	forms := map[string]int{}
	for w, wt := range tr.Truth.Witnesses {
		if wt.Kind != KindFragmentary {
			continue
		}
		n := tr.Collation.Extant(w)
		if n < lo || n > hi {
			t.Errorf("fragmentary %s keeps %d units; configured %d..%d", wt.Siglum, n, lo, hi)
		}
		runs := ExtantRuns(tr.Collation.Row(w))
		forms[wt.Fragment.Form]++
		switch wt.Fragment.Form {
		case FormLeaf:
			if len(runs) != 1 || !reflect.DeepEqual(runs, wt.Fragment.Runs) {
				t.Errorf("leaf %s: extant runs %v, recorded %v", wt.Siglum, runs, wt.Fragment.Runs)
			}
		case FormScattered:
			if len(runs) < 2 {
				t.Errorf("scattered %s has extant runs %v", wt.Siglum, runs)
			}
		default:
			t.Errorf("%s has form %q", wt.Siglum, wt.Fragment.Form)
		}
	}
	if forms[FormLeaf] == 0 || forms[FormScattered] == 0 || forms[FormLeaf]+forms[FormScattered] != 10 {
		t.Errorf("fragment forms %v; expected 10 fragments of both forms", forms)
	}
}

func TestTruthRoundTrip(t *testing.T) {
	tr := mustSimulate(t, smallConfig(2))
	var buf bytes.Buffer
	if err := tr.WriteTruth(&buf); err != nil {
		t.Fatal(err)
	}
	got, err := ReadTruth(&buf)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(*got, tr.Truth) {
		t.Error("truth read back differs from truth written")
	}
	if _, err := ReadTruth(strings.NewReader(`{"groups":[{"name":"a"}],"witnesses":[{"siglum":"X","group":3,"shares":[1]}]}`)); err == nil || !strings.Contains(err.Error(), "group 3") {
		t.Errorf("bad group index: err %v", err)
	}
	if _, err := ReadTruth(strings.NewReader(`{"colour":1}`)); err == nil {
		t.Error("unknown field accepted")
	}
}

func TestConfigValidation(t *testing.T) {
	if err := DefaultConfig().Validate(); err != nil {
		t.Fatalf("default config: %v", err)
	}
	cases := []struct {
		name   string
		change func(*Config)
		want   string
	}{
		{"few units", func(c *Config) { c.Units = 1 }, "units is 1"},
		{"too many sections", func(c *Config) { c.Sections = 500 }, "sections is 500"},
		{"section names", func(c *Config) { c.SectionNames = []string{"x"} }, "section_names has 1 names"},
		{"duplicate section names", func(c *Config) { c.SectionNames = []string{"x", "y", "x", "z"} }, `"x" is given twice`},
		{"one reading", func(c *Config) { c.Readings = 1 }, "readings is 1"},
		{"no families", func(c *Config) { c.Families = nil }, "families is empty"},
		{"empty family", func(c *Config) { c.Families[1].Groups = 0 }, "family 1 has 0 groups"},
		{"bad family share", func(c *Config) { c.Families[0].Share = -1 }, "family 0 has share -1"},
		{"group names", func(c *Config) { c.GroupNames = []string{"p"} }, "group_names has 1 names for 5 groups"},
		{"rate above 1", func(c *Config) { c.ScribalRate = 1.5 }, "scribal_rate is 1.5"},
		{"NaN rate", func(c *Config) { c.Mixed = math.NaN() }, "mixed is NaN"},
		{"no divergence", func(c *Config) { c.FamilyDivergence, c.GroupDivergence = 0, 0 }, "too small"},
		{"tiny divergence", func(c *Config) { c.FamilyDivergence, c.GroupDivergence = 0, 1e-6 }, "too small"},
		{"mixture range without a hundredth", func(c *Config) { c.MixtureMin, c.MixtureMax = 0.201, 0.209 }, "mixture range"},
		{"mixture above half", func(c *Config) { c.MixtureMax = 0.7 }, "mixture range"},
		{"fragment range", func(c *Config) { c.FragmentMin = 0.5; c.FragmentMax = 0.2 }, "fragment range"},
		{"lacuna length", func(c *Config) { c.LacunaMaxLen = 0 }, "lacuna_max_len is 0"},
		{"sigla count", func(c *Config) { c.Sigla = []string{"A"} }, "sigla has 1 sigla for 60 witnesses"},
		{"block mixture in one section", func(c *Config) { c.Sections = 1 }, "needs at least 2 sections"},
		{"mixture in one group", func(c *Config) { c.Families = []Family{{Groups: 1, Share: 1}} }, "need at least 2 groups"},
		{"tiny group", func(c *Config) { c.Families[2].Share = 0.01 }, "group 4 gets 1 witnesses"},
		{"too many special", func(c *Config) { c.Fragmentary = 0.9 }, "can be spared"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := DefaultConfig()
			cfg.Families = append([]Family(nil), cfg.Families...)
			tc.change(&cfg)
			err := cfg.Validate()
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("err = %v; want it to mention %q", err, tc.want)
			}
			if _, err := Simulate(cfg); err == nil {
				t.Fatal("Simulate accepted an invalid config")
			}
		})
	}
}

// duplicateLabels names every reading alike.
type duplicateLabels struct{ PlainLabels }

func (duplicateLabels) Reading(int, int) string { return "same" }

func TestLabellerMustNameReadingsApart(t *testing.T) {
	cfg := smallConfig(1)
	cfg.Labels = duplicateLabels{}
	if _, err := Simulate(cfg); err == nil || !strings.Contains(err.Error(), "given twice") {
		t.Fatalf("err = %v", err)
	}
}
