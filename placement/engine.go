// Package placement places a partial witness against a frozen group model: it finds the
// non-negative group coefficients h that best reproduce the witness's readings at the units it
// covers, by masked non-negative least squares against the model's profile matrix W.
//
// # The problem
//
// W is the readings x k profile matrix (non-negative, one column per group); its rows are grouped
// by variation unit, unit u owning rows [start, end) = unitRows[u] (empty for a unit set aside
// when the model was learnt). Row r carries a weight w_r, the value a witness's indicator takes
// on that row when it has that reading (the IDF weight, or 1). A witness covering the units C
// gives, over the rows of those units, the vector v_C with v_r = w_r for the row of its reading
// and 0 for the other readings of the unit, and is placed by
//
//	h = argmin_{h >= 0} ||W_C h - v_C||^2.
//
// The rows of units the witness does not cover (lacunae, or text outside a fragment) are left
// out altogether: a lacuna is not evidence (common practice). A covered unit whose reading the
// model does not know (a reading set aside at training, or one never seen) keeps its rows with
// v = 0 there: the witness disagrees with every group at that unit, and that is evidence. A
// covered unit with no rows is recognised but contributes nothing.
//
// # Cost
//
// Everything the requests share is computed once by NewEngine: per-unit Gram blocks
// G_u = W_u^T W_u (the upper triangle, packed) and their sum, the full Gram G. A placement forms
// the normal equations
//
//	G_C = sum_{u in C} G_u,   c_C = W_C^T v_C = sum_{u in C, reading known} w_r W[r,:]^T,
//
// adding the blocks of the covered units, or, when the witness covers more than half of the
// units that have rows, subtracting from G the blocks of those it lacks; then solves the
// normal-equations NNLS with nnls.Solver.SolveGram. With U the units that have rows, the cost
// is O(|C| k + min(|C|, U - |C|) k^2 + k^3), plus an O(U) scan for the missing units when
// subtracting; nothing is allocated per placement. The weighted rows w_r W[r,:] and w_r^2 are
// precomputed too.
//
// The residual needs no pass over the rows:
//
//	||W_C h - v_C||^2 = h^T G_C h - 2 h^T c_C + v_C^T v_C,
//
// computed in O(k^2) with an absolute rounding error of a few eps * ||v_C||^2 (Fit.Residual,
// Workspace.ResidualAt).
package placement

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/nnls"
)

// ErrNoCoverage is returned by Place for a witness that covers no unit with rows in the model:
// there is nothing to place it by.
var ErrNoCoverage = errors.New("placement: the witness covers no unit that the model has readings for")

// Observation is a witness's reading at one unit.
type Observation struct {
	// Unit is the index of the variation unit (a collation unit index, 0 <= Unit < NumUnits()).
	Unit int
	// Row is the row of W of the witness's reading, within the unit's row range, or -1 for a
	// reading the model does not know. At a unit with no rows Row must be -1.
	Row int
}

// Fit is the result of a placement.
type Fit struct {
	// H are the non-negative group coefficients. The slice belongs to the Workspace and is valid
	// until its next use; copy it to keep it.
	H []float64
	// Residual is ||W_C h - v_C||^2, Norm2 is ||v_C||^2 (so Residual <= Norm2, since h = 0 is
	// feasible, and 1 - Residual/Norm2 is the share of the witness's weighted readings explained).
	Residual, Norm2 float64
	// CoveredUnits counts the units observed; UsedUnits those of them that have rows in the model
	// (the units that entered the fit); UnknownReadings those used units whose reading the model
	// does not know (Row = -1).
	CoveredUnits, UsedUnits, UnknownReadings int
}

// Engine places witnesses against one frozen profile matrix. It is immutable once made and safe
// for concurrent use by many goroutines, each with its own Workspace.
type Engine struct {
	k, nRows int
	units    []unitInfo
	blocks   []float64 // per unit with rows: packed upper triangle of W_u^T W_u, then (w_r W[r,:], w_r^2) for each of its rows
	full     []float64 // packed upper triangle of the full Gram W^T W
	rowUnits []int32   // units that have rows, in order
	tri      int       // k(k+1)/2
}

// NewEngine checks W, unitRows and rowWeights and precomputes the Gram blocks. W is the
// readings x k profile matrix (finite, non-negative); unitRows[u] is the half-open row range of
// unit u (empty, start == end, for a unit with no rows; the non-empty ranges must be disjoint and
// in increasing order, as prepare.Prepared.UnitRows gives them); rowWeights[r] is the value of
// the witness's indicator on row r (finite, non-negative). The Engine keeps its own copies.
func NewEngine(W *mat.Dense, unitRows [][2]int, rowWeights []float64) (*Engine, error) {
	if W == nil || W.IsEmpty() {
		return nil, errors.New("placement: the profile matrix W is empty")
	}
	nRows, k := W.Dims()
	if len(rowWeights) != nRows {
		return nil, fmt.Errorf("placement: %d row weights for a profile matrix of %d rows", len(rowWeights), nRows)
	}
	if len(unitRows) == 0 {
		return nil, errors.New("placement: no units")
	}
	e := &Engine{
		k: k, nRows: nRows,
		units: make([]unitInfo, len(unitRows)), tri: k * (k + 1) / 2,
	}
	if nRows*k > math.MaxInt32 || len(unitRows)*e.tri > math.MaxInt32 {
		return nil, fmt.Errorf("placement: a model of %d units, %d rows and %d groups is too large (offsets are 32-bit)", len(unitRows), nRows, k)
	}
	w := make([]float64, nRows*k) // W row-major
	weight := make([]float64, nRows)
	for r := range nRows {
		for j := range k {
			v := W.At(r, j)
			if !(v >= 0) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("placement: W[%d][%d] is %v; profiles must be finite and non-negative", r, j, v)
			}
			w[r*k+j] = v
		}
		wt := rowWeights[r]
		if !(wt >= 0) || math.IsInf(wt, 0) {
			return nil, fmt.Errorf("placement: weight of row %d is %v; expected a finite non-negative number", r, wt)
		}
		weight[r] = wt
	}
	prevEnd := 0
	for u, ur := range unitRows {
		lo, hi := ur[0], ur[1]
		if lo < 0 || hi < lo || hi > nRows {
			return nil, fmt.Errorf("placement: unit %d has row range [%d, %d); expected 0 <= start <= end <= %d", u, lo, hi, nRows)
		}
		e.units[u] = unitInfo{lo: int32(lo), hi: int32(hi), off: -1}
		if lo == hi {
			continue
		}
		if lo < prevEnd {
			return nil, fmt.Errorf("placement: unit %d has row range [%d, %d), overlapping or before the previous unit's rows (which end at %d)", u, lo, hi, prevEnd)
		}
		prevEnd = hi
		e.rowUnits = append(e.rowUnits, int32(u))
	}
	if len(e.rowUnits) == 0 {
		return nil, errors.New("placement: no unit has rows")
	}
	// Unit by unit, the packed Gram block followed by the unit's rows (w_r W[r,:], w_r^2), so
	// that a placement reads one stretch of memory per covered unit, and summing the rows of the
	// known readings gives c_C and v_C^T v_C at once.
	size := 0
	for _, u := range e.rowUnits {
		size += e.tri + (unitRows[u][1]-unitRows[u][0])*(k+1)
	}
	if size > math.MaxInt32 {
		return nil, fmt.Errorf("placement: a model of %d units, %d rows and %d groups is too large (offsets are 32-bit)", len(unitRows), nRows, k)
	}
	e.blocks = make([]float64, size)
	e.full = make([]float64, e.tri)
	off := 0
	for _, u := range e.rowUnits {
		e.units[u].off = int32(off)
		blk := e.blocks[off : off+e.tri]
		wv := e.blocks[off+e.tri:]
		for r := unitRows[u][0]; r < unitRows[u][1]; r++ {
			row := w[r*k : r*k+k]
			p := 0
			for i := range k {
				ri := row[i]
				for j := i; j < k; j++ {
					blk[p] += ri * row[j]
					p++
				}
			}
			wr := wv[(r-unitRows[u][0])*(k+1):]
			for j, v := range row {
				wr[j] = weight[r] * v
			}
			wr[k] = weight[r] * weight[r]
		}
		for i, v := range blk {
			e.full[i] += v
		}
		off += e.tri + (unitRows[u][1]-unitRows[u][0])*(k+1)
	}
	return e, nil
}

// UnitGram returns unit u's Gram block W_u^T W_u, packed as the upper triangle by rows
// (k(k+1)/2 entries: (0,0), (0,1), ..., (0,k-1), (1,1), ...), or nil for a unit with no rows.
// The slice belongs to the Engine and must not be modified.
func (e *Engine) UnitGram(u int) []float64 {
	ui := e.units[u]
	if ui.lo == ui.hi {
		return nil
	}
	return e.blocks[ui.off : int(ui.off)+e.tri : int(ui.off)+e.tri]
}

// K returns the number of groups (columns of W).
func (e *Engine) K() int { return e.k }

// NumUnits returns the number of units (len(unitRows)).
func (e *Engine) NumUnits() int { return len(e.units) }

// NumRows returns the number of rows of W.
func (e *Engine) NumRows() int { return e.nRows }

// UnitRows returns the row range [start, end) of unit u.
func (e *Engine) UnitRows(u int) (start, end int) { return int(e.units[u].lo), int(e.units[u].hi) }

// unitInfo is a unit's row range and the offset of its Gram block in Engine.blocks (-1 if the
// unit has no rows), kept together so that a placement touches one place per observation.
type unitInfo struct{ lo, hi, off int32 }

// Workspace is the scratch memory of placements: one per goroutine, reused across calls.
type Workspace struct {
	e       *Engine
	mark    []uint32 // mark[u] == gen: unit u is covered by the current witness
	gen     uint32
	packed  []float64
	offs    []int32   // offsets of the Gram blocks to sum
	rows    []int32   // offsets of the weighted rows of the known readings
	offMult []float64 // multiplicities of the blocks and rows (PlaceWeighted)
	rowMult []float64
	g       []float64 // the last placement's normal equations: G_C (k x k),
	cv      []float64 // (c_C, v_C^T v_C),
	c       []float64 // c_C = cv[:k]
	h       []float64
	vv      float64 // v_C^T v_C = cv[k]
	solver  *nnls.Solver
	valid   bool
}

// NewWorkspace returns a Workspace for placements with e.
func (e *Engine) NewWorkspace() *Workspace {
	return &Workspace{
		e: e, mark: make([]uint32, len(e.units)), packed: make([]float64, e.tri),
		offs: make([]int32, 0, len(e.rowUnits)), rows: make([]int32, 0, len(e.rowUnits)),
		offMult: make([]float64, 0, len(e.rowUnits)), rowMult: make([]float64, 0, len(e.rowUnits)),
		g: make([]float64, e.k*e.k), cv: make([]float64, e.k+1), h: make([]float64, e.k),
		solver: nnls.NewSolver(e.k),
	}
}

// Place fits the witness given by obs (one Observation per covered unit, in any order) and
// returns its group coefficients. It fails for a unit out of range, a unit given twice, a Row
// outside its unit's range, a Workspace of another Engine, and, wrapping ErrNoCoverage, a witness
// that covers no unit with rows. A witness all of whose readings are unknown to the model is
// placed at h = 0 with Norm2 = 0.
func (e *Engine) Place(obs []Observation, ws *Workspace) (Fit, error) {
	fit, err := e.gather(obs, nil, ws)
	if err != nil {
		return Fit{}, err
	}
	// G_C, packed, by adding the covered blocks or, when fewer are missing, subtracting the sum
	// of the missing ones from the full Gram.
	G := ws.packed
	missing := len(e.rowUnits) - fit.UsedUnits
	if fit.UsedUnits <= missing {
		sumRows(G, e.blocks, ws.offs)
	} else {
		offs := ws.offs[:0]
		for _, u := range e.rowUnits {
			if ws.mark[u] != ws.gen {
				offs = append(offs, e.units[u].off)
			}
		}
		sumRows(G, e.blocks, offs)
		for i, f := range e.full {
			G[i] = f - G[i]
		}
	}
	// c_C = sum of w_r W[r,:] over the known readings.
	sumRows(ws.cv, e.blocks, ws.rows)
	e.unpack(ws)
	if fit.UsedUnits > missing {
		// After subtraction a column whose covered entries are all zero keeps a rounding residue
		// of the size of (missing+1) * eps * G_jj: set such a column to exactly zero, so that it
		// is neither used nor mistaken for an indefinite G.
		k, g := e.k, ws.g
		for j := range k {
			if g[j*k+j] <= float64(missing+1)*8*epsilon*e.full[diagIndex(j, k)] {
				for i := range k {
					g[i*k+j] = 0
					g[j*k+i] = 0
				}
			}
		}
	}
	return e.solve(fit, ws)
}

// PlaceWeighted is Place with observation i entering the problem mult[i] times (any finite
// non-negative real): it minimises sum_i mult[i] ||W_{u_i} h - v_{u_i}||^2 over h >= 0, as a
// bootstrap resample of the units, or a down-weighting of some of them, needs. It uses the same
// precomputed blocks, always by adding (O(|C| k^2)), and does not allocate. Observations with
// mult[i] = 0 are checked but left out, and are not counted in UsedUnits or UnknownReadings;
// Residual and Norm2 are the weighted sums. It fails as Place does, for len(mult) != len(obs),
// and for a negative or non-finite multiplicity.
func (e *Engine) PlaceWeighted(obs []Observation, mult []float64, ws *Workspace) (Fit, error) {
	if len(mult) != len(obs) {
		return Fit{}, fmt.Errorf("placement: %d multiplicities for %d observations", len(mult), len(obs))
	}
	for i, m := range mult {
		if !(m >= 0) || math.IsInf(m, 0) {
			return Fit{}, fmt.Errorf("placement: observation %d: multiplicity %v; expected a finite non-negative number", i, m)
		}
	}
	fit, err := e.gather(obs, mult, ws)
	if err != nil {
		return Fit{}, err
	}
	sumRowsScaled(ws.packed, e.blocks, ws.offs, ws.offMult)
	sumRowsScaled(ws.cv, e.blocks, ws.rows, ws.rowMult)
	e.unpack(ws)
	return e.solve(fit, ws)
}

// gather validates obs, marks the covered units in ws, and collects the offsets of the Gram
// blocks of the used units (ws.offs) and of the weighted rows of the known readings (ws.rows),
// with their multiplicities when mult is not nil, and v_C^T v_C. It returns the Fit counts.
func (e *Engine) gather(obs []Observation, mult []float64, ws *Workspace) (Fit, error) {
	if ws == nil || ws.e != e {
		return Fit{}, errors.New("placement: the workspace was not made by this engine")
	}
	ws.valid = false
	ws.gen++
	if ws.gen == 0 { // wrapped: old marks could alias the new generation
		clear(ws.mark)
		ws.gen = 1
	}
	gen := ws.gen
	used, unknown, nk := 0, 0, 0
	offs, rows := ws.offs[:cap(ws.offs)], ws.rows[:cap(ws.rows)]
	offMult, rowMult := ws.offMult[:cap(ws.offMult)], ws.rowMult[:cap(ws.rowMult)]
	for i, o := range obs {
		if o.Unit < 0 || o.Unit >= len(e.units) {
			return Fit{}, fmt.Errorf("placement: observation %d: unit %d is out of range [0, %d)", i, o.Unit, len(e.units))
		}
		if ws.mark[o.Unit] == gen {
			return Fit{}, fmt.Errorf("placement: observation %d: unit %d is given more than once", i, o.Unit)
		}
		ws.mark[o.Unit] = gen
		ui := e.units[o.Unit]
		lo, hi := int(ui.lo), int(ui.hi)
		if o.Row != -1 && (o.Row < lo || o.Row >= hi) {
			return Fit{}, fmt.Errorf("placement: observation %d: row %d is not a reading of unit %d (rows [%d, %d), or -1 for an unknown reading)", i, o.Row, o.Unit, lo, hi)
		}
		if hi == lo {
			continue
		}
		m := 1.0
		if mult != nil {
			if m = mult[i]; m == 0 {
				continue
			}
			offMult[used] = m
		}
		// Units are distinct and have rows, so used < len(e.rowUnits) = cap(offs).
		offs[used] = ui.off
		used++
		if o.Row < 0 {
			unknown++
			continue
		}
		if mult != nil {
			rowMult[nk] = m
		}
		rows[nk] = ui.off + int32(e.tri+(o.Row-lo)*(e.k+1))
		nk++
	}
	ws.offs, ws.rows = offs[:used], rows[:nk]
	ws.offMult, ws.rowMult = offMult[:used], rowMult[:nk]
	if used == 0 {
		return Fit{}, fmt.Errorf("%w (%d units observed, none with readings in the model)", ErrNoCoverage, len(obs))
	}
	return Fit{CoveredUnits: len(obs), UsedUnits: used, UnknownReadings: unknown}, nil
}

// unpack copies the packed G_C of ws to the full symmetric ws.g.
func (e *Engine) unpack(ws *Workspace) {
	k, g, G := e.k, ws.g, ws.packed
	p := 0
	for i := range k {
		for j := i; j < k; j++ {
			g[i*k+j] = G[p]
			g[j*k+i] = G[p]
			p++
		}
	}
}

// solve runs the NNLS on the normal equations in ws and completes fit.
func (e *Engine) solve(fit Fit, ws *Workspace) (Fit, error) {
	k := e.k
	ws.c, ws.vv = ws.cv[:k], ws.cv[k]
	if err := ws.solver.SolveGram(ws.g, ws.c, ws.h); err != nil {
		return Fit{}, fmt.Errorf("placement: solving for the group coefficients: %w", err)
	}
	ws.valid = true
	fit.H = ws.h
	fit.Norm2 = ws.vv
	fit.Residual = math.Max(0, nnls.Objective(ws.g, ws.c, ws.vv, ws.h))
	return fit, nil
}

// ResidualAt returns ||W_C h - v_C||^2 for any h of length K(), for the witness of the last
// successful Place with ws, by h^T G_C h - 2 h^T c_C + v_C^T v_C (O(k^2), clamped at 0).
func (ws *Workspace) ResidualAt(h []float64) (float64, error) {
	if !ws.valid {
		return 0, errors.New("placement: no placement to evaluate against (Place has not succeeded with this workspace)")
	}
	if len(h) != ws.e.k {
		return 0, fmt.Errorf("placement: h has length %d; the model has %d groups", len(h), ws.e.k)
	}
	return math.Max(0, nnls.Objective(ws.g, ws.c, ws.vv, h)), nil
}

// Gram returns G_C = W_C^T W_C of the last successful placement (k x k, row-major), and Cross
// returns c_C = W_C^T v_C. Both belong to the Workspace: read them, do not keep or change them.
func (ws *Workspace) Gram() []float64 { return ws.g }

// Cross returns c_C = W_C^T v_C of the last successful placement (see Gram).
func (ws *Workspace) Cross() []float64 { return ws.c }

const epsilon = 0x1p-52

// diagIndex returns the index of entry (j, j) in a packed upper triangle of order k, stored
// row by row: row i holds entries (i, i..k-1) and starts at i*k - i*(i-1)/2.
func diagIndex(j, k int) int { return j*k - j*(j-1)/2 }

// sumRowsScaled sets dst to the sum of scale[q] * src[offs[q] : offs[q]+len(dst)].
func sumRowsScaled(dst, src []float64, offs []int32, scale []float64) {
	n := len(dst)
	clear(dst)
	scale = scale[:len(offs)]
	q := 0
	for ; q+4 <= len(offs); q += 4 {
		o0, o1, o2, o3 := int(offs[q]), int(offs[q+1]), int(offs[q+2]), int(offs[q+3])
		s0, s1, s2, s3 := scale[q], scale[q+1], scale[q+2], scale[q+3]
		a := src[o0 : o0+n]
		b := src[o1 : o1+n]
		c := src[o2 : o2+n]
		d := src[o3 : o3+n]
		a, b, c, d = a[:len(dst)], b[:len(dst)], c[:len(dst)], d[:len(dst)]
		for i := range dst {
			dst[i] += (s0*a[i] + s1*b[i]) + (s2*c[i] + s3*d[i])
		}
	}
	for ; q < len(offs); q++ {
		o := int(offs[q])
		a := src[o : o+n]
		a = a[:len(dst)]
		sq := scale[q]
		for i := range dst {
			dst[i] += sq * a[i]
		}
	}
}

// sumRows sets dst to the sum of the vectors src[o : o+len(dst)] for o in offs. It adds four
// vectors per pass over dst, so that dst is loaded and stored once per four.
func sumRows(dst, src []float64, offs []int32) {
	n := len(dst)
	clear(dst)
	q := 0
	for ; q+4 <= len(offs); q += 4 {
		o0, o1, o2, o3 := int(offs[q]), int(offs[q+1]), int(offs[q+2]), int(offs[q+3])
		a := src[o0 : o0+n]
		b := src[o1 : o1+n]
		c := src[o2 : o2+n]
		d := src[o3 : o3+n]
		a, b, c, d = a[:len(dst)], b[:len(dst)], c[:len(dst)], d[:len(dst)]
		for i := range dst {
			dst[i] += (a[i] + b[i]) + (c[i] + d[i])
		}
	}
	for ; q < len(offs); q++ {
		o := int(offs[q])
		a := src[o : o+n]
		a = a[:len(dst)]
		for i := range dst {
			dst[i] += a[i]
		}
	}
}
