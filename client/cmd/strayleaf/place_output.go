package main

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"
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

// writePlacementsTEI is filled by the TEI output; until then it refuses.
func writePlacementsTEI(w io.Writer, results []placementJSON) error {
	return fmt.Errorf("--format tei: not available yet")
}
