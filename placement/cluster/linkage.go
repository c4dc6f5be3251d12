package cluster

import (
	"fmt"
	"math"
	"sort"
)

// Merge is one step of an agglomerative clustering: clusters A and B are joined at distance
// Height into a cluster of Size items. Items are numbered 0..n-1 and the cluster made by merge
// i is numbered n+i, as in the usual linkage-matrix convention; A < B.
type Merge struct {
	A, B   int
	Height float64
	Size   int
}

// Dendrogram is the result of a hierarchical clustering of n items: n-1 merges in order of
// increasing height, and the cophenetic distance of every pair of items.
type Dendrogram struct {
	N      int
	Merges []Merge
	// coph[condensed(i, j)] is the height at which items i < j first fall in one cluster.
	coph []float64
}

// Cophenetic returns the cophenetic distance of items i and j: the height of the merge at which
// they first share a cluster (0 for i == j).
func (d *Dendrogram) Cophenetic(i, j int) float64 {
	if i == j {
		return 0
	}
	return d.coph[condensed(d.N, i, j)]
}

// condensed returns the index of pair i != j in the row-major upper triangle of an n x n matrix
// without its diagonal.
func condensed(n, i, j int) int {
	if i > j {
		i, j = j, i
	}
	return n*i - i*(i+1)/2 + (j - i - 1)
}

// AverageLinkage clusters n items by average linkage (UPGMA: the distance between two clusters is
// the mean of the distances between their members; Sokal & Michener 1958, from memory), given the
// symmetric distance function dist(i, j) for i < j. It uses the nearest-neighbour chain algorithm
// with the Lance-Williams update d(k, x+y) = (|x| d(k,x) + |y| d(k,y)) / (|x| + |y|), which for a
// reducible linkage such as average linkage gives the same merges as the greedy closest-pair
// algorithm. Ties are broken as scipy.cluster.hierarchy.linkage(method='average') breaks them
// (lowest index first, preferring the previous link of the chain), so that equal inputs give equal
// dendrograms. Distances must be finite.
func AverageLinkage(n int, dist func(i, j int) float64) (*Dendrogram, error) {
	if n < 1 {
		return nil, fmt.Errorf("average linkage: no items")
	}
	np := n * (n - 1) / 2
	D := make([]float64, np)
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			v := dist(i, j)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("average linkage: distance between items %d and %d is %g", i, j, v)
			}
			D[condensed(n, i, j)] = v
		}
	}
	size := make([]int, n)
	for i := range size {
		size[i] = 1
	}
	// members[i] lists the items of the cluster currently held in slot i.
	members := make([][]int, n)
	for i := range members {
		members[i] = []int{i}
	}
	coph := make([]float64, np)
	type raw struct {
		x, y   int // slots merged (x < y); the merged cluster stays in slot y
		height float64
		size   int
	}
	raws := make([]raw, 0, n-1)
	chain := make([]int, 0, n)
	for step := 0; step < n-1; step++ {
		if len(chain) == 0 {
			for i := 0; i < n; i++ {
				if size[i] > 0 {
					chain = append(chain, i)
					break
				}
			}
		}
		var x, y int
		var best float64
		for {
			x = chain[len(chain)-1]
			best = math.Inf(1)
			if len(chain) > 1 {
				y = chain[len(chain)-2]
				best = D[condensed(n, x, y)]
			}
			for i := 0; i < n; i++ {
				if size[i] == 0 || i == x {
					continue
				}
				if d := D[condensed(n, x, i)]; d < best {
					best = d
					y = i
				}
			}
			if len(chain) > 1 && y == chain[len(chain)-2] {
				break
			}
			chain = append(chain, y)
		}
		chain = chain[:len(chain)-2]
		if x > y {
			x, y = y, x
		}
		nx, ny := size[x], size[y]
		for _, a := range members[x] {
			for _, b := range members[y] {
				coph[condensed(n, a, b)] = best
			}
		}
		raws = append(raws, raw{x: x, y: y, height: best, size: nx + ny})
		members[y] = append(members[y], members[x]...)
		members[x] = nil
		size[x] = 0
		size[y] = nx + ny
		for i := 0; i < n; i++ {
			if size[i] == 0 || i == y {
				continue
			}
			ix, iy := condensed(n, i, x), condensed(n, i, y)
			D[iy] = (float64(nx)*D[ix] + float64(ny)*D[iy]) / float64(nx+ny)
		}
	}
	// Order merges by height (stable, as scipy does) and renumber clusters: a slot refers to the
	// latest cluster formed in it, which is item i until its first merge.
	order := make([]int, len(raws))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(a, b int) bool { return raws[order[a]].height < raws[order[b]].height })
	label := make([]int, n) // current cluster number held in each slot
	for i := range label {
		label[i] = i
	}
	merges := make([]Merge, len(raws))
	for k, idx := range order {
		r := raws[idx]
		a, b := label[r.x], label[r.y]
		if a > b {
			a, b = b, a
		}
		merges[k] = Merge{A: a, B: b, Height: r.height, Size: r.size}
		label[r.y] = n + k
	}
	return &Dendrogram{N: n, Merges: merges, coph: coph}, nil
}

// CopheneticCorrelation returns the Pearson correlation between the distances dist(i, j) and the
// cophenetic distances of d over all pairs i < j (Sokal & Rohlf 1962, from memory; used for the
// NMF rank by Brunet et al. 2004, PNAS 101). When either set of values is constant the
// correlation is undefined; it is then reported as 1 if the dendrogram reproduces the distances
// exactly and 0 otherwise.
func (d *Dendrogram) CopheneticCorrelation(dist func(i, j int) float64) float64 {
	n := d.N
	np := n * (n - 1) / 2
	if np == 0 {
		return 1
	}
	var meanD, meanC float64
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			meanD += dist(i, j)
			meanC += d.coph[condensed(n, i, j)]
		}
	}
	meanD /= float64(np)
	meanC /= float64(np)
	var sxy, sxx, syy float64
	exact := true
	for i := 0; i < n; i++ {
		for j := i + 1; j < n; j++ {
			x := dist(i, j)
			y := d.coph[condensed(n, i, j)]
			if x != y {
				exact = false
			}
			sxy += (x - meanD) * (y - meanC)
			sxx += (x - meanD) * (x - meanD)
			syy += (y - meanC) * (y - meanC)
		}
	}
	if sxx == 0 || syy == 0 {
		if exact {
			return 1
		}
		return 0
	}
	return sxy / math.Sqrt(sxx*syy)
}
