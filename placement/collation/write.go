package collation

import (
	"encoding/csv"
	"fmt"
	"io"
)

// WriteCSV writes c in the long CSV form that ReadCSV reads: a header `witness,unit,reading`
// (with a `section` column when any unit has a section), then one row per extant witness-unit
// pair, witness by witness in order, units in text order. Lacunae are left out.
func WriteCSV(w io.Writer, c *Collation) error {
	cw := csv.NewWriter(w)
	withSection := len(c.Sections()) > 0
	header := []string{"witness", "unit", "reading"}
	if withSection {
		header = append(header, "section")
	}
	if err := cw.Write(header); err != nil {
		return fmt.Errorf("writing collation CSV: %w", err)
	}
	rec := make([]string, len(header))
	for wi, siglum := range c.witnesses {
		for u, r := range c.Row(wi) {
			if r == Lacuna {
				continue
			}
			unit := &c.units[u]
			rec[0], rec[1], rec[2] = siglum, unit.ID, unit.Readings[r]
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
