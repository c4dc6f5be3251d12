package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"strings"
	"text/tabwriter"

	"strayleaf/client"
	"strayleaf/placement/collation"
	"strayleaf/placement/model"
)

func init() {
	register(&command{name: "place", summary: "place witnesses or fragments into the groups of a model", run: runPlace})
}

// placementJSON is one line of `strayleaf place --json`: the client's placement (its field names
// are a contract, shared with the API's JSON) and, for a witness that could not be placed, the error.
type placementJSON struct {
	client.Placement
	Error string `json:"error,omitempty"`
}

// witnessInput is one witness read from a witnesses file.
type witnessInput struct {
	Witness  string
	Readings []model.Reading
}

// witnessesFromCollation lists each witness of c with its readings at the units it has.
func witnessesFromCollation(c *collation.Collation) []witnessInput {
	out := make([]witnessInput, 0, c.NumWitnesses())
	for w := 0; w < c.NumWitnesses(); w++ {
		in := witnessInput{Witness: c.Witness(w)}
		for u, r := range c.Row(w) {
			if r != collation.Lacuna {
				un := c.Unit(u)
				in.Readings = append(in.Readings, model.Reading{Unit: un.ID, Reading: un.Readings[r]})
			}
		}
		out = append(out, in)
	}
	return out
}

// placementOut is a local placement in the shape of a placement answered by a strayleafd.
func placementOut(p *model.Placement, ref string) placementJSON {
	out := client.Placement{Witness: p.Witness, Model: ref, BestGroup: p.BestGroup, Confidence: p.Confidence,
		CoveredUnits: p.CoveredUnits, UsedUnits: p.UsedUnits, RelativeResidual: p.RelativeResidual,
		UnknownReadings: nonNil(p.UnknownReadings), UninformativeUnits: nonNil(p.UninformativeUnits),
		Groups: make([]client.GroupShare, len(p.Groups))}
	for i, g := range p.Groups {
		out.Groups[i] = client.GroupShare{Group: g.Group, Share: g.Share}
	}
	addGuidance(&out, p)
	return placementJSON{Placement: out}
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

// modelSource names where a command gets its model: a bundle file or a local store.
type modelSource struct {
	bundle, store, ref string
}

func (s *modelSource) flags(fs interface {
	StringVar(*string, string, string, string)
}) {
	fs.StringVar(&s.bundle, "bundle", "", "model bundle file (from 'strayleaf train')")
	fs.StringVar(&s.store, "store", "", "local model store file (with --model)")
	fs.StringVar(&s.ref, "model", "", "model reference in the store: name, name@3 or name@alias")
}

// load returns the model and the reference it was loaded by.
func (s *modelSource) load() (*model.Model, string, func(), error) {
	switch {
	case s.bundle != "" && s.store != "":
		return nil, "", nil, usageError("", "give either --bundle or --store with --model, not both")
	case s.bundle != "":
		b, err := os.ReadFile(s.bundle)
		if err != nil {
			return nil, "", nil, fmt.Errorf("reading bundle: %w", err)
		}
		m, err := model.Decode(b)
		if err != nil {
			return nil, "", nil, fmt.Errorf("reading bundle %s: %w", s.bundle, err)
		}
		return m, s.bundle, func() {}, nil
	case s.store != "":
		if s.ref == "" {
			return nil, "", nil, usageError("", "--store needs --model NAME[@VERSION|@ALIAS]")
		}
		return loadFromStore(s.store, s.ref)
	}
	return nil, "", nil, usageError("", "no model given: use --bundle FILE, or --store DB --model REF")
}

func runPlace(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("place", "place (--bundle BUNDLE | --store DB --model REF | --server ADDR --model REF) --witnesses FILE [--json | --format table|json|csv|tei]", stderr)
	var src modelSource
	src.flags(fs)
	remote := addRemoteFlags(fs)
	path := fs.String("witnesses", "", "witnesses to place, in the collation form (long CSV or TEI); every witness in it is placed")
	inFormat := fs.String("witnesses-format", "", "format of --witnesses: csv or tei (default: by extension)")
	copt := addCollationFlags(fs)
	asJSON := fs.Bool("json", false, "print JSON lines, one object per witness (same as --format json)")
	outFormat := fs.String("format", "table", "output: table, json (JSON lines), csv or tei")
	bySection := fs.Bool("by-section", false, "also place each section's readings separately and report a change of exemplar (block mixture)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *path == "" {
		return usageError("place", "--witnesses is required")
	}
	if *asJSON {
		*outFormat = "json"
	}
	switch *outFormat {
	case "table", "json", "csv", "tei":
	default:
		return usageError("place", "--format %q: expected table, json, csv or tei", *outFormat)
	}
	in, err := readCollationWith(*path, *inFormat, copt)
	if err != nil {
		return err
	}
	var results []placementJSON
	if remote.remote() {
		if src.bundle != "" || src.store != "" {
			return usageError("place", "--server places against the server's store: give --model REF, not --bundle or --store")
		}
		if src.ref == "" {
			return usageError("place", "--server needs --model REF")
		}
		results, err = placeRemote(ctx, remote, src.ref, witnessesFromCollation(in.C), *bySection)
	} else {
		results, err = placeLocal(&src, witnessesFromCollation(in.C), *bySection)
	}
	if err != nil {
		return err
	}
	failed := 0
	for _, r := range results {
		if r.Error != "" {
			failed++
		}
	}
	if err := writePlacements(stdout, *outFormat, results); err != nil {
		return err
	}
	if failed > 0 {
		fmt.Fprintf(stderr, "strayleaf place: %d of %d witnesses could not be placed (see their error entries)\n", failed, len(results))
		return exitError{1}
	}
	return nil
}

func writePlacements(w io.Writer, format string, results []placementJSON) error {
	switch format {
	case "json":
		for _, r := range results {
			if err := writeJSON(w, r); err != nil {
				return err
			}
		}
		return nil
	case "csv":
		return writePlacementsCSV(w, results)
	case "tei":
		return writePlacementsTEI(w, results)
	case "table", "":
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
		fmt.Fprintln(tw, "witness\tbest group\tconfidence\tshares\tcovered\tunknown readings")
		for _, r := range results {
			if r.Error != "" {
				// A server's error has its field violations on lines of their own: one row here.
				fmt.Fprintf(tw, "%s\t-\t-\terror: %s\t\t\n", r.Witness, strings.Join(strings.Fields(r.Error), " "))
				continue
			}
			var sh []string
			for _, g := range r.Groups {
				if g.Share >= 0.005 {
					sh = append(sh, fmt.Sprintf("%s %.2f", g.Group, g.Share))
				}
			}
			fmt.Fprintf(tw, "%s\t%s\t%.2f\t%s\t%d\t%d\n", r.Witness, r.BestGroup, r.Confidence, strings.Join(sh, ", "), r.CoveredUnits, len(r.UnknownReadings))
		}
		return tw.Flush()
	}
	return fmt.Errorf("--format %q: expected table, json, csv or tei", format)
}

func failedPlacement(witness, ref, msg string) placementJSON {
	return placementJSON{Placement: client.Placement{Witness: witness, Model: ref, Groups: []client.GroupShare{},
		UnknownReadings: []string{}, UninformativeUnits: []string{}}, Error: msg}
}

// placeLocal places every witness against a model from a bundle file or a local store.
func placeLocal(src *modelSource, witnesses []witnessInput, bySection bool) ([]placementJSON, error) {
	m, ref, done, err := src.load()
	if err != nil {
		return nil, err
	}
	defer done()
	results := make([]placementJSON, 0, len(witnesses))
	ws := m.Engine().NewWorkspace()
	for _, w := range witnesses {
		p, err := m.Place(w.Witness, w.Readings, ws)
		if err != nil {
			results = append(results, failedPlacement(w.Witness, ref, err.Error()))
			continue
		}
		out := placementOut(p, ref)
		if bySection {
			sp, err := m.PlaceBySection(w.Witness, w.Readings, ws)
			if err != nil {
				results = append(results, failedPlacement(w.Witness, ref, "by section: "+err.Error()))
				continue
			}
			addSections(&out.Placement, sp)
		}
		results = append(results, out)
	}
	return results, nil
}

// placeRemote places every witness over one PlaceStream to a strayleafd, asking for what the
// local path prints: the nearest training witnesses and, with bySection, the sections.
func placeRemote(ctx context.Context, remote *remoteFlags, ref string, witnesses []witnessInput, bySection bool) ([]placementJSON, error) {
	cl, err := remote.dial()
	if err != nil {
		return nil, err
	}
	defer cl.Close()
	ws := make([]client.Witness, len(witnesses))
	for i, w := range witnesses {
		ws[i].Siglum = w.Witness
		for _, r := range w.Readings {
			ws[i].Readings = append(ws[i].Readings, client.Reading{Unit: r.Unit, Reading: r.Reading})
		}
	}
	results := make([]placementJSON, 0, len(ws))
	opt := client.PlaceOptions{Nearest: model.NearestWitnesses, BySection: bySection}
	err = cl.PlaceAllWith(ctx, ref, ws, opt, func(r client.StreamResult) error {
		if r.Err != nil {
			results = append(results, failedPlacement(r.Witness, ref, r.Err.Error()))
			return nil
		}
		results = append(results, remotePlacementOut(r.Placement))
		return nil
	})
	return results, err
}

// remotePlacementOut is placementOut for a placement answered by a strayleafd.
func remotePlacementOut(p *client.Placement) placementJSON {
	return placementJSON{Placement: *p}
}
