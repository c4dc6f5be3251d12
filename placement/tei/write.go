package tei

import (
	"bufio"
	"fmt"
	"io"
	"unicode"
	"unicode/utf8"

	"strayleaf/placement/collation"
)

// WriteApparatus writes c as a TEI P5 apparatus by parallel segmentation that Read, with the
// default options, reads back to the same collation:
//
//   - one <witness> per witness in a <listWit>, in order. Its xml:id is the siglum when the
//     siglum is an XML name (NCName); otherwise the xml:id is a generated "wit-<number>" and the
//     siglum is kept in @n, so such a file must be read with Options.SiglumAttr = "n";
//   - units in order, each an <app> inside a <div n="section"><ab> (a new div each time the
//     section changes; no @n for units without a section). The unit id is the xml:id when it is
//     an NCName unlike any witness id, else @n;
//   - one <rdg> per reading, in order, with @wit listing its witnesses ("#A #B"); a reading with
//     no witness has no @wit. The label is the element's text when it reads back unchanged (no
//     white space to collapse, not empty, not "om."); otherwise it is @n, and the text is empty.
//     A lacuna is a witness named in no reading of the app.
//
// A unit without readings, or a label, id, section or siglum holding a character XML 1.0
// cannot carry, is an error.
func WriteApparatus(w io.Writer, c *collation.Collation) error {
	bw := bufio.NewWriterSize(w, 256<<10)
	nw, nu := c.NumWitnesses(), c.NumUnits()
	for _, s := range c.Witnesses() {
		if err := checkChars("siglum", s); err != nil {
			return err
		}
	}
	ids := newIDs()
	witIDs := ids.witnesses(nw, c.Witness)

	bw.WriteString(`<?xml version="1.0" encoding="UTF-8"?>
<TEI xmlns="http://www.tei-c.org/ns/1.0">
  <teiHeader>
    <fileDesc>
      <titleStmt><title>Collation</title></titleStmt>
      <publicationStmt><p>Written by strayleaf.</p></publicationStmt>
      <sourceDesc>
`)
	if nw > 0 {
		bw.WriteString("        <listWit>\n")
		for i, s := range c.Witnesses() {
			bw.WriteString(`          <witness xml:id="`)
			escape(bw, witIDs[i])
			if witIDs[i] != s {
				bw.WriteString(`" n="`)
				escape(bw, s)
			}
			bw.WriteString("\"/>\n")
		}
		bw.WriteString("        </listWit>\n")
	} else {
		bw.WriteString("        <p>No witnesses.</p>\n")
	}
	bw.WriteString(`      </sourceDesc>
    </fileDesc>
    <encodingDesc>
      <variantEncoding method="parallel-segmentation" location="internal"/>
    </encodingDesc>
  </teiHeader>
  <text>
    <body>
`)
	// Witnesses of the current unit are bucketed by reading: counts gives each bucket's start in order.
	var counts []int
	var order []int32
	open := false
	section := ""
	for u := 0; u < nu; u++ {
		unit := c.Unit(u)
		if len(unit.Readings) == 0 {
			return fmt.Errorf("writing TEI apparatus: unit %q has no reading; an <app> needs at least one", unit.ID)
		}
		if err := checkChars("unit id", unit.ID); err != nil {
			return err
		}
		if err := checkChars("section", unit.Section); err != nil {
			return err
		}
		if !open || unit.Section != section {
			if open {
				bw.WriteString("      </ab></div>\n")
			}
			bw.WriteString("      <div")
			if unit.Section != "" {
				bw.WriteString(` n="`)
				escape(bw, unit.Section)
				bw.WriteString(`"`)
			}
			bw.WriteString("><ab>\n")
			open, section = true, unit.Section
		}
		nr := len(unit.Readings)
		counts = append(counts[:0], make([]int, nr+1)...)
		for wi := 0; wi < nw; wi++ {
			if r := c.Reading(wi, u); r != collation.Lacuna {
				counts[r+1]++
			}
		}
		for r := 1; r <= nr; r++ {
			counts[r] += counts[r-1]
		}
		// counts[r] is now where reading r's witnesses start in order.
		if cap(order) < nw {
			order = make([]int32, nw)
		}
		order = order[:counts[nr]]
		pos := append([]int(nil), counts[:nr]...)
		for wi := 0; wi < nw; wi++ {
			if r := c.Reading(wi, u); r != collation.Lacuna {
				order[pos[r]] = int32(wi)
				pos[r]++
			}
		}
		bw.WriteString("        <app ")
		if isNCName(unit.ID) && !ids.used[unit.ID] {
			bw.WriteString(`xml:id="`)
		} else {
			bw.WriteString(`n="`)
		}
		escape(bw, unit.ID)
		bw.WriteString(`">`)
		for r, label := range unit.Readings {
			if err := checkChars("reading", label); err != nil {
				return fmt.Errorf("unit %q: %w", unit.ID, err)
			}
			bw.WriteString("<rdg")
			if lo, hi := counts[r], counts[r+1]; hi > lo {
				bw.WriteString(` wit="`)
				for k, wi := range order[lo:hi] {
					if k > 0 {
						bw.WriteByte(' ')
					}
					bw.WriteByte('#')
					escape(bw, witIDs[wi])
				}
				bw.WriteByte('"')
			}
			asText := label != "" && label != "om." && normalize([]byte(label)) == label
			if !asText {
				bw.WriteString(` n="`)
				escape(bw, label)
				bw.WriteString(`"/>`)
				continue
			}
			bw.WriteByte('>')
			escape(bw, label)
			bw.WriteString("</rdg>")
		}
		bw.WriteString("</app>\n")
	}
	if !open {
		bw.WriteString("      <div><ab/></div>\n")
	} else {
		bw.WriteString("      </ab></div>\n")
	}
	bw.WriteString("    </body>\n  </text>\n</TEI>\n")
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("writing TEI apparatus: %w", err)
	}
	return nil
}

// escape writes s with the characters XML gives meaning to, and tab, newline and carriage
// return (which attribute values would otherwise lose), as references. s has been checked with
// checkChars.
func escape(w *bufio.Writer, s string) {
	last := 0
	for i := 0; i < len(s); i++ {
		var ref string
		switch s[i] {
		case '<':
			ref = "&lt;"
		case '>':
			ref = "&gt;"
		case '&':
			ref = "&amp;"
		case '"':
			ref = "&#34;"
		case '\'':
			ref = "&#39;"
		case '\t':
			ref = "&#x9;"
		case '\n':
			ref = "&#xA;"
		case '\r':
			ref = "&#xD;"
		default:
			continue
		}
		w.WriteString(s[last:i])
		w.WriteString(ref)
		last = i + 1
	}
	w.WriteString(s[last:])
}

// checkChars reports, for WriteApparatus, a string that XML cannot carry (see xmlCharsError).
func checkChars(what, s string) error { return xmlCharsError("writing TEI apparatus", what, s) }

// xmlCharsError reports a string that is not valid UTF-8 or holds a character outside XML 1.0's
// Char production (XML 1.0, production [2]: #x9 | #xA | #xD | [#x20-#xD7FF] | [#xE000-#xFFFD] |
// [#x10000-#x10FFFF]); doing and what say what was being written.
func xmlCharsError(doing, what, s string) error {
	for i, r := range s {
		if r == utf8.RuneError {
			if _, size := utf8.DecodeRuneInString(s[i:]); size == 1 {
				return fmt.Errorf("%s: %s %q is not valid UTF-8", doing, what, s)
			}
		}
		if !(r == 0x9 || r == 0xA || r == 0xD || (r >= 0x20 && r <= 0xD7FF) || (r >= 0xE000 && r <= 0xFFFD) || (r >= 0x10000 && r <= 0x10FFFF)) {
			return fmt.Errorf("%s: %s %q holds character %U, which XML cannot carry", doing, what, s, r)
		}
	}
	return nil
}

// isNCName reports whether s is an XML name without colon, conservatively: a letter or "_"
// first, then letters, digits, ".", "-" or "_". (Some rarer NCNames are refused; they are then
// written as @n, which reads back the same.)
func isNCName(s string) bool {
	if s == "" {
		return false
	}
	for i, r := range s {
		switch {
		case r == '_' || unicode.IsLetter(r):
		case i > 0 && (unicode.IsDigit(r) || r == '.' || r == '-'):
		default:
			return false
		}
	}
	return true
}
