package main

import (
	"fmt"
	"io"
	"sort"
	"strings"
	"text/tabwriter"
)

// inspectTEI is what `strayleaf inspect` reports of a TEI apparatus: what the reader found
// before the collation was built. Its field names are a contract.
type inspectTEI struct {
	Witnesses       int               `json:"witnesses"`
	Groups          int               `json:"witness_groups"`
	Units           int               `json:"units"`
	Readings        int               `json:"readings"`
	ReadingElements int               `json:"reading_elements"`
	Lacunae         inspectTEILacunae `json:"lacunae"`
	MergeTypes      []string          `json:"merge_types"`
	MergedByType    map[string]int    `json:"merged_by_type"`
	Merges          []inspectMerge    `json:"merges"`
	GeneratedIDs    []inspectGenID    `json:"generated_unit_ids"`
}

// inspectTEILacunae counts lacuna cells by cause (each cell once).
type inspectTEILacunae struct {
	Total int `json:"total"`
	// Absent: the witness is named in no reading of the app.
	Absent int `json:"absent"`
	// Marked: lacunaStart/lacunaEnd (or witEnd/witStart).
	Marked int `json:"marked"`
	// Gap: a reading holding a <gap>.
	Gap int `json:"gap"`
	// Detail: a witDetail of a lacuna type.
	Detail int `json:"witdetail"`
}

type inspectMerge struct {
	Unit      string   `json:"unit"`
	Type      string   `json:"type"`
	Reading   string   `json:"reading"`
	Into      string   `json:"into"`
	Witnesses []string `json:"witnesses"`
	Line      int      `json:"line"`
}

type inspectGenID struct {
	ID   string `json:"id"`
	Line int    `json:"line"`
}

// inspectTEIOf describes the TEI report of src, or returns nil when src was not TEI.
func inspectTEIOf(src *collationSource) *inspectTEI {
	r := src.TEI
	if r == nil {
		return nil
	}
	out := &inspectTEI{Witnesses: r.Witnesses, Groups: r.Groups, Units: r.Units, Readings: r.Readings, ReadingElements: r.ReadingElements,
		Lacunae:    inspectTEILacunae{Total: r.Lacunae.Total(), Absent: r.Lacunae.Absent, Marked: r.Lacunae.Marked, Gap: r.Lacunae.Gap, Detail: r.Lacunae.Detail},
		MergeTypes: append([]string{}, src.MergeTypes...), MergedByType: map[string]int{}, Merges: []inspectMerge{}, GeneratedIDs: []inspectGenID{}}
	for t, n := range r.MergedByType {
		out.MergedByType[t] = n
	}
	for _, m := range r.Merges {
		out.Merges = append(out.Merges, inspectMerge{Unit: m.Unit, Type: m.Type, Reading: m.Reading, Into: m.Into,
			Witnesses: append([]string{}, m.Witnesses...), Line: m.Line})
	}
	for _, g := range r.GeneratedIDs {
		out.GeneratedIDs = append(out.GeneratedIDs, inspectGenID{g.ID, g.Line})
	}
	return out
}

// maxMergesShown bounds the merges listed in the table output (the JSON lists them all).
const maxMergesShown = 12

// writeInspectTEI prints the TEI part of the inspect table.
func writeInspectTEI(w io.Writer, t *inspectTEI) error {
	fmt.Fprintln(w, "\nTEI apparatus:")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "  witnesses\t%d (%d listWit groups)\n", t.Witnesses, t.Groups)
	fmt.Fprintf(tw, "  units\t%d (%d with generated ids)\n", t.Units, len(t.GeneratedIDs))
	fmt.Fprintf(tw, "  readings\t%d, from %d reading elements\n", t.Readings, t.ReadingElements)
	fmt.Fprintf(tw, "  lacunae\t%d cells: %d absent from the app, %d lacunaStart/lacunaEnd, %d gap, %d witDetail\n",
		t.Lacunae.Total, t.Lacunae.Absent, t.Lacunae.Marked, t.Lacunae.Gap, t.Lacunae.Detail)
	types := "none (--merge-types \"\")"
	if len(t.MergeTypes) > 0 {
		types = strings.Join(t.MergeTypes, ", ")
	}
	fmt.Fprintf(tw, "  merged types\t%s\n", types)
	if len(t.MergedByType) == 0 {
		fmt.Fprintf(tw, "  merged readings\tnone\n")
	} else {
		var parts []string
		for _, ty := range sortedKeys(t.MergedByType) {
			parts = append(parts, fmt.Sprintf("%s %d", ty, t.MergedByType[ty]))
		}
		fmt.Fprintf(tw, "  merged readings\t%d: %s\n", len(t.Merges), strings.Join(parts, ", "))
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if len(t.Merges) == 0 {
		return nil
	}
	fmt.Fprintln(w, "\nmerged readings (counted as the reading they vary):")
	tw = tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "  unit\ttype\treading\tinto\twitnesses\tline")
	for i, m := range t.Merges {
		if i == maxMergesShown {
			fmt.Fprintf(tw, "  ... (%d in all; --json lists them all)\n", len(t.Merges))
			break
		}
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\t%d\n", m.Unit, m.Type, m.Reading, m.Into, strings.Join(m.Witnesses, " "), m.Line)
	}
	return tw.Flush()
}

func sortedKeys(m map[string]int) []string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}
