package tei

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	"strayleaf/placement/collation"
)

// sameCollation reports how a and b differ (witnesses, units, sections, readings, cells).
func sameCollation(a, b *collation.Collation) error {
	if !reflect.DeepEqual(a.Witnesses(), b.Witnesses()) {
		return fmt.Errorf("witnesses %q != %q", a.Witnesses(), b.Witnesses())
	}
	if a.NumUnits() != b.NumUnits() {
		return fmt.Errorf("%d units != %d", a.NumUnits(), b.NumUnits())
	}
	for u := range a.NumUnits() {
		ua, ub := a.Unit(u), b.Unit(u)
		if ua.ID != ub.ID || ua.Section != ub.Section || !reflect.DeepEqual(ua.Readings, ub.Readings) {
			return fmt.Errorf("unit %d: %q/%q %q != %q/%q %q", u, ua.ID, ua.Section, ua.Readings, ub.ID, ub.Section, ub.Readings)
		}
	}
	for w := range a.NumWitnesses() {
		if !reflect.DeepEqual(a.Row(w), b.Row(w)) {
			return fmt.Errorf("witness %q: cells %v != %v", a.Witness(w), a.Row(w), b.Row(w))
		}
	}
	return nil
}

func roundTrip(t *testing.T, c *collation.Collation, opt Options) (*collation.Collation, []byte) {
	t.Helper()
	var buf bytes.Buffer
	if err := WriteApparatus(&buf, c); err != nil {
		t.Fatal(err)
	}
	back, _, err := Read(bytes.NewReader(buf.Bytes()), "written.xml", opt)
	if err != nil {
		t.Fatalf("reading back: %v\n%s", err, buf.String())
	}
	return back, buf.Bytes()
}

func TestWriteRoundTripApparatus(t *testing.T) {
	c, _, err := ReadFile("testdata/apparatus.xml", mergeOrthNonsense)
	if err != nil {
		t.Fatal(err)
	}
	back, out := roundTrip(t, c, Options{})
	if err := sameCollation(c, back); err != nil {
		t.Errorf("round trip: %v", err)
	}
	for _, want := range []string{
		`<witness xml:id="Pc"/>`,
		`<variantEncoding method="parallel-segmentation" location="internal"/>`,
		`<div n="2.b"><ab>`,
		`<app n="2"><rdg wit="#K #L #M1 #M2 #N #Pc">over the fen</rdg><rdg wit="#P">across the fen</rdg></app>`,
		`<rdg wit="#L #N" n="om."/>`,
		`<rdg>by the</rdg>`, // a reading no extant witness has
	} {
		if !bytes.Contains(out, []byte(want)) {
			t.Errorf("written apparatus lacks %s", want)
		}
	}
}

// Sigla, ids, sections and labels that are not plain XML names or plain text still read back.
func TestWriteRoundTripAwkwardStrings(t *testing.T) {
	var b collation.Builder
	sigla := []string{"01", "A", "wit-1", "x&y", "Ω", "B c"}
	for _, s := range sigla {
		b.AddWitness(s)
	}
	cells := []struct{ w, u, label, section string }{
		{"01", "1", "", "1"},
		{"A", "1", "om.", "1"},
		{"wit-1", "1", "  spaced  out ", "1"},
		{"x&y", "A", "a\tb", "2"},
		{"Ω", "A", "<tag> & \"quoted\" 'x'", "2"},
		{"B c", "u 2", "line\nbreak\r\nend", "1"},
		{"01", "u 2", "plain words", "1"},
		{"A", "é", "déjà vu", ""},
	}
	for _, c := range cells {
		if err := b.Add(c.w, c.u, c.label, c.section); err != nil {
			t.Fatal(err)
		}
	}
	u, _ := b.AddUnit("é", "")
	b.AddReading(u, "unattested")
	c := b.Build()
	back, out := roundTrip(t, c, Options{SiglumAttr: "n"})
	if err := sameCollation(c, back); err != nil {
		t.Errorf("round trip: %v\n%s", err, out)
	}
	if !bytes.Contains(out, []byte(`<witness xml:id="wit-2" n="01"/>`)) || !bytes.Contains(out, []byte(`<witness xml:id="wit-1"/>`)) {
		t.Errorf("generated witness ids clash or are missing:\n%s", out)
	}
	if !bytes.Contains(out, []byte(`<app n="A">`)) {
		t.Errorf("a unit id equal to a siglum must not be written as xml:id:\n%s", out)
	}
}

func TestWriteRoundTripRandom(t *testing.T) {
	for seed := uint64(1); seed <= 5; seed++ {
		c := randomCollation(seed, 40, 300)
		back, _ := roundTrip(t, c, Options{})
		if err := sameCollation(c, back); err != nil {
			t.Errorf("seed %d: %v", seed, err)
		}
	}
}

func TestWriteErrors(t *testing.T) {
	var b collation.Builder
	b.AddWitness("A")
	if _, err := b.AddUnit("u1", ""); err != nil {
		t.Fatal(err)
	}
	if err := WriteApparatus(&bytes.Buffer{}, b.Build()); err == nil || !strings.Contains(err.Error(), `unit "u1" has no reading`) {
		t.Errorf("unit without readings: err = %v", err)
	}
	b = collation.Builder{}
	if err := b.Add("A", "u1", "bell\x07", ""); err != nil {
		t.Fatal(err)
	}
	if err := WriteApparatus(&bytes.Buffer{}, b.Build()); err == nil || !strings.Contains(err.Error(), "U+0007") {
		t.Errorf("control character: err = %v", err)
	}
}

// randomCollation builds a seeded random collation with collation.Builder: nw witnesses in 8
// families, nu units in sections of 100, 3 or 4 readings per unit. A witness takes its family's
// reading with probability 0.8 and another at random otherwise; about 3% of cells are lacunae,
// and every 10th witness is a fragment that lacks a fifth of the text.
func randomCollation(seed uint64, nw, nu int) *collation.Collation {
	rng := rand.New(rand.NewPCG(seed, 0x5EED))
	syll := []string{"ka", "lo", "mir", "sen", "tu", "vah", "ne", "dor", "is", "quel"}
	word := func() string {
		n := 1 + rng.IntN(3)
		var sb strings.Builder
		for i := 0; i < n; i++ {
			sb.WriteString(syll[rng.IntN(len(syll))])
		}
		return sb.String()
	}
	var b collation.Builder
	sigla := make([]string, nw)
	for w := range sigla {
		sigla[w] = fmt.Sprintf("W%04d", w+1)
		b.AddWitness(sigla[w])
	}
	fragStart := make([]int, nw)
	for w := range fragStart {
		fragStart[w] = -1
		if w%10 == 9 {
			fragStart[w] = rng.IntN(nu)
		}
	}
	labels := make([]string, 4)
	family := make([]int, 8)
	for u := 0; u < nu; u++ {
		id := fmt.Sprintf("u%05d", u+1)
		section := fmt.Sprintf("s%d", u/100+1)
		nr := 3 + rng.IntN(2)
		for r := 0; r < nr; r++ {
			labels[r] = fmt.Sprintf("%s %s", word(), word())
			if r > 0 && labels[r] == labels[0] {
				labels[r] += " " + word()
			}
		}
		if _, err := b.AddUnit(id, section); err != nil {
			panic(err)
		}
		for f := range family {
			family[f] = rng.IntN(nr)
		}
		for w := 0; w < nw; w++ {
			if fs := fragStart[w]; fs >= 0 && u >= fs && u < fs+nu/5 {
				continue
			}
			if rng.Float64() < 0.03 {
				continue
			}
			r := family[w%8]
			if rng.Float64() >= 0.8 {
				r = rng.IntN(nr)
			}
			if err := b.Add(sigla[w], id, labels[r], section); err != nil {
				panic(err)
			}
		}
	}
	return b.Build()
}

// The same collation written as CSV and as TEI reads back the same from both.
func TestCSVAndTEIAgree(t *testing.T) {
	c := randomCollation(7, 30, 250)
	var csvBuf bytes.Buffer
	if err := collation.WriteCSV(&csvBuf, c); err != nil {
		t.Fatal(err)
	}
	fromCSV, err := collation.ReadCSV(&csvBuf, "random.csv")
	if err != nil {
		t.Fatal(err)
	}
	fromTEI, _ := roundTrip(t, c, Options{})
	if err := sameCollation(c, fromTEI); err != nil {
		t.Fatalf("TEI round trip: %v", err)
	}
	// The CSV form keeps witnesses in order of first appearance, unit by unit, so compare cell
	// by cell through sigla and unit ids.
	if fromCSV.NumWitnesses() != fromTEI.NumWitnesses() || fromCSV.NumUnits() != fromTEI.NumUnits() {
		t.Fatalf("CSV %d x %d, TEI %d x %d", fromCSV.NumWitnesses(), fromCSV.NumUnits(), fromTEI.NumWitnesses(), fromTEI.NumUnits())
	}
	label := func(c *collation.Collation, w, u int) string {
		if r := c.Reading(w, u); r != collation.Lacuna {
			return c.Unit(u).Readings[r]
		}
		return "(lacuna)"
	}
	for w, siglum := range fromTEI.Witnesses() {
		cw, ok := fromCSV.WitnessIndex(siglum)
		if !ok {
			t.Fatalf("witness %q missing from the CSV collation", siglum)
		}
		for u := range fromTEI.NumUnits() {
			unit := fromTEI.Unit(u)
			cu, ok := fromCSV.UnitIndex(unit.ID)
			if !ok || fromCSV.Unit(cu).Section != unit.Section {
				t.Fatalf("unit %q (section %q) missing from the CSV collation", unit.ID, unit.Section)
			}
			if a, b := label(fromTEI, w, u), label(fromCSV, cw, cu); a != b {
				t.Fatalf("witness %q unit %q: TEI %q, CSV %q", siglum, unit.ID, a, b)
			}
		}
	}
}
