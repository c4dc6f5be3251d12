package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"strayleaf/placement/collation"
)

// suggestWitnessesTEI writes two witnesses: "F1" with the first five extant readings of the
// collation's first witness, and "P0", listed but with no reading checked yet.
func suggestWitnessesTEI(c *collation.Collation) (string, []string) {
	var b strings.Builder
	b.WriteString(`<?xml version="1.0" encoding="UTF-8"?>
<TEI xmlns="http://www.tei-c.org/ns/1.0">
  <teiHeader><fileDesc><titleStmt><title>Fragments</title></titleStmt><publicationStmt><p>Invented.</p></publicationStmt>
    <sourceDesc><listWit><witness xml:id="F1"/><witness xml:id="P0"/></listWit></sourceDesc>
  </fileDesc></teiHeader>
  <text><body><div><ab>
`)
	var checked []string
	for u := 0; u < c.NumUnits() && len(checked) < 5; u++ {
		r := c.Reading(0, u)
		if r == collation.Lacuna {
			continue
		}
		un := c.Unit(u)
		fmt.Fprintf(&b, "<app xml:id=%q><rdg wit=\"#F1\">%s</rdg></app>\n", un.ID, un.Readings[r])
		checked = append(checked, un.ID)
	}
	b.WriteString("</ab></div></body></text>\n</TEI>\n")
	return b.String(), checked
}

// strayleaf suggest --json: one line per witness with witness and units ({unit, gain, hints}),
// the checked units never suggested, hints naming model groups, and the probe list for a
// witness with nothing checked.
func TestSuggestJSON(t *testing.T) {
	f := getTEIFixture(t)
	doc, checked := suggestWitnessesTEI(f.col)
	path := filepath.Join(f.dir, "suggest.xml")
	if err := os.WriteFile(path, []byte(doc), 0o644); err != nil {
		t.Fatal(err)
	}
	out := mustRun(t, "suggest", "--bundle", f.bundle, "--witnesses", path, "--top", "4", "--json")
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != 2 {
		t.Fatalf("%d lines; want 2:\n%s", len(lines), out)
	}
	groups := map[string]bool{}
	for _, g := range f.model.Groups {
		groups[g.Id] = true
	}
	isChecked := map[string]bool{}
	for _, u := range checked {
		isChecked[u] = true
	}
	for _, line := range lines {
		var r struct {
			Witness string `json:"witness"`
			Probe   bool   `json:"probe"`
			Units   []struct {
				Unit  string            `json:"unit"`
				Gain  float64           `json:"gain"`
				Hints map[string]string `json:"hints"`
			} `json:"units"`
		}
		if err := json.Unmarshal([]byte(line), &r); err != nil {
			t.Fatalf("%v: %s", err, line)
		}
		if len(r.Units) != 4 {
			t.Errorf("%s: %d units; want 4", r.Witness, len(r.Units))
		}
		if (r.Witness == "P0") != r.Probe {
			t.Errorf("%s: probe %v", r.Witness, r.Probe)
		}
		for _, u := range r.Units {
			if r.Witness == "F1" && isChecked[u.Unit] {
				t.Errorf("F1: checked unit %s suggested", u.Unit)
			}
			if !(u.Gain >= 0) || len(u.Hints) == 0 {
				t.Errorf("%s: unit %s has gain %v and hints %v", r.Witness, u.Unit, u.Gain, u.Hints)
			}
			for rd, g := range u.Hints {
				if !groups[g] {
					t.Errorf("%s: hint %s -> %s names no group", r.Witness, rd, g)
				}
			}
		}
	}
	table := mustRun(t, "suggest", "--bundle", f.bundle, "--witnesses", path, "--top", "2")
	if !strings.Contains(table, "P0 (probe list)") || !strings.Contains(table, "F1") {
		t.Errorf("table lacks a witness:\n%s", table)
	}
	if code, _, _ := runStrayleaf("suggest", "--bundle", f.bundle); code == 0 {
		t.Error("suggest without --witnesses succeeded")
	}
}
