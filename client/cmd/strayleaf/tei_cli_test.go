package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"strayleaf/placement/collation"
	"strayleaf/placement/model"
	"strayleaf/placement/simulate"
	"strayleaf/placement/tei"
	pb "strayleaf/proto/strayleaf/v1"
)

// runStrayleaf runs the command line and returns its exit status, stdout and stderr.
func runStrayleaf(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

func mustRun(t *testing.T, args ...string) string {
	t.Helper()
	code, out, errs := runStrayleaf(args...)
	if code != 0 {
		t.Fatalf("strayleaf %s: exit %d\n%s%s", strings.Join(args, " "), code, out, errs)
	}
	return out
}

// teiFixture is a small simulated tradition, its trained bundle, and a TEI file of witnesses to
// place.
type teiFixture struct {
	dir, csvPath, bundle, witnesses string
	model                           *pb.Model
	col                             *collation.Collation
}

// getTEIFixture makes the fixture in a temporary directory of the test (training it takes a
// fraction of a second).
func getTEIFixture(t *testing.T) *teiFixture {
	t.Helper()
	f, err := makeTEIFixture(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	return f
}

func makeTEIFixture(dir string) (*teiFixture, error) {
	f := &teiFixture{dir: dir}
	cfg := simulate.DefaultConfig()
	cfg.Seed, cfg.Witnesses, cfg.Units = 5, 36, 90
	cfg.Families = []simulate.Family{{Groups: 1, Share: 0.5}, {Groups: 1, Share: 0.3}, {Groups: 1, Share: 0.2}}
	tr, err := simulate.Simulate(cfg)
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if err := collation.WriteCSV(&buf, tr.Collation); err != nil {
		return nil, err
	}
	f.csvPath = filepath.Join(dir, "tradition.csv")
	if err := os.WriteFile(f.csvPath, buf.Bytes(), 0o644); err != nil {
		return nil, err
	}
	if f.col, err = collation.ReadCSV(bytes.NewReader(buf.Bytes()), f.csvPath); err != nil {
		return nil, err
	}
	f.bundle = filepath.Join(dir, "model.bundle")
	var out, errb bytes.Buffer
	if code := run(context.Background(), []string{"train", "--collation", f.csvPath, "--groups", "3", "--restarts", "1", "--seed", "3", "--out", f.bundle, "--quiet"}, &out, &errb); code != 0 {
		return nil, fmt.Errorf("train: exit %d\n%s%s", code, out.String(), errb.String())
	}
	b, err := os.ReadFile(f.bundle)
	if err != nil {
		return nil, err
	}
	if f.model, err = model.DecodeBundleProto(b); err != nil {
		return nil, err
	}
	f.witnesses = filepath.Join(dir, "witnesses.xml")
	return f, os.WriteFile(f.witnesses, []byte(witnessesTEI(f.col)), 0o644)
}

// witnessesTEI writes three witnesses to place, in TEI: "F1" has the readings of the
// collation's first witness at its first 30 extant units; "F 2" (a siglum that is no XML name,
// so in @n) has the same readings but gives the first of them as an orthographic variant of
// it, which merges into F1's reading by default; "Z9" has a reading only at a unit the model
// does not know, so it cannot be placed.
func witnessesTEI(c *collation.Collation) string {
	var b strings.Builder
	b.WriteString(`<?xml version="1.0" encoding="UTF-8"?>
<TEI xmlns="http://www.tei-c.org/ns/1.0">
  <teiHeader><fileDesc><titleStmt><title>Fragments</title></titleStmt><publicationStmt><p>Invented.</p></publicationStmt>
    <sourceDesc><listWit><witness xml:id="F1"/><witness xml:id="wit-2" n="F 2"/><witness xml:id="Z9"/></listWit></sourceDesc>
  </fileDesc></teiHeader>
  <text><body><div><ab>
`)
	n := 0
	for u := 0; u < c.NumUnits() && n < 30; u++ {
		r := c.Reading(0, u)
		if r == collation.Lacuna {
			continue
		}
		un := c.Unit(u)
		if n == 0 {
			fmt.Fprintf(&b, "<app xml:id=%q><rdg wit=\"#F1\">%s</rdg><rdg wit=\"#wit-2\" type=\"orthographic\">%s</rdg></app>\n", un.ID, un.Readings[r], un.Readings[r]+"h")
		} else {
			fmt.Fprintf(&b, "<app xml:id=%q><rdg wit=\"#F1 #wit-2\">%s</rdg></app>\n", un.ID, un.Readings[r])
		}
		n++
	}
	b.WriteString("<app xml:id=\"nowhere\"><rdg wit=\"#Z9\">lost</rdg></app>\n</ab></div></body></text>\n</TEI>\n")
	return b.String()
}

// xmlTree parses a document into a small element tree (encoding/xml checks that it is
// well-formed).
type xmlElem struct {
	name  xml.Name
	attrs map[string]string
	kids  []*xmlElem
	text  string
}

func parseXML(t *testing.T, s string) *xmlElem {
	t.Helper()
	d := xml.NewDecoder(strings.NewReader(s))
	var stack []*xmlElem
	var root *xmlElem
	for {
		tok, err := d.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("output is not well-formed XML: %v\n%s", err, s)
		}
		switch tk := tok.(type) {
		case xml.StartElement:
			e := &xmlElem{name: tk.Name, attrs: map[string]string{}}
			for _, a := range tk.Attr {
				key := a.Name.Local
				if a.Name.Space == "http://www.w3.org/XML/1998/namespace" {
					key = "xml:" + key
				}
				e.attrs[key] = a.Value
			}
			if len(stack) > 0 {
				stack[len(stack)-1].kids = append(stack[len(stack)-1].kids, e)
			} else {
				root = e
			}
			stack = append(stack, e)
		case xml.EndElement:
			stack = stack[:len(stack)-1]
		case xml.CharData:
			for _, e := range stack {
				e.text += string(tk)
			}
		}
	}
	if root == nil || root.name.Local != "TEI" || root.name.Space != tei.Namespace {
		t.Fatalf("root element is not TEI in the TEI namespace:\n%s", s)
	}
	return root
}

func (e *xmlElem) all(local string) []*xmlElem {
	var out []*xmlElem
	var walk func(*xmlElem)
	walk = func(x *xmlElem) {
		if x.name.Local == local {
			out = append(out, x)
		}
		for _, k := range x.kids {
			walk(k)
		}
	}
	walk(e)
	return out
}

func (e *xmlElem) siglum() string {
	if n, ok := e.attrs["n"]; ok {
		return n
	}
	return e.attrs["xml:id"]
}

// placeJSON runs place --format json and returns the records by witness.
func placeJSON(t *testing.T, f *teiFixture, extra ...string) map[string]placementJSON {
	t.Helper()
	code, out, errs := runStrayleaf(append([]string{"place", "--bundle", f.bundle, "--witnesses", f.witnesses, "--siglum-attr", "n", "--format", "json"}, extra...)...)
	if code != 1 || !strings.Contains(errs, "1 of 3 witnesses could not be placed") {
		t.Fatalf("place --format json: exit %d (expected 1: Z9 cannot be placed)\n%s", code, errs)
	}
	recs := map[string]placementJSON{}
	dec := json.NewDecoder(strings.NewReader(out))
	for dec.More() {
		var r placementJSON
		if err := dec.Decode(&r); err != nil {
			t.Fatal(err)
		}
		recs[r.Witness] = r
	}
	return recs
}

func TestPlaceTEIOutput(t *testing.T) {
	f := getTEIFixture(t)
	recs := placeJSON(t, f)
	if len(recs) != 3 || recs["Z9"].Error == "" || recs["F1"].Error != "" || recs["F 2"].Error != "" {
		t.Fatalf("placements: %+v", recs)
	}
	// The orthographic variant is merged by default: F 2 reads as F1 does and places the same.
	f1, f2 := recs["F1"], recs["F 2"]
	f2.Witness = f1.Witness
	if !reflect.DeepEqual(f1, f2) {
		t.Errorf("with the default merge, F 2 should place as F1:\n%+v\n%+v", recs["F 2"], f1)
	}
	// With --merge-types "" the variant is a reading of its own, unknown to the model.
	kept := placeJSON(t, f, "--merge-types", "")
	variant := f.col.Unit(firstExtant(f.col)).ID
	if got, want := kept["F 2"].UnknownReadings, append([]string{variant}, f1.UnknownReadings...); !reflect.DeepEqual(got, want) {
		t.Errorf("with --merge-types \"\", F 2's unknown readings are %q; expected %q (the variant's unit, then F1's)", got, want)
	}

	code, out, errs := runStrayleaf("place", "--bundle", f.bundle, "--witnesses", f.witnesses, "--siglum-attr", "n", "--format", "tei")
	if code != 1 {
		t.Fatalf("place --format tei: exit %d\n%s", code, errs)
	}
	root := parseXML(t, out)
	ids := map[string]*xmlElem{}
	for _, e := range root.all("note") {
		if id := e.attrs["xml:id"]; id != "" {
			ids[id] = e
		}
	}
	wits := root.all("witness")
	if len(wits) != 3 || wits[0].siglum() != "F1" || wits[1].siglum() != "F 2" || wits[2].siglum() != "Z9" {
		t.Fatalf("witness list: %d witnesses\n%s", len(wits), out)
	}
	for _, w := range wits {
		r := recs[w.siglum()]
		certs := w.all("certainty")
		if r.Error != "" {
			if len(certs) != 0 || len(w.all("note")) != 1 || w.all("note")[0].attrs["type"] != "error" {
				t.Errorf("%s: expected just an error note", w.siglum())
			}
			continue
		}
		if len(certs) != 1 {
			t.Fatalf("%s: %d certainty elements; expected 1", w.siglum(), len(certs))
		}
		c := certs[0]
		best := ids[strings.TrimPrefix(c.attrs["target"], "#")]
		if best == nil || strings.TrimSpace(best.text) != r.BestGroup || c.attrs["locus"] != "value" {
			t.Errorf("%s: certainty %v does not point at a best-group note saying %s", w.siglum(), c.attrs, r.BestGroup)
		}
		if d, err := strconv.ParseFloat(c.attrs["degree"], 64); err != nil || math.Abs(d-r.Confidence) > 5e-5 || d < 0 || d > 1 {
			t.Errorf("%s: degree %q; expected the confidence %v", w.siglum(), c.attrs["degree"], r.Confidence)
		}
		items := w.all("item")
		if len(items) != len(r.Groups) {
			t.Fatalf("%s: %d shares written; %d in the JSON", w.siglum(), len(items), len(r.Groups))
		}
		for i, it := range items {
			v, _ := strconv.ParseFloat(it.text, 64)
			if it.attrs["n"] != r.Groups[i].Group || math.Abs(v-r.Groups[i].Share) > 5e-5 {
				t.Errorf("%s: share %s=%s; the JSON has %s=%v", w.siglum(), it.attrs["n"], it.text, r.Groups[i].Group, r.Groups[i].Share)
			}
		}
	}

	// CSV: the same figures, one row per witness.
	code, out, _ = runStrayleaf("place", "--bundle", f.bundle, "--witnesses", f.witnesses, "--siglum-attr", "n", "--format", "csv")
	if code != 1 {
		t.Fatalf("place --format csv: exit %d", code)
	}
	rows, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 4 || !reflect.DeepEqual(rows[0], []string{"witness", "best_group", "confidence", "covered_units", "unknown_readings", "shares", "error"}) {
		t.Fatalf("CSV:\n%s", out)
	}
	for _, row := range rows[1:] {
		r := recs[row[0]]
		if row[6] != r.Error {
			t.Errorf("%s: CSV error %q; JSON %q", row[0], row[6], r.Error)
		}
		if r.Error != "" {
			continue
		}
		conf, _ := strconv.ParseFloat(row[2], 64)
		if row[1] != r.BestGroup || math.Abs(conf-r.Confidence) > 5e-5 || row[3] != strconv.Itoa(r.CoveredUnits) {
			t.Errorf("%s: CSV %q disagrees with JSON %+v", row[0], row, r)
		}
	}
}

func firstExtant(c *collation.Collation) int {
	for u := 0; u < c.NumUnits(); u++ {
		if c.Reading(0, u) != collation.Lacuna {
			return u
		}
	}
	return -1
}

func TestGroupsCommand(t *testing.T) {
	f := getTEIFixture(t)
	pm := f.model
	if len(pm.Groups) != 3 {
		t.Fatalf("the bundle has %d groups", len(pm.Groups))
	}

	// JSON: the model's group summaries as they are.
	var rep groupsReport
	if err := json.Unmarshal([]byte(mustRun(t, "groups", "--bundle", f.bundle, "--format", "json")), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Model != f.bundle || len(rep.Groups) != len(pm.Groups) || len(rep.WitnessGroups) != len(pm.TrainingWitnesses) {
		t.Fatalf("groups JSON: %+v", rep)
	}
	for i, g := range pm.Groups {
		d := rep.Groups[i]
		if d.Group != g.Id || d.Size != int(g.Size) || len(d.Leading) != len(g.LeadingWitnesses) || len(d.Profile) != len(g.ProfileReadings) {
			t.Fatalf("group %d: %+v; the bundle has %v", i, d, g)
		}
		for j, l := range g.LeadingWitnesses {
			if d.Leading[j] != (witnessShare{l.Witness, l.Share}) {
				t.Errorf("group %s leading %d: %+v; bundle %v", g.Id, j, d.Leading[j], l)
			}
		}
		for j, p := range g.ProfileReadings {
			if d.Profile[j] != (profileReading{p.Unit, p.Reading, p.Concentration, p.Loading}) {
				t.Errorf("group %s profile %d: %+v; bundle %v", g.Id, j, d.Profile[j], p)
			}
		}
	}

	// Table: every group and its first leading witness.
	table := mustRun(t, "groups", "--bundle", f.bundle)
	for _, g := range pm.Groups {
		if !strings.Contains(table, g.Id) || (len(g.LeadingWitnesses) > 0 && !strings.Contains(table, g.LeadingWitnesses[0].Witness)) {
			t.Errorf("table lacks group %s:\n%s", g.Id, table)
		}
	}

	// CSV: one row per leading witness and profile reading, values exact.
	rows, err := csv.NewReader(strings.NewReader(mustRun(t, "groups", "--bundle", f.bundle, "--format", "csv"))).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var want [][]string
	for _, g := range pm.Groups {
		for j, l := range g.LeadingWitnesses {
			want = append(want, []string{g.Id, strconv.Itoa(int(g.Size)), "leading_witness", strconv.Itoa(j + 1), l.Witness, "", "", strconv.FormatFloat(l.Share, 'g', -1, 64), ""})
		}
		for j, p := range g.ProfileReadings {
			want = append(want, []string{g.Id, strconv.Itoa(int(g.Size)), "profile_reading", strconv.Itoa(j + 1), "", p.Unit, p.Reading,
				strconv.FormatFloat(p.Concentration, 'g', -1, 64), strconv.FormatFloat(p.Loading, 'g', -1, 64)})
		}
	}
	if len(rows) != len(want)+1 {
		t.Fatalf("CSV has %d rows; expected %d and a header", len(rows)-1, len(want))
	}
	for i, w := range want {
		got := rows[i+1]
		for _, col := range []int{7, 8} { // numbers compare by value
			if got[col] != "" {
				gv, _ := strconv.ParseFloat(got[col], 64)
				wv, _ := strconv.ParseFloat(w[col], 64)
				if gv == wv {
					got[col] = w[col]
				}
			}
		}
		if !reflect.DeepEqual(got, w) {
			t.Errorf("CSV row %d: %q; expected %q", i+1, got, w)
		}
	}

	// TEI: a division per group, the training witnesses in their best group's listWit.
	root := parseXML(t, mustRun(t, "groups", "--bundle", f.bundle, "--format", "tei"))
	var divs []*xmlElem
	for _, d := range root.all("div") {
		if d.attrs["type"] == "group" {
			divs = append(divs, d)
		}
	}
	if len(divs) != len(pm.Groups) {
		t.Fatalf("%d group divisions; expected %d", len(divs), len(pm.Groups))
	}
	inGroup := map[string]string{}
	for _, lw := range root.all("listWit") {
		if id := lw.attrs["xml:id"]; id != "" {
			for _, w := range lw.all("witness") {
				inGroup[w.siglum()] = id
			}
		}
	}
	for _, tw := range pm.TrainingWitnesses {
		if inGroup[tw.Witness] != tw.BestGroup {
			t.Errorf("witness %s is in group %q of the TEI; its best group is %q", tw.Witness, inGroup[tw.Witness], tw.BestGroup)
		}
	}
	for i, d := range divs {
		g := pm.Groups[i]
		if d.attrs["n"] != g.Id || len(d.all("row")) != len(g.ProfileReadings)+boolInt(len(g.ProfileReadings) > 0) {
			t.Errorf("division %d: n=%q with %d rows; group %s has %d profile readings", i, d.attrs["n"], len(d.all("row")), g.Id, len(g.ProfileReadings))
		}
	}

	if code, _, errs := runStrayleaf("groups", "--bundle", f.bundle, "--format", "xml"); code == 0 || !strings.Contains(errs, `--format "xml"`) {
		t.Errorf("bad --format: exit %d, %s", code, errs)
	}
	if code, _, errs := runStrayleaf("groups"); code == 0 || !strings.Contains(errs, "no model given") {
		t.Errorf("no model: exit %d, %s", code, errs)
	}
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}

// TestInspectTEI runs inspect --json on the TEI test file of package tei. The expected figures
// are those worked out by hand for that file in placement/tei/read_test.go (which names the TEI
// P5 Guidelines section of each construct).
func TestInspectTEI(t *testing.T) {
	src, err := os.ReadFile("../../../placement/tei/testdata/apparatus.xml")
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "apparatus.xml")
	if err := os.WriteFile(path, src, 0o644); err != nil {
		t.Fatal(err)
	}
	inspect := func(extra ...string) inspectReport {
		t.Helper()
		var rep inspectReport
		if err := json.Unmarshal([]byte(mustRun(t, append([]string{"inspect", "--collation", path, "--json"}, extra...)...)), &rep); err != nil {
			t.Fatal(err)
		}
		if rep.TEI == nil {
			t.Fatal("inspect --json of a TEI file has no tei part")
		}
		return rep
	}

	rep := inspect()
	ti := rep.TEI
	if ti.Witnesses != 8 || ti.Groups != 3 || ti.Units != 9 || ti.Readings != 23 || ti.ReadingElements != 31 {
		t.Errorf("tei counts %+v; expected 8 witnesses, 3 groups, 9 units, 23 readings, 31 reading elements", ti)
	}
	if want := (inspectTEILacunae{Total: 11, Absent: 7, Marked: 2, Gap: 1, Detail: 1}); ti.Lacunae != want {
		t.Errorf("lacunae %+v; expected %+v", ti.Lacunae, want)
	}
	if rep.Lacunae != ti.Lacunae.Total || rep.Witnesses != ti.Witnesses || rep.Readings != ti.Readings {
		t.Errorf("collation counts (%d lacunae, %d witnesses, %d readings) disagree with the TEI report", rep.Lacunae, rep.Witnesses, rep.Readings)
	}
	if !reflect.DeepEqual(ti.MergeTypes, []string{"orthographic", "nonsense"}) || !reflect.DeepEqual(ti.MergedByType, map[string]int{"orthographic": 4, "nonsense": 1}) {
		t.Errorf("default merge: types %q, merged %v", ti.MergeTypes, ti.MergedByType)
	}
	wantMerges := []inspectMerge{
		{Unit: "2", Type: "orthographic", Reading: "ouer the fen", Into: "over the fen", Witnesses: []string{"L"}, Line: 44},
		{Unit: "2", Type: "nonsense", Reading: "over the fenn fen", Into: "over the fen", Witnesses: []string{"M2", "N"}, Line: 45},
		{Unit: "app-3", Type: "orthographic", Reading: "whyte gulls", Into: "white gulls", Witnesses: []string{"N"}, Line: 53},
		{Unit: "app-3", Type: "orthographic", Reading: "grey mewes", Into: "grey mews", Witnesses: []string{"Pc"}, Line: 57},
		{Unit: "u7", Type: "orthographic", Reading: "ran colde", Into: "ran cold", Witnesses: []string{"L", "M2", "Pc"}, Line: 88},
	}
	if !reflect.DeepEqual(ti.Merges, wantMerges) {
		t.Errorf("merges %+v; expected %+v", ti.Merges, wantMerges)
	}
	if want := []inspectGenID{{"app-3", 49}}; !reflect.DeepEqual(ti.GeneratedIDs, want) {
		t.Errorf("generated ids %+v; expected %+v", ti.GeneratedIDs, want)
	}

	// Nothing merged: the five merged elements are readings of their own (23 + 5).
	none := inspect("--merge-types", "")
	if none.TEI.Readings != 28 || len(none.TEI.Merges) != 0 || len(none.TEI.MergedByType) != 0 || len(none.TEI.MergeTypes) != 0 {
		t.Errorf("--merge-types \"\": %+v", none.TEI)
	}
	// Only orthographic readings merged: the nonsense reading stays (23 + 1).
	orth := inspect("--merge-types", "orthographic")
	if orth.TEI.Readings != 24 || !reflect.DeepEqual(orth.TEI.MergedByType, map[string]int{"orthographic": 4}) {
		t.Errorf("--merge-types orthographic: %+v", orth.TEI)
	}

	// The table shows the same.
	table := mustRun(t, "inspect", "--collation", path)
	for _, s := range []string{"TEI apparatus:", "8 (3 listWit groups)", "11 cells: 7 absent from the app, 2 lacunaStart/lacunaEnd, 1 gap, 1 witDetail",
		"merged readings  5: nonsense 1, orthographic 4", "ouer the fen"} {
		if !strings.Contains(table, s) {
			t.Errorf("inspect table lacks %q:\n%s", s, table)
		}
	}

	// A CSV collation has no TEI part.
	f := getTEIFixture(t)
	var csvRep map[string]any
	if err := json.Unmarshal([]byte(mustRun(t, "inspect", "--collation", f.csvPath, "--json")), &csvRep); err != nil {
		t.Fatal(err)
	}
	if _, ok := csvRep["tei"]; ok {
		t.Errorf("inspect --json of a CSV collation has a tei part")
	}
	if code, _, errs := runStrayleaf("inspect", "--collation", path, "--merge-types", "bad type"); code == 0 || !strings.Contains(errs, "white space") {
		t.Errorf("--merge-types with white space: exit %d, %s", code, errs)
	}
}

// Training on the TEI form of the fixture's collation, with the CLI, gives the model the CSV
// form gives (bit-identical W, and equal in every field); only the recorded checksum differs.
func TestTrainTEIMatchesCSV(t *testing.T) {
	f := getTEIFixture(t)
	dir := t.TempDir()
	xmlPath := filepath.Join(dir, "tradition.xml")
	var buf bytes.Buffer
	if err := tei.WriteApparatus(&buf, f.col); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(xmlPath, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "tei.bundle")
	mustRun(t, "train", "--collation", xmlPath, "--groups", "3", "--restarts", "1", "--seed", "3", "--out", out, "--quiet")
	b, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	m, err := model.DecodeBundleProto(b)
	if err != nil {
		t.Fatal(err)
	}
	if m.CollationSha256 == f.model.CollationSha256 {
		t.Errorf("the two files have the same checksum")
	}
	if len(m.Profile) != len(f.model.Profile) {
		t.Fatalf("W sizes %d and %d", len(m.Profile), len(f.model.Profile))
	}
	for i := range m.Profile {
		if math.Float64bits(m.Profile[i]) != math.Float64bits(f.model.Profile[i]) {
			t.Fatalf("W differs at %d: %v (TEI) vs %v (CSV)", i, m.Profile[i], f.model.Profile[i])
		}
	}
	m.CollationSha256 = f.model.CollationSha256
	if !proto.Equal(m, f.model) {
		t.Errorf("the models differ beyond the collation checksum")
	}
}
