package tei

import (
	"bytes"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"math"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"unicode"
)

// node is an element of a parsed document.
type node struct {
	name     string // local name
	space    string
	attrs    map[string]string // "id" for xml:id is stored as "xml:id"
	kids     []*node
	text     strings.Builder // character data directly inside
	parent   *node
	line     int
	allText  string
	attrSeen []string
}

// parseTree parses b strictly (encoding/xml checks well-formedness) into a tree.
func parseTree(t *testing.T, b []byte) *node {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(b))
	d.Strict = true
	var root *node
	var stack []*node
	for {
		line, _ := d.InputPos()
		tok, err := d.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("not well-formed XML: %v\n%s", err, b)
		}
		switch tk := tok.(type) {
		case xml.StartElement:
			n := &node{name: tk.Name.Local, space: tk.Name.Space, attrs: map[string]string{}, line: line}
			for _, a := range tk.Attr {
				key := a.Name.Local
				switch a.Name.Space {
				case "":
					if key == "xmlns" {
						continue // the namespace declaration
					}
				case xmlNamespace:
					key = "xml:" + key
				default:
					key = a.Name.Space + ":" + key
				}
				n.attrs[key] = a.Value
				n.attrSeen = append(n.attrSeen, key)
			}
			if len(stack) > 0 {
				n.parent = stack[len(stack)-1]
				n.parent.kids = append(n.parent.kids, n)
			} else if root != nil {
				t.Fatalf("two root elements")
			} else {
				root = n
			}
			stack = append(stack, n)
		case xml.EndElement:
			n := stack[len(stack)-1]
			n.allText = collectText(n)
			stack = stack[:len(stack)-1]
		case xml.CharData:
			if len(stack) > 0 {
				stack[len(stack)-1].text.Write(tk)
			}
		case xml.Directive:
			t.Fatalf("unexpected directive %s", tk)
		}
	}
	if root == nil {
		t.Fatal("no root element")
	}
	return root
}

func collectText(n *node) string {
	var b strings.Builder
	b.WriteString(n.text.String())
	for _, k := range n.kids {
		b.WriteString(k.allText)
	}
	return b.String()
}

func (n *node) walk(fn func(*node)) {
	fn(n)
	for _, k := range n.kids {
		k.walk(fn)
	}
}

func (n *node) find(name string) []*node {
	var out []*node
	n.walk(func(m *node) {
		if m.name == name {
			out = append(out, m)
		}
	})
	return out
}

// teiRules is what the test knows of the TEI P5 content models and attributes of the elements
// the writers use, from memory of the TEI P5 Guidelines (chapter beside each). Children are the
// elements allowed directly inside (for the elements written here); attrs the attributes
// allowed (xml:id and n are global attributes, allowed on every element: ch. 1.3.1.1 "Global
// Attributes", from memory).
var teiRules = map[string]struct {
	children []string
	attrs    []string
}{
	"TEI":             {[]string{"teiHeader", "text"}, nil},                                  // ch. 4 / 16 (from memory)
	"teiHeader":       {[]string{"fileDesc"}, nil},                                           // ch. 2.1.1 (from memory)
	"fileDesc":        {[]string{"titleStmt", "publicationStmt", "sourceDesc"}, nil},         // ch. 2.2 (from memory)
	"titleStmt":       {[]string{"title"}, nil},                                              // ch. 2.2.1 (from memory)
	"title":           {nil, nil},                                                            // ch. 3.12.2.2 (from memory)
	"publicationStmt": {[]string{"p"}, nil},                                                  // ch. 2.2.4 (from memory)
	"sourceDesc":      {[]string{"p", "listWit"}, nil},                                       // ch. 2.2.7 (from memory)
	"listWit":         {[]string{"head", "witness", "listWit"}, nil},                         // ch. 12.1.4.1 (from memory)
	"witness":         {[]string{"note", "certainty"}, nil},                                  // ch. 12.1.4.1; model.global (from memory)
	"note":            {[]string{"list", "num"}, []string{"type"}},                           // ch. 3.9.1 (from memory)
	"list":            {[]string{"head", "item"}, []string{"type"}},                          // ch. 3.8 (from memory)
	"item":            {[]string{"ref", "num"}, nil},                                         // ch. 3.8 (from memory)
	"num":             {nil, []string{"type", "value"}},                                      // ch. 3.6.3 (from memory)
	"ref":             {nil, []string{"target"}},                                             // ch. 3.7 (from memory)
	"head":            {[]string{"ref", "num"}, nil},                                         // ch. 4.2.1 (from memory)
	"p":               {nil, nil},                                                            // ch. 3.1 (from memory)
	"text":            {[]string{"body"}, nil},                                               // ch. 4 (from memory)
	"body":            {[]string{"p", "div"}, nil},                                           // ch. 4 (from memory)
	"div":             {[]string{"head", "list", "table", "p"}, []string{"type"}},            // ch. 4.1 (from memory)
	"table":           {[]string{"head", "row"}, []string{"type"}},                           // ch. 14.1.1 (from memory)
	"row":             {[]string{"cell"}, []string{"role"}},                                  // ch. 14.1.1 (from memory)
	"cell":            {[]string{"num"}, []string{"role"}},                                   // ch. 14.1.1 (from memory)
	"certainty":       {nil, []string{"target", "locus", "degree", "assertedValue", "cert"}}, // ch. 21.1.2 (from memory)
}

// checkTEI checks a document against what the Guidelines say of its elements (teiRules, from
// memory) and returns the elements by xml:id.
func checkTEI(t *testing.T, b []byte) (*node, map[string]*node) {
	t.Helper()
	root := parseTree(t, b)
	if root.name != "TEI" || root.space != Namespace {
		t.Fatalf("root is {%s}%s; expected {%s}TEI", root.space, root.name, Namespace)
	}
	ids := map[string]*node{}
	root.walk(func(n *node) {
		if n.space != Namespace {
			t.Errorf("line %d: <%s> is in namespace %q; expected the TEI namespace", n.line, n.name, n.space)
		}
		rule, ok := teiRules[n.name]
		if !ok {
			t.Errorf("line %d: <%s> is not an element the writers are known to use correctly", n.line, n.name)
			return
		}
		for _, k := range n.kids {
			if !contains(rule.children, k.name) {
				t.Errorf("line %d: <%s> inside <%s>; the Guidelines (from memory) allow there only %v", k.line, k.name, n.name, rule.children)
			}
		}
		for _, a := range n.attrSeen {
			if a != "xml:id" && a != "n" && !contains(rule.attrs, a) {
				t.Errorf("line %d: <%s> has @%s; expected only %v and the global xml:id, n", n.line, n.name, a, rule.attrs)
			}
		}
		if id, ok := n.attrs["xml:id"]; ok {
			if !strictNCName(id) {
				t.Errorf("line %d: xml:id %q is not an NCName", n.line, id)
			}
			if prev, dup := ids[id]; dup {
				t.Errorf("line %d: xml:id %q already used at line %d", n.line, id, prev.line)
			}
			ids[id] = n
		}
	})
	// Orders the Guidelines impose (from memory): teiHeader before text; the fileDesc
	// statements in order; head elements first in listWit, list, table and div; sourceDesc
	// holds paragraphs or lists, not both; a listWit and a list are not empty.
	root.walk(func(n *node) {
		names := make([]string, len(n.kids))
		for i, k := range n.kids {
			names[i] = k.name
		}
		switch n.name {
		case "TEI":
			want(t, n, names, []string{"teiHeader", "text"})
		case "fileDesc":
			want(t, n, names, []string{"titleStmt", "publicationStmt", "sourceDesc"})
		case "teiHeader":
			want(t, n, names, []string{"fileDesc"})
		case "sourceDesc":
			if contains(names, "p") && contains(names, "listWit") {
				t.Errorf("line %d: <sourceDesc> mixes <p> and <listWit>", n.line)
			}
		case "listWit", "list", "table", "div":
			seenOther := false
			body := 0
			for _, k := range names {
				if k == "head" && seenOther {
					t.Errorf("line %d: <%s> has a <head> after other content", n.line, n.name)
				}
				if k != "head" {
					seenOther = true
					body++
				}
			}
			if body == 0 {
				t.Errorf("line %d: <%s> holds nothing but headings", n.line, n.name)
			}
			if n.name == "div" && (len(names) == 0 || names[0] != "head") {
				t.Errorf("line %d: <div> does not start with its <head>", n.line)
			}
		}
	})
	// Every pointer resolves; numbers are numbers; certainty is well formed (ch. 21.1.2, from
	// memory: @locus is required; @degree is a probability from 0 to 1).
	root.walk(func(n *node) {
		if tg, ok := n.attrs["target"]; ok {
			for _, p := range strings.Fields(tg) {
				if !strings.HasPrefix(p, "#") || ids[p[1:]] == nil {
					t.Errorf("line %d: <%s target=%q>: %q names no xml:id of the document", n.line, n.name, tg, p)
				}
			}
		}
		if v, ok := n.attrs["value"]; ok {
			if _, err := strconv.ParseFloat(v, 64); err != nil {
				t.Errorf("line %d: <num value=%q> is not a number", n.line, v)
			}
		}
		if n.name == "certainty" {
			if !contains([]string{"name", "start", "end", "location", "value"}, n.attrs["locus"]) {
				t.Errorf("line %d: <certainty> @locus %q; expected name, start, end, location or value", n.line, n.attrs["locus"])
			}
			d, err := strconv.ParseFloat(n.attrs["degree"], 64)
			if err != nil || d < 0 || d > 1 {
				t.Errorf("line %d: <certainty> @degree %q; expected a probability from 0 to 1", n.line, n.attrs["degree"])
			}
			if n.attrs["target"] == "" {
				t.Errorf("line %d: <certainty> without @target", n.line)
			}
		}
	})
	return root, ids
}

func want(t *testing.T, n *node, got, want []string) {
	t.Helper()
	if !reflect.DeepEqual(got, want) {
		t.Errorf("line %d: <%s> holds %v; expected %v", n.line, n.name, got, want)
	}
}

func contains(s []string, x string) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

// strictNCName checks the NCName production of Namespaces in XML 1.0 (from memory) for the
// characters these tests use: a letter or "_" first, then letters, digits, ".", "-", "_".
func strictNCName(s string) bool {
	for i, r := range s {
		if !(r == '_' || unicode.IsLetter(r) || (i > 0 && (unicode.IsDigit(r) || r == '.' || r == '-'))) {
			return false
		}
	}
	return s != ""
}

// withOneApp adds an <app> with one reading to the body of a written document, so that the
// apparatus reader (which wants at least one unit) reads its witness list.
func withOneApp(doc []byte) io.Reader {
	return bytes.NewReader(bytes.Replace(doc, []byte("<body>"), []byte("<body><div><ab><app><rdg>x</rdg></app></ab></div>"), 1))
}

func samplePlacements() []PlacedWitness {
	return []PlacedWitness{
		{Witness: "F1", BestGroup: "G2", Shares: []GroupShare{{"G2", 0.81234}, {"G1", 0.18766}}, Confidence: 0.87,
			CoveredUnits: 40, UsedUnits: 38, UnknownReadings: 2},
		{Witness: "F 2", BestGroup: "G1", Shares: []GroupShare{{"G1", 1}, {"G2", 0}}, Confidence: 1, CoveredUnits: 5, UsedUnits: 5},
		{Witness: "7b", Error: `no unit in common with the model <"here" & there>`},
		{Witness: "F1.best-group", BestGroup: "G1", Shares: []GroupShare{{"G1", 0.5}, {"G2", 0.5}}, Confidence: 0},
		{Witness: "Z", Shares: []GroupShare{{"G1", 0}, {"G2", 0}}},
		{Witness: "wit-1", BestGroup: "G2", Shares: []GroupShare{{"G2", 0.6}, {"G1", 0.4}}, Confidence: 0.55},
	}
}

func TestWritePlacementsStructure(t *testing.T) {
	ps := samplePlacements()
	var buf bytes.Buffer
	if err := WritePlacements(&buf, "demo@2", ps); err != nil {
		t.Fatal(err)
	}
	out := buf.Bytes()
	root, ids := checkTEI(t, out)

	// The witnesses read back, in order, with the apparatus reader (sigla that are not XML
	// names are in @n, as WriteApparatus writes them; the <listWit> of the output has no
	// xml:id, so it is no group).
	c, rep, err := Read(withOneApp(out), "placements.xml", Options{SiglumAttr: "n"})
	if err != nil {
		t.Fatalf("reading placements back: %v\n%s", err, out)
	}
	var sigla []string
	for _, p := range ps {
		sigla = append(sigla, p.Witness)
	}
	if !reflect.DeepEqual(c.Witnesses(), sigla) || rep.Groups != 0 {
		t.Errorf("read back %q (%d groups); expected %q and no group", c.Witnesses(), rep.Groups, sigla)
	}

	wits := root.find("witness")
	if len(wits) != len(ps) {
		t.Fatalf("%d witnesses written; expected %d", len(wits), len(ps))
	}
	for i, w := range wits {
		p := ps[i]
		siglum := w.attrs["xml:id"]
		if n, ok := w.attrs["n"]; ok {
			siglum = n
		}
		if siglum != p.Witness {
			t.Errorf("witness %d: siglum %q; expected %q", i, siglum, p.Witness)
		}
		notes := map[string]*node{}
		for _, k := range w.kids {
			if k.name == "note" {
				notes[k.attrs["type"]] = k
			}
		}
		certs := w.find("certainty")
		if p.Error != "" {
			if notes["error"] == nil || notes["error"].allText != p.Error || len(w.kids) != 1 {
				t.Errorf("%s: expected only an error note %q, got %d children", p.Witness, p.Error, len(w.kids))
			}
			continue
		}
		if p.BestGroup == "" {
			if notes["best-group"] != nil || len(certs) != 0 {
				t.Errorf("%s: no best group, yet a best-group note or certainty is written", p.Witness)
			}
		} else {
			best := notes["best-group"]
			if best == nil || best.allText != p.BestGroup {
				t.Fatalf("%s: best-group note missing or wrong", p.Witness)
			}
			if len(certs) != 1 || ids[strings.TrimPrefix(certs[0].attrs["target"], "#")] != best {
				t.Fatalf("%s: expected one certainty pointing at the best-group note", p.Witness)
			}
			d, _ := strconv.ParseFloat(certs[0].attrs["degree"], 64)
			if math.Abs(d-p.Confidence) > 5e-5 {
				t.Errorf("%s: certainty degree %v; expected %v within the four written decimals", p.Witness, d, p.Confidence)
			}
		}
		items := notes["group-shares"].find("item")
		if len(items) != len(p.Shares) {
			t.Fatalf("%s: %d shares written; expected %d", p.Witness, len(items), len(p.Shares))
		}
		for j, it := range items {
			v, err := strconv.ParseFloat(it.allText, 64)
			if it.attrs["n"] != p.Shares[j].Group || err != nil || math.Abs(v-p.Shares[j].Share) > 5e-5 {
				t.Errorf("%s: share %d is %s=%q; expected %s=%v", p.Witness, j, it.attrs["n"], it.allText, p.Shares[j].Group, p.Shares[j].Share)
			}
		}
		nums := map[string]string{}
		for _, n := range notes["coverage"].find("num") {
			nums[n.attrs["type"]] = n.attrs["value"]
		}
		wantNums := map[string]string{"covered-units": strconv.Itoa(p.CoveredUnits), "used-units": strconv.Itoa(p.UsedUnits), "unknown-readings": strconv.Itoa(p.UnknownReadings)}
		if !reflect.DeepEqual(nums, wantNums) {
			t.Errorf("%s: coverage %v; expected %v", p.Witness, nums, wantNums)
		}
	}
	for _, s := range []string{
		`<witness xml:id="wit-2" n="F 2">`, // not an NCName: generated id, siglum in @n
		`<witness xml:id="wit-3" n="7b">`,  // wit-1 is a siglum already
		`<witness xml:id="wit-1">`,
		`<note type="best-group" xml:id="F1.best-group.2">G2</note>`, // F1.best-group is a siglum
		`<certainty target="#F1.best-group.2" locus="value" degree="0.8700"/>`,
		`<item n="G2">0.8123</item>`,
		`<head>Placements against model demo@2</head>`,
	} {
		if !bytes.Contains(out, []byte(s)) {
			t.Errorf("output lacks %s\n%s", s, out)
		}
	}
}

func TestWritePlacementsEmpty(t *testing.T) {
	var buf bytes.Buffer
	if err := WritePlacements(&buf, "", nil); err != nil {
		t.Fatal(err)
	}
	root, _ := checkTEI(t, buf.Bytes())
	if len(root.find("listWit")) != 0 || len(root.find("witness")) != 0 {
		t.Errorf("empty placements wrote a witness list:\n%s", buf.Bytes())
	}
}

func TestWritePlacementsErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		p    PlacedWitness
		want string
	}{
		{"NaN confidence", PlacedWitness{Witness: "A", BestGroup: "G1", Confidence: math.NaN()}, "confidence is NaN"},
		{"confidence above 1", PlacedWitness{Witness: "A", BestGroup: "G1", Confidence: 1.5}, "confidence is 1.5"},
		{"negative share", PlacedWitness{Witness: "A", Shares: []GroupShare{{"G1", -0.1}}}, "share of G1 is -0.1"},
		{"control character", PlacedWitness{Witness: "A\x01"}, "U+0001"},
		{"bad UTF-8", PlacedWitness{Witness: "A", BestGroup: "G\xff"}, "not valid UTF-8"},
	} {
		err := WritePlacements(io.Discard, "m", []PlacedWitness{tc.p})
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err = %v; expected it to say %q", tc.name, err, tc.want)
		}
	}
	// An error record is written whatever its numbers hold.
	if err := WritePlacements(io.Discard, "m", []PlacedWitness{{Witness: "A", Error: "x", Confidence: math.NaN()}}); err != nil {
		t.Errorf("error record: %v", err)
	}
}

func sampleGroups() ([]Group, []Member) {
	groups := []Group{
		{ID: "G1", Size: 3, Leading: []WitnessShare{{"A", 0.99}, {"B", 0.95}, {"C d", 0.7}},
			Profile: []ProfileReading{{"1.1", "over the fen", 0.91}, {"u<2>", `"gone" & lost`, 0.6}}},
		{ID: "G2", Size: 1, Leading: []WitnessShare{{"E", 1}, {"C d", 0.3}, {"X", 0.2}}},
		{ID: "G 3", Size: 0}, // no member: no listWit
		{ID: "A", Size: 1, Leading: []WitnessShare{{"F", 0.8}}}, // clashes with a siglum
	}
	members := []Member{
		{"A", "G1", []float64{0.99, 0.01, 0, 0}},
		{"E", "G2", []float64{0, 1, 0, 0}},
		{"B", "G1", []float64{0.95, 0.05, 0, 0}},
		{"C d", "G1", []float64{0.7, 0.3, 0, 0}},
		{"F", "A", []float64{0.2, 0, 0, 0.8}},
		{"Q", "", []float64{0, 0, 0, 0}},
	}
	return groups, members
}

func TestWriteGroupsStructure(t *testing.T) {
	groups, members := sampleGroups()
	var buf bytes.Buffer
	if err := WriteGroups(&buf, "demo@1", groups, members); err != nil {
		t.Fatal(err)
	}
	out := buf.Bytes()
	root, ids := checkTEI(t, out)

	// Members read back in the written order (group by group, then those with no group), and
	// each nested <listWit> is a group of the reader.
	c, rep, err := Read(withOneApp(out), "groups.xml", Options{SiglumAttr: "n"})
	if err != nil {
		t.Fatalf("reading groups back: %v\n%s", err, out)
	}
	wantOrder := []string{"A", "B", "C d", "E", "F", "Q"}
	if !reflect.DeepEqual(c.Witnesses(), wantOrder) || rep.Groups != 3 {
		t.Errorf("read back %q with %d groups; expected %q with 3", c.Witnesses(), rep.Groups, wantOrder)
	}

	// Each member stands in its best group's listWit, with its shares.
	byID := map[string]Member{}
	for _, m := range members {
		byID[m.Witness] = m
	}
	for _, w := range root.find("witness") {
		siglum := w.attrs["xml:id"]
		if n, ok := w.attrs["n"]; ok {
			siglum = n
		}
		m := byID[siglum]
		group := ""
		if lw := w.parent; lw.attrs["xml:id"] != "" {
			group = lw.attrs["n"]
			if group == "" {
				group = lw.attrs["xml:id"]
			}
		}
		if group != m.BestGroup {
			t.Errorf("witness %q is in group %q; expected %q", siglum, group, m.BestGroup)
		}
		items := w.find("item")
		if len(items) != len(groups) {
			t.Fatalf("witness %q: %d shares; expected %d", siglum, len(items), len(groups))
		}
		for g, it := range items {
			v, _ := strconv.ParseFloat(it.allText, 64)
			if it.attrs["n"] != groups[g].ID || math.Abs(v-m.Shares[g]) > 5e-5 {
				t.Errorf("witness %q share %d: %s=%s; expected %s=%v", siglum, g, it.attrs["n"], it.allText, groups[g].ID, m.Shares[g])
			}
		}
	}

	divs := root.find("div")
	if len(divs) != len(groups) {
		t.Fatalf("%d group divisions; expected %d", len(divs), len(groups))
	}
	for g, d := range divs {
		gr := groups[g]
		if d.attrs["n"] != gr.ID || d.attrs["type"] != "group" {
			t.Errorf("div %d: n=%q type=%q; expected n=%q type=group", g, d.attrs["n"], d.attrs["type"], gr.ID)
		}
		head := d.kids[0]
		if refs := head.find("ref"); gr.ID != "G 3" {
			if len(refs) != 1 {
				t.Errorf("group %s: head without pointer to its listWit", gr.ID)
			} else if lw := ids[strings.TrimPrefix(refs[0].attrs["target"], "#")]; lw == nil || lw.name != "listWit" {
				t.Errorf("group %s: head points to %v; expected its listWit", gr.ID, refs[0].attrs["target"])
			}
		} else if len(refs) != 0 {
			t.Errorf("group %s has no member, yet its head points somewhere", gr.ID)
		}
		var leading []WitnessShare
		for _, l := range d.find("list") {
			for _, it := range l.find("item") {
				nums := it.find("num")
				v, _ := strconv.ParseFloat(nums[0].attrs["value"], 64)
				name := strings.TrimSpace(strings.TrimSuffix(it.allText, nums[0].allText))
				if refs := it.find("ref"); len(refs) == 1 {
					w := ids[strings.TrimPrefix(refs[0].attrs["target"], "#")]
					if w == nil || w.name != "witness" {
						t.Errorf("group %s: leading %q points to no witness", gr.ID, name)
					}
				} else if _, member := byID[name]; member {
					t.Errorf("group %s: leading member %q has no pointer", gr.ID, name)
				}
				leading = append(leading, WitnessShare{name, v})
			}
		}
		if len(leading) != len(gr.Leading) {
			t.Fatalf("group %s: leading %v; expected %v", gr.ID, leading, gr.Leading)
		}
		for i := range leading {
			if leading[i].Witness != gr.Leading[i].Witness || math.Abs(leading[i].Share-gr.Leading[i].Share) > 5e-5 {
				t.Errorf("group %s: leading %v; expected %v", gr.ID, leading, gr.Leading)
			}
		}
		var profile []ProfileReading
		for _, r := range d.find("row") {
			if r.attrs["role"] == "label" {
				continue
			}
			cells := r.find("cell")
			v, _ := strconv.ParseFloat(cells[2].allText, 64)
			profile = append(profile, ProfileReading{cells[0].allText, cells[1].allText, v})
		}
		if fmt.Sprint(profile) != fmt.Sprint(gr.Profile) && !(len(profile) == 0 && len(gr.Profile) == 0) {
			t.Errorf("group %s: profile %v; expected %v", gr.ID, profile, gr.Profile)
		}
	}
	for _, s := range []string{
		`<listWit xml:id="group-1" n="A">`, // the group id is a siglum too
		`<witness xml:id="wit-1" n="C d">`,
		`<item>X <num type="share" value="0.2000">0.2000</num></item>`, // not a member: no pointer
	} {
		if !bytes.Contains(out, []byte(s)) {
			t.Errorf("output lacks %s\n%s", s, out)
		}
	}
}

func TestWriteGroupsEmptyAndErrors(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteGroups(&buf, "", nil, nil); err != nil {
		t.Fatal(err)
	}
	checkTEI(t, buf.Bytes())
	buf.Reset()
	if err := WriteGroups(&buf, "", []Group{{ID: "G1"}}, nil); err != nil {
		t.Fatal(err)
	}
	checkTEI(t, buf.Bytes())

	groups, members := sampleGroups()
	for _, tc := range []struct {
		name string
		edit func(g []Group, m []Member) ([]Group, []Member)
		want string
	}{
		{"shares not parallel", func(g []Group, m []Member) ([]Group, []Member) {
			m[0].Shares = m[0].Shares[:1]
			return g, m
		}, `witness "A" has 1 shares for 4 groups`},
		{"unknown best group", func(g []Group, m []Member) ([]Group, []Member) { m[1].BestGroup = "G9"; return g, m }, `best group "G9"`},
		{"duplicate group", func(g []Group, m []Member) ([]Group, []Member) { g[1].ID = "G1"; return g, m }, `group id "G1" is given twice`},
		{"duplicate witness", func(g []Group, m []Member) ([]Group, []Member) { m[1].Witness = "A"; return g, m }, `witness "A" is given twice`},
		{"concentration above 1", func(g []Group, m []Member) ([]Group, []Member) { g[0].Profile[0].Concentration = 1.2; return g, m }, "concentration at 1.1 is 1.2"},
		{"NaN share", func(g []Group, m []Member) ([]Group, []Member) { g[1].Leading[0].Share = math.NaN(); return g, m }, "share of E is NaN"},
	} {
		g := append([]Group(nil), groups...)
		for i := range g {
			g[i].Profile = append([]ProfileReading(nil), g[i].Profile...)
			g[i].Leading = append([]WitnessShare(nil), g[i].Leading...)
		}
		m := append([]Member(nil), members...)
		for i := range m {
			m[i].Shares = append([]float64(nil), m[i].Shares...)
		}
		g, m = tc.edit(g, m)
		err := WriteGroups(io.Discard, "m", g, m)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err = %v; expected it to say %q", tc.name, err, tc.want)
		}
	}
}
