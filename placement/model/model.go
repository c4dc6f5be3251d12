// Package model is the frozen group model: the profile matrix W learnt from a collation with the
// unit/reading index it needs to read new witnesses, the summaries a scholar reads, and the
// checksummed bundle it travels in. A Model is immutable and safe for concurrent use.
package model

import (
	"fmt"
	"math"
	"sync"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement"
	pb "strayleaf/proto/strayleaf/v1"
)

// Model is a decoded, validated group model ready to place witnesses.
type Model struct {
	pb        *pb.Model
	w         *mat.Dense
	engine    *placement.Engine
	unitIndex map[string]int
	// unitIDs[u] is unit u's id and hasRows[u] whether it keeps rows in W, flat copies of the
	// proto's units for the placement path (which reads them for every observation).
	unitIDs []string
	hasRows []bool
	// rowWeight[r] is row r's IDF weight.
	rowWeight []float64
	// lookup[u] finds the row of a reading label of unit u (see unitLookup).
	lookup    []unitLookup
	groupIDs  []string
	sizeBytes int64
	// derived holds what guidance and confidence need, built once on first use (see guide).
	guideOnce sync.Once
	derived   *guide
	// scratch pools the per-call memory of Place (*placeScratch), so that a placement allocates
	// only what it returns.
	scratch sync.Pool
}

// maxScanLabels is the most reading labels of a unit that are found by scanning them rather
// than by a map: a few string comparisons are cheaper than hashing the label.
const maxScanLabels = 16

// unitLookup finds the row of W of a reading label at one unit. A unit has few readings, so the
// labels are scanned (the first equal label answers); a unit with more than maxScanLabels
// labels uses a map. rowOf[i] is the row of label i, or -1 when the model knows the label but set
// it aside (a singular reading); of equal labels, rowOf holds for each the same answer.
type unitLookup struct {
	labels []string
	rowOf  []int32
	byName map[string]int32 // only for units with more than maxScanLabels labels
}

// row returns the row of reading label at the unit, -1 for a label set aside, and whether the
// model knows the label at all.
func (l *unitLookup) row(label string) (int, bool) {
	if l.byName != nil {
		r, ok := l.byName[label]
		return int(r), ok
	}
	for i, s := range l.labels {
		if s == label {
			return int(l.rowOf[i]), true
		}
	}
	return -1, false
}

// MaxGroups is the largest number of groups a model may have. Work on a large tradition rarely
// looks at more than about 20 groups (common practice); the cap keeps a crafted bundle from
// asking for memory in proportion to k^2 per unit.
const MaxGroups = 100

// FromProto validates m and builds its placement indexes.
func FromProto(m *pb.Model) (*Model, error) {
	k := int(m.GroupCount)
	nr := len(m.Rows)
	if k < 1 || k > MaxGroups {
		return nil, fmt.Errorf("model: group_count is %d; expected 1 to %d groups", k, MaxGroups)
	}
	if nr == 0 {
		return nil, fmt.Errorf("model: no profile rows")
	}
	if len(m.Profile) != nr*k {
		return nil, fmt.Errorf("model: profile has %d entries; expected rows x groups = %d x %d", len(m.Profile), nr, k)
	}
	for i, v := range m.Profile {
		if !(v >= 0) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("model: profile entry %d is %v; expected a finite non-negative number", i, v)
		}
	}
	if len(m.Groups) != k {
		return nil, fmt.Errorf("model: %d group summaries for %d groups", len(m.Groups), k)
	}
	out := &Model{pb: m, unitIndex: make(map[string]int, len(m.Units)), lookup: make([]unitLookup, len(m.Units)),
		unitIDs: make([]string, len(m.Units)), hasRows: make([]bool, len(m.Units))}
	unitRows := make([][2]int, len(m.Units))
	weights := make([]float64, nr)
	for u, un := range m.Units {
		if _, dup := out.unitIndex[un.Id]; dup {
			return nil, fmt.Errorf("model: unit %q listed twice", un.Id)
		}
		out.unitIndex[un.Id] = u
		out.unitIDs[u] = un.Id
		out.hasRows[u] = un.RowStart < un.RowEnd
		lo, hi := int(un.RowStart), int(un.RowEnd)
		if lo < 0 || hi < lo || hi > nr {
			return nil, fmt.Errorf("model: unit %q has row range [%d,%d) outside the %d rows", un.Id, lo, hi, nr)
		}
		unitRows[u] = [2]int{lo, hi}
		// The row of each label; with repeated labels, the row of the last one that has a row.
		rr := make(map[string]int32, len(un.Readings))
		for _, label := range un.Readings {
			rr[label] = -1
		}
		for i := lo; i < hi; i++ {
			row := m.Rows[i]
			if int(row.Unit) != u || row.Reading < 0 || int(row.Reading) >= len(un.Readings) {
				return nil, fmt.Errorf("model: row %d does not belong to unit %q", i, un.Id)
			}
			rr[un.Readings[row.Reading]] = int32(i)
			weights[i] = row.Weight
		}
		lk := unitLookup{labels: un.Readings}
		if len(un.Readings) > maxScanLabels {
			lk.byName = rr
		} else {
			lk.rowOf = make([]int32, len(un.Readings))
			for i, label := range un.Readings {
				lk.rowOf[i] = rr[label]
			}
		}
		out.lookup[u] = lk
	}
	for i, row := range m.Rows {
		if row.Unit < 0 || int(row.Unit) >= len(m.Units) {
			return nil, fmt.Errorf("model: row %d names unit %d of %d", i, row.Unit, len(m.Units))
		}
		if r := unitRows[row.Unit]; i < r[0] || i >= r[1] {
			return nil, fmt.Errorf("model: row %d lies outside the row range of its unit %q", i, m.Units[row.Unit].Id)
		}
	}
	out.rowWeight = weights
	out.w = mat.NewDense(nr, k, m.Profile)
	eng, err := placement.NewEngine(out.w, unitRows, weights)
	if err != nil {
		return nil, fmt.Errorf("model: %w", err)
	}
	out.engine = eng
	for _, g := range m.Groups {
		out.groupIDs = append(out.groupIDs, g.Id)
	}
	// Rough resident size: W, the engine's Gram blocks, and the indexes.
	out.sizeBytes = int64(8*nr*k + 8*len(m.Units)*k*k + 64*len(m.Units) + 48*nr)
	return out, nil
}

// Proto returns the model message. The caller must not modify it.
func (m *Model) Proto() *pb.Model { return m.pb }

// Groups returns the group ids G1..Gk in column order.
func (m *Model) Groups() []string { return m.groupIDs }

// K returns the number of groups.
func (m *Model) K() int { return len(m.groupIDs) }

// W returns the profile matrix (readings x groups). The caller must not modify it.
func (m *Model) W() *mat.Dense { return m.w }

// Engine returns the placement engine over W.
func (m *Model) Engine() *placement.Engine { return m.engine }

// UnitIndex returns the index of unit id in the model's units.
func (m *Model) UnitIndex(id string) (int, bool) {
	u, ok := m.unitIndex[id]
	return u, ok
}

// SizeBytes estimates the memory the decoded model holds, for cache accounting.
func (m *Model) SizeBytes() int64 { return m.sizeBytes }
