// Package prepare turns a collation into the matrices a group model is learnt from, the way
// textual scholars prepare a collation for grouping (common practice):
//
//  1. Singular readings, attested by fewer than MinSupport witnesses (default 2), are set aside:
//     they are usually one copyist's slip and say nothing about grouping.
//  2. Units left with fewer than two readings carry no grouping signal and are set aside. They are
//     remembered (Prepared.UnitRows gives them an empty row range), so that a fragment citing one
//     later is understood rather than rejected.
//  3. Witnesses extant at fewer than MinCoverage (default 0.5) of the kept units are set aside from
//     training; they are placed afterwards against the learnt profiles.
//  4. Each kept reading r at unit u is weighted by its inverse document frequency
//     w_r = log(N_u / n_r), with N_u the witnesses extant at u and n_r the witnesses that have r
//     (Spärck Jones 1972, J. Documentation 28), so that rare shared readings count for more than
//     readings almost every witness has. Both counts are taken over all witnesses of the
//     collation, fragmentary ones included. With IDF off every weight is 1.
//
// The result is the readings x witnesses matrix X, X[r][j] = w_r if training witness j has
// reading r and 0 otherwise, and its observation mask M, M[r][j] = 1 if witness j is extant at
// the unit of r and 0 if it is not: a lacuna leaves every reading of its unit unobserved, not zero.
package prepare

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/collation"
)

// Options are the preparation settings.
type Options struct {
	// MinSupport is the least number of witnesses a reading needs to be kept (default 2).
	MinSupport int
	// MinCoverage is the least share of kept units a witness must be extant at to be used in
	// training (default 0.5).
	MinCoverage float64
	// IDF switches inverse-document-frequency weighting on (the default).
	IDF bool
}

// DefaultOptions returns the defaults: MinSupport 2, MinCoverage 0.5, IDF on.
func DefaultOptions() Options { return Options{MinSupport: 2, MinCoverage: 0.5, IDF: true} }

// Validate reports an option outside its range.
func (o Options) Validate() error {
	if o.MinSupport < 1 {
		return fmt.Errorf("min_support is %d; expected a whole number of witnesses >= 1", o.MinSupport)
	}
	if !(o.MinCoverage >= 0 && o.MinCoverage <= 1) {
		return fmt.Errorf("min_coverage is %g; expected a share between 0 and 1", o.MinCoverage)
	}
	return nil
}

// Row is a kept reading: one row of X and of a profile matrix W.
type Row struct {
	Unit    int     // index of the unit in the collation
	Reading int     // index of the reading in the unit's Readings
	Support int     // witnesses that have the reading
	Weight  float64 // IDF weight log(N_u/n_r), or 1 with IDF off
}

// SingularReading is a reading set aside for too little support.
type SingularReading struct {
	Unit      string   `json:"unit"`
	Reading   string   `json:"reading"`
	Witnesses []string `json:"witnesses"` // the witnesses that have it
}

// UninformativeUnit is a unit set aside because fewer than two readings were left at it.
type UninformativeUnit struct {
	Unit   string `json:"unit"`
	Kept   int    `json:"kept_readings"` // readings left after singular readings were set aside (0 or 1)
	Reason string `json:"reason"`
}

// FragmentaryWitness is a witness set aside from training for low coverage.
type FragmentaryWitness struct {
	Witness  string  `json:"witness"`
	Extant   int     `json:"extant_units"` // kept units the witness is extant at
	Coverage float64 `json:"coverage"`     // Extant / number of kept units
}

// Report says what preparation set aside and why.
type Report struct {
	SingularReadings     []SingularReading
	UninformativeUnits   []UninformativeUnit
	FragmentaryWitnesses []FragmentaryWitness
}

// Prepared is a collation made ready for grouping.
type Prepared struct {
	Collation *collation.Collation
	Options   Options
	// Rows are the kept readings, grouped by unit, units in text order.
	Rows []Row
	// UnitRows[u] is the half-open range [start, end) of Rows that belong to collation unit u; it
	// is empty for a unit set aside.
	UnitRows [][2]int
	// KeptUnits are the indexes of the units that have rows, in text order.
	KeptUnits []int
	// Train are the collation indexes of the witnesses used in training: the columns of X and M.
	Train []int
	// X is the len(Rows) x len(Train) weighted reading matrix; M its 0/1 observation mask.
	X, M   *mat.Dense
	Report Report
}

// RowOf returns the row of reading r at unit u, or -1 if that reading was set aside or the unit
// has no rows.
func (p *Prepared) RowOf(u, r int) int {
	lo, hi := p.UnitRows[u][0], p.UnitRows[u][1]
	for i := lo; i < hi; i++ {
		if p.Rows[i].Reading == r {
			return i
		}
	}
	return -1
}

// Prepare applies the preparation steps to c. It fails if the options are out of range or if
// nothing is left to learn from (no kept unit, or no training witness).
func Prepare(c *collation.Collation, opt Options) (*Prepared, error) {
	if err := opt.Validate(); err != nil {
		return nil, err
	}
	p := &Prepared{Collation: c, Options: opt, UnitRows: make([][2]int, c.NumUnits())}
	nw := c.NumWitnesses()

	// Steps 1, 2 and 4: per unit, support of each reading, singular set-aside, IDF.
	for u := 0; u < c.NumUnits(); u++ {
		unit := c.Unit(u)
		support := c.Support(u)
		extant := 0
		for _, s := range support {
			extant += s
		}
		start := len(p.Rows)
		for r, s := range support {
			if s < opt.MinSupport {
				if s > 0 {
					p.Report.SingularReadings = append(p.Report.SingularReadings, SingularReading{
						Unit: unit.ID, Reading: unit.Readings[r], Witnesses: holders(c, u, r),
					})
				}
				continue
			}
			w := 1.0
			if opt.IDF {
				w = math.Log(float64(extant) / float64(s))
			}
			p.Rows = append(p.Rows, Row{Unit: u, Reading: r, Support: s, Weight: w})
		}
		if kept := len(p.Rows) - start; kept < 2 {
			p.Rows = p.Rows[:start]
			p.Report.UninformativeUnits = append(p.Report.UninformativeUnits, UninformativeUnit{Unit: unit.ID, Kept: kept, Reason: uninformativeReason(support, kept, opt.MinSupport)})
			p.UnitRows[u] = [2]int{start, start}
			continue
		}
		p.UnitRows[u] = [2]int{start, len(p.Rows)}
		p.KeptUnits = append(p.KeptUnits, u)
	}
	if len(p.KeptUnits) == 0 {
		return nil, fmt.Errorf("no variation unit has two readings each shared by at least %d witnesses: nothing to group by", opt.MinSupport)
	}

	// Step 3: fragmentary witnesses.
	for w := 0; w < nw; w++ {
		row := c.Row(w)
		extant := 0
		for _, u := range p.KeptUnits {
			if row[u] != collation.Lacuna {
				extant++
			}
		}
		cov := float64(extant) / float64(len(p.KeptUnits))
		if cov < opt.MinCoverage {
			p.Report.FragmentaryWitnesses = append(p.Report.FragmentaryWitnesses, FragmentaryWitness{Witness: c.Witness(w), Extant: extant, Coverage: cov})
			continue
		}
		p.Train = append(p.Train, w)
	}
	if len(p.Train) == 0 {
		return nil, fmt.Errorf("every witness is extant at fewer than %.0f%% of the %d kept units: no witness is left to train on (lower min_coverage?)", 100*opt.MinCoverage, len(p.KeptUnits))
	}

	// X and M.
	nr := len(p.Rows)
	p.X = mat.NewDense(nr, len(p.Train), nil)
	p.M = mat.NewDense(nr, len(p.Train), nil)
	for j, w := range p.Train {
		row := c.Row(w)
		for _, u := range p.KeptUnits {
			r := row[u]
			if r == collation.Lacuna {
				continue
			}
			lo, hi := p.UnitRows[u][0], p.UnitRows[u][1]
			for i := lo; i < hi; i++ {
				p.M.Set(i, j, 1)
				if p.Rows[i].Reading == int(r) {
					p.X.Set(i, j, p.Rows[i].Weight)
				}
			}
		}
	}
	return p, nil
}

// uninformativeReason says why a unit with kept (0 or 1) readings left is set aside, given the
// support of each of its readings.
func uninformativeReason(support []int, kept, minSupport int) string {
	extant, attested := 0, 0
	for _, s := range support {
		extant += s
		if s > 0 {
			attested++
		}
	}
	switch {
	case extant == 0:
		return "no witness is extant at the unit"
	case extant == 1:
		return "only one witness is extant at the unit"
	case attested == 1:
		return "every extant witness has the same reading"
	case kept == 0:
		return fmt.Sprintf("no reading is attested by %d or more witnesses", minSupport)
	default:
		return fmt.Sprintf("only one reading is attested by %d or more witnesses", minSupport)
	}
}

func holders(c *collation.Collation, u, r int) []string {
	var out []string
	for w := 0; w < c.NumWitnesses(); w++ {
		if c.Reading(w, u) == r {
			out = append(out, c.Witness(w))
		}
	}
	return out
}
