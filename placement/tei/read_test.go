package tei

import (
	"errors"
	"fmt"
	"io"
	"reflect"
	"strings"
	"testing"
	"testing/iotest"

	"strayleaf/placement/collation"
)

// The expectations below follow the TEI P5 Guidelines (from memory; the section numbers may be
// off): chapter 12 "Critical Apparatus" for the apparatus elements, chapter 3 (core elements)
// for <gap>, chapter 4 "Default Text Structure" for <div>, and chapter 1 "The TEI
// Infrastructure" for the TEI namespace and the global xml:id and @n. Merging by @type, and
// which markers make a cell a lacuna, follow this package's documented rules (common practice
// treats a witness without text at a unit as not counted there).

// wantUnit is one unit of an expected collation. cells has one character per witness, in
// witness order: the reading's index, or "-" for a lacuna.
type wantUnit struct {
	id, section string
	readings    []string
	cells       string
}

// checkCollation compares c with the expected witnesses and units.
func checkCollation(t *testing.T, c *collation.Collation, witnesses []string, units []wantUnit) {
	t.Helper()
	if got := c.Witnesses(); !reflect.DeepEqual(got, witnesses) {
		t.Fatalf("witnesses = %q, want %q", got, witnesses)
	}
	if c.NumUnits() != len(units) {
		ids := []string{}
		for _, u := range c.Units() {
			ids = append(ids, u.ID)
		}
		t.Fatalf("%d units %q, want %d", c.NumUnits(), ids, len(units))
	}
	for u, w := range units {
		got := c.Unit(u)
		if got.ID != w.id || got.Section != w.section {
			t.Errorf("unit %d = %q in section %q, want %q in %q", u, got.ID, got.Section, w.id, w.section)
		}
		if !reflect.DeepEqual(got.Readings, w.readings) {
			t.Errorf("unit %q readings = %q, want %q", w.id, got.Readings, w.readings)
		}
		var cells strings.Builder
		for wi := range witnesses {
			if r := c.Reading(wi, u); r == collation.Lacuna {
				cells.WriteByte('-')
			} else {
				fmt.Fprintf(&cells, "%d", r)
			}
		}
		if cells.String() != w.cells {
			t.Errorf("unit %q cells (%s) = %s, want %s", w.id, strings.Join(witnesses, " "), cells.String(), w.cells)
		}
	}
}

var mergeOrthNonsense = Options{TypeActions: map[string]Action{"orthographic": Merge, "nonsense": Merge}}

// apparatusWitnesses and apparatusUnits are what testdata/apparatus.xml (an invented text)
// holds, worked out by hand from the rules in the package doc. Each construct is named with its
// place in the TEI P5 Guidelines; all these references are from memory.
//
// <listWit> and <witness xml:id> (12.1.4 "Witness Information", from memory): the eight
// witnesses in declaration order, the nested groups beta, gamma and delta (inside gamma) taking
// no place of their own.
var apparatusWitnesses = []string{"K", "L", "M1", "M2", "N", "P", "Pc", "Q"}

var apparatusUnits = []wantUnit{
	//                                                                         K L M1 M2 N P Pc Q
	// <app xml:id> (12.1.1 "The Apparatus Entry", from memory); <lem>, <rdg> and @wit (12.1.2
	// "Readings", from memory); "#beta" and "#delta" point to nested <listWit> groups (12.1.4,
	// from memory); white space in a reading collapses; Q is named nowhere: absent.
	{"u1", "1", []string{"the salt-reeve rode", "a salt-reeve rode"}, "0000111-"},
	// <app n> gives the id (@n, a global attribute, 1.3.1.1, from memory); bare id "L"; @type
	// orthographic and nonsense (12.1.2, from memory) merge into the <lem>; Pc's "over the fen"
	// is the lem's reading; a <witDetail> of type "correction" (12.1.4, from memory) is a note.
	{"2", "1", []string{"over the fen", "across the fen"}, "0000010-"},
	// No id: generated. <rdgGrp> (12.1.3 "Indicating Subvariation in Apparatus Entries", from
	// memory): N's orthographic reading merges into its group's first substantive reading; the
	// second group's @type applies to Pc's reading but not to P's, which has its own; <hi> text
	// counts, <note> text (12.1.1, from memory) does not.
	{"app-3", "1", []string{"grey gulls", "white gulls", "grey mews"}, "0011122-"},
	// An empty <rdg/> is an omission; @n labels a reading; an element in another namespace
	// (the TEI namespace: chapter 1 "The TEI Infrastructure", from memory) is left out.
	{"u4", "1", []string{"and sang", "om.", "sang-loudly"}, "0100122-"},
	// <div n="2"> (4.1 "Divisions of the Body", from memory) gives the section. <lacunaStart/>
	// after text inside N's reading (12.1.5 "Fragmentary Witnesses", from memory): a lacuna, and
	// N stays lacunose. <gap> in P's reading (3.5.3 "Additions, Deletions, and Omissions", from
	// memory): a lacuna. Their readings stay, with no witness.
	{"u5", "2", []string{"at the ford", "by the ford", "by the", "the ford"}, "0011--00"},
	// N is named while lacunose: a lacuna. Then <lacunaStart wit="#Q"/> (12.1.5, from memory)
	// stands in the running text.
	{"u6", "2", []string{"the water", "the watter", "the waters"}, "0000-222"},
	// Nested <div n="b"> (4.1, from memory): section "2.b". <lacunaEnd/> (12.1.5, from memory)
	// before N's text: N is extant and reads "ran chill". <witDetail type="damage"> (12.1.4,
	// from memory): P is a lacuna. Q is lacunose and named nowhere.
	{"u7", "2.b", []string{"ran cold", "ran chill"}, "00001-0-"},
	// <lacunaEnd wit="#Q"/> before the text of Q's reading: Q is extant. The <app> nested in the
	// lem (allowed by "The Parallel Segmentation Method", 12.2.3, from memory) is left out of the
	// lem's text...
	{"u8", "2.b", []string{"beneath", "under stone"}, "00001001"},
	// ...and is a unit of its own, after the one that holds it.
	{"u8a", "2.b", []string{"stone", "stones"}, "0001-11-"},
}

func TestReadApparatus(t *testing.T) {
	c, rep, err := ReadFile("testdata/apparatus.xml", mergeOrthNonsense)
	if err != nil {
		t.Fatal(err)
	}
	checkCollation(t, c, apparatusWitnesses, apparatusUnits)

	if rep.Witnesses != 8 || rep.Units != 9 || rep.Readings != 23 || rep.Groups != 3 || rep.ReadingElements != 31 {
		t.Errorf("report counts: %d witnesses, %d units, %d readings, %d groups, %d reading elements; want 8, 9, 23, 3, 31",
			rep.Witnesses, rep.Units, rep.Readings, rep.Groups, rep.ReadingElements)
	}
	wantLac := LacunaCounts{Absent: 7, Marked: 2, Gap: 1, Detail: 1}
	if rep.Lacunae != wantLac {
		t.Errorf("lacunae = %+v, want %+v", rep.Lacunae, wantLac)
	}
	if rep.Lacunae.Total() != c.Lacunae() {
		t.Errorf("report counts %d lacunae, the collation has %d", rep.Lacunae.Total(), c.Lacunae())
	}
	if want := map[string]int{"orthographic": 4, "nonsense": 1}; !reflect.DeepEqual(rep.MergedByType, want) {
		t.Errorf("merged by type = %v, want %v", rep.MergedByType, want)
	}
	wantMerges := []MergedReading{
		{Unit: "2", Type: "orthographic", Reading: "ouer the fen", Into: "over the fen", Witnesses: []string{"L"}, Line: 44},
		{Unit: "2", Type: "nonsense", Reading: "over the fenn fen", Into: "over the fen", Witnesses: []string{"M2", "N"}, Line: 45},
		{Unit: "app-3", Type: "orthographic", Reading: "whyte gulls", Into: "white gulls", Witnesses: []string{"N"}, Line: 53},
		{Unit: "app-3", Type: "orthographic", Reading: "grey mewes", Into: "grey mews", Witnesses: []string{"Pc"}, Line: 57},
		{Unit: "u7", Type: "orthographic", Reading: "ran colde", Into: "ran cold", Witnesses: []string{"L", "M2", "Pc"}, Line: 88},
	}
	if !reflect.DeepEqual(rep.Merges, wantMerges) {
		t.Errorf("merges =\n%+v\nwant\n%+v", rep.Merges, wantMerges)
	}
	if want := []GeneratedID{{ID: "app-3", Line: 49}}; !reflect.DeepEqual(rep.GeneratedIDs, want) {
		t.Errorf("generated ids = %+v, want %+v", rep.GeneratedIDs, want)
	}
	if s := rep.String(); !strings.Contains(s, "8 witnesses (3 groups), 9 units, 23 readings") || !strings.Contains(s, "orthographic 4") {
		t.Errorf("report summary:\n%s", s)
	}
}

// Without merge actions every reading element with its own label is a reading.
func TestReadApparatusWithoutMerging(t *testing.T) {
	c, rep, err := ReadFile("testdata/apparatus.xml", Options{})
	if err != nil {
		t.Fatal(err)
	}
	u, _ := c.UnitIndex("2")
	if got, want := c.Unit(u).Readings, []string{"over the fen", "ouer the fen", "over the fenn fen", "across the fen"}; !reflect.DeepEqual(got, want) {
		t.Errorf("unit 2 readings = %q, want %q", got, want)
	}
	if len(rep.Merges) != 0 || rep.Readings != 28 {
		t.Errorf("%d merges and %d readings, want 0 and 28", len(rep.Merges), rep.Readings)
	}
}

// doc wraps a witness list and body in a TEI document.
func doc(wits, body string) string {
	return `<TEI xmlns="http://www.tei-c.org/ns/1.0"><teiHeader><fileDesc><sourceDesc><listWit>` + wits +
		"</listWit></sourceDesc></fileDesc></teiHeader>\n<text><body>\n" + body + "\n</body></text></TEI>\n"
}

const abc = `<witness xml:id="A"/><witness xml:id="B"/><witness xml:id="C"/>`

func read(t *testing.T, s string, opt Options) *collation.Collation {
	t.Helper()
	c, _, err := Read(strings.NewReader(s), "test.xml", opt)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

func TestMergeParentRules(t *testing.T) {
	opt := Options{TypeActions: map[string]Action{"orth": Merge}}
	for _, tc := range []struct {
		name, body string
		want       wantUnit
	}{
		// Rule 3: an ungrouped merged reading joins the lem, even when the lem comes later.
		{"lem", `<app xml:id="u"><rdg wit="#A">x</rdg><rdg wit="#B" type="orth">yy</rdg><lem wit="#C">y</lem></app>`,
			wantUnit{"u", "", []string{"x", "y"}, "011"}},
		// Rule 4: no lem: the first substantive reading of the app.
		{"first substantive", `<app xml:id="u"><rdg wit="#A" type="orth">xx</rdg><rdg wit="#B">x</rdg><rdg wit="#C">z</rdg></app>`,
			wantUnit{"u", "", []string{"x", "z"}, "001"}},
		// Rule 5: no substantive reading: the first reading element.
		{"all merged", `<app xml:id="u"><rdg wit="#A" type="orth">colour</rdg><rdg wit="#B #C" type="orth">color</rdg></app>`,
			wantUnit{"u", "", []string{"colour"}, "000"}},
		// Rule 2: a group without a substantive reading defers to the enclosing group.
		{"nested groups", `<app xml:id="u"><lem wit="#A">a</lem><rdgGrp><rdg wit="#B">b</rdg><rdgGrp type="orth"><rdg wit="#C">bb</rdg></rdgGrp></rdgGrp></app>`,
			wantUnit{"u", "", []string{"a", "b"}, "011"}},
		// A lem is never merged, whatever its @type.
		{"typed lem", `<app xml:id="u"><lem wit="#A" type="orth">a</lem><rdg wit="#B">b</rdg><rdg wit="#C" type="orth">aa</rdg></app>`,
			wantUnit{"u", "", []string{"a", "b"}, "010"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			checkCollation(t, read(t, doc(abc, tc.body), opt), []string{"A", "B", "C"}, []wantUnit{tc.want})
		})
	}
}

func TestLacunaRules(t *testing.T) {
	for _, tc := range []struct {
		name, body string
		want       []wantUnit
	}{
		{"marker alone in a reading", `<app xml:id="u1"><rdg wit="#A #B">x</rdg><rdg wit="#C"><lacunaStart/></rdg></app>
			<app xml:id="u2"><rdg wit="#A #B #C">y</rdg></app>
			<app xml:id="u3"><rdg wit="#A #B">z</rdg><rdg wit="#C"><lacunaEnd/></rdg></app>`,
			[]wantUnit{{"u1", "", []string{"x", "om."}, "00-"}, {"u2", "", []string{"y"}, "00-"}, {"u3", "", []string{"z", "om."}, "001"}}},
		{"marker after the whole text", `<app xml:id="u1"><rdg wit="#A #B">x</rdg><rdg wit="#C">x<lacunaStart/></rdg></app>`,
			[]wantUnit{{"u1", "", []string{"x"}, "00-"}}},
		{"lacunaEnd after text", `<app xml:id="u1"><rdg wit="#A #B">x</rdg><rdg wit="#C"><lacunaStart/></rdg></app>
			<app xml:id="u2"><rdg wit="#A #B #C">y <lacunaEnd wit="#C"/>z</rdg></app>
			<app xml:id="u3"><rdg wit="#A #B #C">w</rdg></app>`,
			[]wantUnit{{"u1", "", []string{"x", "om."}, "00-"}, {"u2", "", []string{"y z"}, "00-"}, {"u3", "", []string{"w"}, "000"}}},
		{"witEnd and witStart", `<witEnd wit="#B"/><app xml:id="u1"><rdg wit="#A #B">x</rdg></app><witStart wit="#B"/>
			<app xml:id="u2"><rdg wit="#A #B">y</rdg></app>`,
			[]wantUnit{{"u1", "", []string{"x"}, "0--"}, {"u2", "", []string{"y"}, "00-"}}},
		{"group in a marker", `<lacunaStart wit="#g"/><app xml:id="u1"><rdg wit="#A #B #C">x</rdg></app>`,
			[]wantUnit{{"u1", "", []string{"x"}, "0--"}}},
		{"witDetail at app level", `<app xml:id="u1"><witDetail wit="#B" type="illegible"/><rdg wit="#A #B">x</rdg><rdg wit="#C">y<witDetail type="lacuna">torn</witDetail></rdg></app>`,
			[]wantUnit{{"u1", "", []string{"x", "y"}, "0--"}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			wits := `<witness xml:id="A"/><listWit xml:id="g"><witness xml:id="B"/><witness xml:id="C"/></listWit>`
			checkCollation(t, read(t, doc(wits, tc.body), Options{}), []string{"A", "B", "C"}, tc.want)
		})
	}
}

func TestOptions(t *testing.T) {
	t.Run("negative lem", func(t *testing.T) {
		body := `<lacunaStart wit="#C"/><app xml:id="u1"><lem>x</lem><rdg wit="#B">y</rdg></app>`
		checkCollation(t, read(t, doc(abc, body), Options{NegativeLem: true}), []string{"A", "B", "C"},
			[]wantUnit{{"u1", "", []string{"x", "y"}, "01-"}})
		checkCollation(t, read(t, doc(abc, body), Options{}), []string{"A", "B", "C"},
			[]wantUnit{{"u1", "", []string{"x", "y"}, "-1-"}})
	})
	t.Run("siglum attribute", func(t *testing.T) {
		wits := `<witness xml:id="w1" n="01"/><witness xml:id="w2"/>`
		body := `<app xml:id="u1"><rdg wit="#w1 #w2">x</rdg></app>`
		checkCollation(t, read(t, doc(wits, body), Options{SiglumAttr: "n"}), []string{"01", "w2"},
			[]wantUnit{{"u1", "", []string{"x"}, "00"}})
	})
	t.Run("labels and sections", func(t *testing.T) {
		body := `<div type="book" n="I"><div1 n="3"><app xml:id="u1"><rdg wit="#A" n="one" type="x">a  b</rdg><rdg wit="#B #C"/></app></div1></div>`
		checkCollation(t, read(t, doc(abc, body), Options{}), []string{"A", "B", "C"},
			[]wantUnit{{"u1", "I.3", []string{"one", "om."}, "011"}})
		checkCollation(t, read(t, doc(abc, body), Options{TextLabels: true, OmissionLabel: "(omitted)", SectionElements: []string{"div"}, SectionAttr: "type"}),
			[]string{"A", "B", "C"}, []wantUnit{{"u1", "book", []string{"a b", "(omitted)"}, "011"}})
		checkCollation(t, read(t, doc(abc, body), Options{LabelAttr: "type", SectionSeparator: "/"}),
			[]string{"A", "B", "C"}, []wantUnit{{"u1", "I/3", []string{"x", "om."}, "011"}})
	})
	t.Run("no namespace", func(t *testing.T) {
		s := `<TEI><listWit><witness xml:id="A"/></listWit><app xml:id="u1"><rdg wit="#A">x</rdg></app></TEI>`
		if _, _, err := Read(strings.NewReader(s), "plain.xml", Options{}); err == nil || !strings.Contains(err.Error(), "no TEI element") {
			t.Errorf("err = %v, want no TEI element", err)
		}
		checkCollation(t, read(t, s, Options{AcceptNoNamespace: true}), []string{"A"}, []wantUnit{{"u1", "", []string{"x"}, "0"}})
	})
	t.Run("witness list after the text", func(t *testing.T) {
		s := `<TEI xmlns="http://www.tei-c.org/ns/1.0"><text><body><app xml:id="u1"><rdg wit="#g">x</rdg></app></body>
			<back><listWit xml:id="g"><witness xml:id="A"/></listWit></back></text></TEI>`
		checkCollation(t, read(t, s, Options{}), []string{"A"}, []wantUnit{{"u1", "", []string{"x"}, "0"}})
	})
	t.Run("byte order mark and ASCII", func(t *testing.T) {
		s := "\xEF\xBB\xBF<?xml version=\"1.0\" encoding=\"US-ASCII\"?>" + doc(abc, `<app xml:id="u1"><rdg wit="#A">caf&#233; &amp; co</rdg></app>`)
		checkCollation(t, read(t, s, Options{}), []string{"A", "B", "C"}, []wantUnit{{"u1", "", []string{"café & co"}, "0--"}})
	})
}

func TestReaders(t *testing.T) {
	s := "\xEF\xBB\xBF" + doc(abc, `<app xml:id="u1"><rdg wit="#A">x</rdg></app>`)
	c, _, err := Read(iotest.OneByteReader(strings.NewReader(s)), "one-byte.xml", Options{})
	if err != nil {
		t.Fatal(err)
	}
	checkCollation(t, c, []string{"A", "B", "C"}, []wantUnit{{"u1", "", []string{"x"}, "0--"}})
	if _, _, err = Read(iotest.DataErrReader(strings.NewReader(s)), "data-err.xml", Options{}); err != nil {
		t.Errorf("data with EOF: %v", err)
	}
	_, _, err = Read(io.MultiReader(strings.NewReader(s[:100]), iotest.ErrReader(errors.New("disk on fire"))), "broken.xml", Options{})
	if err == nil || !strings.Contains(err.Error(), "disk on fire") || !strings.Contains(err.Error(), "broken.xml") {
		t.Errorf("a failing reader: err = %v", err)
	}
}
