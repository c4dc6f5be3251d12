package tei

import (
	"bytes"
	"os"
	"testing"

	"strayleaf/placement/collation"
)

// FuzzRead checks that Read never panics or hangs, that what it returns is consistent with its
// report, and that whatever it reads survives a write and a second read unchanged.
func FuzzRead(f *testing.F) {
	for _, name := range []string{"testdata/apparatus.xml", "testdata/billion-laughs.xml", "testdata/external-entity.xml"} {
		b, err := os.ReadFile(name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	wits := `<witness xml:id="A"/><listWit xml:id="g"><witness xml:id="B"/><witness xml:id="C"/></listWit>`
	for _, body := range []string{
		`<app xml:id="u1"><lem wit="#A">x</lem><rdg wit="#g" type="orth">xx</rdg></app>`,
		`<div n="1"><app n="1"><rdgGrp type="orth"><rdg wit="#B">a</rdg><rdg wit="#C" type="s">b</rdg></rdgGrp><lem/></app></div>`,
		`<lacunaStart wit="#B"/><app><rdg wit="A C">y<lacunaEnd wit="#B"/><gap/></rdg><witDetail wit="#g" type="damage"/></app>`,
		`<app xml:id="o"><lem wit="#A #B">p <app xml:id="i"><rdg wit="#A">q</rdg><rdg wit="#B"><witStart/>r</rdg></app></lem><rdg wit="#C" n="&lt;&#233;&gt;"/></app>`,
		`<div n="1"><div n="a"><app><rdg wit="#A">a<lacunaStart/></rdg><rdg wit="#B #C"/></app></div></div><app n="app-1"><lem>z</lem></app>`,
		`<app xml:id="u"><lem wit="#A" type="orth">a</lem><rdgGrp><rdg wit="#B">b</rdg><rdgGrp type="orth"><rdg wit="#C">bb</rdg></rdgGrp></rdgGrp></app>`,
		`<app xml:id="u1"><rdg wit="#A #B">x</rdg><rdg wit="#C">x<lacunaStart/></rdg></app><app xml:id="u2"><rdg wit="#A #B #C">y <lacunaEnd wit="#C"/>z</rdg></app>`,
		`<app xml:id="u1"><witDetail wit="#B" type="illegible"/><rdg wit="#A #B">x</rdg><rdg wit="#C">y<witDetail type="lacuna">torn</witDetail></rdg></app>`,
		`<app xml:id="u1"><lem wit="#A #B">x</lem><rdg wit="#B">y</rdg></app>`,
		`<app xml:id="u1"><rdg wit="#A">x<rdg wit="#B">y</rdg></rdg></app>`,
	} {
		f.Add([]byte(doc(wits, body)))
	}
	opt := Options{
		TypeActions: map[string]Action{"orth": Merge, "orthographic": Merge, "nonsense": Merge},
		Limits:      Limits{MaxInputBytes: 1 << 20, MaxTokens: 100_000, MaxDepth: 64, MaxCells: 1 << 20},
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		c, rep, err := Read(bytes.NewReader(data), "fuzz.xml", opt)
		if err != nil {
			if c != nil || rep != nil {
				t.Fatalf("error %v with a result", err)
			}
			if err.Error() == "" {
				t.Fatal("empty error message")
			}
			return
		}
		if rep.Witnesses != c.NumWitnesses() || rep.Units != c.NumUnits() || rep.Readings != c.NumReadings() || rep.Lacunae.Total() != c.Lacunae() {
			t.Fatalf("report %+v does not match the collation", rep)
		}
		if rep.Lacunae.Absent < 0 {
			t.Fatalf("negative absent count %+v", rep.Lacunae)
		}
		for w := range c.NumWitnesses() {
			for u, r := range c.Row(w) {
				if r != collation.Lacuna && (r < 0 || int(r) >= len(c.Unit(u).Readings)) {
					t.Fatalf("cell (%d,%d) = %d out of range", w, u, r)
				}
			}
		}
		var buf bytes.Buffer
		if err := WriteApparatus(&buf, c); err != nil {
			t.Fatalf("writing what was read: %v", err)
		}
		back, _, err := Read(&buf, "again.xml", Options{SiglumAttr: "n"})
		if err != nil {
			t.Fatalf("reading back: %v", err)
		}
		if err := sameCollation(c, back); err != nil {
			t.Fatalf("round trip: %v", err)
		}
	})
}
