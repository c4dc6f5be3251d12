package main

import "strayleaf/placement/model"

// The parts of a placement line that read mixture, block mixture and the nearest training
// witnesses (see model.Placement and model.PlaceBySection).

// mixtureJSON is the mixture reading of a placement: the two largest shares and the
// likelihood-ratio test that decides `mixed`.
type mixtureJSON struct {
	Primary         string  `json:"primary"`
	Secondary       string  `json:"secondary"`
	Share           float64 `json:"secondary_share"`
	LikelihoodShare float64 `json:"likelihood_share"`
	LikelihoodRatio float64 `json:"likelihood_ratio"`
}

// nearestJSON is a training witness compared with the placed one by agreement.
type nearestJSON struct {
	Witness   string  `json:"witness"`
	BestGroup string  `json:"best_group"`
	Agree     int     `json:"agree"`
	Compared  int     `json:"units_compared"`
	Agreement float64 `json:"agreement"`
}

// sectionJSON is the placement of one section's readings.
type sectionJSON struct {
	Section      string  `json:"section"`
	BestGroup    string  `json:"best_group"`
	Confidence   float64 `json:"confidence"`
	CoveredUnits int     `json:"covered_units"`
}

// changeJSON is one change of exemplar: the last section with the old group, the first with the
// new one.
type changeJSON struct {
	After string `json:"after_section"`
	At    string `json:"at_section"`
	From  string `json:"from_group"`
	To    string `json:"to_group"`
}

// addGuidance copies informative coverage, mixture and nearest witnesses into out.
func addGuidance(out *placementJSON, p *model.Placement) {
	out.InformativeCoverage = p.InformativeCoverage
	out.Calibrated = p.Calibrated
	out.Mixed = p.Mixed
	if mx := p.Mixture; mx != nil {
		out.Mixture = &mixtureJSON{mx.Primary, mx.Secondary, mx.Share, mx.LikelihoodShare, mx.LikelihoodRatio}
	}
	for _, n := range p.Nearest {
		out.Nearest = append(out.Nearest, nearestJSON{n.Witness, n.BestGroup, n.Agree, n.Compared, n.Agreement})
	}
}

// addSections copies a placement by section into out.
func addSections(out *placementJSON, sp *model.SectionedPlacement) {
	block := sp.BlockMixture
	out.BlockMixture = &block
	out.Sections = []sectionJSON{}
	out.Changes = []changeJSON{}
	for _, s := range sp.Sections {
		out.Sections = append(out.Sections, sectionJSON{s.Section, s.BestGroup, s.Confidence, s.CoveredUnits})
	}
	for _, c := range sp.Changes {
		out.Changes = append(out.Changes, changeJSON{c.After, c.At, c.From, c.To})
	}
}
