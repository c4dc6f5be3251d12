package model

import (
	"errors"
	"fmt"

	"strayleaf/placement"
)

// Block mixture (common practice): a copyist may change exemplar part-way through the text, and
// the witness then groups with one family in one stretch and with another elsewhere. Placing each
// section on its own shows it. PlaceBySection places the readings of every section separately and
// flags a block mixture when two sections are each placed with confidence at least
// BlockConfidence in different groups. Each change is placed between the last confident section
// of the old group and the first confident section of the new one: the sections between them, if
// any, are given to one side or the other at the single boundary that maximises the
// log-likelihood of their readings under the two groups' reading probabilities.

// BlockConfidence is the least confidence of the sections whose disagreement flags a block
// mixture.
const BlockConfidence = 0.9

// ErrNoSections is returned by PlaceBySection for a model whose units carry no sections.
var ErrNoSections = errors.New("the model's units carry no sections")

// SectionPlacement is the placement of the readings of one section.
type SectionPlacement struct {
	Section string
	// BestGroup and Confidence as in Placement; empty and 0 when the section has no reading the
	// model can place by.
	BestGroup    string
	Confidence   float64
	CoveredUnits int
	Groups       []GroupShare
	// Placement is the full placement of the section (nil when it could not be placed).
	Placement *Placement
}

// BlockChange is one change of exemplar.
type BlockChange struct {
	// After is the last section placed with the old group, At the first with the new one.
	After, At string
	// AtIndex is At's index among the model's sections.
	AtIndex  int
	From, To string
}

// SectionedPlacement is a witness placed section by section.
type SectionedPlacement struct {
	Witness string
	// Sections are in text order; only sections the witness has readings in are listed.
	Sections     []SectionPlacement
	BlockMixture bool
	Changes      []BlockChange
}

// Sections returns the model's section labels in text order.
func (m *Model) Sections() []string { return m.guide().sections }

// PlaceBySection places each section's readings separately (see the notes above). Readings at
// units without a section are left out. ws may be nil.
func (m *Model) PlaceBySection(witness string, readings []Reading, ws *placement.Workspace) (*SectionedPlacement, error) {
	g := m.guide()
	if len(g.sections) == 0 {
		return nil, ErrNoSections
	}
	if _, _, err := m.Observe(witness, readings, nil); err != nil {
		return nil, err
	}
	if ws == nil {
		ws = m.engine.NewWorkspace()
	}
	bySection := make([][]Reading, len(g.sections))
	for _, r := range readings {
		if s := g.sectionOf[m.unitIndex[r.Unit]]; s >= 0 {
			bySection[s] = append(bySection[s], r)
		}
	}
	out := &SectionedPlacement{Witness: witness}
	var idx []int      // section index of each entry of out.Sections
	var ll [][]float64 // log-likelihood of each entry's readings under each group
	for s, rs := range bySection {
		if len(rs) == 0 {
			continue
		}
		sp := SectionPlacement{Section: g.sections[s]}
		p, err := m.PlaceWith(witness, rs, ws, PlaceOptions{})
		switch {
		case err == nil:
			sp.BestGroup, sp.Confidence, sp.CoveredUnits, sp.Groups, sp.Placement = p.BestGroup, p.Confidence, p.CoveredUnits, p.Groups, p
		case errors.Is(err, placement.ErrNoCoverage):
			sp.CoveredUnits = len(rs)
		default:
			return nil, fmt.Errorf("section %s: %w", g.sections[s], err)
		}
		obs, _, _ := m.Observe(witness, rs, nil)
		l := make([]float64, g.k)
		for _, o := range obs {
			g.logLik(l, o.Unit, o.Row, m)
		}
		out.Sections = append(out.Sections, sp)
		idx = append(idx, s)
		ll = append(ll, l)
	}
	// Confident sections in text order; a change between consecutive ones that disagree.
	last := -1
	for i, sp := range out.Sections {
		if sp.BestGroup == "" || sp.Confidence < BlockConfidence {
			continue
		}
		if last >= 0 && out.Sections[last].BestGroup != sp.BestGroup {
			from, to := m.groupIndex(out.Sections[last].BestGroup), m.groupIndex(sp.BestGroup)
			// Boundary b in (last, i]: entries last+1..b-1 go with from, b..i-1 with to.
			bestB, bestV := i, 0.0
			for b := last + 1; b <= i; b++ {
				v := 0.0
				for j := last + 1; j < i; j++ {
					if j < b {
						v += ll[j][from]
					} else {
						v += ll[j][to]
					}
				}
				if b == last+1 || v > bestV {
					bestB, bestV = b, v
				}
			}
			out.Changes = append(out.Changes, BlockChange{
				After: out.Sections[bestB-1].Section, At: out.Sections[bestB].Section, AtIndex: idx[bestB],
				From: out.Sections[last].BestGroup, To: sp.BestGroup,
			})
		}
		last = i
	}
	out.BlockMixture = len(out.Changes) > 0
	return out, nil
}

// groupIndex returns the column of group id, or -1.
func (m *Model) groupIndex(id string) int {
	for i, g := range m.groupIDs {
		if g == id {
			return i
		}
	}
	return -1
}
