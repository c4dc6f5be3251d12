package nmf

import (
	"bytes"
	"fmt"
	"hash/maphash"
	"math"
	"runtime"

	"gonum.org/v1/gonum/mat"
)

// Problem is the masked data in the forms the ANLS steps need.
//
// Only observed cells count, so the data is kept as XM = M .* X in sparse form, by columns for
// the H step (c_j = W^T xm_j) and by rows for the W step (c_r = H xm_r^T); observed zeros need no
// entry because they add nothing to c, only to the Gram matrices.
//
// The Gram matrices are where the mask bites: column j's is G_j = sum over observed rows r of
// W_r W_r^T, and row r's is sum over observed columns j of h_j h_j^T. Rows whose mask rows are
// identical (in a collation, all readings of one variation unit) form a class, and a class
// shares its row Gram matrix and its contribution S_c = sum_{r in c} W_r W_r^T to every column.
// Each column then combines classes, and each class combines columns, whichever way is shorter:
// subtracting the few unobserved ones from the full Gram matrix, or adding up the observed ones.
type Problem struct {
	m, n  int
	xm    *sparse   // M .* X
	colSq []float64 // ||xm_j||^2
	rowSq []float64 // ||xm_r||^2
	// rowConst[r] is the common value of row r's entries if they are all equal (as in IDF-weighted
	// reading rows), else 0; the W step then sums the rows of H and scales once.
	rowConst []float64
	// constRows reports that every row's entries are equal (rowConst[r] != 0 for every row with
	// an entry): then c_j = W^T xm_j is a plain sum of rows of diag(rowConst) W.
	constRows bool
	total     float64 // ||XM||_F^2
	maxValue  float64 // largest observed cell
	observed  int     // number of observed cells
	mask      []byte  // mask[r*n+j] = 1 if cell (r, j) is observed, row-major

	rowClass []int32 // class of each row
	classes  []maskClass
	// For column j: the classes listed in colList[colListStart[j]:colListStart[j+1]] are its
	// unobserved classes if colSubtract[j], else its observed ones.
	colListStart []int
	colList      []int32
	colSubtract  []bool
	colObserved  []int // observed rows of column j
}

// maskClass is a set of rows with the same mask row.
type maskClass struct {
	rows []int32
	// cols are the class's unobserved columns if subtract, else its observed columns.
	cols     []int32
	subtract bool
	observed int // observed columns
}

// NewProblem checks the m x n data X and its 0/1 mask M (nil: every cell observed) and lays
// them out for factorisation, once for any number of runs. Observed cells must be finite and
// non-negative; cells with M = 0 are ignored whatever X holds there (NaN included).
func NewProblem(X, M *mat.Dense) (*Problem, error) {
	if X == nil || X.IsEmpty() {
		return nil, fmt.Errorf("X is empty")
	}
	m, n := X.Dims()
	xr := X.RawMatrix()
	var mr blasRaw
	if M != nil {
		if a, b := M.Dims(); a != m || b != n {
			return nil, fmt.Errorf("mask M is %d x %d but X is %d x %d", a, b, m, n)
		}
		raw := M.RawMatrix()
		mr = blasRaw{data: raw.Data, stride: raw.Stride}
	}
	p := &Problem{m: m, n: n, colSq: make([]float64, n), rowSq: make([]float64, m), mask: make([]byte, m*n)}
	workers := runtime.GOMAXPROCS(0)
	// Pass 1, row by row: check the cells, fill the mask, count the entries of each row.
	rowStart := make([]int, m+1)
	obsCount := make([]int, m)
	err := parallelFor(m, workers, func(_, r int) error {
		xrow := xr.Data[r*xr.Stride : r*xr.Stride+n]
		mask := p.mask[r*n : r*n+n]
		nnz, obs, sq := 0, 0, 0.0
		for j, v := range xrow {
			if mr.data != nil {
				switch o := mr.data[r*mr.stride+j]; o {
				case 0:
					continue
				case 1:
				default:
					return fmt.Errorf("mask M[%d][%d] is %g; expected 0 (unobserved) or 1 (observed)", r, j, o)
				}
			}
			mask[j] = 1
			obs++
			if !(v >= 0) || math.IsInf(v, 0) {
				return fmt.Errorf("X[%d][%d] is %g; observed cells must be finite and non-negative", r, j, v)
			}
			if v != 0 {
				nnz++
				sq += v * v
			}
		}
		rowStart[r+1], obsCount[r], p.rowSq[r] = nnz, obs, sq
		return nil
	})
	if err != nil {
		return nil, err
	}
	for r := 0; r < m; r++ {
		rowStart[r+1] += rowStart[r]
		p.observed += obsCount[r]
	}
	// Pass 2: the entries.
	rowCol := make([]int32, rowStart[m])
	rowVal := make([]float64, rowStart[m])
	_ = parallelFor(m, workers, func(_, r int) error {
		e := rowStart[r]
		mask := p.mask[r*n : r*n+n]
		for j, v := range xr.Data[r*xr.Stride : r*xr.Stride+n] {
			if mask[j] == 1 && v != 0 {
				rowCol[e], rowVal[e] = int32(j), v
				e++
			}
		}
		return nil
	})
	p.xm = newSparseRows(m, n, rowStart, rowCol, rowVal)
	for _, v := range rowVal {
		p.maxValue = math.Max(p.maxValue, v)
	}
	p.rowConst = make([]float64, m)
	p.constRows = true
	for r := 0; r < m; r++ {
		vals := rowVal[rowStart[r]:rowStart[r+1]]
		if len(vals) == 0 {
			continue
		}
		p.rowConst[r] = vals[0]
		for _, v := range vals {
			if v != vals[0] {
				p.rowConst[r] = 0
				p.constRows = false
				break
			}
		}
	}
	for j := 0; j < n; j++ {
		for _, v := range p.xm.colVal[p.xm.colStart[j]:p.xm.colStart[j+1]] {
			p.colSq[j] += v * v
		}
		p.total += p.colSq[j]
	}
	p.buildClasses()
	return p, nil
}

// blasRaw is the backing array of a row-major matrix.
type blasRaw struct {
	data   []float64
	stride int
}

// NormSq returns ||M .* X||_F^2, the objective of the zero factorisation (k = 0).
func (p *Problem) NormSq() float64 { return p.total }

// Dims returns the size m x n of the data.
func (p *Problem) Dims() (m, n int) { return p.m, p.n }

func (p *Problem) maskRow(r int) []byte { return p.mask[r*p.n : (r+1)*p.n] }

// buildClasses groups rows by identical mask rows and lists, for each column and each class,
// the shorter way to form its Gram matrix.
func (p *Problem) buildClasses() {
	m, n := p.m, p.n
	p.rowClass = make([]int32, m)
	seed := maphash.MakeSeed()
	byHash := map[uint64][]int32{}
	for r := 0; r < m; r++ {
		row := p.maskRow(r)
		key := maphash.Bytes(seed, row)
		found := int32(-1)
		for _, c := range byHash[key] {
			if bytes.Equal(p.maskRow(int(p.classes[c].rows[0])), row) {
				found = c
				break
			}
		}
		if found < 0 {
			found = int32(len(p.classes))
			p.classes = append(p.classes, maskClass{})
			byHash[key] = append(byHash[key], found)
		}
		p.classes[found].rows = append(p.classes[found].rows, int32(r))
		p.rowClass[r] = found
	}
	for c := range p.classes {
		cl := &p.classes[c]
		var on, off []int32
		for j, o := range p.maskRow(int(cl.rows[0])) {
			if o == 1 {
				on = append(on, int32(j))
			} else {
				off = append(off, int32(j))
			}
		}
		cl.observed = len(on)
		if len(off) <= len(on) {
			cl.cols, cl.subtract = off, true
		} else {
			cl.cols, cl.subtract = on, false
		}
	}
	// Per column: observed and unobserved classes, counted first, then listed the shorter way.
	nc := len(p.classes)
	onCount := make([]int, n)
	p.colObserved = make([]int, n)
	for c := range p.classes {
		cl := &p.classes[c]
		for j, o := range p.maskRow(int(cl.rows[0])) {
			if o == 1 {
				onCount[j]++
				p.colObserved[j] += len(cl.rows)
			}
		}
	}
	p.colSubtract = make([]bool, n)
	p.colListStart = make([]int, n+1)
	for j := 0; j < n; j++ {
		p.colSubtract[j] = nc-onCount[j] <= onCount[j]
		size := onCount[j]
		if p.colSubtract[j] {
			size = nc - onCount[j]
		}
		p.colListStart[j+1] = p.colListStart[j] + size
	}
	p.colList = make([]int32, p.colListStart[n])
	next := append([]int(nil), p.colListStart[:n]...)
	for c := range p.classes {
		for j, o := range p.maskRow(int(p.classes[c].rows[0])) {
			if (o == 1) != p.colSubtract[j] {
				p.colList[next[j]] = int32(c)
				next[j]++
			}
		}
	}
}
