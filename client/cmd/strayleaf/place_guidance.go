package main

import (
	"strayleaf/client"
	"strayleaf/placement/model"
)

// The parts of a placement line that read mixture, block mixture and the nearest training
// witnesses (see model.Placement and model.PlaceBySection), copied into the client's types so
// that a local placement prints as one answered by a strayleafd.

// addGuidance copies informative coverage, mixture and nearest witnesses into out.
func addGuidance(out *client.Placement, p *model.Placement) {
	out.InformativeCoverage = p.InformativeCoverage
	out.Calibrated = p.Calibrated
	out.Mixed = p.Mixed
	if mx := p.Mixture; mx != nil {
		out.Mixture = &client.Mixture{Primary: mx.Primary, Secondary: mx.Secondary, SecondaryShare: mx.Share,
			LikelihoodShare: mx.LikelihoodShare, LikelihoodRatio: mx.LikelihoodRatio}
	}
	for _, n := range p.Nearest {
		out.Nearest = append(out.Nearest, client.Neighbour{Witness: n.Witness, BestGroup: n.BestGroup, Agree: n.Agree,
			UnitsCompared: n.Compared, Agreement: n.Agreement})
	}
}

// addSections copies a placement by section into out.
func addSections(out *client.Placement, sp *model.SectionedPlacement) {
	block := sp.BlockMixture
	out.BlockMixture = &block
	out.Sections = make([]client.SectionPlacement, len(sp.Sections))
	for i, s := range sp.Sections {
		out.Sections[i] = client.SectionPlacement{Section: s.Section, BestGroup: s.BestGroup, Confidence: s.Confidence, CoveredUnits: s.CoveredUnits}
	}
	out.Changes = make([]client.BlockChange, len(sp.Changes))
	for i, c := range sp.Changes {
		out.Changes[i] = client.BlockChange{AfterSection: c.After, AtSection: c.At, FromGroup: c.From, ToGroup: c.To}
	}
}
