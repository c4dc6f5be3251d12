package tei_test

// The same collation read from its CSV form and from its TEI form must give the same model.
//
// Order rules that make the two paths read identically (documented in collation.WriteCSV,
// collation.ReadCSV, WriteApparatus and Read):
//   - witnesses: ReadCSV takes them in order of first appearance; WriteApparatus declares them in
//     the collation's order and Read keeps declaration order;
//   - units: ReadCSV in order of first appearance, WriteCSV unit by unit; WriteApparatus writes
//     one <app> per unit in order and Read keeps the order of the start tags;
//   - readings: WriteCSV writes the first witness of each reading first, readings in order, so
//     ReadCSV gets them back in order; WriteApparatus writes one <rdg> per reading in order and
//     Read keeps document order;
//   - sections: the CSV section column; a <div n> around each run of units of one section.
// So simulated tradition -> CSV -> collation A -> TEI -> collation B gives B identical to A, and
// training is deterministic for a given seed (package nmf), so the models must be equal bit for
// bit.

import (
	"bytes"
	"fmt"
	"math"
	"reflect"
	"testing"

	"google.golang.org/protobuf/proto"

	"strayleaf/placement/collation"
	"strayleaf/placement/model"
	"strayleaf/placement/simulate"
	"strayleaf/placement/tei"
)

func TestCSVAndTEIGiveTheSameModel(t *testing.T) {
	for _, tc := range []struct {
		name   string
		sigla  func(n int) []string
		words  bool
		teiOpt tei.Options
	}{
		{name: "plain labels", teiOpt: tei.Options{}},
		// Sigla that are not XML names go to @n (read with SiglumAttr "n"); word labels with
		// spelling variants; the CLI's default merge map (no @type is written, so it changes
		// nothing).
		{name: "numeric sigla, word labels", words: true,
			sigla: func(n int) []string {
				s := make([]string, n)
				for i := range s {
					s[i] = fmt.Sprintf("%03d", i+1)
				}
				return s
			},
			teiOpt: tei.Options{SiglumAttr: "n", TypeActions: map[string]tei.Action{"orthographic": tei.Merge, "nonsense": tei.Merge}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cfg := simulate.DefaultConfig()
			cfg.Seed = 11
			cfg.Witnesses, cfg.Units = 48, 160
			if tc.sigla != nil {
				cfg.Sigla = tc.sigla(cfg.Witnesses)
			}
			if tc.words {
				cfg.SectionNames = []string{"oak", "fen", "mire", "heath"}
				cfg.Labels = simulate.NewWordLabels(cfg.Seed, cfg.SectionNames)
			}
			tr, err := simulate.Simulate(cfg)
			if err != nil {
				t.Fatal(err)
			}
			var csvBuf bytes.Buffer
			if err := collation.WriteCSV(&csvBuf, tr.Collation); err != nil {
				t.Fatal(err)
			}
			fromCSV, err := collation.ReadCSV(bytes.NewReader(csvBuf.Bytes()), "sim.csv")
			if err != nil {
				t.Fatal(err)
			}
			var teiBuf bytes.Buffer
			if err := tei.WriteApparatus(&teiBuf, fromCSV); err != nil {
				t.Fatal(err)
			}
			fromTEI, rep, err := tei.Read(bytes.NewReader(teiBuf.Bytes()), "sim.xml", tc.teiOpt)
			if err != nil {
				t.Fatal(err)
			}
			if rep.Witnesses != fromCSV.NumWitnesses() || rep.Units != fromCSV.NumUnits() || rep.Readings != fromCSV.NumReadings() || len(rep.Merges) != 0 {
				t.Errorf("TEI report %d witnesses, %d units, %d readings, %d merges; CSV collation has %d, %d, %d",
					rep.Witnesses, rep.Units, rep.Readings, len(rep.Merges), fromCSV.NumWitnesses(), fromCSV.NumUnits(), fromCSV.NumReadings())
			}
			if err := tei.SameCollation(fromCSV, fromTEI); err != nil {
				t.Fatalf("the TEI path reads another collation: %v", err)
			}

			opt := model.TrainOptions{Groups: cfg.NumGroups(), Seed: 7, Restarts: 1}
			a, _, err := model.Train(fromCSV, opt)
			if err != nil {
				t.Fatal(err)
			}
			b, _, err := model.Train(fromTEI, opt)
			if err != nil {
				t.Fatal(err)
			}
			if len(a.Profile) == 0 || len(a.Profile) != len(b.Profile) {
				t.Fatalf("profile sizes %d and %d", len(a.Profile), len(b.Profile))
			}
			for i := range a.Profile {
				if math.Float64bits(a.Profile[i]) != math.Float64bits(b.Profile[i]) {
					t.Fatalf("W differs at entry %d (row %d, group %d): %v (CSV) vs %v (TEI)",
						i, i/int(a.GroupCount), i%int(a.GroupCount), a.Profile[i], b.Profile[i])
				}
			}
			if !proto.Equal(a.SetAside, b.SetAside) {
				t.Errorf("set-aside reports differ:\nCSV %v\nTEI %v", a.SetAside, b.SetAside)
			}
			if len(a.TrainingWitnesses) != len(b.TrainingWitnesses) {
				t.Fatalf("%d and %d training witnesses", len(a.TrainingWitnesses), len(b.TrainingWitnesses))
			}
			for i := range a.TrainingWitnesses {
				if !proto.Equal(a.TrainingWitnesses[i], b.TrainingWitnesses[i]) {
					t.Errorf("training witness %d differs:\nCSV %v\nTEI %v", i, a.TrainingWitnesses[i], b.TrainingWitnesses[i])
				}
			}
			// Everything else too: units, rows, groups, fit (no collation checksum was given,
			// so the two file forms do not show).
			if !proto.Equal(a, b) {
				t.Errorf("models differ outside W, set-aside and training witnesses")
			}
			ba, err := model.EncodeBundle(a)
			if err != nil {
				t.Fatal(err)
			}
			bb, err := model.EncodeBundle(b)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(ba, bb) {
				t.Errorf("bundles differ (%d and %d bytes)", len(ba), len(bb))
			}
			// The check can fail: a collation with one cell changed gives another W.
			changed := flipOneCell(t, fromTEI)
			if changed == nil {
				t.Fatal("no cell to change: the check that the comparison can fail did not run")
			}
			c, _, err := model.Train(changed, opt)
			if err != nil {
				t.Fatal(err)
			}
			if reflect.DeepEqual(c.Profile, a.Profile) {
				t.Errorf("a changed collation gave the same W; the comparison cannot tell")
			}
		})
	}
}

// flipOneCell returns a copy of c in which the first witness that shares the second reading of
// some unit with others takes another shared reading there instead.
func flipOneCell(t *testing.T, c *collation.Collation) *collation.Collation {
	t.Helper()
	var b collation.Builder
	for _, s := range c.Witnesses() {
		b.AddWitness(s)
	}
	done := false
	for u := 0; u < c.NumUnits(); u++ {
		un := c.Unit(u)
		ui, err := b.AddUnit(un.ID, un.Section)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range un.Readings {
			b.AddReading(ui, r)
		}
		sup := c.Support(u)
		for w := 0; w < c.NumWitnesses(); w++ {
			r := c.Reading(w, u)
			if r == collation.Lacuna {
				continue
			}
			if !done && sup[r] >= 3 {
				for o := range sup {
					if o != r && sup[o] >= 3 {
						r, done = o, true
						break
					}
				}
			}
			if err := b.AddCell(w, ui, un.Readings[r]); err != nil {
				t.Fatal(err)
			}
		}
	}
	if !done {
		return nil
	}
	return b.Build()
}
