package nmf

import "gonum.org/v1/gonum/mat"

// sparse is an m x n matrix of which only the non-zero entries are kept, both by rows and by
// columns (entries in increasing column, resp. row, order).
type sparse struct {
	m, n     int
	rowStart []int // row r: columns rowCol[rowStart[r]:rowStart[r+1]], values rowVal
	rowCol   []int32
	rowVal   []float64
	colStart []int // column j: rows colRow[colStart[j]:colStart[j+1]], values colVal
	colRow   []int32
	colVal   []float64
}

// newSparseRows completes a sparse matrix given by rows with its column form (a counting
// transpose, which keeps rows in increasing order within each column).
func newSparseRows(m, n int, rowStart []int, rowCol []int32, rowVal []float64) *sparse {
	a := &sparse{m: m, n: n, rowStart: rowStart, rowCol: rowCol, rowVal: rowVal,
		colStart: make([]int, n+1), colRow: make([]int32, len(rowCol)), colVal: make([]float64, len(rowCol))}
	for _, j := range rowCol {
		a.colStart[j+1]++
	}
	for j := 0; j < n; j++ {
		a.colStart[j+1] += a.colStart[j]
	}
	next := append([]int(nil), a.colStart[:n]...)
	for r := 0; r < m; r++ {
		for e := rowStart[r]; e < rowStart[r+1]; e++ {
			j := rowCol[e]
			a.colRow[next[j]] = int32(r)
			a.colVal[next[j]] = rowVal[e]
			next[j]++
		}
	}
	return a
}

// sparseFromDense keeps the non-zero entries of X.
func sparseFromDense(X *mat.Dense) *sparse {
	m, n := X.Dims()
	raw := X.RawMatrix()
	rowStart := make([]int, m+1)
	var rowCol []int32
	var rowVal []float64
	for r := 0; r < m; r++ {
		for j, v := range raw.Data[r*raw.Stride : r*raw.Stride+n] {
			if v != 0 {
				rowCol = append(rowCol, int32(j))
				rowVal = append(rowVal, v)
			}
		}
		rowStart[r+1] = len(rowCol)
	}
	return newSparseRows(m, n, rowStart, rowCol, rowVal)
}

// mul sets y = A b for the n x l row-major b (y is m x l row-major).
func (a *sparse) mul(y, b []float64, l, workers int) {
	_ = parallelFor(a.m, workers, func(_, r int) error {
		lo, hi := a.rowStart[r], a.rowStart[r+1]
		gather(y[r*l:r*l+l], b, l, a.rowCol[lo:hi], a.rowVal[lo:hi])
		return nil
	})
}

// mulT sets z = A^T b for the m x l row-major b (z is n x l row-major).
func (a *sparse) mulT(z, b []float64, l, workers int) {
	_ = parallelFor(a.n, workers, func(_, j int) error {
		lo, hi := a.colStart[j], a.colStart[j+1]
		gather(z[j*l:j*l+l], b, l, a.colRow[lo:hi], a.colVal[lo:hi])
		return nil
	})
}

// dot returns x . y (len(y) >= len(x)).
func dot(x, y []float64) float64 {
	y = y[:len(x)]
	s := 0.0
	for i, v := range x {
		s += v * y[i]
	}
	return s
}
