package tei

// Output of results as TEI P5: placements of witnesses and the groups of a model.
//
// The elements and attributes used, and the rules followed, are those of the TEI P5 Guidelines
// as known from memory (no schema can be fetched here to validate against):
//
//   - ch. 2 "The TEI Header": <TEI> holds <teiHeader> then <text>; <teiHeader> holds <fileDesc>,
//     which needs <titleStmt> (with <title>), <publicationStmt> (here with a <p>) and
//     <sourceDesc>. <sourceDesc> holds either paragraphs or lists (a <listWit>), not both.
//   - ch. 12.1.4 "The Witness List" (12.1.4.1): <listWit> holds <head> elements first, then one
//     or more <witness> or nested <listWit> elements; a nested <listWit> with an xml:id is a
//     group of witnesses. <witness> has mixed content in which <note> and the global elements
//     (<certainty> among them) may stand.
//   - ch. 3 "Elements Available in All TEI Documents": <note> with @type (its content may hold a
//     <list>); <list> with @type, optional <head>s first, then one or more <item>s; <num> with
//     @value (a number) and @type; <ref> with @target (space-separated URI pointers, here
//     "#id"); <head>; <p>. Global attributes used: xml:id (unique in the document, an XML
//     NCName) and @n (any label).
//   - ch. 14 "Tables, Formulæ, Graphics and Notated Music": <table> with @type, optional <head>s
//     first, then <row> elements of <cell>s; @role="label" on a row of column headings (the
//     default role, "data", is left implicit).
//   - ch. 4 "Default Text Structure": <text> holds <body>, which holds <div>s or paragraphs;
//     <div> with @type and @n, a <head> first.
//   - ch. 21 "Certainty, Precision, and Responsibility", 21.1 "Levels of Certainty": <certainty>
//     says how certain some aspect of the markup is. Of its attributes only these are used:
//     @target (pointer to the element concerned), @locus (required; which aspect: "name",
//     "start", "end", "location" or "value", here "value": the element's content is right) and
//     @degree (the probability, from 0 to 1, that the aspect is right: teidata.probability).
//     @assertedValue is not used: it names an alternative to the encoded value, and the value
//     judged here is the encoded one. @cert (a coarse "high"/"medium"/"low") is not used either:
//     the number says more and no conversion rule is imposed.
//
// Identifiers follow WriteApparatus: a witness's xml:id is its siglum when the siglum is an
// XML name (NCName) not taken before in the document; otherwise it is a generated "wit-<n>" and
// the siglum is kept in @n. The documents therefore read back with Read and
// Options.SiglumAttr = "n" to the same witnesses, in order (and, for WriteGroups, the same
// groups).

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
)

// GroupShare is a group's share of a placed witness (its coefficient over the sum of all).
type GroupShare struct {
	Group string
	Share float64
}

// PlacedWitness is one witness placed against a model, as WritePlacements writes it.
type PlacedWitness struct {
	Witness string
	// BestGroup is the group with the largest share, "" if the witness got none.
	BestGroup string
	// Shares are the groups' shares, in the order to be written (best first); each in [0, 1].
	Shares []GroupShare
	// Confidence is the probability, in [0, 1], that BestGroup is the witness's group; it is
	// written as the degree of a <certainty> about the best-group note.
	Confidence float64
	// CoveredUnits, UsedUnits and UnknownReadings count the units the model knows that the
	// witness has, those of them the model groups by, and the readings the model does not know.
	CoveredUnits, UsedUnits, UnknownReadings int
	// Error, if set, says why the witness could not be placed; the other fields are then not
	// written.
	Error string
}

// Group describes one group of a model for WriteGroups.
type Group struct {
	// ID is the group's id, such as "G1".
	ID string
	// Size counts the training witnesses whose best group it is.
	Size int
	// Leading are the witnesses with the largest share in the group, largest first.
	Leading []WitnessShare
	// Profile are the readings whose profile loading falls mostly in the group.
	Profile []ProfileReading
}

// WitnessShare is a witness with its share in a group.
type WitnessShare struct {
	Witness string
	Share   float64
}

// ProfileReading is a reading of a group's profile: Concentration is the group's share, in
// [0, 1], of the reading's total loading.
type ProfileReading struct {
	Unit, Reading string
	Concentration float64
}

// Member is a training witness of a model with its best group ("" for none) and its shares,
// parallel to the groups given to WriteGroups.
type Member struct {
	Witness   string
	BestGroup string
	Shares    []float64
}

// WritePlacements writes placed witnesses as a TEI P5 document whose header's <sourceDesc>
// holds one <listWit> (headed by the model name when given) with one <witness> per placed
// witness, in order:
//
//	<witness xml:id="F1">
//	  <note type="best-group" xml:id="F1.best-group">G2</note>
//	  <note type="group-shares"><list><item n="G2">0.8123</item><item n="G1">0.1877</item></list></note>
//	  <note type="coverage"><num type="covered-units" value="40">40</num> units covered, ...</note>
//	  <certainty target="#F1.best-group" locus="value" degree="0.8700"/>
//	</witness>
//
// A witness that could not be placed gets a <note type="error"> instead; one with no best
// group gets no best-group note and no <certainty>. Shares and degrees are written with four
// decimals. A share or confidence outside [0, 1] (or NaN), or a string XML cannot carry, is
// an error. The elements and attributes used, and the TEI P5 rules they follow (from memory),
// are listed at the top of output.go.
func WritePlacements(w io.Writer, modelName string, ps []PlacedWitness) error {
	if err := checkOutChars("model name", modelName); err != nil {
		return err
	}
	ids := newIDs()
	witIDs := ids.witnesses(len(ps), func(i int) string { return ps[i].Witness })
	for i := range ps {
		p := &ps[i]
		if err := checkOutChars("siglum", p.Witness); err != nil {
			return err
		}
		for _, s := range []string{p.BestGroup, p.Error} {
			if err := checkOutChars("text", s); err != nil {
				return fmt.Errorf("witness %q: %w", p.Witness, err)
			}
		}
		if p.Error != "" {
			continue
		}
		if err := checkUnit("confidence", p.Confidence); err != nil {
			return fmt.Errorf("writing TEI placements: witness %q: %w", p.Witness, err)
		}
		for _, g := range p.Shares {
			if err := checkOutChars("group", g.Group); err != nil {
				return fmt.Errorf("witness %q: %w", p.Witness, err)
			}
			if err := checkUnit("share of "+g.Group, g.Share); err != nil {
				return fmt.Errorf("writing TEI placements: witness %q: %w", p.Witness, err)
			}
		}
	}

	bw := bufio.NewWriterSize(w, 64<<10)
	title := "Placements"
	if modelName != "" {
		title = "Placements against model " + modelName
	}
	writeHeaderStart(bw, title)
	if len(ps) == 0 {
		bw.WriteString("        <p>No witnesses.</p>\n")
	} else {
		bw.WriteString("        <listWit>\n          <head>")
		escape(bw, title)
		bw.WriteString("</head>\n")
		for i := range ps {
			p := &ps[i]
			writeWitnessStart(bw, "          ", witIDs[i], p.Witness)
			switch {
			case p.Error != "":
				bw.WriteString("            <note type=\"error\">")
				escape(bw, p.Error)
				bw.WriteString("</note>\n")
			default:
				bestID := ""
				if p.BestGroup != "" {
					bestID = ids.take(witIDs[i] + ".best-group")
					bw.WriteString(`            <note type="best-group" xml:id="`)
					escape(bw, bestID)
					bw.WriteString(`">`)
					escape(bw, p.BestGroup)
					bw.WriteString("</note>\n")
				}
				if len(p.Shares) > 0 {
					bw.WriteString(`            <note type="group-shares"><list>`)
					for _, g := range p.Shares {
						bw.WriteString(`<item n="`)
						escape(bw, g.Group)
						bw.WriteString(`">`)
						bw.WriteString(fixed4(g.Share))
						bw.WriteString("</item>")
					}
					bw.WriteString("</list></note>\n")
				}
				fmt.Fprintf(bw, `            <note type="coverage"><num type="covered-units" value="%d">%d</num> units covered, `+
					`<num type="used-units" value="%d">%d</num> used for placing, `+
					`<num type="unknown-readings" value="%d">%d</num> readings unknown to the model</note>`+"\n",
					p.CoveredUnits, p.CoveredUnits, p.UsedUnits, p.UsedUnits, p.UnknownReadings, p.UnknownReadings)
				if bestID != "" {
					bw.WriteString(`            <certainty target="#`)
					escape(bw, bestID)
					bw.WriteString(`" locus="value" degree="`)
					bw.WriteString(fixed4(p.Confidence))
					bw.WriteString("\"/>\n")
				}
			}
			bw.WriteString("          </witness>\n")
		}
		bw.WriteString("        </listWit>\n")
	}
	writeHeaderEnd(bw)
	fmt.Fprintf(bw, "      <p>%d witnesses placed; the witness list in the header gives each one's best group, group shares and coverage, and a certainty element gives the confidence in the best group.</p>\n", len(ps))
	return writeEnd(bw, "placements")
}

// WriteGroups writes a model's groups as a TEI P5 document:
//
//   - the header's <sourceDesc> holds a <listWit> of the training witnesses (members), with one
//     nested <listWit xml:id="G1"> per group holding the members whose best group it is, in the
//     order given, each with a <note type="group-shares"> of its shares; members with no best
//     group follow the groups. A group id that is not an NCName, or is taken, gets a generated
//     "group-<n>" xml:id and keeps the id in @n. A group that no member has as its best group
//     gets no <listWit> (a <listWit> needs a witness), and its <head> below no pointer;
//   - the <body> holds one <div type="group" n="G1"> per group: a <head> pointing to the group's
//     <listWit>, a <list type="leading-witnesses"> of the leading witnesses with their shares
//     (each a <ref> to its <witness> when it is a member, plain text otherwise), and a
//     <table type="profile-readings"> with a label row and one row per profile reading (unit,
//     reading, concentration).
//
// A member's shares must be parallel to groups. Shares and concentrations are written with four
// decimals and must lie in [0, 1].
func WriteGroups(w io.Writer, modelName string, groups []Group, members []Member) error {
	if err := checkOutChars("model name", modelName); err != nil {
		return err
	}
	for _, g := range groups {
		if err := checkOutChars("group", g.ID); err != nil {
			return err
		}
		if g.Size < 0 {
			return fmt.Errorf("writing TEI groups: group %q has size %d; expected >= 0", g.ID, g.Size)
		}
		for _, l := range g.Leading {
			if err := checkOutChars("siglum", l.Witness); err != nil {
				return err
			}
			if err := checkUnit("share of "+l.Witness, l.Share); err != nil {
				return fmt.Errorf("writing TEI groups: group %q: %w", g.ID, err)
			}
		}
		for _, p := range g.Profile {
			if err := checkOutChars("unit", p.Unit); err != nil {
				return err
			}
			if err := checkOutChars("reading", p.Reading); err != nil {
				return err
			}
			if err := checkUnit("concentration at "+p.Unit, p.Concentration); err != nil {
				return fmt.Errorf("writing TEI groups: group %q: %w", g.ID, err)
			}
		}
	}
	groupIndex := make(map[string]int, len(groups))
	for i, g := range groups {
		if _, dup := groupIndex[g.ID]; dup {
			return fmt.Errorf("writing TEI groups: group id %q is given twice", g.ID)
		}
		groupIndex[g.ID] = i
	}
	byGroup := make([][]int, len(groups))
	var ungrouped []int
	memberOf := make(map[string]int, len(members))
	for i, m := range members {
		if err := checkOutChars("siglum", m.Witness); err != nil {
			return err
		}
		if len(m.Shares) != len(groups) {
			return fmt.Errorf("writing TEI groups: witness %q has %d shares for %d groups", m.Witness, len(m.Shares), len(groups))
		}
		for g, s := range m.Shares {
			if err := checkUnit("share in "+groups[g].ID, s); err != nil {
				return fmt.Errorf("writing TEI groups: witness %q: %w", m.Witness, err)
			}
		}
		if _, dup := memberOf[m.Witness]; dup {
			return fmt.Errorf("writing TEI groups: witness %q is given twice", m.Witness)
		}
		memberOf[m.Witness] = i
		if m.BestGroup == "" {
			ungrouped = append(ungrouped, i)
			continue
		}
		g, ok := groupIndex[m.BestGroup]
		if !ok {
			return fmt.Errorf("writing TEI groups: witness %q has best group %q, which is not among the groups", m.Witness, m.BestGroup)
		}
		byGroup[g] = append(byGroup[g], i)
	}

	// Witness ids first (in the order the witnesses are written), so that they are kept when
	// they can be; then the group ids.
	order := make([]int, 0, len(members))
	for _, idx := range byGroup {
		order = append(order, idx...)
	}
	order = append(order, ungrouped...)
	ids := newIDs()
	inOrder := ids.witnesses(len(order), func(i int) string { return members[order[i]].Witness })
	witID := make([]string, len(members))
	for i, m := range order {
		witID[m] = inOrder[i]
	}
	groupID := make([]string, len(groups))
	for i, g := range groups {
		if len(byGroup[i]) == 0 {
			continue
		}
		if isNCName(g.ID) && !ids.used[g.ID] {
			groupID[i] = g.ID
			ids.used[g.ID] = true
		} else {
			groupID[i] = ids.generate("group-")
		}
	}

	bw := bufio.NewWriterSize(w, 64<<10)
	title := "Groups"
	if modelName != "" {
		title = "Groups of model " + modelName
	}
	writeHeaderStart(bw, title)
	writeMember := func(indent string, m int) {
		writeWitnessStart(bw, indent, witID[m], members[m].Witness)
		if len(groups) > 0 {
			bw.WriteString(indent + `  <note type="group-shares"><list>`)
			for g, s := range members[m].Shares {
				bw.WriteString(`<item n="`)
				escape(bw, groups[g].ID)
				bw.WriteString(`">`)
				bw.WriteString(fixed4(s))
				bw.WriteString("</item>")
			}
			bw.WriteString("</list></note>\n")
		}
		bw.WriteString(indent + "</witness>\n")
	}
	if len(members) == 0 {
		bw.WriteString("        <p>No training witnesses.</p>\n")
	} else {
		bw.WriteString("        <listWit>\n          <head>Training witnesses by group</head>\n")
		for g := range groups {
			if len(byGroup[g]) == 0 {
				continue // a <listWit> needs a witness: a group no member has as best group gets none
			}
			bw.WriteString(`          <listWit xml:id="`)
			escape(bw, groupID[g])
			if groupID[g] != groups[g].ID {
				bw.WriteString(`" n="`)
				escape(bw, groups[g].ID)
			}
			bw.WriteString("\">\n            <head>")
			escape(bw, groups[g].ID)
			bw.WriteString("</head>\n")
			for _, m := range byGroup[g] {
				writeMember("            ", m)
			}
			bw.WriteString("          </listWit>\n")
		}
		for _, m := range ungrouped {
			writeMember("          ", m)
		}
		bw.WriteString("        </listWit>\n")
	}
	writeHeaderEnd(bw)
	if len(groups) == 0 {
		bw.WriteString("      <p>The model has no groups.</p>\n")
	}
	for g, gr := range groups {
		bw.WriteString(`      <div type="group" n="`)
		escape(bw, gr.ID)
		bw.WriteString("\">\n        <head>")
		if len(byGroup[g]) > 0 {
			bw.WriteString(`<ref target="#`)
			escape(bw, groupID[g])
			bw.WriteString(`">`)
			escape(bw, gr.ID)
			bw.WriteString("</ref>")
		} else {
			escape(bw, gr.ID)
		}
		fmt.Fprintf(bw, ": <num type=\"size\" value=\"%d\">%d</num> training witnesses</head>\n", gr.Size, gr.Size)
		if len(gr.Leading) == 0 {
			bw.WriteString("        <p>No leading witness.</p>\n")
		} else {
			bw.WriteString("        <list type=\"leading-witnesses\">\n          <head>Leading witnesses (share in the group)</head>\n")
			for _, l := range gr.Leading {
				bw.WriteString("          <item>")
				if m, ok := memberOf[l.Witness]; ok {
					bw.WriteString(`<ref target="#`)
					escape(bw, witID[m])
					bw.WriteString(`">`)
					escape(bw, l.Witness)
					bw.WriteString("</ref>")
				} else {
					escape(bw, l.Witness)
				}
				s := fixed4(l.Share)
				bw.WriteString(` <num type="share" value="` + s + `">` + s + "</num></item>\n")
			}
			bw.WriteString("        </list>\n")
		}
		if len(gr.Profile) == 0 {
			bw.WriteString("        <p>No profile reading.</p>\n")
		} else {
			bw.WriteString("        <table type=\"profile-readings\">\n          <head>Profile readings (the group's share of the reading's loading)</head>\n")
			bw.WriteString("          <row role=\"label\"><cell>unit</cell><cell>reading</cell><cell>concentration</cell></row>\n")
			for _, p := range gr.Profile {
				bw.WriteString("          <row><cell>")
				escape(bw, p.Unit)
				bw.WriteString("</cell><cell>")
				escape(bw, p.Reading)
				c := fixed4(p.Concentration)
				bw.WriteString(`</cell><cell><num type="concentration" value="` + c + `">` + c + "</num></cell></row>\n")
			}
			bw.WriteString("        </table>\n")
		}
		bw.WriteString("      </div>\n")
	}
	return writeEnd(bw, "groups")
}

// idSet hands out document-unique xml:id values.
type idSet struct {
	used map[string]bool
	next map[string]int
}

func newIDs() *idSet { return &idSet{used: map[string]bool{}, next: map[string]int{}} }

// witnesses returns the xml:id of each of n sigla (siglum(i)): the siglum itself when it is an
// NCName not taken by an earlier one, else a generated "wit-<n>" (WriteApparatus, WritePlacements
// and WriteGroups all name witnesses so).
func (s *idSet) witnesses(n int, siglum func(int) string) []string {
	out := make([]string, n)
	for i := range out {
		if v := siglum(i); isNCName(v) && !s.used[v] {
			out[i] = v
			s.used[v] = true
		}
	}
	for i := range out {
		if out[i] == "" {
			out[i] = s.generate("wit-")
		}
	}
	return out
}

// generate returns prefix + the next number that gives an unused id.
func (s *idSet) generate(prefix string) string {
	for {
		s.next[prefix]++
		id := prefix + strconv.Itoa(s.next[prefix])
		if !s.used[id] {
			s.used[id] = true
			return id
		}
	}
}

// take returns id if it is unused, else id + ".2", ".3", ...; want is an NCName.
func (s *idSet) take(want string) string {
	id := want
	for n := 2; s.used[id]; n++ {
		id = want + "." + strconv.Itoa(n)
	}
	s.used[id] = true
	return id
}

func writeHeaderStart(bw *bufio.Writer, title string) {
	bw.WriteString(`<?xml version="1.0" encoding="UTF-8"?>
<TEI xmlns="http://www.tei-c.org/ns/1.0">
  <teiHeader>
    <fileDesc>
      <titleStmt><title>`)
	escape(bw, title)
	bw.WriteString(`</title></titleStmt>
      <publicationStmt><p>Written by strayleaf.</p></publicationStmt>
      <sourceDesc>
`)
}

func writeHeaderEnd(bw *bufio.Writer) {
	bw.WriteString(`      </sourceDesc>
    </fileDesc>
  </teiHeader>
  <text>
    <body>
`)
}

func writeEnd(bw *bufio.Writer, what string) error {
	bw.WriteString("    </body>\n  </text>\n</TEI>\n")
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("writing TEI %s: %w", what, err)
	}
	return nil
}

// writeWitnessStart writes `<witness xml:id="id"` (with n="siglum" when they differ) and ">\n".
func writeWitnessStart(bw *bufio.Writer, indent, id, siglum string) {
	bw.WriteString(indent + `<witness xml:id="`)
	escape(bw, id)
	if id != siglum {
		bw.WriteString(`" n="`)
		escape(bw, siglum)
	}
	bw.WriteString("\">\n")
}

// checkUnit reports a value that is not a number in [0, 1].
func checkUnit(what string, v float64) error {
	if math.IsNaN(v) || v < 0 || v > 1 {
		return fmt.Errorf("%s is %v; expected a number from 0 to 1", what, v)
	}
	return nil
}

// checkOutChars reports, for WritePlacements and WriteGroups, a string that XML cannot carry
// (see xmlCharsError).
func checkOutChars(what, s string) error { return xmlCharsError("writing TEI output", what, s) }

// fixed4 formats v in [0, 1] with four decimals.
func fixed4(v float64) string { return strconv.FormatFloat(v, 'f', 4, 64) }
