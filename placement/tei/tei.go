// Package tei reads a collation from a TEI P5 critical apparatus encoded by parallel
// segmentation, and writes one.
//
// # What is read
//
// The reader follows the TEI P5 Guidelines, chapter 12 "Critical Apparatus" (from memory):
//
//   - Witnesses are the <witness xml:id="..."> elements, wherever they stand (usually in a
//     <listWit> of the header). The siglum is the xml:id, or the attribute named by
//     Options.SiglumAttr when the witness has it. Witnesses are kept in declaration order.
//   - A <listWit> with an xml:id is a group: a @wit pointer to it stands for every witness
//     declared inside it, nested groups included.
//   - Each <app> is a variation unit. Its id is @xml:id, else @n, else a generated
//     "app-<ordinal>", the ordinal counting <app> elements from 1 in document order (if that id is
//     taken by another app, "app-<ordinal>.2", ".3", ... is used). Generated ids are listed in
//     Report.GeneratedIDs. Two apps with the same id are an error. Units are in the order of their
//     start tags, so an <app> nested inside a reading (allowed in parallel segmentation) follows
//     the app that holds it; its text is not part of the outer reading's text.
//   - A unit's section is the Options.SectionAttr (default @n) of the enclosing section elements
//     (Options.SectionElements, default div and div1 to div7) that have it, outermost first,
//     joined by Options.SectionSeparator (default "."): <div n="2"><div n="b"> gives "2.b".
//   - Each <lem> and <rdg> is a reading element; its @wit lists the witnesses that have it, as
//     space-separated pointers "#A #B" (bare ids "A B" are accepted too; a pointer into another
//     document is refused). A reading element with no @wit adds its reading to the unit with no
//     witness (unless Options.NegativeLem, for a <lem>). An <app> may hold at most one <lem>.
//   - The reading's label is its Options.LabelAttr attribute (default @n), verbatim, when present;
//     otherwise its text with XML white space collapsed to single spaces and trimmed. The text is
//     all character data inside the element, except inside <note>, <witDetail>, <wit>, <gap>,
//     <desc>, a nested <app>, and elements in other namespaces. An empty text is an omission,
//     labelled Options.OmissionLabel (default "om."). Reading elements with the same label are one
//     reading of the unit; readings are kept in document order.
//   - A witness may be named in only one reading element of an <app>, and only once in it
//     (directly or through a group); otherwise a *DuplicateWitnessError is returned.
//   - Witnesses may be declared anywhere in the document, before or after the apparatus: @wit
//     pointers are resolved once the whole document is read. A <variantEncoding> with a
//     @method other than "parallel-segmentation" is refused.
//
// # Reading types and merging
//
// A reading element's type is its @type, or else the @type of the nearest enclosing <rdgGrp>
// that has one. Options.TypeActions maps types to actions; a type mapped to Merge (say
// "orthographic" or "nonsense") makes the element's witnesses count as witnesses of its parent
// reading, and the element adds no reading of its own. A <lem> is never merged. The parent is
// found as follows:
//
//  1. A reading element is substantive if it is a <lem> or its type is not mapped to Merge.
//  2. If the element is inside <rdgGrp> elements, the innermost group that holds a substantive
//     reading (at any depth within it) gives the parent: its first substantive reading in
//     document order.
//  3. Otherwise the <lem> of the app, if it has one.
//  4. Otherwise the first substantive reading of the app in document order.
//  5. If the app has no substantive reading at all, the first reading element of the app is the
//     parent (it stays a reading; the others merge into it).
//
// Every merge is listed in Report.Merges, and counted per type in Report.MergedByType.
//
// # Lacunae
//
// A witness-unit cell is a lacuna (collation.Lacuna) when:
//
//   - the witness is named in no reading element of the app (Report.Lacunae.Absent);
//   - lacunaStart/lacunaEnd (Report.Lacunae.Marked): a <lacunaStart wit="#X"/> makes X lacunose,
//     a <lacunaEnd wit="#X"/> makes it extant again; <witEnd/> acts as lacunaStart and
//     <witStart/> as lacunaEnd (a fragment's text ends or begins). Inside a reading element the
//     marker may leave out @wit: it then applies to the element's witnesses. A witness named in a reading element is lacunose there if it is lacunose at the
//     end of the element, or if a marker for it comes after some of the element's text (the
//     reading is then incomplete). So <rdg wit="#X"><lacunaStart/></rdg> is a lacuna and X stays
//     lacunose until a lacunaEnd; <rdg wit="#X"><lacunaEnd/>word</rdg> is X's full reading "word".
//     A witness named in a reading while lacunose gets a lacuna there, not the reading;
//   - <gap> (Report.Lacunae.Gap): a reading element holding a <gap> is incomplete, and the cells of
//     all its witnesses are lacunae;
//   - <witDetail> (Report.Lacunae.Detail): a <witDetail wit="#X"> inside an <app> whose @type is
//     one of Options.LacunaDetailTypes (default "damage", "illegible", "lacuna") makes X's cell at
//     that app a lacuna. Without @wit, inside a reading element, it applies to the element's
//     witnesses. Other witDetail elements are notes and change nothing.
//
// A lacuna caused in several ways is counted once, under the first of Marked, Gap, Detail.
//
// # Safety
//
// The input must be UTF-8 (or declared US-ASCII). A DOCTYPE is refused, so no entity can be
// declared; only the five predefined entities and character references are understood, and any
// other entity reference is an error. Work and memory are bounded by Options.Limits.
package tei

import (
	"errors"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"

	"strayleaf/placement/collation"
)

// Namespaces of the names the reader looks at.
const (
	// Namespace is the TEI namespace.
	Namespace = "http://www.tei-c.org/ns/1.0"
	// xmlNamespace is the namespace of the xml: prefix (xml:id).
	xmlNamespace = "http://www.w3.org/XML/1998/namespace"
)

// Action says what is done with reading elements of a given @type.
type Action int

const (
	// Keep makes the element a reading of its own (the default for every type).
	Keep Action = iota
	// Merge gives the element's witnesses to its parent reading (see the package doc).
	Merge
)

func (a Action) String() string {
	switch a {
	case Keep:
		return "keep"
	case Merge:
		return "merge"
	}
	return fmt.Sprintf("Action(%d)", int(a))
}

// Limits bound the work and memory of a read. A zero field takes its default.
type Limits struct {
	// MaxInputBytes is the largest input read (default 1 GiB).
	MaxInputBytes int64
	// MaxTokenBytes is the largest single XML token: a tag with its attributes, a run of text, a
	// comment (default 16 MiB). It bounds the decoder's buffer.
	MaxTokenBytes int64
	// MaxTokens is the most XML tokens read (default 50,000,000).
	MaxTokens int64
	// MaxDepth is the deepest element nesting (default 256).
	MaxDepth int
	// MaxAttrBytes is the longest attribute value (default 1 MiB).
	MaxAttrBytes int
	// MaxLabelBytes is the longest reading text (default 64 KiB); a longer reading can be given a
	// short label in its @n.
	MaxLabelBytes int
	// MaxCells is the largest witnesses x units table (default 100,000,000 cells, 400 MB). It also
	// bounds the witness look-ups made while resolving pointers (twice this number).
	MaxCells int64
}

// DefaultLimits returns the default limits.
func DefaultLimits() Limits {
	return Limits{
		MaxInputBytes: 1 << 30,
		MaxTokenBytes: 16 << 20,
		MaxTokens:     50_000_000,
		MaxDepth:      256,
		MaxAttrBytes:  1 << 20,
		MaxLabelBytes: 64 << 10,
		MaxCells:      100_000_000,
	}
}

// Options are the reader's settings. The zero value reads with the defaults and merges nothing.
type Options struct {
	// TypeActions maps a reading @type to its action; types not in the map are kept. For example
	// {"orthographic": Merge, "nonsense": Merge}.
	TypeActions map[string]Action
	// LabelAttr names the reading attribute that gives the label (default "n"). "xml:id" names the
	// xml:id attribute.
	LabelAttr string
	// TextLabels ignores LabelAttr: labels always come from the reading's text.
	TextLabels bool
	// OmissionLabel labels a reading with no text (default "om.").
	OmissionLabel string
	// SectionElements are the TEI elements whose SectionAttr gives the section (default div,
	// div1 ... div7).
	SectionElements []string
	// SectionAttr names the section attribute (default "n").
	SectionAttr string
	// SectionSeparator joins the labels of nested sections (default ".").
	SectionSeparator string
	// SiglumAttr, if set, names a <witness> attribute that gives the siglum when present (for
	// example "n"); otherwise the siglum is the xml:id.
	SiglumAttr string
	// LacunaDetailTypes are the witDetail @type values that make a lacuna (default "damage",
	// "illegible", "lacuna"). A non-nil empty slice means none.
	LacunaDetailTypes []string
	// NegativeLem reads a <lem> without @wit as the reading of every declared witness that is not
	// named elsewhere in the app and is not lacunose there (a negative apparatus).
	NegativeLem bool
	// AcceptNoNamespace reads elements in no namespace as TEI elements.
	AcceptNoNamespace bool
	// Limits bound the work; zero fields take their defaults.
	Limits Limits
}

// withDefaults fills zero fields and checks the rest.
func (o Options) withDefaults() (Options, error) {
	def := DefaultLimits()
	l := &o.Limits
	for _, f := range []struct {
		name string
		v    *int64
		d    int64
	}{
		{"MaxInputBytes", &l.MaxInputBytes, def.MaxInputBytes},
		{"MaxTokenBytes", &l.MaxTokenBytes, def.MaxTokenBytes},
		{"MaxTokens", &l.MaxTokens, def.MaxTokens},
		{"MaxCells", &l.MaxCells, def.MaxCells},
	} {
		if *f.v < 0 {
			return o, fmt.Errorf("tei options: Limits.%s is %d; expected a positive number, or 0 for the default", f.name, *f.v)
		}
		if *f.v == 0 {
			*f.v = f.d
		}
	}
	for _, f := range []struct {
		name string
		v    *int
		d    int
	}{
		{"MaxDepth", &l.MaxDepth, def.MaxDepth},
		{"MaxAttrBytes", &l.MaxAttrBytes, def.MaxAttrBytes},
		{"MaxLabelBytes", &l.MaxLabelBytes, def.MaxLabelBytes},
	} {
		if *f.v < 0 {
			return o, fmt.Errorf("tei options: Limits.%s is %d; expected a positive number, or 0 for the default", f.name, *f.v)
		}
		if *f.v == 0 {
			*f.v = f.d
		}
	}
	for t, a := range o.TypeActions {
		if t == "" {
			return o, fmt.Errorf("tei options: TypeActions has an empty type; expected @type values such as \"orthographic\"")
		}
		if a != Keep && a != Merge {
			return o, fmt.Errorf("tei options: type %q has action %d; expected Keep or Merge", t, int(a))
		}
	}
	if o.LabelAttr == "" {
		o.LabelAttr = "n"
	}
	if o.OmissionLabel == "" {
		o.OmissionLabel = "om."
	}
	if o.SectionElements == nil {
		o.SectionElements = []string{"div", "div1", "div2", "div3", "div4", "div5", "div6", "div7"}
	}
	if o.SectionAttr == "" {
		o.SectionAttr = "n"
	}
	if o.SectionSeparator == "" {
		o.SectionSeparator = "."
	}
	if o.LacunaDetailTypes == nil {
		o.LacunaDetailTypes = []string{"damage", "illegible", "lacuna"}
	}
	return o, nil
}

// Report says what a read found.
type Report struct {
	// Source is the name given to Read.
	Source string
	// Witnesses, Units and Readings count the collation's witnesses, units and distinct readings
	// (after merging).
	Witnesses, Units, Readings int
	// Groups counts the <listWit> groups with an xml:id.
	Groups int
	// ReadingElements counts the <lem> and <rdg> elements read.
	ReadingElements int
	// Lacunae counts the lacuna cells by cause.
	Lacunae LacunaCounts
	// MergedByType counts merged reading elements per @type.
	MergedByType map[string]int
	// Merges lists every merge, app by app in the order the apps close (so a nested app's
	// merges come before those of the app holding it), in document order within an app.
	Merges []MergedReading
	// GeneratedIDs lists the units whose id was generated.
	GeneratedIDs []GeneratedID
}

// LacunaCounts counts lacuna cells (witness x unit) by cause; each cell is counted once.
type LacunaCounts struct {
	// Absent: the witness is named in no reading element of the app.
	Absent int
	// Marked: named, but lacunose there by lacunaStart/lacunaEnd (or witEnd/witStart).
	Marked int
	// Gap: named in a reading element that holds a <gap>.
	Gap int
	// Detail: named, and a witDetail of a lacuna type is given for it at the app.
	Detail int
}

// Total returns the number of lacuna cells.
func (l LacunaCounts) Total() int { return l.Absent + l.Marked + l.Gap + l.Detail }

// MergedReading records one reading element merged into its parent reading.
type MergedReading struct {
	Unit string
	// Type is the element's effective @type.
	Type string
	// Reading is the merged element's own label; Into is the parent reading's label.
	Reading, Into string
	// Witnesses are the witnesses that got the parent reading through this merge (lacunose
	// witnesses left out).
	Witnesses []string
	// Line is the merged element's line.
	Line int
}

// GeneratedID records a unit whose <app> had neither xml:id nor @n.
type GeneratedID struct {
	ID   string
	Line int
}

// Error is a problem in the input, located by line and element.
type Error struct {
	// Source is the name given to Read.
	Source string
	// Line is the 1-based line where the element starts (0 if not known).
	Line int
	// Element is the element's local name (or "!DOCTYPE"), "" if none.
	Element string
	// Err says what went wrong and what was expected.
	Err error
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.Source)
	if e.Line > 0 {
		fmt.Fprintf(&b, " line %d", e.Line)
	}
	b.WriteString(": ")
	if e.Element != "" {
		fmt.Fprintf(&b, "<%s>: ", e.Element)
	}
	b.WriteString(e.Err.Error())
	return b.String()
}

func (e *Error) Unwrap() error { return e.Err }

// ErrDoctype is returned (wrapped in *Error) for any <!DOCTYPE ...> or other markup declaration.
var ErrDoctype = errors.New("a DOCTYPE is refused: it can declare entities, and this reader expands none; remove it (a TEI document needs no DOCTYPE)")

// ErrNoReadings is returned (wrapped in *Error) for an <app> with no <lem> or <rdg>.
var ErrNoReadings = errors.New("the app has no reading; expected at least one <lem> or <rdg>")

// LimitError reports a limit of Options.Limits reached.
type LimitError struct {
	// Limit is the Limits field's name.
	Limit string
	// Max is its value.
	Max int64
}

func (e *LimitError) Error() string {
	return fmt.Sprintf("input exceeds Limits.%s = %d; raise it in the options if the input is trusted", e.Limit, e.Max)
}

// UnknownWitnessError reports a @wit pointer to no declared witness or group.
type UnknownWitnessError struct {
	Pointer string
	// Declared lists some of the declared witness ids (at most 10), and NumDeclared counts them.
	Declared    []string
	NumDeclared int
}

func (e *UnknownWitnessError) Error() string {
	var known string
	switch {
	case e.NumDeclared == 0:
		known = "no witness is declared (expected <witness xml:id=\"...\"> in a <listWit>)"
	case e.NumDeclared > len(e.Declared):
		known = fmt.Sprintf("declared: %s, ... (%d in all)", strings.Join(e.Declared, ", "), e.NumDeclared)
	default:
		known = "declared: " + strings.Join(e.Declared, ", ")
	}
	return fmt.Sprintf("@wit points to %q, which is no declared witness or <listWit> group; %s", e.Pointer, known)
}

// DuplicateWitnessError reports a witness named twice in one <app>.
type DuplicateWitnessError struct {
	Witness, Unit string
	// First is the element that named the witness first ("lem" or "rdg") and FirstLine its line.
	First     string
	FirstLine int
	// SameReading is set when both names are in one reading element (directly or via a group).
	SameReading bool
}

func (e *DuplicateWitnessError) Error() string {
	if e.SameReading {
		return fmt.Sprintf("witness %q is named twice in the same reading of app %q (directly or through a <listWit> group); name it once", e.Witness, e.Unit)
	}
	return fmt.Sprintf("witness %q is already named in the <%s> at line %d of the same app %q; a witness has one reading at a unit (a corrector is usually given its own siglum, such as %q)",
		e.Witness, e.First, e.FirstLine, e.Unit, e.Witness+"c")
}

// Read reads a TEI parallel-segmentation apparatus from r; name labels errors and the report.
// A problem in the input is an *Error giving the line and element, wrapping the cause (an
// *UnknownWitnessError, *DuplicateWitnessError, *LimitError, ErrDoctype, ErrNoReadings, an
// *xml.SyntaxError, or a plain description); a failed read returns no collation and no report.
func Read(r io.Reader, name string, opt Options) (*collation.Collation, *Report, error) {
	o, err := opt.withDefaults()
	if err != nil {
		return nil, nil, err
	}
	p := newParser(r, name, o)
	if err := p.run(); err != nil {
		return nil, nil, err
	}
	return p.resolve()
}

// ReadFile reads the apparatus in the file at path.
func ReadFile(path string, opt Options) (*collation.Collation, *Report, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, fmt.Errorf("reading TEI apparatus: %w", err)
	}
	defer f.Close()
	return Read(f, path, opt)
}

// sortedTypes returns the keys of m sorted (for stable output).
func sortedTypes(m map[string]int) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// String summarises the report on a few lines.
func (r *Report) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %d witnesses (%d groups), %d units, %d readings from %d reading elements\n",
		r.Source, r.Witnesses, r.Groups, r.Units, r.Readings, r.ReadingElements)
	fmt.Fprintf(&b, "lacunae: %d cells (absent %d, marked %d, gap %d, witDetail %d)\n",
		r.Lacunae.Total(), r.Lacunae.Absent, r.Lacunae.Marked, r.Lacunae.Gap, r.Lacunae.Detail)
	if len(r.MergedByType) > 0 {
		b.WriteString("merged:")
		for _, t := range sortedTypes(r.MergedByType) {
			fmt.Fprintf(&b, " %s %d", t, r.MergedByType[t])
		}
		b.WriteString("\n")
	}
	if len(r.GeneratedIDs) > 0 {
		fmt.Fprintf(&b, "generated unit ids: %d\n", len(r.GeneratedIDs))
	}
	return b.String()
}
