package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"text/tabwriter"

	"strayleaf/placement/prepare"
	"strayleaf/placement/rank"
)

func init() {
	register(&command{name: "rank", summary: "help choose the number of groups: fit and stability over a range of k", run: runRank})
}

// rankRowJSON is one row of `strayleaf rank --json`'s table.
type rankRowJSON struct {
	K           int     `json:"k"`
	Objective   float64 `json:"objective"`
	Cophenetic  float64 `json:"cophenetic"`
	Dispersion  float64 `json:"dispersion"`
	SparsenessW float64 `json:"sparseness_w"`
	SparsenessH float64 `json:"sparseness_h"`
}

type rankJSON struct {
	Collation         string        `json:"collation"`
	Restarts          int           `json:"restarts"`
	RecommendedK      int           `json:"recommended_k"`
	Reason            string        `json:"reason"`
	Table             []rankRowJSON `json:"table"`
	Plot              string        `json:"plot,omitempty"`
	TrainingWitnesses int           `json:"training_witnesses"`
}

// parseKRange reads "A:B" with 1 <= A <= B.
func parseKRange(s string) (int, int, error) {
	a, b, ok := strings.Cut(s, ":")
	if !ok {
		return 0, 0, fmt.Errorf("--k-range %q: expected A:B, such as 2:12", s)
	}
	lo, err1 := strconv.Atoi(strings.TrimSpace(a))
	hi, err2 := strconv.Atoi(strings.TrimSpace(b))
	if err1 != nil || err2 != nil || lo < 1 || hi < lo {
		return 0, 0, fmt.Errorf("--k-range %q: expected whole numbers A:B with 1 <= A <= B", s)
	}
	return lo, hi, nil
}

func runRank(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("rank", "rank --collation FILE --k-range A:B [--restarts R] [--plot FILE.svg] [--json]", stderr)
	path := fs.String("collation", "", "collation file (long CSV or TEI P5 .xml)")
	format := fs.String("format", "", "collation format: csv or tei (default: by extension)")
	kr := fs.String("k-range", "2:10", "range of group counts to try, A:B")
	restarts := fs.Int("restarts", 10, "random starts per k (the consensus is taken over them)")
	seed := fs.Uint64("seed", 1, "random seed")
	plot := fs.String("plot", "", "write an SVG plot of the evidence to this file")
	noIDF := fs.Bool("no-idf", false, "weight every reading 1 instead of by IDF")
	popt := prepare.DefaultOptions()
	fs.IntVar(&popt.MinSupport, "min-support", popt.MinSupport, "least witnesses a reading needs to be kept")
	fs.Float64Var(&popt.MinCoverage, "min-coverage", popt.MinCoverage, "least share of kept units a training witness must be extant at")
	asJSON := fs.Bool("json", false, "print one JSON object")
	quiet := fs.Bool("quiet", false, "no progress on the terminal")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *path == "" {
		return usageError("rank", "--collation is required")
	}
	lo, hi, err := parseKRange(*kr)
	if err != nil {
		return usageError("rank", "%v", err)
	}
	if *restarts < 2 {
		return usageError("rank", "--restarts must be at least 2 for a consensus")
	}
	popt.IDF = !*noIDF
	src, err := readCollation(*path, *format)
	if err != nil {
		return err
	}
	p, err := prepare.Prepare(src.C, popt)
	if err != nil {
		return fmt.Errorf("preparing %s: %w", src.Path, err)
	}
	if hi > len(p.Train) {
		return usageError("rank", "--k-range goes to %d but only %d witnesses are left to train on", hi, len(p.Train))
	}
	nopt := rank.SweepOptions()
	nopt.Seed = *seed
	prog := newProgress(stderr, "rank sweep", *quiet)
	res, err := rank.SweepContext(ctx, p.X, p.M, lo, hi, *restarts, nopt, prog.update)
	if err != nil {
		return err
	}
	out := rankJSON{Collation: src.Path, Restarts: res.Restarts, RecommendedK: res.Recommended, Reason: res.Reason, TrainingWitnesses: len(p.Train)}
	for _, k := range res.Ks {
		out.Table = append(out.Table, rankRowJSON{K: k.K, Objective: k.Objective, Cophenetic: k.Cophenetic, Dispersion: k.Dispersion,
			SparsenessW: k.SparsenessW, SparsenessH: k.SparsenessH})
	}
	if *plot != "" {
		f, err := os.Create(*plot)
		if err != nil {
			return err
		}
		if err := res.Plot(f); err != nil {
			f.Close()
			return fmt.Errorf("writing plot %s: %w", *plot, err)
		}
		if err := f.Close(); err != nil {
			return err
		}
		out.Plot = *plot
	}
	if *asJSON {
		return writeJSON(stdout, out)
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "k\tobjective\tcophenetic\tdispersion\tsparseness W\tsparseness H\t")
	for _, r := range out.Table {
		mark := ""
		if r.K == out.RecommendedK {
			mark = "  <- recommended"
		}
		fmt.Fprintf(tw, "%d\t%.2f\t%.4f\t%.4f\t%.3f\t%.3f\t%s\n", r.K, r.Objective, r.Cophenetic, r.Dispersion, r.SparsenessW, r.SparsenessH, mark)
	}
	tw.Flush()
	fmt.Fprintf(stdout, "\nrecommended: %s\n", out.Reason)
	if out.Plot != "" {
		fmt.Fprintf(stdout, "plot: %s\n", out.Plot)
	}
	return nil
}
