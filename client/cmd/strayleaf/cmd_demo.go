package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"text/tabwriter"
	"time"

	"strayleaf"
	"strayleaf/api"
	"strayleaf/api/auth"
	"strayleaf/client"
	"strayleaf/placement/collation"
	"strayleaf/placement/simulate"
	pb "strayleaf/proto/strayleaf/v1"
)

func init() {
	register(&command{name: "demo", summary: "run the whole job on the embedded demo tradition, end to end", run: runDemo})
}

// runDemo trains a model on the embedded demo collation, starts strayleafd in-process on
// loopback with a temporary store and a fresh token, publishes the model through the API, places
// the demo fragments over gRPC (one of them over REST too), asks which units to check next, and
// stops the service.
func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("demo", "demo [--keep DIR] [--verbose]", stderr)
	keep := fs.String("keep", "", "keep the store and tokens file in this directory (default: a temporary one, removed)")
	verbose := fs.Bool("verbose", false, "show the service's log")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("demo", "unexpected arguments %q", fs.Args())
	}
	dir := *keep
	if dir == "" {
		tmp, err := os.MkdirTemp("", "strayleaf-demo-")
		if err != nil {
			return err
		}
		defer os.RemoveAll(tmp)
		dir = tmp
	} else if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "%s\n\n", strayleaf.DemoDescription)

	// 1. Train.
	start := time.Now()
	bundle, err := api.TrainDemo()
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "1. Trained the group model on the demo collation (%d bytes, %.1fs).\n", len(bundle), time.Since(start).Seconds())

	// 2. Start the service with a fresh publish token.
	tok, err := auth.NewToken()
	if err != nil {
		return err
	}
	line, err := auth.Line("demo-cataloguer", auth.RolePublish, tok)
	if err != nil {
		return err
	}
	tokens := filepath.Join(dir, "tokens")
	if err := os.WriteFile(tokens, []byte("# strayleaf demo\n"+line+"\n"), 0o600); err != nil {
		return err
	}
	level := slog.LevelWarn
	if *verbose {
		level = slog.LevelInfo
	}
	d, err := api.Start(ctx, api.Config{StorePath: filepath.Join(dir, "models.db"), GRPCAddr: "127.0.0.1:0", HTTPAddr: "127.0.0.1:0",
		TokensFile: tokens, Logger: slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: level}))})
	if err != nil {
		return err
	}
	defer func() {
		sctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		d.Shutdown(sctx)
	}()
	fmt.Fprintf(stdout, "2. Started strayleafd in-process: gRPC on %s, REST on %s, store %s.\n", d.GRPCAddr(), d.HTTPAddr(), filepath.Join(dir, "models.db"))

	cl, err := client.Dial(d.GRPCAddr(), client.WithToken(tok))
	if err != nil {
		return err
	}
	defer cl.Close()

	// 3. Publish.
	ref, err := cl.PublishModel(ctx, api.DemoModelName, bundle, "demo model", "current")
	if err != nil {
		return err
	}
	desc, err := cl.GetModel(ctx, "demo@current")
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "3. Published it through the API as %s (alias current).\n\n", ref)
	truth, err := simulate.ReadTruth(bytes.NewReader(strayleaf.DemoTruth))
	if err != nil {
		return err
	}
	source := groupSources(desc.GetGroups(), truth)
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "   group\tcopies\tleading witnesses\tsimulated scriptorium of its members")
	for _, g := range desc.GetGroups() {
		var lead []string
		for _, l := range g.GetLeadingWitnesses() {
			lead = append(lead, l.GetWitness())
		}
		fmt.Fprintf(tw, "   %s\t%d\t%s\t%s\n", g.GetId(), g.GetSize(), strings.Join(lead, " "), source[g.GetId()])
	}
	tw.Flush()

	// 4. Place the fragments over one gRPC stream.
	frag, err := collation.ReadCSV(bytes.NewReader(strayleaf.DemoFragments), "demo fragments")
	if err != nil {
		return err
	}
	var ws []client.Witness
	for _, w := range witnessesFromCollation(frag) {
		cw := client.Witness{Siglum: w.Witness}
		for _, r := range w.Readings {
			cw.Readings = append(cw.Readings, client.Reading{Unit: r.Unit, Reading: r.Reading})
		}
		ws = append(ws, cw)
	}
	fmt.Fprintf(stdout, "\n4. Placed the %d demo fragments over gRPC (PlaceStream):\n\n", len(ws))
	var placed []*client.Placement
	err = cl.PlaceAll(ctx, "demo@current", ws, func(r client.StreamResult) error {
		if r.Err != nil {
			return fmt.Errorf("placing %s: %v", r.Witness, r.Err)
		}
		placed = append(placed, r.Placement)
		return nil
	})
	if err != nil {
		return err
	}
	tw = tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "   fragment\tunits\tbest group\tconfidence\tshares\tsimulation says")
	for _, p := range placed {
		var sh []string
		for _, g := range p.Groups {
			if g.Share >= 0.05 {
				sh = append(sh, fmt.Sprintf("%s %.2f", g.Group, g.Share))
			}
		}
		said := ""
		if wt, ok := truth.Witness(p.Witness); ok && wt.Group >= 0 && wt.Group < len(truth.Groups) {
			said = truth.Groups[wt.Group].Name
			for g, share := range wt.Shares {
				if g != wt.Group && share > 0 && g < len(truth.Groups) {
					said += fmt.Sprintf(" mixed with %s %.2f", truth.Groups[g].Name, share)
				}
			}
		}
		fmt.Fprintf(tw, "   %s\t%d\t%s\t%.2f\t%s\t%s\n", p.Witness, p.CoveredUnits, p.BestGroup, p.Confidence, strings.Join(sh, ", "), said)
	}
	tw.Flush()

	// 5. The same placement over REST.
	first := ws[0]
	rest, err := placeREST(ctx, d.HTTPAddr(), tok, first)
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "\n5. The same fragment %s over REST (POST /v1/models/demo@current/placements): best group %s, confidence %.2f, model %s.\n",
		first.Siglum, rest.BestGroup, rest.Confidence, rest.Model)
	if rest.BestGroup != placed[0].BestGroup || rest.Confidence != placed[0].Confidence {
		return fmt.Errorf("REST and gRPC disagree on %s: %s %.4f vs %s %.4f", first.Siglum, rest.BestGroup, rest.Confidence, placed[0].BestGroup, placed[0].Confidence)
	}

	// 6. A cataloguer's loop: a binding strip shows three units of the leaf; ask which of the
	// leaf's other units to read next, read them, and place again.
	if err := demoCheckingLoop(ctx, stdout, cl, ws[len(ws)-1]); err != nil {
		return err
	}
	fmt.Fprintln(stdout, "\n7. Stopping the service.")
	return nil
}

// placeREST places one witness through the REST gateway.
func placeREST(ctx context.Context, httpAddr, token string, w client.Witness) (*client.Placement, error) {
	body, err := json.Marshal(map[string]any{"witness": w.Siglum, "readings": w.Readings})
	if err != nil {
		return nil, err
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, "http://"+httpAddr+"/v1/models/demo@current/placements", bytes.NewReader(body))
	if err != nil {
		return nil, err
	}
	req.Header.Set("Authorization", "Bearer "+token)
	req.Header.Set("Content-Type", "application/json")
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		return nil, err
	}
	if resp.StatusCode != http.StatusOK {
		return nil, fmt.Errorf("REST placement: %s: %s", resp.Status, b)
	}
	var p client.Placement
	if err := json.Unmarshal(b, &p); err != nil {
		return nil, fmt.Errorf("REST placement: %w", err)
	}
	return &p, nil
}

// groupSources names, for each model group, the simulated scriptoria its leading witnesses
// were copied in (from the simulation's truth), so that the demo shows the groups are real.
func groupSources(groups []*pb.GroupSummary, truth *simulate.Truth) map[string]string {
	out := map[string]string{}
	for _, g := range groups {
		count := map[string]int{}
		for _, l := range g.GetLeadingWitnesses() {
			if wt, ok := truth.Witness(l.GetWitness()); ok && wt.Group >= 0 && wt.Group < len(truth.Groups) {
				count[truth.Groups[wt.Group].Name]++
			}
		}
		names := make([]string, 0, len(count))
		for n := range count {
			names = append(names, n)
		}
		sort.Slice(names, func(a, b int) bool {
			return count[names[a]] > count[names[b]] || count[names[a]] == count[names[b]] && names[a] < names[b]
		})
		var parts []string
		for _, n := range names {
			parts = append(parts, fmt.Sprintf("%s %d/%d", n, count[n], len(g.GetLeadingWitnesses())))
		}
		out[g.GetId()] = strings.Join(parts, ", ")
	}
	return out
}

// demoCheckingLoop shows the cataloguer's loop on one fragment: start from a strip with three
// units, ask which of the units still legible on the leaf are worth reading next, "read" them
// (take them from the full fragment) and place again, until the placement is confident.
func demoCheckingLoop(ctx context.Context, stdout io.Writer, cl *client.Client, leaf client.Witness) error {
	have := append([]client.Reading(nil), leaf.Readings[:3]...)
	left := map[string]client.Reading{}
	for _, r := range leaf.Readings[3:] {
		left[r.Unit] = r
	}
	fmt.Fprintf(stdout, "\n6. What to check next: a binding strip of %s shows only %d units. Asking which of the leaf's other units to read:\n\n", leaf.Siglum, len(have))
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "   units read\tbest group\tconfidence\tnext to read (expected gain in bits)")
	for round := 0; round < 4; round++ {
		p, err := cl.Place(ctx, "demo@current", leaf.Siglum+"-strip", have)
		if err != nil {
			return err
		}
		cands := make([]string, 0, len(left))
		for u := range left {
			cands = append(cands, u)
		}
		sort.Strings(cands)
		next := ""
		var chosen []client.Reading
		if p.Confidence < 0.95 && len(cands) > 0 {
			s, err := cl.SuggestUnits(ctx, "demo@current", leaf.Siglum+"-strip", have, client.SuggestOptions{Top: 3, Candidates: cands})
			if err != nil {
				return err
			}
			var parts []string
			for _, u := range s.Units {
				parts = append(parts, fmt.Sprintf("%s (%.2f)", u.Unit, u.Gain))
				chosen = append(chosen, left[u.Unit])
				delete(left, u.Unit)
			}
			next = strings.Join(parts, ", ")
		} else {
			next = "(settled)"
		}
		fmt.Fprintf(tw, "   %d\t%s\t%.2f\t%s\n", len(have), p.BestGroup, p.Confidence, next)
		if len(chosen) == 0 {
			break
		}
		have = append(have, chosen...)
	}
	return tw.Flush()
}
