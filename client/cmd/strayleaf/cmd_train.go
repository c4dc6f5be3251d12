package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	"text/tabwriter"

	"strayleaf/placement/calibrate"
	"strayleaf/placement/model"
	"strayleaf/placement/prepare"
	pb "strayleaf/proto/strayleaf/v1"
)

func init() {
	register(&command{name: "train", summary: "learn a group model from a collation and write it as a bundle", run: runTrain})
}

type trainJSON struct {
	Bundle            string                  `json:"bundle"`
	BundleSHA256      string                  `json:"bundle_sha256"`
	Collation         string                  `json:"collation"`
	CollationSHA256   string                  `json:"collation_sha256"`
	Groups            []groupDesc             `json:"groups"`
	WitnessGroups     map[string]string       `json:"witness_groups"`
	SetAside          []string                `json:"set_aside"`
	SetAsideDetail    *setAsideJSON           `json:"set_aside_detail"`
	Objective         float64                 `json:"objective"`
	RelativeError     float64                 `json:"relative_error"`
	Iterations        int32                   `json:"iterations"`
	Seed              uint64                  `json:"seed"`
	Restarts          int32                   `json:"restarts"`
	Calibration       *calibrationSummaryJSON `json:"calibration,omitempty"`
	TrainingWitnesses int                     `json:"training_witnesses"`
}

type calibrationSummaryJSON struct {
	Method string  `json:"method"`
	ECE    float64 `json:"expected_calibration_error"`
	N      int32   `json:"samples"`
	// Folds, Seconds (the time calibration took), Reliability (the bins behind the ECE) and
	// Doubtful (held-out witnesses left out, their own group in doubt) come from the run.
	Folds        int             `json:"folds,omitempty"`
	Seconds      float64         `json:"seconds,omitempty"`
	TrainSeconds float64         `json:"-"`
	Reliability  []calibrate.Bin `json:"reliability,omitempty"`
	Doubtful     int             `json:"doubtful_witnesses,omitempty"`
}

func runTrain(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("train", "train --collation FILE --groups K [--seed N] [--restarts R] [--no-idf] [--min-support N] [--min-coverage F] [--no-calibration] [--reliability-plot SVG] --out BUNDLE [--json]", stderr)
	path := fs.String("collation", "", "collation file (long CSV or TEI P5 .xml)")
	format := fs.String("format", "", "collation format: csv or tei (default: by extension)")
	copt := addCollationFlags(fs)
	k := fs.Int("groups", 0, "number of groups K to learn (see 'strayleaf rank' for help choosing it)")
	seed := fs.Uint64("seed", 1, "random seed (same seed, same model)")
	restarts := fs.Int("restarts", 4, "runs from different starts (the first from NNDSVD, the others random); the best fit is kept")
	noIDF := fs.Bool("no-idf", false, "weight every reading 1 instead of by IDF log(N_u/n_r)")
	popt := prepare.DefaultOptions()
	fs.IntVar(&popt.MinSupport, "min-support", popt.MinSupport, "least witnesses a reading needs to be kept (fewer: singular, set aside)")
	fs.Float64Var(&popt.MinCoverage, "min-coverage", popt.MinCoverage, "least share of kept units a witness must be extant at to be trained on")
	out := fs.String("out", "", "bundle file to write")
	noCal := fs.Bool("no-calibration", false, "skip calibrating the confidence (K-fold refits and simulated fragments); placements then carry a provisional, uncalibrated confidence")
	folds := fs.Int("calibration-folds", 3, "K, the refits the confidence is calibrated by")
	plotPath := fs.String("reliability-plot", "", "write the calibration's reliability diagram to this SVG file")
	asJSON := fs.Bool("json", false, "print one JSON object")
	quiet := fs.Bool("quiet", false, "no progress on the terminal")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	switch {
	case *path == "":
		return usageError("train", "--collation is required")
	case *k < 1:
		return usageError("train", "--groups must be at least 1")
	case *out == "":
		return usageError("train", "--out is required")
	}
	popt.IDF = !*noIDF
	src, err := readCollationWith(*path, *format, copt)
	if err != nil {
		return err
	}
	prog := newProgress(stderr, "training", *quiet)
	topt := model.TrainOptions{Groups: *k, Prepare: popt, Seed: *seed, Restarts: *restarts, Progress: prog.update}
	m, prep, err := trainModel(src, topt)
	if err != nil {
		return err
	}
	var cal *calibrate.Report
	if !*noCal {
		if cal, err = calibrate.CalibrateContext(ctx, m, prep, topt, calibrate.Options{Folds: *folds, Seed: *seed}); err != nil {
			return fmt.Errorf("calibrating the confidence on %s: %w (use --no-calibration to skip)", src.Path, err)
		}
		if *plotPath != "" {
			var buf bytes.Buffer
			if err := cal.Plot(&buf); err != nil {
				return err
			}
			if err := writeFileAtomic(*plotPath, buf.Bytes()); err != nil {
				return err
			}
		}
	} else if *plotPath != "" {
		return usageError("train", "--reliability-plot needs the calibration (drop --no-calibration)")
	}
	b, err := model.EncodeBundle(m)
	if err != nil {
		return err
	}
	if err := writeFileAtomic(*out, b); err != nil {
		return err
	}
	rep := trainReport(m, src)
	if cal != nil && rep.Calibration != nil {
		rep.Calibration.Folds, rep.Calibration.Seconds, rep.Calibration.TrainSeconds = cal.Folds, cal.CalibrationSeconds, cal.TrainSeconds
		rep.Calibration.Reliability = cal.Bins
		rep.Calibration.Doubtful = len(cal.Doubtful)
	}
	rep.Bundle = *out
	rep.BundleSHA256 = sha256Hex(b)
	if *asJSON {
		return writeJSON(stdout, rep)
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "model\t%s (%d bytes, sha256 %s)\n", *out, len(b), rep.BundleSHA256[:16])
	fmt.Fprintf(tw, "trained on\t%d witnesses, %d readings; %d witnesses set aside\n", rep.TrainingWitnesses, len(m.Rows), len(rep.SetAside))
	fmt.Fprintf(tw, "fit\trelative error %.3f after %d iterations (restart %d of %d)\n", rep.RelativeError, rep.Iterations, m.Fit.BestRestart+1, m.Train.Restarts)
	if rep.Calibration != nil {
		fmt.Fprintf(tw, "calibration\t%s, expected calibration error %.3f over %d simulated fragments\n", rep.Calibration.Method, rep.Calibration.ECE, rep.Calibration.N)
	}
	tw.Flush()
	fmt.Fprintln(stdout)
	tw = tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "group\tsize\tleading witnesses\tprofile readings")
	for _, g := range rep.Groups {
		lead := ""
		for i, l := range g.Leading {
			if i > 0 {
				lead += " "
			}
			lead += l.Witness
		}
		prof := ""
		for i, p := range g.Profile {
			if i == 4 {
				break
			}
			if i > 0 {
				prof += ", "
			}
			prof += p.Unit + "=" + p.Reading
		}
		fmt.Fprintf(tw, "%s\t%d\t%s\t%s\n", g.Group, g.Size, lead, prof)
	}
	return tw.Flush()
}

// trainModel trains on a collation source, recording its checksum in the model.
func trainModel(src *collationSource, opt model.TrainOptions) (*pb.Model, *prepare.Prepared, error) {
	opt.CollationSHA256 = src.SHA256
	m, p, err := model.Train(src.C, opt)
	if err != nil {
		return nil, nil, fmt.Errorf("training on %s: %w", src.Path, err)
	}
	return m, p, nil
}

func trainReport(m *pb.Model, src *collationSource) *trainJSON {
	rep := &trainJSON{Collation: src.Path, CollationSHA256: m.CollationSha256, WitnessGroups: map[string]string{}, SetAside: []string{},
		Objective: m.Fit.Objective, RelativeError: m.Fit.RelativeError, Iterations: m.Fit.Iterations, Seed: m.Train.Seed, Restarts: m.Train.Restarts,
		TrainingWitnesses: len(m.TrainingWitnesses)}
	for _, tw := range m.TrainingWitnesses {
		rep.WitnessGroups[tw.Witness] = tw.BestGroup
	}
	sa := &setAsideJSON{}
	for _, f := range m.SetAside.FragmentaryWitnesses {
		rep.SetAside = append(rep.SetAside, f.Witness)
		sa.FragmentaryWitnesses = append(sa.FragmentaryWitnesses, prepare.FragmentaryWitness{Witness: f.Witness, Extant: int(f.ExtantUnits), Coverage: f.Coverage})
	}
	for _, s := range m.SetAside.SingularReadings {
		sa.SingularReadings = append(sa.SingularReadings, prepare.SingularReading{Unit: s.Unit, Reading: s.Reading, Witnesses: s.Witnesses})
	}
	for _, u := range m.SetAside.UninformativeUnits {
		sa.UninformativeUnits = append(sa.UninformativeUnits, prepare.UninformativeUnit{Unit: u.Unit, Kept: int(u.KeptReadings), Reason: u.Reason})
	}
	rep.SetAsideDetail = sa
	rep.Groups = groupsOf(m, "").Groups
	if c := m.Calibration; c != nil && c.Method != "" {
		rep.Calibration = &calibrationSummaryJSON{Method: c.Method, ECE: c.ExpectedCalibrationError, N: c.Samples}
	}
	return rep
}

// writeFileAtomic writes b to path through a temporary file and a rename, so that a crash never
// leaves a half-written bundle under the final name.
func writeFileAtomic(path string, b []byte) error {
	tmp := path + ".tmp"
	f, err := os.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return err
	}
	if _, err := f.Write(b); err != nil {
		f.Close()
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return os.Rename(tmp, path)
}
