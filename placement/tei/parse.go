package tei

import (
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"strings"
)

// The parse pass streams the document once and keeps a compact record of what it found:
// declarations, apps, reading elements (with their @wit pointers interned as numbers), lacuna
// markers and witDetails, and the document order of all of them as a list of events. The
// resolve pass then replays the events, once every witness is known (a <listWit> may follow the
// text), and builds the collation.

type frameKind uint8

const (
	kOther frameKind = iota
	kListWit
	kWitness
	kApp
	kReading
	kGroup
	kSection
)

// frame is an open TEI element.
type frame struct {
	kind frameKind
	name string
	line int
	// app is the innermost open <app> (-1 if none).
	app int32
	// rdg is the reading element open within that app (-1 if none).
	rdg int32
	// text is the reading element whose text the character data here joins (-1 if none), and buf
	// its buffer's index in parser.textBufs.
	text int32
	buf  int
	// group is the innermost open <rdgGrp> of that app (index into its groups, -1 if none), and
	// grpType the nearest enclosing group @type.
	group   int32
	grpType string
}

type witDecl struct {
	id, siglum string
	line       int
}

type groupDecl struct {
	id      string
	line    int
	members []int32
}

type idKind uint8

const (
	idNone idKind = iota
	idXML
	idN
)

type grpRec struct{ parent int32 }

type appRec struct {
	id      string
	idKind  idKind
	line    int
	section string
	level   int32
	lem     int32
	rdgs    []int32
	groups  []grpRec
}

type rdgRec struct {
	app      int32
	group    int32
	lem      bool
	hasWit   bool
	gap      bool
	hasText  bool
	fixed    bool // the label comes from the label attribute
	typ      string
	label    string
	line     int
	lo, hi   int32 // @wit pointers in parser.pool
	elemName string
}

type markRec struct {
	start     bool
	own       bool // no @wit: the reading element's witnesses
	afterText bool
	rdg       int32
	lo, hi    int32
	line      int
	elem      string
}

type detailRec struct {
	own    bool
	app    int32
	rdg    int32
	lo, hi int32
	line   int
}

type evKind uint8

const (
	evAppStart evKind = iota
	evAppEnd
	evRdgStart
	evRdgEnd
	evMark
	evDetail
)

type event struct {
	kind evKind
	idx  int32
}

type parser struct {
	opt Options
	src string
	in  *boundedReader
	dec *xml.Decoder

	stack      []frame
	sections   []string
	section    string // sections joined
	openGroups []int32
	textBufs   [][]byte
	openApps   int32
	tokens     int64
	depth      int
	skip       int
	roots      int
	sawTEI     bool

	labelAttr, sectionAttr, siglumAttr xml.Name
	sectionEl                          map[string]bool
	detailTypes                        map[string]bool

	wits   []witDecl
	groups []groupDecl
	decls  map[string]int32 // id -> witness index, or -(group index + 1)
	sigla  map[string]int32

	ptrIndex map[string]int32
	ptrNames []string
	pool     []int32

	apps    []appRec
	rdgs    []rdgRec
	marks   []markRec
	details []detailRec
	events  []event
}

func qname(s string) xml.Name {
	if rest, ok := strings.CutPrefix(s, "xml:"); ok {
		return xml.Name{Space: xmlNamespace, Local: rest}
	}
	return xml.Name{Local: s}
}

func newParser(r io.Reader, name string, o Options) *parser {
	p := &parser{
		opt:         o,
		src:         name,
		in:          newBoundedReader(r, o.Limits.MaxInputBytes, o.Limits.MaxTokenBytes),
		labelAttr:   qname(o.LabelAttr),
		sectionAttr: qname(o.SectionAttr),
		sectionEl:   map[string]bool{},
		detailTypes: map[string]bool{},
		decls:       map[string]int32{},
		sigla:       map[string]int32{},
		ptrIndex:    map[string]int32{},
	}
	if o.SiglumAttr != "" {
		p.siglumAttr = qname(o.SiglumAttr)
	}
	for _, e := range o.SectionElements {
		p.sectionEl[e] = true
	}
	for _, t := range o.LacunaDetailTypes {
		p.detailTypes[t] = true
	}
	d := xml.NewDecoder(p.in)
	d.Strict = true
	d.Entity = nil
	d.CharsetReader = func(label string, in io.Reader) (io.Reader, error) {
		if strings.EqualFold(label, "us-ascii") || strings.EqualFold(label, "ascii") {
			return in, nil
		}
		return nil, fmt.Errorf("only UTF-8 input is read; convert the file from %s to UTF-8", label)
	}
	p.dec = d
	return p
}

func (p *parser) errAt(line int, elem string, err error) error {
	return &Error{Source: p.src, Line: line, Element: elem, Err: err}
}

func (p *parser) errf(line int, elem, format string, a ...any) error {
	return p.errAt(line, elem, fmt.Errorf(format, a...))
}

func (p *parser) isTEI(n xml.Name) bool {
	return n.Space == Namespace || (p.opt.AcceptNoNamespace && n.Space == "")
}

func attrValue(attrs []xml.Attr, n xml.Name) (string, bool) {
	for _, a := range attrs {
		if a.Name.Local == n.Local && a.Name.Space == n.Space {
			return a.Value, true
		}
	}
	return "", false
}

func isSpace(c byte) bool { return c == ' ' || c == '\t' || c == '\n' || c == '\r' }

// run streams the document.
func (p *parser) run() error {
	lim := &p.opt.Limits
	for {
		p.in.startToken()
		line, _ := p.dec.InputPos()
		tok, err := p.dec.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			return p.decodeError(line, err)
		}
		p.tokens++
		if p.tokens > lim.MaxTokens {
			return p.errAt(line, "", &LimitError{Limit: "MaxTokens", Max: lim.MaxTokens})
		}
		switch t := tok.(type) {
		case xml.StartElement:
			if p.depth == 0 {
				p.roots++
				if p.roots > 1 {
					return p.errf(line, t.Name.Local, "a second root element; an XML document has one root element")
				}
			}
			p.depth++
			if p.depth > lim.MaxDepth {
				return p.errAt(line, t.Name.Local, &LimitError{Limit: "MaxDepth", Max: int64(lim.MaxDepth)})
			}
			for _, a := range t.Attr {
				if len(a.Value) > lim.MaxAttrBytes {
					return p.errAt(line, t.Name.Local, &LimitError{Limit: "MaxAttrBytes", Max: int64(lim.MaxAttrBytes)})
				}
			}
			if p.skip > 0 {
				p.skip++
				continue
			}
			if !p.isTEI(t.Name) {
				p.skip = 1
				continue
			}
			p.sawTEI = true
			if err := p.start(t, line); err != nil {
				return err
			}
		case xml.EndElement:
			p.depth--
			if p.skip > 0 {
				p.skip--
				continue
			}
			if err := p.end(line); err != nil {
				return err
			}
		case xml.CharData:
			if p.skip > 0 {
				continue
			}
			if len(p.stack) == 0 {
				if p.depth == 0 && !allSpace(t) {
					return p.errf(line, "", "text outside the root element; expected only white space there")
				}
				continue
			}
			if err := p.text(t, line); err != nil {
				return err
			}
		case xml.Directive:
			return p.errAt(line, "!"+directiveName(t), ErrDoctype)
		case xml.ProcInst, xml.Comment:
			// Processing instructions (xml-model, xml-stylesheet) and comments carry no apparatus.
		}
	}
	if !p.sawTEI {
		return p.errf(0, "", "no TEI element found: expected elements in the TEI namespace %s (set AcceptNoNamespace to read elements in no namespace)", Namespace)
	}
	if len(p.apps) == 0 {
		return p.errf(0, "", "no <app> found: expected a critical apparatus encoded by parallel segmentation")
	}
	return nil
}

func directiveName(d xml.Directive) string {
	s := strings.TrimSpace(string(d))
	if i := strings.IndexAny(s, " \t\r\n["); i >= 0 {
		s = s[:i]
	}
	if len(s) > 20 {
		s = s[:20]
	}
	return s
}

func allSpace(b []byte) bool {
	for _, c := range b {
		if !isSpace(c) {
			return false
		}
	}
	return true
}

func (p *parser) decodeError(line int, err error) error {
	switch {
	case errors.Is(err, errInputLimit):
		return p.errAt(line, "", &LimitError{Limit: "MaxInputBytes", Max: p.opt.Limits.MaxInputBytes})
	case errors.Is(err, errTokenLimit):
		return p.errAt(line, "", &LimitError{Limit: "MaxTokenBytes", Max: p.opt.Limits.MaxTokenBytes})
	}
	var se *xml.SyntaxError
	if errors.As(err, &se) {
		msg := se.Msg
		if msg == "unexpected EOF" {
			msg = "unexpected end of input (an element is left open)"
		}
		if strings.Contains(msg, "entity") {
			msg += " (only the predefined entities &lt; &gt; &amp; &quot; &apos; and character references are read; no entity is declared or expanded)"
		}
		return p.errAt(se.Line, "", &malformedError{msg: msg, err: err})
	}
	return p.errAt(line, "", fmt.Errorf("cannot read the input: %w", err))
}

// malformedError is a decoder error, worded without the decoder's own prefix and line.
type malformedError struct {
	msg string
	err error
}

func (e *malformedError) Error() string { return "malformed XML: " + e.msg }
func (e *malformedError) Unwrap() error { return e.err }

func (p *parser) top() frame {
	if len(p.stack) == 0 {
		return frame{app: -1, rdg: -1, text: -1, buf: -1, group: -1}
	}
	return p.stack[len(p.stack)-1]
}

func (p *parser) setSection() { p.section = strings.Join(p.sections, p.opt.SectionSeparator) }

// start handles the start tag of a TEI element.
func (p *parser) start(t xml.StartElement, line int) error {
	parent := p.top()
	f := parent
	f.kind, f.name, f.line = kOther, t.Name.Local, line
	name := t.Name.Local
	switch name {
	case "listWit":
		f.kind = kListWit
		id, _ := attrValue(t.Attr, xml.Name{Space: xmlNamespace, Local: "id"})
		g := int32(-1)
		if id != "" {
			g = int32(len(p.groups))
			if err := p.declare(id, -(g + 1), line, name); err != nil {
				return err
			}
			p.groups = append(p.groups, groupDecl{id: id, line: line})
		}
		p.openGroups = append(p.openGroups, g)
	case "witness":
		f.kind = kWitness
		f.text = -1
		if err := p.witness(t, line); err != nil {
			return err
		}
	case "app":
		f.kind = kApp
		a := appRec{line: line, section: p.section, level: p.openApps, lem: -1}
		if v, ok := attrValue(t.Attr, xml.Name{Space: xmlNamespace, Local: "id"}); ok && v != "" {
			a.id, a.idKind = v, idXML
		} else if v, ok := attrValue(t.Attr, xml.Name{Local: "n"}); ok && v != "" {
			a.id, a.idKind = v, idN
		}
		f.app = int32(len(p.apps))
		f.rdg, f.text, f.buf, f.group, f.grpType = -1, -1, -1, -1, ""
		p.apps = append(p.apps, a)
		p.openApps++
		p.events = append(p.events, event{evAppStart, f.app})
	case "lem", "rdg":
		if parent.app < 0 {
			return p.errf(line, name, "a reading outside an <app>; expected <%s> inside <app>", name)
		}
		if parent.rdg >= 0 {
			return p.errf(line, name, "a reading inside the <%s> at line %d of the same app; a variation inside a reading needs its own <app>",
				p.rdgs[parent.rdg].elemName, p.rdgs[parent.rdg].line)
		}
		f.kind = kReading
		if err := p.reading(&f, t, line); err != nil {
			return err
		}
	case "rdgGrp":
		if parent.app < 0 {
			return p.errf(line, name, "a reading group outside an <app>; expected <rdgGrp> inside <app>")
		}
		if parent.rdg >= 0 {
			return p.errf(line, name, "a reading group inside a reading; expected <rdgGrp> directly inside <app> or another <rdgGrp>")
		}
		f.kind = kGroup
		a := &p.apps[parent.app]
		f.group = int32(len(a.groups))
		a.groups = append(a.groups, grpRec{parent: parent.group})
		if v, ok := attrValue(t.Attr, xml.Name{Local: "type"}); ok && v != "" {
			f.grpType = v
		}
	case "lacunaStart", "lacunaEnd", "witStart", "witEnd":
		f.text = -1
		if err := p.marker(parent, t, line); err != nil {
			return err
		}
	case "witDetail":
		f.text = -1
		if err := p.witDetail(parent, t, line); err != nil {
			return err
		}
	case "gap":
		f.text = -1
		if parent.text >= 0 {
			p.rdgs[parent.text].gap = true
		}
	case "note", "wit", "desc":
		f.text = -1
	case "variantEncoding":
		if m, ok := attrValue(t.Attr, xml.Name{Local: "method"}); ok && m != "parallel-segmentation" {
			return p.errf(line, name, "the apparatus is encoded by method %q; this reader reads method \"parallel-segmentation\"", m)
		}
	}
	if f.kind == kOther && p.sectionEl[name] {
		if v, ok := attrValue(t.Attr, p.sectionAttr); ok && v != "" {
			f.kind = kSection
			p.sections = append(p.sections, v)
			p.setSection()
		}
	}
	p.stack = append(p.stack, f)
	return nil
}

func (p *parser) declare(id string, target int32, line int, elem string) error {
	if prev, ok := p.decls[id]; ok {
		pl := 0
		if prev >= 0 {
			pl = p.wits[prev].line
		} else {
			pl = p.groups[-prev-1].line
		}
		return p.errf(line, elem, "xml:id %q is declared twice (first at line %d); expected unique witness and group ids", id, pl)
	}
	p.decls[id] = target
	return nil
}

func (p *parser) witness(t xml.StartElement, line int) error {
	id, _ := attrValue(t.Attr, xml.Name{Space: xmlNamespace, Local: "id"})
	if id == "" {
		return p.errf(line, "witness", "a witness without xml:id; expected <witness xml:id=\"...\"> (the @wit pointers name it)")
	}
	w := int32(len(p.wits))
	if err := p.declare(id, w, line, "witness"); err != nil {
		return err
	}
	siglum := id
	if p.siglumAttr.Local != "" {
		if v, ok := attrValue(t.Attr, p.siglumAttr); ok && v != "" {
			siglum = v
		}
	}
	if prev, ok := p.sigla[siglum]; ok {
		return p.errf(line, "witness", "siglum %q is given twice (first at line %d); expected unique sigla", siglum, p.wits[prev].line)
	}
	p.sigla[siglum] = w
	p.wits = append(p.wits, witDecl{id: id, siglum: siglum, line: line})
	for _, g := range p.openGroups {
		if g >= 0 {
			p.groups[g].members = append(p.groups[g].members, w)
		}
	}
	return nil
}

// pointers interns the pointers of a @wit value into p.pool.
func (p *parser) pointers(v string, line int, elem string) (lo, hi int32, err error) {
	lo = int32(len(p.pool))
	for i := 0; i < len(v); {
		for i < len(v) && isSpace(v[i]) {
			i++
		}
		j := i
		for j < len(v) && !isSpace(v[j]) {
			j++
		}
		if j > i {
			name := strings.TrimPrefix(v[i:j], "#")
			if name == "" || strings.IndexByte(name, '#') >= 0 {
				return 0, 0, p.errf(line, elem, "@wit pointer %q is not a local pointer; expected \"#id\" (or a bare id) naming a witness of this document", v[i:j])
			}
			id, ok := p.ptrIndex[name]
			if !ok {
				id = int32(len(p.ptrNames))
				name = strings.Clone(name)
				p.ptrIndex[name] = id
				p.ptrNames = append(p.ptrNames, name)
			}
			p.pool = append(p.pool, id)
		}
		i = j
	}
	return lo, int32(len(p.pool)), nil
}

func (p *parser) reading(f *frame, t xml.StartElement, line int) error {
	name := t.Name.Local
	a := &p.apps[f.app]
	r := rdgRec{app: f.app, group: f.group, lem: name == "lem", line: line, typ: f.grpType, elemName: name}
	if r.lem {
		if a.lem >= 0 {
			return p.errf(line, name, "a second <lem> in the app (the first is at line %d); an app has at most one lem", p.rdgs[a.lem].line)
		}
	}
	if v, ok := attrValue(t.Attr, xml.Name{Local: "type"}); ok && v != "" {
		r.typ = v
	}
	if !p.opt.TextLabels {
		if v, ok := attrValue(t.Attr, p.labelAttr); ok {
			r.fixed, r.label = true, v
		}
	}
	if v, ok := attrValue(t.Attr, xml.Name{Local: "wit"}); ok {
		r.hasWit = true
		lo, hi, err := p.pointers(v, line, name)
		if err != nil {
			return err
		}
		r.lo, r.hi = lo, hi
	}
	idx := int32(len(p.rdgs))
	if r.lem {
		a.lem = idx
	}
	a.rdgs = append(a.rdgs, idx)
	p.rdgs = append(p.rdgs, r)
	f.rdg, f.text = idx, idx
	f.buf = len(p.textBufs)
	if cap(p.textBufs) > len(p.textBufs) {
		p.textBufs = p.textBufs[:len(p.textBufs)+1]
		p.textBufs[f.buf] = p.textBufs[f.buf][:0]
	} else {
		p.textBufs = append(p.textBufs, nil)
	}
	p.events = append(p.events, event{evRdgStart, idx})
	return nil
}

func (p *parser) marker(parent frame, t xml.StartElement, line int) error {
	name := t.Name.Local
	m := markRec{start: name == "lacunaStart" || name == "witEnd", rdg: parent.rdg, line: line, elem: name}
	if v, ok := attrValue(t.Attr, xml.Name{Local: "wit"}); ok {
		lo, hi, err := p.pointers(v, line, name)
		if err != nil {
			return err
		}
		m.lo, m.hi = lo, hi
	} else if parent.rdg >= 0 {
		m.own = true
	} else {
		return p.errf(line, name, "a lacuna marker outside a reading names no witness; expected @wit=\"#X\"")
	}
	if parent.rdg >= 0 {
		m.afterText = p.rdgs[parent.rdg].hasText
	}
	p.events = append(p.events, event{evMark, int32(len(p.marks))})
	p.marks = append(p.marks, m)
	return nil
}

func (p *parser) witDetail(parent frame, t xml.StartElement, line int) error {
	typ, _ := attrValue(t.Attr, xml.Name{Local: "type"})
	if !p.detailTypes[typ] || parent.app < 0 {
		return nil // a note on a witness; no lacuna
	}
	d := detailRec{app: parent.app, rdg: parent.rdg, line: line}
	if v, ok := attrValue(t.Attr, xml.Name{Local: "wit"}); ok {
		lo, hi, err := p.pointers(v, line, "witDetail")
		if err != nil {
			return err
		}
		d.lo, d.hi = lo, hi
	} else if parent.rdg >= 0 {
		d.own = true
	} else {
		return p.errf(line, "witDetail", "a witDetail outside a reading names no witness; expected @wit=\"#X\"")
	}
	p.events = append(p.events, event{evDetail, int32(len(p.details))})
	p.details = append(p.details, d)
	return nil
}

func (p *parser) text(t xml.CharData, line int) error {
	f := &p.stack[len(p.stack)-1]
	if f.text < 0 {
		return nil
	}
	r := &p.rdgs[f.text]
	if !r.hasText && !allSpace(t) {
		r.hasText = true
	}
	if r.fixed {
		return nil
	}
	b := p.textBufs[f.buf]
	if len(b)+len(t) > p.opt.Limits.MaxLabelBytes {
		return p.errAt(r.line, r.elemName, &LimitError{Limit: "MaxLabelBytes", Max: int64(p.opt.Limits.MaxLabelBytes)})
	}
	p.textBufs[f.buf] = append(b, t...)
	return nil
}

// normalize collapses runs of XML white space to one space and trims the ends.
func normalize(b []byte) string {
	var sb strings.Builder
	sb.Grow(len(b))
	space := false
	for _, c := range b {
		if isSpace(c) {
			space = true
			continue
		}
		if space && sb.Len() > 0 {
			sb.WriteByte(' ')
		}
		space = false
		sb.WriteByte(c)
	}
	return sb.String()
}

func (p *parser) end(line int) error {
	f := p.stack[len(p.stack)-1]
	p.stack = p.stack[:len(p.stack)-1]
	switch f.kind {
	case kListWit:
		p.openGroups = p.openGroups[:len(p.openGroups)-1]
	case kSection:
		p.sections = p.sections[:len(p.sections)-1]
		p.setSection()
	case kReading:
		r := &p.rdgs[f.rdg]
		if !r.fixed {
			r.label = normalize(p.textBufs[f.buf])
			if r.label == "" {
				r.label = p.opt.OmissionLabel
			}
		}
		p.textBufs = p.textBufs[:f.buf]
		p.events = append(p.events, event{evRdgEnd, f.rdg})
	case kApp:
		if len(p.apps[f.app].rdgs) == 0 {
			return p.errAt(f.line, "app", ErrNoReadings)
		}
		p.openApps--
		p.events = append(p.events, event{evAppEnd, f.app})
	}
	return nil
}
