// Package collation holds a collation: the readings that each witness of a text has at each
// variation unit, or the fact that it has none there (a lacuna, or a unit not checked).
//
// A Collation is immutable once built. Build one with a Builder, which checks every cell as it is
// added, or with one of the readers (ReadCSV here, the TEI reader in package tei).
package collation

import (
	"fmt"
	"sort"
)

// Lacuna is the reading index of a witness-unit cell with no reading: the witness is not extant
// at the unit (damage, illegible text, a missing leaf) or the unit was not checked.
const Lacuna = -1

// Unit is a variation unit: a place in the text where the witnesses differ.
type Unit struct {
	// ID names the unit; it is unique in a collation.
	ID string
	// Section is an optional label for the part of the text the unit lies in (a chapter, a
	// book). Units with the same section need not be contiguous, though they usually are.
	Section string
	// Readings are the alternative readings at the unit, by label, in order of first appearance.
	Readings []string
}

// ReadingIndex returns the index of the reading labelled label, or Lacuna.
func (u *Unit) ReadingIndex(label string) int {
	for i, r := range u.Readings {
		if r == label {
			return i
		}
	}
	return Lacuna
}

// Collation is a witnesses x units table of reading indexes. Units are in text order (order of
// first appearance in the source); witnesses in order of first appearance.
type Collation struct {
	witnesses []string
	units     []Unit
	wIndex    map[string]int
	uIndex    map[string]int
	// cells[w*len(units)+u] is the index into units[u].Readings of witness w's reading, or Lacuna.
	cells []int32
}

// NumWitnesses returns the number of witnesses.
func (c *Collation) NumWitnesses() int { return len(c.witnesses) }

// NumUnits returns the number of variation units.
func (c *Collation) NumUnits() int { return len(c.units) }

// Witness returns the siglum of witness w.
func (c *Collation) Witness(w int) string { return c.witnesses[w] }

// Witnesses returns the sigla in order. The caller must not modify the slice.
func (c *Collation) Witnesses() []string { return c.witnesses }

// Unit returns variation unit u. The caller must not modify it.
func (c *Collation) Unit(u int) *Unit { return &c.units[u] }

// Units returns the units in text order. The caller must not modify the slice.
func (c *Collation) Units() []Unit { return c.units }

// WitnessIndex returns the index of the witness with the given siglum.
func (c *Collation) WitnessIndex(siglum string) (int, bool) {
	i, ok := c.wIndex[siglum]
	return i, ok
}

// UnitIndex returns the index of the unit with the given id.
func (c *Collation) UnitIndex(id string) (int, bool) {
	i, ok := c.uIndex[id]
	return i, ok
}

// Reading returns the index of witness w's reading at unit u, or Lacuna.
func (c *Collation) Reading(w, u int) int { return int(c.cells[w*len(c.units)+u]) }

// Row returns witness w's reading indexes for all units (Lacuna where it has none). The caller
// must not modify the slice.
func (c *Collation) Row(w int) []int32 {
	n := len(c.units)
	return c.cells[w*n : (w+1)*n : (w+1)*n]
}

// Extant returns the number of units at which witness w has a reading.
func (c *Collation) Extant(w int) int {
	n := 0
	for _, r := range c.Row(w) {
		if r != Lacuna {
			n++
		}
	}
	return n
}

// Lacunae returns the number of witness-unit cells with no reading.
func (c *Collation) Lacunae() int {
	n := 0
	for _, r := range c.cells {
		if r == Lacuna {
			n++
		}
	}
	return n
}

// NumReadings returns the total number of distinct readings over all units.
func (c *Collation) NumReadings() int {
	n := 0
	for i := range c.units {
		n += len(c.units[i].Readings)
	}
	return n
}

// Support returns, for unit u, how many witnesses have each of its readings.
func (c *Collation) Support(u int) []int {
	s := make([]int, len(c.units[u].Readings))
	n := len(c.units)
	for w := range c.witnesses {
		if r := c.cells[w*n+u]; r != Lacuna {
			s[r]++
		}
	}
	return s
}

// Sections returns the distinct section labels in text order (empty labels left out).
func (c *Collation) Sections() []string {
	var out []string
	seen := map[string]bool{}
	for i := range c.units {
		s := c.units[i].Section
		if s != "" && !seen[s] {
			seen[s] = true
			out = append(out, s)
		}
	}
	return out
}

// ConflictError reports a cell given twice with different readings.
type ConflictError struct {
	Witness, Unit string
	First, Second string
}

func (e *ConflictError) Error() string {
	return fmt.Sprintf("witness %q has two readings at unit %q (%q and %q); a witness has at most one reading at a unit (a corrector's reading is usually given its own siglum, such as %q)",
		e.Witness, e.Unit, e.First, e.Second, e.Witness+"c")
}

// SectionError reports a unit given two different sections.
type SectionError struct {
	Unit          string
	First, Second string
}

func (e *SectionError) Error() string {
	return fmt.Sprintf("unit %q is given two sections (%q and %q); a unit lies in one section", e.Unit, e.First, e.Second)
}

// Builder assembles a Collation cell by cell, checking each cell as it comes. The zero value is
// ready to use.
type Builder struct {
	witnesses []string
	units     []Unit
	wIndex    map[string]int
	uIndex    map[string]int
	// rows[w] holds witness w's reading indexes for the units seen so far (it may be shorter than
	// units: missing entries are lacunae).
	rows       [][]int32
	sectionSet []bool // sectionSet[u]: the section of unit u has been given explicitly
}

// AddWitness declares a witness (so that a witness with no extant unit is still part of the
// collation) and returns its index. Declaring a witness twice is harmless.
func (b *Builder) AddWitness(siglum string) int {
	if b.wIndex == nil {
		b.wIndex = map[string]int{}
	}
	if i, ok := b.wIndex[siglum]; ok {
		return i
	}
	i := len(b.witnesses)
	b.witnesses = append(b.witnesses, siglum)
	b.wIndex[siglum] = i
	b.rows = append(b.rows, nil)
	return i
}

// AddUnit declares a variation unit with an optional section and returns its index. Units are kept
// in the order they are first declared. It returns a *SectionError if the unit was declared
// before with another non-empty section.
func (b *Builder) AddUnit(id, section string) (int, error) {
	if b.uIndex == nil {
		b.uIndex = map[string]int{}
	}
	if i, ok := b.uIndex[id]; ok {
		if section != "" {
			if b.sectionSet[i] && b.units[i].Section != section {
				return i, &SectionError{Unit: id, First: b.units[i].Section, Second: section}
			}
			b.units[i].Section = section
			b.sectionSet[i] = true
		}
		return i, nil
	}
	i := len(b.units)
	b.units = append(b.units, Unit{ID: id, Section: section})
	b.uIndex[id] = i
	b.sectionSet = append(b.sectionSet, section != "")
	return i, nil
}

// AddReading declares a reading label at unit u (by index from AddUnit) without giving it to any
// witness, and returns its index.
func (b *Builder) AddReading(u int, label string) int {
	un := &b.units[u]
	if r := un.ReadingIndex(label); r != Lacuna {
		return r
	}
	un.Readings = append(un.Readings, label)
	return len(un.Readings) - 1
}

// Add records that witness siglum has reading label at unit id, in the given section (which may
// be empty). The same cell given twice with the same reading is accepted once; with a different
// reading it is a *ConflictError; a unit given two sections is a *SectionError.
func (b *Builder) Add(siglum, id, label, section string) error {
	u, err := b.AddUnit(id, section)
	if err != nil {
		return err
	}
	return b.AddCell(b.AddWitness(siglum), u, label)
}

// AddCell records that witness w has reading label at unit u (indexes from AddWitness and
// AddUnit). It is Add without the lookups by name: the same cell given twice with the same
// reading is accepted once; with a different reading it is a *ConflictError.
func (b *Builder) AddCell(w, u int, label string) error {
	row := b.rows[w]
	for len(row) <= u {
		row = append(row, Lacuna)
	}
	b.rows[w] = row
	// Check for a conflict before the label is declared, so that a rejected cell leaves no
	// reading behind at the unit.
	if prev := row[u]; prev != Lacuna && int(prev) != b.units[u].ReadingIndex(label) {
		return &ConflictError{Witness: b.witnesses[w], Unit: b.units[u].ID, First: b.units[u].Readings[prev], Second: label}
	}
	row[u] = int32(b.AddReading(u, label))
	return nil
}

// Build returns the collation assembled so far. The Builder must not be used afterwards.
func (b *Builder) Build() *Collation {
	nu := len(b.units)
	cells := make([]int32, len(b.witnesses)*nu)
	for w, row := range b.rows {
		dst := cells[w*nu : (w+1)*nu]
		n := copy(dst, row)
		for i := n; i < nu; i++ {
			dst[i] = Lacuna
		}
	}
	c := &Collation{witnesses: b.witnesses, units: b.units, wIndex: b.wIndex, uIndex: b.uIndex, cells: cells}
	if c.wIndex == nil {
		c.wIndex = map[string]int{}
	}
	if c.uIndex == nil {
		c.uIndex = map[string]int{}
	}
	*b = Builder{}
	return c
}

// SortedSigla returns the sigla sorted, for stable reports.
func (c *Collation) SortedSigla() []string {
	s := append([]string(nil), c.witnesses...)
	sort.Strings(s)
	return s
}
