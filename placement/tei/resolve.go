package tei

import (
	"fmt"
	"math"

	"strayleaf/placement/collation"
)

const unknownTarget = math.MinInt32

// Cell flags: why a named witness's cell is a lacuna.
const (
	flagMarked uint8 = 1 << iota
	flagGap
)

// level holds, for one depth of <app> nesting, which witnesses the open app has named.
type level struct {
	citeApp   []int32 // app index + 1 of the app that named witness w last
	citeRdg   []int32 // the reading element that named it
	flags     []uint8 // lacuna causes for that cell
	detailApp []int32 // app index + 1 of the last app with a lacuna witDetail for w
	cites     []int32 // the witnesses named in the open app, in order
}

type resolver struct {
	p        *parser
	b        collation.Builder
	rep      *Report
	ids      []string
	targets  []int32
	lacunose []bool
	levels   []*level
	unit     []int   // unit index of each app
	citeLo   []int32 // range of each reading element's witnesses in its level's cites
	citeHi   []int32
	parentOf []int32
	mergeOf  []int32
	budget   int64
}

// resolve replays the parsed events and builds the collation.
func (p *parser) resolve() (*collation.Collation, *Report, error) {
	rep := &Report{Source: p.src, Groups: len(p.groups), ReadingElements: len(p.rdgs), MergedByType: map[string]int{}}
	ids, err := p.unitIDs(rep)
	if err != nil {
		return nil, nil, err
	}
	lim := p.opt.Limits
	if nw, nu := int64(len(p.wits)), int64(len(p.apps)); nw*nu > lim.MaxCells {
		return nil, nil, p.errAt(0, "", fmt.Errorf("%d witnesses x %d units: %w", nw, nu, &LimitError{Limit: "MaxCells", Max: lim.MaxCells}))
	}
	rs := &resolver{
		p:        p,
		rep:      rep,
		ids:      ids,
		targets:  make([]int32, len(p.ptrNames)),
		lacunose: make([]bool, len(p.wits)),
		unit:     make([]int, len(p.apps)),
		citeLo:   make([]int32, len(p.rdgs)),
		citeHi:   make([]int32, len(p.rdgs)),
		parentOf: make([]int32, len(p.rdgs)),
		mergeOf:  make([]int32, len(p.rdgs)),
		budget:   2 * lim.MaxCells,
	}
	for i, n := range p.ptrNames {
		if t, ok := p.decls[n]; ok {
			rs.targets[i] = t
		} else {
			rs.targets[i] = unknownTarget
		}
	}
	// Witness i of the parse is witness i of the collation (sigla are unique).
	for _, w := range p.wits {
		rs.b.AddWitness(w.siglum)
	}
	for _, ev := range p.events {
		var err error
		switch ev.kind {
		case evAppStart:
			err = rs.appStart(ev.idx)
		case evRdgStart:
			err = rs.rdgStart(ev.idx)
		case evMark:
			err = rs.mark(ev.idx)
		case evRdgEnd:
			rs.rdgEnd(ev.idx)
		case evDetail:
			err = rs.detail(ev.idx)
		case evAppEnd:
			err = rs.appEnd(ev.idx)
		}
		if err != nil {
			return nil, nil, err
		}
	}
	c := rs.b.Build()
	rep.Witnesses, rep.Units, rep.Readings = c.NumWitnesses(), c.NumUnits(), c.NumReadings()
	l := &rep.Lacunae
	l.Absent = c.Lacunae() - l.Marked - l.Gap - l.Detail
	return c, rep, nil
}

// unitIDs gives each app its unit id: @xml:id, else @n, else "app-<ordinal>".
func (p *parser) unitIDs(rep *Report) ([]string, error) {
	ids := make([]string, len(p.apps))
	taken := make(map[string]int, len(p.apps))
	for i, a := range p.apps {
		if a.idKind == idNone {
			continue
		}
		if first, ok := taken[a.id]; ok {
			hint := "expected unique app ids"
			if a.idKind == idN {
				hint = "@n values often repeat from section to section: give each app a unique xml:id"
			}
			return nil, p.errf(a.line, "app", "unit id %q is given twice (first at line %d); %s", a.id, first, hint)
		}
		taken[a.id] = a.line
		ids[i] = a.id
	}
	for i, a := range p.apps {
		if a.idKind != idNone {
			continue
		}
		id := fmt.Sprintf("app-%d", i+1)
		for k := 2; ; k++ {
			if _, ok := taken[id]; !ok {
				break
			}
			id = fmt.Sprintf("app-%d.%d", i+1, k)
		}
		taken[id] = a.line
		ids[i] = id
		rep.GeneratedIDs = append(rep.GeneratedIDs, GeneratedID{ID: id, Line: a.line})
	}
	return ids, nil
}

func (rs *resolver) level(l int32) *level {
	for int32(len(rs.levels)) <= l {
		n := len(rs.p.wits)
		rs.levels = append(rs.levels, &level{
			citeApp:   make([]int32, n),
			citeRdg:   make([]int32, n),
			flags:     make([]uint8, n),
			detailApp: make([]int32, n),
		})
	}
	return rs.levels[l]
}

func (rs *resolver) spend(line int, elem string) error {
	rs.budget--
	if rs.budget < 0 {
		return rs.p.errAt(line, elem, fmt.Errorf("too many witness look-ups: %w", &LimitError{Limit: "MaxCells", Max: rs.p.opt.Limits.MaxCells}))
	}
	return nil
}

// expand calls fn for each witness the pointers pool[lo:hi] name (groups expanded).
func (rs *resolver) expand(lo, hi int32, line int, elem string, fn func(w int32) error) error {
	p := rs.p
	for _, ptr := range p.pool[lo:hi] {
		t := rs.targets[ptr]
		switch {
		case t == unknownTarget:
			e := &UnknownWitnessError{Pointer: "#" + p.ptrNames[ptr], NumDeclared: len(p.wits)}
			for i := 0; i < len(p.wits) && i < 10; i++ {
				e.Declared = append(e.Declared, p.wits[i].id)
			}
			return p.errAt(line, elem, e)
		case t >= 0:
			if err := rs.spend(line, elem); err != nil {
				return err
			}
			if err := fn(t); err != nil {
				return err
			}
		default:
			for _, w := range p.groups[-t-1].members {
				if err := rs.spend(line, elem); err != nil {
					return err
				}
				if err := fn(w); err != nil {
					return err
				}
			}
		}
	}
	return nil
}

func (rs *resolver) appStart(a int32) error {
	app := &rs.p.apps[a]
	lv := rs.level(app.level)
	lv.cites = lv.cites[:0]
	u, err := rs.b.AddUnit(rs.ids[a], app.section)
	if err != nil {
		return rs.p.errAt(app.line, "app", err)
	}
	rs.unit[a] = u
	return nil
}

func (rs *resolver) rdgStart(r int32) error {
	p := rs.p
	rd := &p.rdgs[r]
	a := rd.app
	lv := rs.level(p.apps[a].level)
	rs.citeLo[r] = int32(len(lv.cites))
	stamp := a + 1
	err := rs.expand(rd.lo, rd.hi, rd.line, rd.elemName, func(w int32) error {
		if lv.citeApp[w] == stamp {
			first := &p.rdgs[lv.citeRdg[w]]
			return p.errAt(rd.line, rd.elemName, &DuplicateWitnessError{
				Witness: p.wits[w].siglum, Unit: rs.ids[a],
				First: first.elemName, FirstLine: first.line, SameReading: lv.citeRdg[w] == r,
			})
		}
		lv.citeApp[w], lv.citeRdg[w], lv.flags[w] = stamp, r, 0
		lv.cites = append(lv.cites, w)
		return nil
	})
	rs.citeHi[r] = int32(len(lv.cites))
	return err
}

// own returns the witnesses named by reading element r.
func (rs *resolver) own(r int32) []int32 {
	lv := rs.level(rs.p.apps[rs.p.rdgs[r].app].level)
	return lv.cites[rs.citeLo[r]:rs.citeHi[r]]
}

func (rs *resolver) mark(i int32) error {
	p := rs.p
	m := &p.marks[i]
	var lv *level
	var stamp int32
	if m.rdg >= 0 {
		a := p.rdgs[m.rdg].app
		lv, stamp = rs.level(p.apps[a].level), a+1
	}
	apply := func(w int32) error {
		rs.lacunose[w] = m.start
		if lv != nil && m.afterText && lv.citeApp[w] == stamp && lv.citeRdg[w] == m.rdg {
			lv.flags[w] |= flagMarked
		}
		return nil
	}
	if m.own {
		for _, w := range rs.own(m.rdg) {
			if err := rs.spend(m.line, m.elem); err != nil {
				return err
			}
			_ = apply(w)
		}
		return nil
	}
	return rs.expand(m.lo, m.hi, m.line, m.elem, apply)
}

func (rs *resolver) rdgEnd(r int32) {
	rd := &rs.p.rdgs[r]
	lv := rs.level(rs.p.apps[rd.app].level)
	for _, w := range lv.cites[rs.citeLo[r]:rs.citeHi[r]] {
		if rs.lacunose[w] {
			lv.flags[w] |= flagMarked
		}
		if rd.gap {
			lv.flags[w] |= flagGap
		}
	}
}

func (rs *resolver) detail(i int32) error {
	p := rs.p
	d := &p.details[i]
	lv := rs.level(p.apps[d.app].level)
	stamp := d.app + 1
	if d.own {
		for _, w := range rs.own(d.rdg) {
			lv.detailApp[w] = stamp
		}
		return nil
	}
	return rs.expand(d.lo, d.hi, d.line, "witDetail", func(w int32) error {
		lv.detailApp[w] = stamp
		return nil
	})
}

// parents sets parentOf for the reading elements of app a (see the package doc for the rule).
func (rs *resolver) parents(app *appRec) {
	p := rs.p
	subst := func(r int32) bool {
		rd := &p.rdgs[r]
		return rd.lem || p.opt.TypeActions[rd.typ] != Merge
	}
	var first []int32
	if len(app.groups) > 0 {
		first = make([]int32, len(app.groups))
		for i := range first {
			first[i] = -1
		}
	}
	firstSub := int32(-1)
	for _, r := range app.rdgs {
		if !subst(r) {
			continue
		}
		if firstSub < 0 {
			firstSub = r
		}
		for g := p.rdgs[r].group; g >= 0; g = app.groups[g].parent {
			if first[g] < 0 {
				first[g] = r
			}
		}
	}
	for _, r := range app.rdgs {
		rs.parentOf[r] = rs.parentFor(r, app, subst(r), first, firstSub)
	}
}

func (rs *resolver) parentFor(r int32, app *appRec, substantive bool, first []int32, firstSub int32) int32 {
	if substantive {
		return r
	}
	for g := rs.p.rdgs[r].group; g >= 0; g = app.groups[g].parent {
		if first[g] >= 0 {
			return first[g]
		}
	}
	if app.lem >= 0 {
		return app.lem
	}
	if firstSub >= 0 {
		return firstSub
	}
	return app.rdgs[0]
}

func (rs *resolver) appEnd(a int32) error {
	p := rs.p
	app := &p.apps[a]
	lv := rs.level(app.level)
	u, id := rs.unit[a], rs.ids[a]
	rs.parents(app)
	for _, r := range app.rdgs {
		rs.mergeOf[r] = -1
		rd := &p.rdgs[r]
		if pr := rs.parentOf[r]; pr == r {
			rs.b.AddReading(u, rd.label)
		} else {
			rs.mergeOf[r] = int32(len(rs.rep.Merges))
			rs.rep.Merges = append(rs.rep.Merges, MergedReading{Unit: id, Type: rd.typ, Reading: rd.label, Into: p.rdgs[pr].label, Line: rd.line})
			rs.rep.MergedByType[rd.typ]++
		}
	}
	stamp := a + 1
	l := &rs.rep.Lacunae
	for _, w := range lv.cites {
		r := lv.citeRdg[w]
		switch fl := lv.flags[w]; {
		case fl&flagMarked != 0:
			l.Marked++
		case fl&flagGap != 0:
			l.Gap++
		case lv.detailApp[w] == stamp:
			l.Detail++
		default:
			if err := rs.b.AddCell(int(w), u, p.rdgs[rs.parentOf[r]].label); err != nil {
				return p.errAt(p.rdgs[r].line, p.rdgs[r].elemName, err)
			}
			if m := rs.mergeOf[r]; m >= 0 {
				rs.rep.Merges[m].Witnesses = append(rs.rep.Merges[m].Witnesses, p.wits[w].siglum)
			}
		}
	}
	if p.opt.NegativeLem && app.lem >= 0 && !p.rdgs[app.lem].hasWit {
		lem := &p.rdgs[app.lem]
		for w := range p.wits {
			if err := rs.spend(lem.line, "lem"); err != nil {
				return err
			}
			if lv.citeApp[w] == stamp || rs.lacunose[w] || lv.detailApp[w] == stamp {
				continue
			}
			if err := rs.b.AddCell(w, u, lem.label); err != nil {
				return p.errAt(lem.line, "lem", err)
			}
		}
	}
	return nil
}
