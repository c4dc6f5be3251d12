package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"strayleaf"
	"strayleaf/placement/collation"
	"strayleaf/placement/simulate"
)

// The committed demo files are exactly what the committed command makes: they never drift from
// the simulator.
func TestCommittedDemoIsFresh(t *testing.T) {
	files, err := generate(strayleaf.DemoSeed)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range []struct {
		name      string
		committed []byte
		fresh     []byte
	}{
		{"collation.csv", strayleaf.DemoCollation, files.Collation},
		{"fragments.csv", strayleaf.DemoFragments, files.Fragments},
		{"truth.json", strayleaf.DemoTruth, files.Truth},
	} {
		if !bytes.Equal(f.committed, f.fresh) {
			t.Errorf("testdata/demo/%s differs from a fresh generation; run %s", f.name, demoCommand())
		}
	}
	cmd := []byte(demoCommand())
	if !bytes.Contains(strayleaf.DemoReadme, cmd) {
		t.Errorf("testdata/demo/README.md does not give the command %q", cmd)
	}
	if !bytes.Contains([]byte(strayleaf.DemoDescription), []byte(fmt.Sprint("seed ", strayleaf.DemoSeed))) {
		t.Errorf("DemoDescription does not name seed %d", strayleaf.DemoSeed)
	}
}

func demoCommand() string {
	return fmt.Sprintf("go run ./placement/simulate/cmd/simdemo -seed %d -out testdata/demo", strayleaf.DemoSeed)
}

// The demo holds what its README promises.
func TestDemoShape(t *testing.T) {
	c, err := collation.ReadCSV(bytes.NewReader(strayleaf.DemoCollation), "collation.csv")
	if err != nil {
		t.Fatal(err)
	}
	frags, err := collation.ReadCSV(bytes.NewReader(strayleaf.DemoFragments), "fragments.csv")
	if err != nil {
		t.Fatal(err)
	}
	truth, err := simulate.ReadTruth(bytes.NewReader(strayleaf.DemoTruth))
	if err != nil {
		t.Fatal(err)
	}
	if c.NumWitnesses() != 90 || c.NumUnits() != 240 || len(c.Sections()) != 6 || len(truth.Groups) != 5 {
		t.Errorf("collation has %d witnesses, %d units, %d sections, %d groups; README says 90, 240, 6, 5",
			c.NumWitnesses(), c.NumUnits(), len(c.Sections()), len(truth.Groups))
	}
	if len(truth.Witnesses) != c.NumWitnesses() || len(truth.Fragments) != frags.NumWitnesses() {
		t.Fatalf("truth has %d witnesses and %d fragments for %d and %d", len(truth.Witnesses), len(truth.Fragments), c.NumWitnesses(), frags.NumWitnesses())
	}
	kinds := map[simulate.Kind]int{}
	for _, wt := range truth.Witnesses {
		w, ok := c.WitnessIndex(wt.Siglum)
		if !ok {
			t.Fatalf("truth names %s, not in the collation", wt.Siglum)
		}
		if c.Extant(w) != wt.Extant {
			t.Errorf("%s: %d units extant in the CSV, %d in the truth", wt.Siglum, c.Extant(w), wt.Extant)
		}
		kinds[wt.Kind]++
	}
	if kinds[simulate.KindMixed] < 2 || kinds[simulate.KindBlockMixed] < 2 || kinds[simulate.KindFragmentary] < 2 {
		t.Errorf("kinds %v; the demo should have a few mixed, block-mixed and fragmentary witnesses", kinds)
	}
	if n := frags.NumWitnesses(); n < 6 || n > 10 {
		t.Errorf("%d fragments; expected 6 to 10", n)
	}
	for _, ft := range truth.Fragments {
		w, ok := frags.WitnessIndex(ft.Siglum)
		if !ok {
			t.Fatalf("fragment truth names %s, not in fragments.csv", ft.Siglum)
		}
		if _, clash := c.WitnessIndex(ft.Siglum); clash {
			t.Errorf("fragment %s has the siglum of a collated witness", ft.Siglum)
		}
		if n := frags.Extant(w); n != ft.Extant || n < 20 || n > 60 {
			t.Errorf("fragment %s has %d units (truth %d); expected a few dozen", ft.Siglum, n, ft.Extant)
		}
		// Its units and readings are those of the collation's text.
		for u := range frags.NumUnits() {
			r := frags.Reading(w, u)
			if r == collation.Lacuna {
				continue
			}
			unit := frags.Unit(u)
			if _, ok := c.UnitIndex(unit.ID); !ok {
				t.Errorf("fragment %s has unit %s, not in the collation", ft.Siglum, unit.ID)
			}
		}
	}
}

func TestRunWritesTheFiles(t *testing.T) {
	dir := t.TempDir()
	if err := run(strayleaf.DemoSeed, dir); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(filepath.Join(dir, "fragments.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, strayleaf.DemoFragments) {
		t.Error("run wrote other fragments than generate makes")
	}
	for _, name := range []string{"collation.csv", "truth.json"} {
		if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
			t.Error(err)
		}
	}
}
