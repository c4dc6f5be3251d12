package model

import (
	"cmp"
	"errors"
	"fmt"
	"slices"
	"strings"

	"strayleaf/placement"
)

// Reading is one checked unit of a witness to be placed.
type Reading struct {
	Unit    string
	Reading string
}

// GroupShare is a group's share of a placement: its NNLS coefficient over the sum of all
// coefficients.
type GroupShare struct {
	Group string
	Share float64
}

// Placement is where a partial witness falls among the model's groups.
type Placement struct {
	Witness   string
	BestGroup string
	// Groups are all groups' shares, best first; they sum to 1 (all zero if the coefficients
	// are all zero, when BestGroup is empty).
	Groups []GroupShare
	// Coefficients are the raw NNLS coefficients h in group order G1..Gk.
	Coefficients []float64
	Confidence   float64
	// CoveredUnits counts the units the witness has a reading at that the model knows.
	CoveredUnits int
	// UsedUnits counts the covered units that carry rows in W (not set aside at training).
	UsedUnits int
	// UnknownReadings lists units where the witness has a reading the model does not know (or
	// set aside as singular): evidence against every group there.
	UnknownReadings []string
	// UninformativeUnits lists covered units the model set aside at training.
	UninformativeUnits []string
	// Residual is ||W_c h - v_c||^2 and RelativeResidual Residual / ||v_c||^2.
	Residual, RelativeResidual float64
	// InformativeCoverage is the share of the model's total informativeness carried by the used
	// units (see Model.Informativeness).
	InformativeCoverage float64
	// Features are what Confidence is read from; Calibrated reports that it was read through
	// the model's calibration (the probability that BestGroup is the witness's true group),
	// not the provisional formula of a model without one.
	Features   Features
	Calibrated bool
	// Mixture is the mixture reading of the two largest shares (nil with one group or no
	// placement); Mixed is Mixture.Mixed.
	Mixture *Mixture
	Mixed   bool
	// Nearest are the training witnesses that agree most with the witness (see Model.Nearest).
	Nearest []Neighbour
}

// InputError lists what is wrong with a witness given for placement, unit by unit, so that a
// service can answer with one field violation per bad unit.
type InputError struct {
	Witness    string
	Violations []Violation
}

// Violation is one problem with one part of the input.
type Violation struct {
	Field       string // e.g. "readings[3].unit"
	Description string
}

func (e *InputError) Error() string {
	parts := make([]string, len(e.Violations))
	for i, v := range e.Violations {
		parts[i] = v.Field + ": " + v.Description
	}
	w := e.Witness
	if w == "" {
		w = "(no siglum)"
	}
	return fmt.Sprintf("witness %s: %s", w, strings.Join(parts, "; "))
}

// ErrNoCoverage is returned when a witness covers no unit the model can place by.
var ErrNoCoverage = placement.ErrNoCoverage

// Observe checks a witness's readings against the model and turns them into engine observations.
// Every unknown unit and every unit given twice is reported in one *InputError.
func (m *Model) Observe(witness string, readings []Reading, obs []placement.Observation) ([]placement.Observation, *Placement, error) {
	s := m.getScratch()
	defer m.putScratch(s)
	return m.observe(witness, readings, obs, s)
}

// unitScan is how many units after the previous one findUnit compares before it asks the map:
// a witness that lists its units in the model's order with short gaps (a scattered fragment)
// is found by a few comparisons of short strings, cheaper than hashing the id.
const unitScan = 4

// findUnit returns the index of unit id. Witnesses usually list their units in the model's order,
// so the unitScan units from the one after the previous (guess) are tried first, by string
// comparison, before the map.
func (m *Model) findUnit(id string, guess int) (int, bool) {
	if guess >= 0 {
		ids := m.unitIDs[min(guess, len(m.unitIDs)):min(guess+unitScan, len(m.unitIDs))]
		for i, s := range ids {
			if s == id {
				return guess + i, true
			}
		}
	}
	u, ok := m.unitIndex[id]
	return u, ok
}

// observe is Observe with the caller's scratch memory.
func (m *Model) observe(witness string, readings []Reading, obs []placement.Observation, s *placeScratch) ([]placement.Observation, *Placement, error) {
	p := &Placement{Witness: witness}
	var bad []Violation
	if len(readings) == 0 {
		bad = append(bad, Violation{Field: "readings", Description: "no readings given; expected at least one checked unit"})
	}
	gen := s.nextGen()
	obs = obs[:0]
	prev := -1
	for i, r := range readings {
		u, ok := m.findUnit(r.Unit, prev+1)
		switch {
		case r.Unit == "":
			bad = append(bad, Violation{Field: fmt.Sprintf("readings[%d].unit", i), Description: "empty unit id"})
			continue
		case !ok:
			bad = append(bad, Violation{Field: fmt.Sprintf("readings[%d].unit", i), Description: fmt.Sprintf("unit %q is not in the model", r.Unit)})
			continue
		case r.Reading == "":
			bad = append(bad, Violation{Field: fmt.Sprintf("readings[%d].reading", i), Description: fmt.Sprintf("empty reading at unit %q; leave a lacuna out instead", r.Unit)})
			continue
		}
		prev = u
		if s.seen[u] == gen {
			bad = append(bad, Violation{Field: fmt.Sprintf("readings[%d].unit", i), Description: fmt.Sprintf("unit %q given twice (also readings[%d]); a witness has at most one reading at a unit (a corrector is usually given its own siglum)", r.Unit, s.at[u])})
			continue
		}
		s.seen[u], s.at[u] = gen, int32(i)
		if !m.hasRows[u] {
			p.UninformativeUnits = append(p.UninformativeUnits, r.Unit)
			continue
		}
		row, known := m.lookup[u].row(r.Reading)
		if !known || row < 0 {
			p.UnknownReadings = append(p.UnknownReadings, r.Unit)
			row = -1
		}
		p.CoveredUnits++
		obs = append(obs, placement.Observation{Unit: u, Row: row})
	}
	p.CoveredUnits += len(p.UninformativeUnits)
	if len(bad) > 0 {
		return obs, nil, &InputError{Witness: witness, Violations: bad}
	}
	return obs, p, nil
}

// PlaceOptions choose the optional parts of a placement.
type PlaceOptions struct {
	// Nearest is how many nearest training witnesses to name in Placement.Nearest (see
	// Model.Nearest); 0 names none and saves the comparison with every training witness.
	Nearest int
}

// Place places one partial witness: masked NNLS of its readings against W over the units it
// covers, with its confidence features, mixture test and the NearestWitnesses nearest training
// witnesses. ws may be nil (one is made); pipelines placing many witnesses reuse one per
// goroutine.
func (m *Model) Place(witness string, readings []Reading, ws *placement.Workspace) (*Placement, error) {
	return m.PlaceWith(witness, readings, ws, PlaceOptions{Nearest: NearestWitnesses})
}

// PlaceWith is Place with the optional parts chosen by opt.
func (m *Model) PlaceWith(witness string, readings []Reading, ws *placement.Workspace, opt PlaceOptions) (*Placement, error) {
	if ws == nil {
		ws = m.engine.NewWorkspace()
	}
	s := m.getScratch()
	defer m.putScratch(s)
	obs, p, err := m.observe(witness, readings, s.obs, s)
	s.obs = obs
	if err != nil {
		return nil, err
	}
	fit, err := m.engine.Place(obs, ws)
	if err != nil {
		if errors.Is(err, placement.ErrNoCoverage) {
			return nil, fmt.Errorf("witness %s: %w (it covers %d units, none of which the model groups by)", witness, err, p.CoveredUnits)
		}
		return nil, fmt.Errorf("witness %s: %w", witness, err)
	}
	m.finish(p, fit)
	m.assess(p, obs, ws, s)
	if opt.Nearest > 0 {
		p.Nearest = m.Nearest(readings, opt.Nearest)
	}
	return p, nil
}

func (m *Model) finish(p *Placement, fit placement.Fit) {
	k := m.K()
	p.UsedUnits = fit.UsedUnits
	p.Residual = fit.Residual
	if fit.Norm2 > 0 {
		p.RelativeResidual = fit.Residual / fit.Norm2
	}
	p.Coefficients = append([]float64(nil), fit.H[:k]...)
	sum := 0.0
	for _, h := range p.Coefficients {
		sum += h
	}
	p.Groups = make([]GroupShare, k)
	for g, h := range p.Coefficients {
		s := 0.0
		if sum > 0 {
			s = h / sum
		}
		p.Groups[g] = GroupShare{Group: m.groupIDs[g], Share: s}
	}
	slices.SortStableFunc(p.Groups, func(a, b GroupShare) int { return cmp.Compare(b.Share, a.Share) })
	if sum > 0 {
		p.BestGroup = p.Groups[0].Group
	}
}
