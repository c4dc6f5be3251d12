package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// strayleaf train calibrates the confidence (the summary names the expected calibration error,
// the bundle carries the map, and --reliability-plot writes an SVG); place --json gives
// informative_coverage, calibrated, mixed, nearest, and with --by-section sections and
// block_mixture.
func TestTrainCalibratesAndPlaceReadsGuidance(t *testing.T) {
	f := getTEIFixture(t)
	if f.model.Calibration == nil || f.model.Calibration.Method == "" || len(f.model.Informativeness) == 0 || len(f.model.ProbeUnits) == 0 {
		t.Fatalf("trained bundle lacks calibration, informativeness or probe list")
	}
	plot := filepath.Join(f.dir, "reliability.svg")
	bundle := filepath.Join(f.dir, "m2.bundle")
	out := mustRun(t, "train", "--collation", f.csvPath, "--groups", "3", "--restarts", "1", "--out", bundle, "--quiet", "--reliability-plot", plot, "--json")
	var tr struct {
		Calibration *struct {
			ECE         float64 `json:"expected_calibration_error"`
			Samples     int     `json:"samples"`
			Reliability []struct {
				Count int `json:"count"`
			} `json:"reliability"`
		} `json:"calibration"`
	}
	if err := json.Unmarshal([]byte(out), &tr); err != nil {
		t.Fatal(err)
	}
	if tr.Calibration == nil || tr.Calibration.Samples == 0 || len(tr.Calibration.Reliability) != 10 || tr.Calibration.ECE < 0 {
		t.Fatalf("train summary calibration %+v", tr.Calibration)
	}
	if b, err := os.ReadFile(plot); err != nil || !strings.Contains(string(b), "<svg") {
		t.Fatalf("reliability plot: %v", err)
	}
	if code, _, _ := runStrayleaf("train", "--collation", f.csvPath, "--groups", "3", "--out", bundle, "--quiet", "--no-calibration", "--reliability-plot", plot); code == 0 {
		t.Error("--reliability-plot with --no-calibration accepted")
	}

	out = mustRun(t, "place", "--bundle", bundle, "--witnesses", f.csvPath, "--json", "--by-section")
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != f.col.NumWitnesses() {
		t.Fatalf("%d lines for %d witnesses", len(lines), f.col.NumWitnesses())
	}
	training := map[string]bool{}
	for _, tw := range f.model.TrainingWitnesses {
		training[tw.Witness] = true
	}
	for _, line := range lines[:5] {
		var p struct {
			Witness             string   `json:"witness"`
			InformativeCoverage *float64 `json:"informative_coverage"`
			Calibrated          bool     `json:"calibrated"`
			Mixed               *bool    `json:"mixed"`
			Nearest             []struct {
				Witness   string  `json:"witness"`
				Compared  int     `json:"units_compared"`
				Agreement float64 `json:"agreement"`
			} `json:"nearest"`
			Sections []struct {
				Section   string `json:"section"`
				BestGroup string `json:"best_group"`
			} `json:"sections"`
			BlockMixture *bool `json:"block_mixture"`
		}
		if err := json.Unmarshal([]byte(line), &p); err != nil {
			t.Fatal(err)
		}
		if p.InformativeCoverage == nil || !p.Calibrated || p.Mixed == nil || len(p.Nearest) == 0 || p.Nearest[0].Compared == 0 {
			t.Errorf("%s: guidance missing: %s", p.Witness, line)
		}
		// A training witness is among its own nearest training witnesses, agreeing fully.
		if training[p.Witness] {
			self := false
			for _, n := range p.Nearest {
				self = self || (n.Witness == p.Witness && n.Agreement == 1)
			}
			if !self || p.Nearest[0].Agreement != 1 {
				t.Errorf("%s: not its own nearest: %+v", p.Witness, p.Nearest)
			}
		}
		if p.BlockMixture == nil || len(p.Sections) == 0 {
			t.Errorf("%s: no sections: %s", p.Witness, line)
		}
	}
}
