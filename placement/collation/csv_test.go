package collation

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// cellsBySiglum returns c's extant cells as siglum -> unit id -> reading label.
func cellsBySiglum(c *Collation) map[string]map[string]string {
	out := map[string]map[string]string{}
	for w := 0; w < c.NumWitnesses(); w++ {
		m := map[string]string{}
		for u, r := range c.Row(w) {
			if r != Lacuna {
				m[c.Unit(u).ID] = c.Unit(u).Readings[r]
			}
		}
		out[c.Witness(w)] = m
	}
	return out
}

func TestReadCSV(t *testing.T) {
	// Columns in another order, a UTF-8 byte-order mark, CRLF line ends, a header in mixed case
	// with spaces, a blank line, values with spaces around them, a quoted value with a comma and
	// a doubled quote, non-ASCII text, a row repeated with the same reading, and an empty
	// section on the first row of a unit whose section is given later.
	in := "\xEF\xBB\xBFReading, Section ,unit,WITNESS\r\n" +
		"vælmor,I,1.1,Ald\r\n" +
		"vælmor,I,1.1,Bir\r\n" +
		"\r\n" +
		" nu , ,1.2, Ald \r\n" +
		"\"sona, sona\",I,1.2,Ced\r\n" +
		"\"he sæmde \"\"ja\"\"\",II,2.1,Bir\r\n" +
		"nu,I,1.2,Ald\r\n" +
		"sona,II,2.1,Ced\r\n"
	c, err := ReadCSV(strings.NewReader(in), "demo.csv")
	if err != nil {
		t.Fatal(err)
	}
	if got, want := c.Witnesses(), []string{"Ald", "Bir", "Ced"}; !reflect.DeepEqual(got, want) {
		t.Errorf("witnesses %q, want %q (order of first appearance)", got, want)
	}
	wantUnits := []Unit{
		{ID: "1.1", Section: "I", Readings: []string{"vælmor"}},
		{ID: "1.2", Section: "I", Readings: []string{"nu", "sona, sona"}},
		{ID: "2.1", Section: "II", Readings: []string{`he sæmde "ja"`, "sona"}},
	}
	if got := c.Units(); !reflect.DeepEqual(got, wantUnits) {
		t.Errorf("units\n got %+v\nwant %+v", got, wantUnits)
	}
	wantCells := map[string]map[string]string{
		"Ald": {"1.1": "vælmor", "1.2": "nu"},
		"Bir": {"1.1": "vælmor", "2.1": `he sæmde "ja"`},
		"Ced": {"1.2": "sona, sona", "2.1": "sona"},
	}
	if got := cellsBySiglum(c); !reflect.DeepEqual(got, wantCells) {
		t.Errorf("cells\n got %v\nwant %v", got, wantCells)
	}
	if got := c.Lacunae(); got != 3 {
		t.Errorf("Lacunae() = %d, want 3 (Ald 2.1, Bir 1.2, Ced 1.1)", got)
	}
}

func TestReadCSVNoSectionColumn(t *testing.T) {
	c, err := ReadCSV(strings.NewReader("unit,witness,reading\nu1,A,x\nu1,B,y\n"), "t.csv")
	if err != nil {
		t.Fatal(err)
	}
	if c.NumUnits() != 1 || c.NumWitnesses() != 2 || c.Unit(0).Section != "" || len(c.Sections()) != 0 {
		t.Errorf("got %d units, %d witnesses, sections %q", c.NumUnits(), c.NumWitnesses(), c.Sections())
	}
}

// TestReadCSVErrors checks every kind of fault: the line and field it is placed at and the words
// that tell the user what was expected.
func TestReadCSVErrors(t *testing.T) {
	const h = "witness,unit,reading\n"
	tests := []struct {
		name  string
		in    string
		line  int
		field string
		want  []string // substrings of the message
	}{
		{"empty file", "", 0, "", []string{"f.csv: the file is empty; expected a header line such as witness,unit,reading"}},
		{"byte-order mark only", "\xEF\xBB\xBF", 0, "", []string{"the file is empty"}},
		{"header lacks reading", "witness,unit\nA,u1\n", 1, "", []string{"f.csv line 1: the header lacks the column(s) reading;", "witness, unit, reading and optionally section"}},
		{"no header at all", "A,u1,x\n", 1, "", []string{`unknown column "A" in the header (field 1)`, "expected the columns witness, unit, reading"}},
		{"unknown column", "witness,unit,reading,note\nA,u1,x,first hand\n", 1, "", []string{`unknown column "note" in the header (field 4)`, "other columns are not read: remove them"}},
		{"column twice", "witness,unit,reading,Unit\n", 1, "", []string{`column "unit" is named twice in the header`}},
		{"header not UTF-8", "witness,unit,r\xE9ading\n", 1, "", []string{"header field 3 is not valid UTF-8"}},
		{"no rows", h, 1, "", []string{"no rows after the header; expected one row per extant witness-unit pair"}},
		{"no rows, blank lines only", h + "\n\n", 1, "", []string{"no rows after the header"}},
		{"empty witness", h + "A,u1,x\n,u1,y\n", 3, "witness", []string{"f.csv line 3, field witness: empty witness; expected the siglum of a witness"}},
		{"empty unit", h + "A,,x\n", 2, "unit", []string{"empty unit; expected the name of a variation unit"}},
		{"empty reading", h + "A,u1,x\nB,u1,\n", 3, "reading", []string{"empty reading;", `an omission is a reading too, e.g. "om"`, "leave the row out where the witness has a lacuna"}},
		{"blank reading", h + "A,u1,  \n", 2, "reading", []string{"empty reading"}},
		{"line count skips blank lines", h + "\n\nA,u1,\n", 4, "reading", []string{"f.csv line 4, field reading: empty reading"}},
		{"two readings for one cell", h + "A,u1,x\nB,u1,y\nA,u1,y\n", 4, "reading",
			[]string{`f.csv line 4, field reading: witness "A" has two readings at unit "u1" ("x" and "y")`, `a corrector's reading is usually given its own siglum, such as "Ac"`, "(the first was given on line 2)"}},
		{"two readings, CRLF", "witness,unit,reading\r\nA,u1,x\r\nA,u1,y\r\n", 3, "reading", []string{"two readings at unit", "line 2"}},
		{"two sections", "witness,unit,reading,section\nA,u1,x,I\nB,u1,y,\nC,u1,y,II\n", 4, "section",
			[]string{`unit "u1" is given two sections ("I" and "II"); a unit lies in one section`, "(the first was given on line 2)"}},
		{"not UTF-8", h + "A,u1,x\nB,u1,caf\xE9\n", 3, "reading", []string{"f.csv line 3, field reading: not valid UTF-8 (byte 0xE9 at byte 4 of the field); save the file as UTF-8"}},
		{"not UTF-8 in siglum", h + "\xFFA,u1,x\n", 2, "witness", []string{"not valid UTF-8 (byte 0xFF at byte 1"}},
		{"too few fields", h + "A,u1,x\nB,u1\n", 3, "", []string{"f.csv line 3: 2 fields, expected 3 (witness,unit,reading) as in the header"}},
		{"too many fields", "unit,reading,witness\nu1,x,A,extra\n", 2, "", []string{"4 fields, expected 3 (unit,reading,witness)"}},
		{"bare quote", h + "A,u1,a\"b\n", 2, "", []string{"f.csv line 2: column 7: bare \" in non-quoted-field", "must be put in double quotes"}},
		{"unclosed quote", h + "A,u1,\"ab\n", 2, "", []string{"extraneous or missing \" in quoted-field", "must end with a double quote"}},
		{"quote left open", h + "A,u1,\"ab\nB,u1,x\nC,u1,y\n", 2, "", []string{"f.csv line 2: record running on to line 4, column 8: extraneous or missing \" in quoted-field"}},
		{"tab in a value", h + "A,u1,\"a\tb\"\n", 2, "reading", []string{"holds the control character U+0009; a value is one line of text"}},
		{"line break in a value", h + "A,u1,\"a\nb\"\n", 2, "reading", []string{"control character U+000A"}},
		{"stray byte-order mark", h + "A,u1,x\n\xEF\xBB\xBFB,u1,x\n", 3, "witness", []string{"byte-order mark (U+FEFF), which is allowed only at the very start of the file"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			c, err := ReadCSV(strings.NewReader(tc.in), "f.csv")
			if err == nil {
				t.Fatalf("no error; read %d witnesses, %d units", c.NumWitnesses(), c.NumUnits())
			}
			if c != nil {
				t.Errorf("a collation came back with the error")
			}
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("error %T %q is not a *ParseError", err, err)
			}
			if pe.File != "f.csv" || pe.Line != tc.line || pe.Field != tc.field {
				t.Errorf("error at %s line %d field %q, want f.csv line %d field %q", pe.File, pe.Line, pe.Field, tc.line, tc.field)
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("message %q\n lacks %q", err, w)
				}
			}
		})
	}
}

// TestReadCSVCellLimit: a short file that names a few cells of a huge table is refused at the
// row that passes the limit, before the table is built.
func TestReadCSVCellLimit(t *testing.T) {
	defer func(m int64) { maxCells = m }(maxCells)
	maxCells = 12
	var in strings.Builder
	in.WriteString("witness,unit,reading\n")
	for i := 1; i <= 5; i++ { // witness i at unit i: 5 rows, a 5 x 5 table
		fmt.Fprintf(&in, "W%d,u%d,x\n", i, i)
	}
	_, err := ReadCSV(strings.NewReader(in.String()), "big.csv")
	var pe *ParseError
	// Row 4 (line 5) makes 4 x 4 = 16 cells, the first count above 12.
	if !errors.As(err, &pe) || pe.Line != 5 || !strings.Contains(err.Error(), "4 witnesses x 4 units so far pass the limit of 12 cells") {
		t.Errorf("got %v, want the limit reported at line 5", err)
	}
	maxCells = 16
	if c, err := ReadCSV(strings.NewReader("witness,unit,reading\nW1,u1,x\nW2,u2,x\nW3,u3,x\nW4,u4,x\n"), "fits.csv"); err != nil || c.NumWitnesses()*c.NumUnits() != 16 {
		t.Errorf("a table of exactly the limit: %v", err)
	}
}

func TestReadCSVTypedCauses(t *testing.T) {
	_, err := ReadCSV(strings.NewReader("witness,unit,reading\nA,u1,x\nA,u1,y\n"), "f.csv")
	var ce *ConflictError
	if !errors.As(err, &ce) || ce.Witness != "A" || ce.Unit != "u1" || ce.First != "x" || ce.Second != "y" {
		t.Errorf("errors.As ConflictError: %+v from %v", ce, err)
	}
	_, err = ReadCSV(strings.NewReader("witness,unit,reading,section\nA,u1,x,I\nB,u1,x,II\n"), "f.csv")
	var se *SectionError
	if !errors.As(err, &se) || se.Unit != "u1" || se.First != "I" || se.Second != "II" {
		t.Errorf("errors.As SectionError: %+v from %v", se, err)
	}
	_, err = ReadCSV(strings.NewReader(""), "f.csv")
	if !errors.Is(err, ErrEmptyFile) {
		t.Errorf("errors.Is(%v, ErrEmptyFile) is false", err)
	}
	_, err = ReadCSV(strings.NewReader("witness,unit,reading\n"), "f.csv")
	if !errors.Is(err, ErrNoRows) {
		t.Errorf("errors.Is(%v, ErrNoRows) is false", err)
	}
}

func TestReadCSVDefaultName(t *testing.T) {
	_, err := ReadCSV(strings.NewReader(""), "")
	if err == nil || !strings.HasPrefix(err.Error(), "collation CSV: ") {
		t.Errorf("error %q, want it to start with a stand-in name", err)
	}
}

type failingReader struct{}

func (failingReader) Read([]byte) (int, error) { return 0, errors.New("disk on fire") }

func TestReadCSVReadError(t *testing.T) {
	_, err := ReadCSV(failingReader{}, "f.csv")
	var pe *ParseError
	if !errors.As(err, &pe) || !strings.Contains(err.Error(), "f.csv: disk on fire") {
		t.Errorf("got %v, want a *ParseError carrying the read error", err)
	}
}

func TestParseErrorFormat(t *testing.T) {
	inner := errors.New("boom")
	tests := []struct {
		e    *ParseError
		want string
	}{
		{&ParseError{File: "a.csv", Line: 3, Field: "unit", Err: inner}, "a.csv line 3, field unit: boom"},
		{&ParseError{File: "a.csv", Line: 3, Err: inner}, "a.csv line 3: boom"},
		{&ParseError{File: "a.csv", Err: inner}, "a.csv: boom"},
	}
	for _, tc := range tests {
		if got := tc.e.Error(); got != tc.want {
			t.Errorf("Error() = %q, want %q", got, tc.want)
		}
		if !errors.Is(tc.e, inner) {
			t.Errorf("Unwrap does not reach the cause")
		}
	}
}

func TestReadCSVFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "c.csv")
	if err := os.WriteFile(path, []byte("witness,unit,reading\nA,u1,x\nA,u2,\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	_, err := ReadCSVFile(path)
	var pe *ParseError
	if !errors.As(err, &pe) || pe.File != path || pe.Line != 3 || pe.Field != "reading" {
		t.Errorf("got %v, want the error placed in %s line 3 field reading", err, path)
	}
	if err := os.WriteFile(path, []byte("witness,unit,reading\nA,u1,x\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	c, err := ReadCSVFile(path)
	if err != nil || c.NumWitnesses() != 1 || c.NumUnits() != 1 {
		t.Errorf("ReadCSVFile: %v, %v", c, err)
	}
	if _, err := ReadCSVFile(filepath.Join(t.TempDir(), "missing.csv")); err == nil || !strings.Contains(err.Error(), "missing.csv") {
		t.Errorf("missing file: %v, want an error naming it", err)
	}
}

// sameCollation reports how a and b differ as the long CSV form sees them: units (ids, sections,
// readings in order) in order, witnesses as a set, and the cells by siglum and unit id.
func sameCollation(a, b *Collation) string {
	if !reflect.DeepEqual(a.Units(), b.Units()) {
		return "units differ:\n " + sprintUnits(a) + "\n " + sprintUnits(b)
	}
	if !reflect.DeepEqual(a.SortedSigla(), b.SortedSigla()) {
		return "witnesses differ: " + strings.Join(a.SortedSigla(), " ") + " / " + strings.Join(b.SortedSigla(), " ")
	}
	for w := 0; w < a.NumWitnesses(); w++ {
		bw, _ := b.WitnessIndex(a.Witness(w))
		if !reflect.DeepEqual(a.Row(w), b.Row(bw)) {
			return "cells of " + a.Witness(w) + " differ"
		}
	}
	return ""
}

func sprintUnits(c *Collation) string {
	var s []string
	for _, u := range c.Units() {
		s = append(s, u.ID+"["+u.Section+"]{"+strings.Join(u.Readings, "|")+"}")
	}
	return strings.Join(s, " ")
}

// TestWriteCSVRoundTrip builds a collation whose witness-by-witness order would not give the
// units or readings back in order (Ced alone is extant at u1, so witness by witness u2 would come
// first; at u2 reading 0 is first held by Bir but Ald, before it, has reading 1), and checks that ReadCSV(WriteCSV(c)) gives the same units in the same
// order, the same readings in the same order, and the same cells.
func TestWriteCSVRoundTrip(t *testing.T) {
	var b Builder
	for _, w := range []string{"Ald", "Bir", "Ced", "Dun"} {
		b.AddWitness(w)
	}
	add := func(w, u, r, s string) {
		if err := b.Add(w, u, r, s); err != nil {
			t.Fatal(err)
		}
	}
	add("Ced", "u1", "ond", "I")
	add("Dun", "u2", "þorne", "I")
	add("Ald", "u2", `"quoted", with comma`, "I")
	add("Bir", "u2", "þorne", "I")
	add("Ald", "u3", "x", "")
	add("Bir", "u3", "y", "")
	add("Dun", "u4", "z", "II")
	add("Ald", "u4", "z", "II")
	c := b.Build()

	var buf bytes.Buffer
	if err := WriteCSV(&buf, c); err != nil {
		t.Fatal(err)
	}
	const want = "witness,unit,reading,section\n" +
		"Ced,u1,ond,I\n" +
		"Bir,u2,þorne,I\n" + // first holder of reading 0, moved ahead of Ald
		"Ald,u2,\"\"\"quoted\"\", with comma\",I\n" +
		"Dun,u2,þorne,I\n" +
		"Ald,u3,x,\n" +
		"Bir,u3,y,\n" +
		"Ald,u4,z,II\n" +
		"Dun,u4,z,II\n"
	if got := buf.String(); got != want {
		t.Errorf("WriteCSV wrote\n%s\nwant\n%s", got, want)
	}
	back, err := ReadCSV(&buf, "round.csv")
	if err != nil {
		t.Fatal(err)
	}
	if diff := sameCollation(c, back); diff != "" {
		t.Error(diff)
	}
}

func TestWriteCSVNoSections(t *testing.T) {
	c := fromTable(t, "A: x y", "B: x -")
	var buf bytes.Buffer
	if err := WriteCSV(&buf, c); err != nil {
		t.Fatal(err)
	}
	if got, want := buf.String(), "witness,unit,reading\nA,u1,x\nB,u1,x\nA,u2,y\n"; got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
}

func TestWriteCSVRefusesUnreadableValues(t *testing.T) {
	tests := []struct {
		w, u, r, s string
		want       string
	}{
		{"A", "u1", " x", "", `reading " x" at unit "u1": white space around the value`},
		{"A", "u1", "", "", `reading "" at unit "u1": empty reading`},
		{"A ", "u1", "x", "", `witness "A ": white space around the value`},
		{"A", "", "x", "", `unit "": empty unit`},
		{"A", "u1", "a\tb", "", "control character U+0009"},
		{"A", "u1", "x", "I\xFF", `section "I\xff" of unit "u1": not valid UTF-8`},
	}
	for _, tc := range tests {
		var b Builder
		if err := b.Add(tc.w, tc.u, tc.r, tc.s); err != nil {
			t.Fatal(err)
		}
		err := WriteCSV(&bytes.Buffer{}, b.Build())
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("WriteCSV(%q,%q,%q,%q) error %v, want it to contain %q", tc.w, tc.u, tc.r, tc.s, err, tc.want)
		}
	}
}

// TestBuilderConflictLeavesNoReading: a cell rejected for a second reading must not leave that
// reading declared at the unit.
func TestBuilderConflictLeavesNoReading(t *testing.T) {
	var b Builder
	if err := b.Add("A", "u1", "x", ""); err != nil {
		t.Fatal(err)
	}
	var ce *ConflictError
	if err := b.Add("A", "u1", "y", ""); !errors.As(err, &ce) {
		t.Fatalf("got %v, want a *ConflictError", err)
	}
	if err := b.Add("A", "u1", "x", ""); err != nil {
		t.Errorf("the same cell again with its own reading: %v", err)
	}
	if got := b.Build().Unit(0).Readings; !reflect.DeepEqual(got, []string{"x"}) {
		t.Errorf("readings %q, want [x]", got)
	}
}

// FuzzReadCSV: ReadCSV never panics; an error is always a *ParseError naming the file; what it
// reads is a well-formed collation that survives WriteCSV and ReadCSV again unchanged.
func FuzzReadCSV(f *testing.F) {
	for _, s := range []string{
		"witness,unit,reading\nA,u1,x\nB,u1,y\n",
		"\xEF\xBB\xBFreading,section,unit,witness\r\nx,I,u1,A\r\n\"y,z\",II,u2,B\r\n",
		"witness,unit,reading,section\nA,u1,x,\nA,u1,x,I\nB,u2,\"a \"\"q\"\"\",\n",
		"witness,unit,reading\nA,u1,x\nA,u1,y\n",
		"witness,unit\nA,u1\n",
		"witness,unit,reading\nA,u1,caf\xE9\n",
		"witness,unit,reading\nA,u1,\"open\n",
		"witness,unit,reading\n\n\nA , u1 , x \n",
		"",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := ReadCSV(bytes.NewReader(data), "fuzz.csv")
		if err != nil {
			var pe *ParseError
			if !errors.As(err, &pe) || pe.File != "fuzz.csv" || pe.Err == nil {
				t.Fatalf("error %T %v is not a *ParseError for fuzz.csv", err, err)
			}
			if c != nil {
				t.Fatal("a collation came back with the error")
			}
			return
		}
		for w := 0; w < c.NumWitnesses(); w++ {
			if c.Extant(w) == 0 {
				t.Fatalf("witness %q has no extant unit", c.Witness(w))
			}
			for u, r := range c.Row(w) {
				if r != Lacuna && (r < 0 || int(r) >= len(c.Unit(u).Readings)) {
					t.Fatalf("cell (%d,%d) = %d out of range", w, u, r)
				}
			}
		}
		var buf bytes.Buffer
		if err := WriteCSV(&buf, c); err != nil {
			t.Fatalf("WriteCSV of a collation ReadCSV accepted: %v", err)
		}
		back, err := ReadCSV(&buf, "again.csv")
		if err != nil {
			t.Fatalf("ReadCSV(WriteCSV(c)): %v\n%s", err, buf.String())
		}
		if diff := sameCollation(c, back); diff != "" {
			t.Fatal(diff)
		}
	})
}
