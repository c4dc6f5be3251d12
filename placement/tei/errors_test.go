package tei

import (
	"encoding/xml"
	"errors"
	"strings"
	"testing"
)

// readErr reads s and returns the error, failing the test if there is none.
func readErr(t *testing.T, s string, opt Options) error {
	t.Helper()
	c, rep, err := Read(strings.NewReader(s), "test.xml", opt)
	if err == nil {
		t.Fatalf("no error; read %d witnesses, %d units", c.NumWitnesses(), rep.Units)
	}
	if c != nil || rep != nil {
		t.Errorf("a failed read returned a collation or report")
	}
	return err
}

func TestErrorMessages(t *testing.T) {
	for _, tc := range []struct {
		name string
		s    string
		// want are substrings of the message: where, which element, what was expected.
		want []string
	}{
		{"unknown witness", doc(abc, `<app xml:id="u1">
			<rdg wit="#A #Z">x</rdg></app>`),
			[]string{"test.xml line 4: <rdg>: ", `@wit points to "#Z", which is no declared witness`, "declared: A, B, C"}},
		{"witness in two readings", doc(abc, `<app xml:id="u1">
			<lem wit="#A #B">x</lem>
			<rdg wit="#B">y</rdg></app>`),
			[]string{"line 5: <rdg>: ", `witness "B" is already named in the <lem> at line 4 of the same app "u1"`, "corrector is usually given its own siglum", `"Bc"`}},
		{"witness twice in one reading", doc(`<witness xml:id="A"/><listWit xml:id="g"><witness xml:id="B"/></listWit>`, `<app xml:id="u1"><rdg wit="#g #B">x</rdg></app>`),
			[]string{"<rdg>: ", `witness "B" is named twice in the same reading of app "u1"`}},
		{"app without readings", doc(abc, `<app xml:id="u1">
			<note>nothing</note></app>`),
			[]string{"line 3: <app>: the app has no reading; expected at least one <lem> or <rdg>"}},
		{"mismatched tags", doc(abc, `<app xml:id="u1"><rdg wit="#A">x</lem></app>`),
			[]string{"line 3: malformed XML: element <rdg> closed by </lem>"}},
		{"unclosed document", `<TEI xmlns="http://www.tei-c.org/ns/1.0"><app>`,
			[]string{"malformed XML: unexpected end of input (an element is left open)"}},
		{"undeclared entity", doc(abc, `<app xml:id="u1"><rdg wit="#A">&nbsp;</rdg></app>`),
			[]string{"malformed XML", "invalid character entity &nbsp;", "no entity is declared or expanded"}},
		{"reading outside an app", doc(abc, `<rdg wit="#A">x</rdg>`),
			[]string{"<rdg>: a reading outside an <app>"}},
		{"reading inside a reading", doc(abc, `<app xml:id="u1"><rdg wit="#A">x<rdg wit="#B">y</rdg></rdg></app>`),
			[]string{"<rdg>: a reading inside the <rdg> at line 3", "needs its own <app>"}},
		{"two lems", doc(abc, `<app xml:id="u1"><lem wit="#A">x</lem><lem wit="#B">y</lem></app>`),
			[]string{"<lem>: a second <lem>", "at most one lem"}},
		{"witness without xml:id", doc(`<witness n="A"/>`, `<app xml:id="u1"><rdg>x</rdg></app>`),
			[]string{"<witness>: a witness without xml:id"}},
		{"witness id twice", doc(`<witness xml:id="A"/><listWit xml:id="A"/>`, `<app xml:id="u1"><rdg>x</rdg></app>`),
			[]string{"<listWit>: xml:id \"A\" is declared twice (first at line 1)"}},
		{"app id twice", doc(abc, `<div n="1"><app n="1"><rdg wit="#A">x</rdg></app></div>
			<div n="2"><app n="1"><rdg wit="#A">x</rdg></app></div>`),
			[]string{"line 4: <app>: unit id \"1\" is given twice (first at line 3)", "give each app a unique xml:id"}},
		{"pointer into another document", doc(abc, `<app xml:id="u1"><rdg wit="other.xml#A">x</rdg></app>`),
			[]string{"<rdg>: @wit pointer \"other.xml#A\" is not a local pointer"}},
		{"marker without witness", doc(abc, `<lacunaStart/><app xml:id="u1"><rdg wit="#A">x</rdg></app>`),
			[]string{"<lacunaStart>: a lacuna marker outside a reading names no witness"}},
		{"other variant encoding", `<TEI xmlns="http://www.tei-c.org/ns/1.0"><teiHeader><encodingDesc>
			<variantEncoding method="location-referenced" location="external"/></encodingDesc></teiHeader></TEI>`,
			[]string{"line 2: <variantEncoding>: the apparatus is encoded by method \"location-referenced\""}},
		{"no app", doc(abc, `<p>plain text</p>`), []string{"no <app> found"}},
		{"no TEI", `<doc><app/></doc>`, []string{"no TEI element found", Namespace}},
		{"two roots", `<TEI xmlns="http://www.tei-c.org/ns/1.0"/><TEI xmlns="http://www.tei-c.org/ns/1.0"/>`,
			[]string{"<TEI>: a second root element"}},
		{"text after the root", `<TEI xmlns="http://www.tei-c.org/ns/1.0"/>junk`, []string{"text outside the root element"}},
		{"other encoding", `<?xml version="1.0" encoding="ISO-8859-1"?><TEI/>`,
			[]string{"cannot read the input", "only UTF-8 input is read"}},
		{"invalid UTF-8", doc(abc, "<app xml:id=\"u1\"><rdg wit=\"#A\">\xff</rdg></app>"),
			[]string{"malformed XML", "UTF-8"}},
		{"witness pointers of an unknown group", doc(abc, `<app xml:id="u1"><rdg wit="#A">x<lacunaEnd wit="#nobody"/></rdg></app>`),
			[]string{"<lacunaEnd>: @wit points to \"#nobody\""}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			msg := readErr(t, tc.s, Options{}).Error()
			t.Log(msg)
			for _, w := range tc.want {
				if !strings.Contains(msg, w) {
					t.Errorf("error %q\n  lacks %q", msg, w)
				}
			}
		})
	}
}

func TestTypedErrors(t *testing.T) {
	err := readErr(t, doc(abc, `<app xml:id="u1"><lem wit="#A">x</lem><rdg wit="#A">y</rdg></app>`), Options{})
	var dup *DuplicateWitnessError
	var te *Error
	if !errors.As(err, &dup) || dup.Witness != "A" || dup.Unit != "u1" || dup.First != "lem" || dup.FirstLine != 3 || dup.SameReading {
		t.Errorf("err = %#v, want a DuplicateWitnessError for A at u1", err)
	}
	if !errors.As(err, &te) || te.Line != 3 || te.Element != "rdg" || te.Source != "test.xml" {
		t.Errorf("err = %#v, want an *Error at line 3, element rdg", err)
	}

	err = readErr(t, doc(abc, `<app xml:id="u1"><rdg wit="#X">x</rdg></app>`), Options{})
	var unk *UnknownWitnessError
	if !errors.As(err, &unk) || unk.Pointer != "#X" || unk.NumDeclared != 3 {
		t.Errorf("err = %#v, want an UnknownWitnessError for #X", err)
	}

	err = readErr(t, doc(abc, `<app xml:id="u1"/>`), Options{})
	if !errors.Is(err, ErrNoReadings) {
		t.Errorf("err = %v, want ErrNoReadings", err)
	}

	err = readErr(t, doc(abc, `<app xml:id="u1"><rdg>x</app>`), Options{})
	var se *xml.SyntaxError
	if !errors.As(err, &se) {
		t.Errorf("err = %#v, want an *xml.SyntaxError inside", err)
	}

	if _, _, err := Read(strings.NewReader(""), "x", Options{Limits: Limits{MaxDepth: -1}}); err == nil || !strings.Contains(err.Error(), "Limits.MaxDepth is -1") {
		t.Errorf("negative limit: err = %v", err)
	}
	if _, _, err := Read(strings.NewReader(""), "x", Options{TypeActions: map[string]Action{"t": 7}}); err == nil || !strings.Contains(err.Error(), `type "t" has action 7`) {
		t.Errorf("unknown action: err = %v", err)
	}
	if _, _, err := Read(strings.NewReader(""), "x", Options{TypeActions: map[string]Action{"": Merge}}); err == nil || !strings.Contains(err.Error(), "empty type") {
		t.Errorf("empty type: err = %v", err)
	}
	if _, _, err := ReadFile("testdata/no-such-file.xml", Options{}); err == nil || !strings.Contains(err.Error(), "no-such-file.xml") {
		t.Errorf("missing file: err = %v", err)
	}
}

// No entity is ever expanded: a DOCTYPE, which is the only way to declare one, is refused before
// anything in it is looked at (so nothing is fetched either).
func TestRefuseDoctype(t *testing.T) {
	for _, f := range []string{"testdata/billion-laughs.xml", "testdata/external-entity.xml"} {
		t.Run(f, func(t *testing.T) {
			_, _, err := ReadFile(f, Options{})
			if !errors.Is(err, ErrDoctype) {
				t.Fatalf("err = %v, want ErrDoctype", err)
			}
			var te *Error
			if !errors.As(err, &te) || te.Line != 2 || te.Element != "!DOCTYPE" {
				t.Errorf("err = %v, want line 2, element !DOCTYPE", err)
			}
			if strings.Contains(err.Error(), "root:") {
				t.Errorf("the error quotes a file it must not read: %v", err)
			}
		})
	}
	// A DOCTYPE without an internal subset, and one after the root start, are refused too.
	for _, s := range []string{
		`<!DOCTYPE TEI><TEI xmlns="http://www.tei-c.org/ns/1.0"/>`,
		`<TEI xmlns="http://www.tei-c.org/ns/1.0"><!ENTITY x "y"></TEI>`,
	} {
		if err := readErr(t, s, Options{}); !errors.Is(err, ErrDoctype) {
			t.Errorf("%s: err = %v, want ErrDoctype", s, err)
		}
	}
}

func TestLimits(t *testing.T) {
	deep := `<TEI xmlns="http://www.tei-c.org/ns/1.0">` + strings.Repeat("<p>", 40) + strings.Repeat("</p>", 40) + `</TEI>`
	longText := doc(abc, `<app xml:id="u1"><rdg wit="#A">`+strings.Repeat("word ", 100)+`</rdg></app>`)
	manyApps := doc(abc, strings.Repeat(`<app><rdg wit="#A">x</rdg></app>`, 20))
	for _, tc := range []struct {
		name, s string
		lim     Limits
		limit   string
	}{
		{"depth", deep, Limits{MaxDepth: 10}, "MaxDepth"},
		{"tokens", manyApps, Limits{MaxTokens: 50}, "MaxTokens"},
		{"attribute", doc(abc, `<app xml:id="`+strings.Repeat("u", 200)+`"><rdg wit="#A">x</rdg></app>`), Limits{MaxAttrBytes: 100}, "MaxAttrBytes"},
		{"token bytes", longText, Limits{MaxTokenBytes: 200}, "MaxTokenBytes"},
		{"input bytes", manyApps, Limits{MaxInputBytes: 300}, "MaxInputBytes"},
		{"label", longText, Limits{MaxLabelBytes: 100}, "MaxLabelBytes"},
		{"cells", manyApps, Limits{MaxCells: 59}, "MaxCells"},
		{"look-ups", doc(`<listWit xml:id="g">`+strings.Repeat(`<witness xml:id="w"/>`, 1)+`</listWit>`+abc,
			strings.Repeat(`<lacunaStart wit="#A #B #C"/>`, 30)+`<app xml:id="u1"><rdg wit="#A">x</rdg></app>`), Limits{MaxCells: 20}, "MaxCells"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := readErr(t, tc.s, Options{Limits: tc.lim})
			var le *LimitError
			if !errors.As(err, &le) || le.Limit != tc.limit {
				t.Fatalf("err = %v, want a LimitError for %s", err, tc.limit)
			}
			if !strings.Contains(err.Error(), "Limits."+tc.limit) {
				t.Errorf("message %q does not name the limit", err)
			}
			// With the default limits the same input reads.
			if tc.name != "depth" {
				if _, _, err := Read(strings.NewReader(tc.s), "test.xml", Options{}); err != nil {
					t.Errorf("with default limits: %v", err)
				}
			}
		})
	}
}
