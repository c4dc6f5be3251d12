// Package rank helps choose the number of groups k of an NMF model: it factorises the data
// for each k of a range from several random starts, measures how well and how stably each k
// groups the witnesses, and recommends one (see Recommend).
//
// The measures, for each k:
//
//   - the objective ||M .* (X - W H)||_F^2 of the best start (it normally falls as k grows);
//   - the mean Hoyer sparseness of the columns of W (group profiles) and of H (witnesses'
//     coefficients) of the best start;
//   - the consensus matrix over the starts and its cophenetic correlation (Brunet et al. 2004);
//   - the dispersion of the consensus matrix (Kim & Park 2007).
//
// Recommend turns them into a choice of k: the stable k (consensus high) whose objective gain
// stands out most from the gains of larger k. Sweep runs the starts in parallel, one per core,
// and its result does not depend on the number of cores.
package rank

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"strayleaf/placement/cluster"
)

// Sparseness returns the sparseness of the vector x (Hoyer 2004, JMLR 5, from memory):
//
//	(sqrt(n) - ||x||_1 / ||x||_2) / (sqrt(n) - 1),
//
// 1 for a vector with a single non-zero entry, 0 for one with all entries equal in magnitude.
// It is undefined for a zero vector and for n = 1; ok is false then.
func Sparseness(x []float64) (s float64, ok bool) {
	n := len(x)
	if n < 2 {
		return 0, false
	}
	var l1, l2 float64
	for _, v := range x {
		l1 += math.Abs(v)
		l2 += v * v
	}
	if l2 == 0 {
		return 0, false
	}
	rn := math.Sqrt(float64(n))
	return (rn - l1/math.Sqrt(l2)) / (rn - 1), true
}

// MeanColumnSparseness returns the mean Sparseness of the columns of A over the columns for
// which it is defined (0 if there are none).
func MeanColumnSparseness(A mat.Matrix) float64 {
	r, c := A.Dims()
	col := make([]float64, r)
	sum, count := 0.0, 0
	for j := 0; j < c; j++ {
		for i := range col {
			col[i] = A.At(i, j)
		}
		if s, ok := Sparseness(col); ok {
			sum += s
			count++
		}
	}
	if count == 0 {
		return 0
	}
	return sum / float64(count)
}

// Assign returns, for each column j of the k x n coefficient matrix H, the component with the
// largest coefficient (the lowest such index on a tie), or -1 if the column is zero: the group
// a witness is assigned to (Brunet et al. 2004, PNAS 101, from memory).
func Assign(H mat.Matrix) []int {
	k, n := H.Dims()
	labels := make([]int, n)
	for j := 0; j < n; j++ {
		best, arg := 0.0, -1
		for g := 0; g < k; g++ {
			if v := H.At(g, j); v > best {
				best, arg = v, g
			}
		}
		labels[j] = arg
	}
	return labels
}

// Consensus is the consensus matrix of several groupings of the same n items (Brunet et al.
// 2004, PNAS 101, from memory): the connectivity matrix of one grouping has C_ij = 1 if items i
// and j are in the same group and 0 otherwise, and the consensus matrix is the mean of the
// connectivity matrices. An item with label -1 (no group) is connected to itself only.
type Consensus struct {
	n, runs  int
	together []int32 // together[condensed(i, j)]: runs in which i < j were grouped together
}

// NewConsensus returns an empty consensus over n items.
func NewConsensus(n int) *Consensus {
	return &Consensus{n: n, together: make([]int32, n*(n-1)/2)}
}

// N returns the number of items.
func (c *Consensus) N() int { return c.n }

// Runs returns the number of groupings added.
func (c *Consensus) Runs() int { return c.runs }

// Add adds one grouping, labels[i] being the group of item i (or -1).
func (c *Consensus) Add(labels []int) error {
	if len(labels) != c.n {
		return fmt.Errorf("consensus: grouping of %d items; expected %d", len(labels), c.n)
	}
	p := 0
	for i := 0; i < c.n; i++ {
		li := labels[i]
		for j := i + 1; j < c.n; j++ {
			if li >= 0 && labels[j] == li {
				c.together[p]++
			}
			p++
		}
	}
	c.runs++
	return nil
}

// At returns C_ij: the share of groupings in which items i and j are together (1 for i == j).
func (c *Consensus) At(i, j int) float64 {
	if i == j {
		return 1
	}
	if c.runs == 0 {
		return 0
	}
	if i > j {
		i, j = j, i
	}
	return float64(c.together[c.n*i-i*(i+1)/2+j-i-1]) / float64(c.runs)
}

// Dispersion returns the dispersion coefficient of the consensus matrix (Kim & Park 2007,
// Bioinformatics 23, from memory),
//
//	rho = (1/n^2) sum_{i,j} 4 (C_ij - 1/2)^2,
//
// over all n^2 entries, diagonal included: 1 when every pair is always or never together, lower
// as the groupings disagree.
func (c *Consensus) Dispersion() float64 {
	if c.n == 0 {
		return 0
	}
	s := float64(c.n) // the diagonal: 4 (1 - 1/2)^2 = 1 each
	for i := 0; i < c.n; i++ {
		for j := i + 1; j < c.n; j++ {
			d := c.At(i, j) - 0.5
			s += 2 * 4 * d * d
		}
	}
	return s / float64(c.n*c.n)
}

// Cophenetic returns the cophenetic correlation of the consensus matrix (Brunet et al. 2004):
// the correlation between the distances 1 - C_ij and the cophenetic distances of their
// average-linkage dendrogram (package cluster). It is 1 for a consensus made of identical
// groupings and falls as the groupings disagree in ways no hierarchy explains.
func (c *Consensus) Cophenetic() (float64, error) {
	dist := func(i, j int) float64 { return 1 - c.At(i, j) }
	d, err := cluster.AverageLinkage(c.n, dist)
	if err != nil {
		return 0, fmt.Errorf("consensus: %w", err)
	}
	return d.CopheneticCorrelation(dist), nil
}
