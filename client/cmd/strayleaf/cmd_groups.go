package main

import (
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"
	"text/tabwriter"

	"strayleaf/placement/tei"
	pb "strayleaf/proto/strayleaf/v1"
)

func init() {
	register(&command{name: "groups", summary: "list a model's groups: leading witnesses and profile readings", run: runGroups})
}

// groupsReport is the output of `strayleaf groups --format json`. Its field names are a contract.
type groupsReport struct {
	Model  string      `json:"model"`
	Groups []groupDesc `json:"groups"`
	// WitnessGroups maps each training witness to its best group ("" for none).
	WitnessGroups map[string]string `json:"witness_groups"`
}

type groupDesc struct {
	Group   string           `json:"group"`
	Size    int              `json:"size"`
	Leading []witnessShare   `json:"leading_witnesses"`
	Profile []profileReading `json:"profile_readings"`
}

type witnessShare struct {
	Witness string  `json:"witness"`
	Share   float64 `json:"share"`
}

type profileReading struct {
	Unit          string  `json:"unit"`
	Reading       string  `json:"reading"`
	Concentration float64 `json:"concentration"`
	Loading       float64 `json:"loading"`
}

func runGroups(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs := newFlags("groups", "groups (--bundle BUNDLE | --store DB --model REF) [--format table|csv|tei|json]", stderr)
	var src modelSource
	src.flags(fs)
	format := fs.String("format", "table", "output: table, csv (one row per leading witness and per profile reading), tei (TEI P5 witness list and group divisions) or json")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("groups", "unexpected argument %q", fs.Arg(0))
	}
	switch *format {
	case "table", "csv", "tei", "json":
	default:
		return usageError("groups", "--format %q: expected table, csv, tei or json", *format)
	}
	m, ref, done, err := src.load()
	if err != nil {
		return err
	}
	defer done()
	pm := m.Proto()
	rep := groupsOf(pm, ref)
	switch *format {
	case "json":
		return writeJSON(stdout, rep)
	case "csv":
		return writeGroupsCSV(stdout, rep)
	case "tei":
		return writeGroupsTEI(stdout, rep, pm)
	}
	tw := tabwriter.NewWriter(stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "model %s: %d groups, %d training witnesses\n\n", ref, len(rep.Groups), len(pm.TrainingWitnesses))
	fmt.Fprintln(tw, "group\tsize\tleading witnesses (share)\tprofile readings (concentration)")
	for _, g := range rep.Groups {
		lead := make([]string, len(g.Leading))
		for i, l := range g.Leading {
			lead[i] = fmt.Sprintf("%s %.2f", l.Witness, l.Share)
		}
		prof := make([]string, len(g.Profile))
		for i, p := range g.Profile {
			prof[i] = fmt.Sprintf("%s=%s %.2f", p.Unit, p.Reading, p.Concentration)
		}
		fmt.Fprintf(tw, "%s\t%d\t%s\t%s\n", g.Group, g.Size, strings.Join(lead, ", "), strings.Join(prof, ", "))
	}
	return tw.Flush()
}

// groupsOf summarises the model's groups as its group summaries give them.
func groupsOf(pm *pb.Model, ref string) *groupsReport {
	rep := &groupsReport{Model: ref, Groups: []groupDesc{}, WitnessGroups: map[string]string{}}
	for _, g := range pm.Groups {
		d := groupDesc{Group: g.Id, Size: int(g.Size), Leading: []witnessShare{}, Profile: []profileReading{}}
		for _, l := range g.LeadingWitnesses {
			d.Leading = append(d.Leading, witnessShare{l.Witness, l.Share})
		}
		for _, p := range g.ProfileReadings {
			d.Profile = append(d.Profile, profileReading{p.Unit, p.Reading, p.Concentration, p.Loading})
		}
		rep.Groups = append(rep.Groups, d)
	}
	for _, tw := range pm.TrainingWitnesses {
		rep.WitnessGroups[tw.Witness] = tw.BestGroup
	}
	return rep
}

// writeGroupsCSV writes one row per leading witness and one per profile reading:
//
//	group,size,kind,rank,witness,unit,reading,value,loading
//
// kind is "leading_witness" (witness and its share in the group as value) or "profile_reading"
// (unit, reading, the group's share of the reading's loading as value, and the loading itself);
// rank counts from 1 within the group and kind. A group with neither gets one row of kind
// "none", so that every group is listed.
func writeGroupsCSV(w io.Writer, rep *groupsReport) error {
	cw := csv.NewWriter(w)
	cw.Write([]string{"group", "size", "kind", "rank", "witness", "unit", "reading", "value", "loading"})
	num := func(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }
	for _, g := range rep.Groups {
		size := strconv.Itoa(g.Size)
		for i, l := range g.Leading {
			cw.Write([]string{g.Group, size, "leading_witness", strconv.Itoa(i + 1), l.Witness, "", "", num(l.Share), ""})
		}
		for i, p := range g.Profile {
			cw.Write([]string{g.Group, size, "profile_reading", strconv.Itoa(i + 1), "", p.Unit, p.Reading, num(p.Concentration), num(p.Loading)})
		}
		if len(g.Leading) == 0 && len(g.Profile) == 0 {
			cw.Write([]string{g.Group, size, "none", "", "", "", "", "", ""})
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("writing groups CSV: %w", err)
	}
	return nil
}

// writeGroupsTEI writes the groups with tei.WriteGroups: the training witnesses by best group in
// nested <listWit>s, and a division per group with its leading witnesses and profile readings.
func writeGroupsTEI(w io.Writer, rep *groupsReport, pm *pb.Model) error {
	groups := make([]tei.Group, len(rep.Groups))
	for i, g := range rep.Groups {
		tg := tei.Group{ID: g.Group, Size: g.Size}
		for _, l := range g.Leading {
			tg.Leading = append(tg.Leading, tei.WitnessShare{Witness: l.Witness, Share: l.Share})
		}
		for _, p := range g.Profile {
			tg.Profile = append(tg.Profile, tei.ProfileReading{Unit: p.Unit, Reading: p.Reading, Concentration: p.Concentration})
		}
		groups[i] = tg
	}
	members := make([]tei.Member, len(pm.TrainingWitnesses))
	for i, tw := range pm.TrainingWitnesses {
		members[i] = tei.Member{Witness: tw.Witness, BestGroup: tw.BestGroup, Shares: tw.Shares}
	}
	if err := tei.WriteGroups(w, rep.Model, groups, members); err != nil {
		return fmt.Errorf("--format tei: %w", err)
	}
	return nil
}
