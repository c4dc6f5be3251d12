package rank

import "gonum.org/v1/gonum/mat"

func matOf(rows [][]float64) *mat.Dense {
	d := mat.NewDense(len(rows), len(rows[0]), nil)
	for i, r := range rows {
		d.SetRow(i, r)
	}
	return d
}
