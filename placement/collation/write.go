package collation

import (
	"encoding/csv"
	"fmt"
	"io"
)

// WriteCSV writes c in the long CSV form that ReadCSV reads: a header `witness,unit,reading`
// (with a `section` column when any unit has a section), then one row per extant witness-unit
// pair, unit by unit in text order. Within a unit the first witness to have each reading is
// written first, readings in their order, then the other extant witnesses in witness order, so
// that ReadCSV gives back the units in the same order, the same readings in the same order at
// each unit, and the same cells.
//
// What the long form cannot hold is not written: lacunae (they have no row), and so a witness
// with no extant unit, a unit at which no witness is extant, and a reading that no witness has.
// Witnesses may come back in another order, since ReadCSV takes them in order of first
// appearance. WriteCSV fails, writing nothing more, on a value ReadCSV would not read back the
// same (empty, with white space around it, not UTF-8, or holding a control character).
func WriteCSV(w io.Writer, c *Collation) error {
	cw := csv.NewWriter(w)
	withSection := len(c.Sections()) > 0
	header := []string{ColumnWitness, ColumnUnit, ColumnReading}
	if withSection {
		header = append(header, ColumnSection)
	}
	if err := cw.Write(header); err != nil {
		return fmt.Errorf("writing collation CSV: %w", err)
	}
	rec := make([]string, len(header))
	order := make([]int, 0, len(c.witnesses))
	picked := make([]bool, len(c.witnesses))
	for u := range c.units {
		unit := &c.units[u]
		order = order[:0]
		for i := range picked {
			picked[i] = false
		}
		for r := range unit.Readings {
			for wi := range c.witnesses {
				if c.Reading(wi, u) == r {
					order = append(order, wi)
					picked[wi] = true
					break
				}
			}
		}
		for wi := range c.witnesses {
			if !picked[wi] && c.Reading(wi, u) != Lacuna {
				order = append(order, wi)
			}
		}
		if len(order) > 0 {
			if err := checkWritable(unit.ID, ColumnUnit); err != nil {
				return fmt.Errorf("writing collation CSV: unit %q: %w", unit.ID, err)
			}
			if err := checkWritable(unit.Section, ColumnSection); err != nil {
				return fmt.Errorf("writing collation CSV: section %q of unit %q: %w", unit.Section, unit.ID, err)
			}
		}
		for _, wi := range order {
			siglum, reading := c.witnesses[wi], unit.Readings[c.Reading(wi, u)]
			if err := checkWritable(siglum, ColumnWitness); err != nil {
				return fmt.Errorf("writing collation CSV: witness %q: %w", siglum, err)
			}
			if err := checkWritable(reading, ColumnReading); err != nil {
				return fmt.Errorf("writing collation CSV: reading %q at unit %q: %w", reading, unit.ID, err)
			}
			rec[0], rec[1], rec[2] = siglum, unit.ID, reading
			if withSection {
				rec[3] = unit.Section
			}
			if err := cw.Write(rec); err != nil {
				return fmt.Errorf("writing collation CSV: %w", err)
			}
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("writing collation CSV: %w", err)
	}
	return nil
}
