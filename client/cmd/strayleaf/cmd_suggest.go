package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
	"text/tabwriter"

	"strayleaf/client"
	"strayleaf/placement/model"
)

func init() {
	register(&command{name: "suggest", summary: "name the units worth checking next for partial witnesses", run: runSuggest})
}

// suggestionJSON is one line of `strayleaf suggest --json`: the client's suggestions (their field
// names are a contract, shared with the API's JSON) and, for a witness that could not be read
// against the model, the error.
type suggestionJSON struct {
	client.Suggestions
	Error string `json:"error,omitempty"`
}

func runSuggest(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("suggest", "suggest (--bundle BUNDLE | --store DB --model REF) --witnesses FILE [--top N] [--candidates FILE] [--json]", stderr)
	var src modelSource
	src.flags(fs)
	path := fs.String("witnesses", "", "witnesses in the collation form (long CSV or TEI): each witness's readings are the units checked so far; a witness with none gets the probe list")
	inFormat := fs.String("witnesses-format", "", "format of --witnesses: csv or tei (default: by extension)")
	copt := addCollationFlags(fs)
	top := fs.Int("top", 10, "number of units to name per witness")
	candidates := fs.String("candidates", "", "file of unit ids, one per line, that can still be checked (e.g. the text a leaf preserves); default: every unit")
	asJSON := fs.Bool("json", false, "print JSON lines, one object per witness")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *path == "" {
		return usageError("suggest", "--witnesses is required")
	}
	if *top < 1 {
		return usageError("suggest", "--top is %d; expected at least 1", *top)
	}
	var cand []string
	if *candidates != "" {
		var err error
		if cand, err = readUnitList(*candidates); err != nil {
			return err
		}
	}
	in, err := readCollationWith(*path, *inFormat, copt)
	if err != nil {
		return err
	}
	m, ref, done, err := src.load()
	if err != nil {
		return err
	}
	defer done()
	var results []suggestionJSON
	failed := 0
	for _, w := range witnessesFromCollation(in.C) {
		if err := ctx.Err(); err != nil {
			return err
		}
		s, err := m.Suggest(w.Witness, w.Readings, model.SuggestOptions{Top: *top, Candidates: cand})
		if err != nil {
			failed++
			results = append(results, suggestionJSON{Suggestions: client.Suggestions{Witness: w.Witness, Model: ref,
				Posterior: []client.GroupShare{}, Units: []client.Suggestion{}}, Error: err.Error()})
			continue
		}
		results = append(results, suggestionOut(s, ref))
	}
	if *asJSON {
		for _, r := range results {
			if err := writeJSON(stdout, r); err != nil {
				return err
			}
		}
	} else if err := writeSuggestionTable(stdout, results); err != nil {
		return err
	}
	if failed > 0 {
		fmt.Fprintf(stderr, "strayleaf suggest: %d of %d witnesses could not be read against the model (see their error entries)\n", failed, len(results))
		return exitError{1}
	}
	return nil
}

func suggestionOut(s *model.Suggestions, ref string) suggestionJSON {
	out := client.Suggestions{Witness: s.Witness, Model: ref, Probe: s.Probe, EntropyBits: s.Entropy,
		Posterior: make([]client.GroupShare, len(s.Posterior)), Units: make([]client.Suggestion, len(s.Units))}
	for i, g := range s.Posterior {
		out.Posterior[i] = client.GroupShare{Group: g.Group, Share: g.Share}
	}
	for i, u := range s.Units {
		su := client.Suggestion{Unit: u.Unit, Gain: u.Gain, Hints: map[string]string{}, Readings: make([]client.ReadingHint, len(u.Hints))}
		for j, h := range u.Hints {
			su.Hints[h.Reading] = h.Favours
			su.Readings[j] = client.ReadingHint{Reading: h.Reading, Probability: h.Probability, Favours: h.Favours}
		}
		out.Units[i] = su
	}
	return suggestionJSON{Suggestions: out}
}

func writeSuggestionTable(w io.Writer, results []suggestionJSON) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "witness\trank\tunit\tgain (bits)\tif it reads ... it points to")
	for _, r := range results {
		if r.Error != "" {
			fmt.Fprintf(tw, "%s\t-\t-\t-\terror: %s\n", r.Witness, r.Error)
			continue
		}
		if len(r.Units) == 0 {
			fmt.Fprintf(tw, "%s\t-\t-\t-\tnothing left to check\n", r.Witness)
		}
		for i, u := range r.Units {
			var hints []string
			for _, h := range u.Readings {
				hints = append(hints, fmt.Sprintf("%s -> %s (%.0f%%)", h.Reading, h.Favours, 100*h.Probability))
			}
			name := r.Witness
			if i > 0 {
				name = ""
			} else if r.Probe {
				name += " (probe list)"
			}
			fmt.Fprintf(tw, "%s\t%d\t%s\t%.3f\t%s\n", name, i+1, u.Unit, u.Gain, strings.Join(hints, "; "))
		}
	}
	return tw.Flush()
}

// readUnitList reads unit ids, one per line; blank lines and lines starting with '#' are
// skipped.
func readUnitList(path string) ([]string, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var out []string
	seen := map[string]bool{}
	sc := bufio.NewScanner(f)
	for line := 1; sc.Scan(); line++ {
		id := strings.TrimSpace(sc.Text())
		if id == "" || strings.HasPrefix(id, "#") {
			continue
		}
		if seen[id] {
			return nil, fmt.Errorf("reading %s line %d: unit %q listed twice", path, line, id)
		}
		seen[id] = true
		out = append(out, id)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("reading %s: %w", path, err)
	}
	sort.Strings(out)
	return out, nil
}
