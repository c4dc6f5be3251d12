package main

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"

	"strayleaf/placement/tei"
)

// writePlacementsCSV writes one row per witness: witness, best_group, confidence, covered_units,
// unknown_readings (count), shares ("G1:0.80;G2:0.20"), error.
func writePlacementsCSV(w io.Writer, results []placementJSON) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"witness", "best_group", "confidence", "covered_units", "unknown_readings", "shares", "error"})
	for _, r := range results {
		var sh []string
		for _, g := range r.Groups {
			sh = append(sh, g.Group+":"+strconv.FormatFloat(g.Share, 'f', 4, 64))
		}
		cw.Write([]string{r.Witness, r.BestGroup, strconv.FormatFloat(r.Confidence, 'f', 4, 64), strconv.Itoa(r.CoveredUnits),
			strconv.Itoa(len(r.UnknownReadings)), strings.Join(sh, ";"), r.Error})
	}
	cw.Flush()
	return cw.Error()
}

// writePlacementsTEI writes the placements as a TEI P5 witness list (see tei.WritePlacements):
// each witness with its best group, shares and coverage as <note>s and the confidence as the
// degree of a <certainty>; a witness that could not be placed with its error.
func writePlacementsTEI(w io.Writer, results []placementJSON) error {
	ref := ""
	ps := make([]tei.PlacedWitness, 0, len(results))
	for _, r := range results {
		if ref == "" {
			ref = r.Model
		}
		p := tei.PlacedWitness{Witness: r.Witness, Error: r.Error}
		if r.Error == "" {
			p.BestGroup, p.Confidence = r.BestGroup, r.Confidence
			p.CoveredUnits, p.UsedUnits, p.UnknownReadings = r.CoveredUnits, r.UsedUnits, len(r.UnknownReadings)
			for _, g := range r.Groups {
				p.Shares = append(p.Shares, tei.GroupShare{Group: g.Group, Share: g.Share})
			}
		}
		ps = append(ps, p)
	}
	if err := tei.WritePlacements(w, ref, ps); err != nil {
		return fmt.Errorf("--format tei: %w", err)
	}
	return nil
}
