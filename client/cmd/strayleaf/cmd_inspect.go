package main

import (
	"context"
	"fmt"
	"io"
	"text/tabwriter"

	"strayleaf/placement/prepare"
)

func init() {
	register(&command{name: "inspect", summary: "describe a collation and what preparation would set aside", run: runInspect})
}

type inspectWitness struct {
	Witness  string  `json:"witness"`
	Extant   int     `json:"extant_units"`
	Coverage float64 `json:"coverage"`
}

type inspectReport struct {
	Collation        string           `json:"collation"`
	SHA256           string           `json:"sha256"`
	Witnesses        int              `json:"witnesses"`
	Units            int              `json:"units"`
	Readings         int              `json:"readings"`
	Lacunae          int              `json:"lacunae"`
	SingularReadings int              `json:"singular_readings"`
	Sections         []string         `json:"sections"`
	Coverage         []inspectWitness `json:"coverage"`
	SetAside         *setAsideJSON    `json:"set_aside"`
	KeptUnits        int              `json:"kept_units"`
	KeptReadings     int              `json:"kept_readings"`
	TrainWitnesses   int              `json:"training_witnesses"`
	PrepareError     string           `json:"prepare_error,omitempty"`
	// TEI is what the TEI reader found (absent for a CSV collation).
	TEI *inspectTEI `json:"tei,omitempty"`
}

type setAsideJSON struct {
	SingularReadings     []prepare.SingularReading    `json:"singular_readings"`
	UninformativeUnits   []prepare.UninformativeUnit  `json:"uninformative_units"`
	FragmentaryWitnesses []prepare.FragmentaryWitness `json:"fragmentary_witnesses"`
}

func runInspect(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("inspect", "inspect --collation FILE [--format csv|tei] [--min-support N] [--min-coverage F] [--json]", stderr)
	path := fs.String("collation", "", "collation file (long CSV `witness,unit,reading[,section]`, or TEI P5 .xml)")
	format := fs.String("format", "", "collation format: csv or tei (default: by extension)")
	copt := addCollationFlags(fs)
	asJSON := fs.Bool("json", false, "print one JSON object")
	popt := prepare.DefaultOptions()
	fs.IntVar(&popt.MinSupport, "min-support", popt.MinSupport, "least witnesses a reading needs to be kept")
	fs.Float64Var(&popt.MinCoverage, "min-coverage", popt.MinCoverage, "least share of kept units a training witness must be extant at")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *path == "" {
		return usageError("inspect", "--collation is required")
	}
	src, err := readCollationWith(*path, *format, copt)
	if err != nil {
		return err
	}
	c := src.C
	rep := inspectReport{Collation: src.Path, SHA256: src.SHA256, Witnesses: c.NumWitnesses(), Units: c.NumUnits(),
		Readings: c.NumReadings(), Lacunae: c.Lacunae(), Sections: c.Sections(), TEI: inspectTEIOf(src)}
	if rep.Sections == nil {
		rep.Sections = []string{}
	}
	for u := 0; u < c.NumUnits(); u++ {
		for _, s := range c.Support(u) {
			if s == 1 {
				rep.SingularReadings++
			}
		}
	}
	for w := 0; w < c.NumWitnesses(); w++ {
		e := c.Extant(w)
		cov := 0.0
		if c.NumUnits() > 0 {
			cov = float64(e) / float64(c.NumUnits())
		}
		rep.Coverage = append(rep.Coverage, inspectWitness{Witness: c.Witness(w), Extant: e, Coverage: cov})
	}
	p, perr := prepare.Prepare(c, popt)
	if perr != nil {
		rep.PrepareError = perr.Error()
		rep.SetAside = &setAsideJSON{}
	} else {
		rep.SetAside = &setAsideJSON{p.Report.SingularReadings, p.Report.UninformativeUnits, p.Report.FragmentaryWitnesses}
		rep.KeptUnits, rep.KeptReadings, rep.TrainWitnesses = len(p.KeptUnits), len(p.Rows), len(p.Train)
	}
	if *asJSON {
		return writeJSON(stdout, rep)
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "collation\t%s\nsha256\t%s\nwitnesses\t%d\nunits\t%d\nreadings\t%d\nlacunae\t%d cells\nsingular readings\t%d\nsections\t%d\n",
		rep.Collation, rep.SHA256, rep.Witnesses, rep.Units, rep.Readings, rep.Lacunae, rep.SingularReadings, len(rep.Sections))
	if perr != nil {
		fmt.Fprintf(tw, "preparation\tfails: %v\n", perr)
	} else {
		fmt.Fprintf(tw, "kept for grouping\t%d units, %d readings, %d training witnesses\n", rep.KeptUnits, rep.KeptReadings, rep.TrainWitnesses)
		fmt.Fprintf(tw, "set aside\t%d singular readings, %d uninformative units, %d fragmentary witnesses\n",
			len(p.Report.SingularReadings), len(p.Report.UninformativeUnits), len(p.Report.FragmentaryWitnesses))
	}
	tw.Flush()
	if rep.TEI != nil {
		if err := writeInspectTEI(stdout, rep.TEI); err != nil {
			return err
		}
	}
	if perr == nil && len(p.Report.FragmentaryWitnesses) > 0 {
		fmt.Fprintln(stdout, "\nfragmentary witnesses (placed after training, not trained on):")
		tw = tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "  witness\textant units\tcoverage")
		for _, f := range p.Report.FragmentaryWitnesses {
			fmt.Fprintf(tw, "  %s\t%d\t%.0f%%\n", f.Witness, f.Extant, 100*f.Coverage)
		}
		tw.Flush()
	}
	if perr == nil && len(p.Report.UninformativeUnits) > 0 {
		fmt.Fprintf(stdout, "\nuninformative units (remembered, not grouped by): ")
		for i, u := range p.Report.UninformativeUnits {
			if i == 12 {
				fmt.Fprintf(stdout, "... (%d in all)", len(p.Report.UninformativeUnits))
				break
			}
			fmt.Fprintf(stdout, "%s ", u.Unit)
		}
		fmt.Fprintln(stdout)
	}
	fmt.Fprintln(stdout, "\ncoverage per witness:")
	tw = tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "  witness\textant units\tcoverage")
	for _, w := range rep.Coverage {
		fmt.Fprintf(tw, "  %s\t%d\t%.0f%%\n", w.Witness, w.Extant, 100*w.Coverage)
	}
	return tw.Flush()
}
