// Package cluster holds the clustering arithmetic used to judge and compare groupings of
// witnesses: the adjusted Rand index between two partitions, and average-linkage hierarchical
// clustering with its cophenetic distances and cophenetic correlation.
package cluster

import "fmt"

// AdjustedRand returns the adjusted Rand index of two partitions of the same items (Hubert &
// Arabie 1985, J. Classification 2, from memory), labels[i] being the group of item i in each.
// Label values are arbitrary: only equality matters.
//
// Over the n(n-1)/2 pairs of items, let a be the pairs together in both partitions, d those apart
// in both, b together only in the first and c together only in the second. Then
//
//	ARI = 2 (a d - b c) / ((a + b)(b + d) + (a + c)(c + d)),
//
// which equals the usual (index - expected) / (max - expected) form. It is 1 for identical
// partitions, about 0 for unrelated ones, and may be negative. When the partitions agree on every
// pair (b = c = 0; this covers fewer than two items) it is 1.
func AdjustedRand(first, second []int) (float64, error) {
	if len(first) != len(second) {
		return 0, fmt.Errorf("adjusted Rand index: partitions label %d and %d items", len(first), len(second))
	}
	n := len(first)
	// Contingency counts n_ij and the margins, keyed by label pairs.
	type pair struct{ a, b int }
	cells := map[pair]int64{}
	rows := map[int]int64{}
	cols := map[int]int64{}
	for i := 0; i < n; i++ {
		cells[pair{first[i], second[i]}]++
		rows[first[i]]++
		cols[second[i]]++
	}
	choose2 := func(x int64) float64 { return float64(x) * float64(x-1) / 2 }
	var sumCells, sumRows, sumCols float64
	for _, v := range cells {
		sumCells += choose2(v)
	}
	for _, v := range rows {
		sumRows += choose2(v)
	}
	for _, v := range cols {
		sumCols += choose2(v)
	}
	total := choose2(int64(n))
	a := sumCells
	b := sumRows - sumCells
	c := sumCols - sumCells
	d := total - a - b - c
	if b == 0 && c == 0 {
		return 1, nil
	}
	return 2 * (a*d - b*c) / ((a+b)*(b+d) + (a+c)*(c+d)), nil
}
