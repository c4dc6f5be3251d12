package nmf

import (
	"fmt"
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/mat"
)

// The initialisations.
const (
	// InitNNDSVD starts from the non-negative double SVD (see NNDSVD). Only the first restart
	// uses it; further restarts start at random.
	InitNNDSVD = "nndsvd"
	// InitRandom starts every restart from random non-negative factors (see randomFactors).
	InitRandom = "random"
)

// nndsvdEps is the threshold below which NNDSVD entries are set to zero, as scikit-learn's
// _initialize_nmf does (its eps=1e-6). Factorize scales it by sqrt(max X), the scale of the
// factors, so that data of small magnitude do not lose whole components.
const nndsvdEps = 1e-6

// exactSVDLimit is the largest min(m, n) for which the initialisation uses the exact thin SVD;
// larger matrices use the randomized range finder.
const exactSVDLimit = 200

// NNDSVD returns the non-negative double singular value decomposition initialisation of a
// rank-k factorisation of the non-negative m x n matrix X (Boutsidis & Gallopoulos 2008, Pattern
// Recognition 41, from memory), built from the exact thin SVD X = U S V^T (gonum mat.SVD) exactly
// as scikit-learn 1.2 builds it in sklearn.decomposition._nmf._initialize_nmf(init='nndsvd'):
//
//	W_:1 = sqrt(s_1) |u_1|,  H_1: = sqrt(s_1) |v_1|;
//	for j = 2..k, with x = u_j, y = v_j split into positive and negative parts x+, x-, y+, y-,
//	m+ = ||x+|| ||y+||, m- = ||x-|| ||y-||: if m+ > m- take (u, v, sigma) = (x+/||x+||,
//	y+/||y+||, m+), otherwise (x-/||x-||, y-/||y-||, m-); then W_:j = sqrt(s_j sigma) u and
//	H_j: = sqrt(s_j sigma) v;
//	finally entries below 1e-6 are set to zero.
//
// Flipping the signs of u_j and v_j together swaps the positive and negative parts, so the
// construction does not depend on the sign the SVD chose (except for an exact tie m+ = m-). A
// pair whose chosen parts are zero (s_j = 0, or no positive part at all) gives a zero component.
// k must be between 1 and min(m, n).
func NNDSVD(X *mat.Dense, k int) (W, H *mat.Dense, err error) { return nndsvd(X, k, nndsvdEps) }

// nndsvd is NNDSVD with the zero threshold eps.
func nndsvd(X *mat.Dense, k int, eps float64) (W, H *mat.Dense, err error) {
	m, n := X.Dims()
	if k < 1 || k > min(m, n) {
		return nil, nil, fmt.Errorf("nndsvd: k is %d; expected 1 <= k <= min(m, n) = %d", k, min(m, n))
	}
	var svd mat.SVD
	if !svd.Factorize(X, mat.SVDThin) {
		return nil, nil, fmt.Errorf("nndsvd: the SVD of the %d x %d matrix did not converge", m, n)
	}
	var U, V mat.Dense
	svd.UTo(&U)
	svd.VTo(&V)
	s := svd.Values(nil)
	W, H = nndsvdFromSVD(U.Slice(0, m, 0, k).(*mat.Dense), s[:k], V.Slice(0, n, 0, k).(*mat.Dense), eps)
	return W, H, nil
}

// nndsvdFromSVD builds the NNDSVD factors from the leading k singular triplets (U m x k, V n x k)
// and sets entries below eps to zero.
func nndsvdFromSVD(U *mat.Dense, s []float64, V *mat.Dense, eps float64) (W, H *mat.Dense) {
	m, k := U.Dims()
	n, _ := V.Dims()
	W = mat.NewDense(m, k, nil)
	H = mat.NewDense(k, n, nil)
	x := make([]float64, m)
	y := make([]float64, n)
	for j := 0; j < k; j++ {
		mat.Col(x, j, U)
		mat.Col(y, j, V)
		sj := math.Max(s[j], 0)
		if j == 0 {
			a := math.Sqrt(sj)
			for i, v := range x {
				W.Set(i, 0, a*math.Abs(v))
			}
			for i, v := range y {
				H.Set(0, i, a*math.Abs(v))
			}
			continue
		}
		xp, xn := partNorms(x)
		yp, yn := partNorms(y)
		mp, mn := xp*yp, xn*yn
		sign, xnrm, ynrm, sigma := 1.0, xp, yp, mp
		if !(mp > mn) {
			sign, xnrm, ynrm, sigma = -1, xn, yn, mn
		}
		if sigma == 0 || sj == 0 {
			continue // a zero component
		}
		lbd := math.Sqrt(sj * sigma)
		for i, v := range x {
			if v = sign * v; v > 0 {
				W.Set(i, j, lbd*v/xnrm)
			}
		}
		for i, v := range y {
			if v = sign * v; v > 0 {
				H.Set(j, i, lbd*v/ynrm)
			}
		}
	}
	for _, d := range []*mat.Dense{W, H} {
		raw := d.RawMatrix()
		for i, v := range raw.Data {
			if v < eps {
				raw.Data[i] = 0
			}
		}
	}
	return W, H
}

// partNorms returns the norms of the positive and negative parts of x.
func partNorms(x []float64) (pos, neg float64) {
	for _, v := range x {
		if v > 0 {
			pos += v * v
		} else {
			neg += v * v
		}
	}
	return math.Sqrt(pos), math.Sqrt(neg)
}

// RandomizedNNDSVD is NNDSVD built from an approximate truncated SVD found by a seeded
// randomized range finder with power iterations (Halko, Martinsson & Tropp 2011, SIAM Review 53,
// algorithms 4.4 and 5.1, from memory; the approach of scikit-learn's randomized_svd): with l =
// k + 10 and a random n x l matrix Omega, Q = orth(X Omega) refined by q = 2 rounds of
// Q = orth(X orth(X^T Q)), then the exact SVD (gonum mat.SVD) of the small l x n matrix Q^T X
// gives U = Q U_B, S and V. The cost is O(nnz(X) l q) instead of the exact SVD's O(m n min(m,n)).
// The same seed gives the same result.
func RandomizedNNDSVD(X *mat.Dense, k int, seed uint64) (W, H *mat.Dense, err error) {
	m, n := X.Dims()
	if k < 1 || k > min(m, n) {
		return nil, nil, fmt.Errorf("nndsvd: k is %d; expected 1 <= k <= min(m, n) = %d", k, min(m, n))
	}
	return randomizedNNDSVD(sparseFromDense(X), m, n, k, seed, 1, nndsvdEps)
}

// linearOp is a matrix known by its products with row-major blocks of l columns: mul sets
// y = A b (b is n x l, y m x l) and mulT sets z = A^T b (b is m x l, z n x l).
type linearOp interface {
	mul(y, b []float64, l, workers int)
	mulT(z, b []float64, l, workers int)
}

func randomizedNNDSVD(a linearOp, m, n, k int, seed uint64, workers int, eps float64) (W, H *mat.Dense, err error) {
	l := min(k+10, m, n)
	const q = 2
	rng := newRand(seed, streamSVD)
	omega := make([]float64, n*l) // row-major n x l
	for i := range omega {
		omega[i] = normal(rng)
	}
	y := make([]float64, m*l) // m x l row-major
	z := make([]float64, n*l)
	a.mul(y, omega, l, workers)
	orthonormalise(y, m, l)
	for it := 0; it < q; it++ {
		a.mulT(z, y, l, workers)
		orthonormalise(z, n, l)
		a.mul(y, z, l, workers)
		orthonormalise(y, m, l)
	}
	// B^T = X^T Q is n x l, so B = Q^T X is its transpose.
	a.mulT(z, y, l, workers)
	bt := mat.NewDense(n, l, z)
	var svd mat.SVD
	if !svd.Factorize(bt.T(), mat.SVDThin) {
		return nil, nil, fmt.Errorf("nndsvd: the SVD of the projected %d x %d matrix did not converge", l, n)
	}
	var ub, v mat.Dense
	svd.UTo(&ub)
	svd.VTo(&v)
	s := svd.Values(nil)
	var u mat.Dense
	u.Mul(mat.NewDense(m, l, y), &ub)
	W, H = nndsvdFromSVD(u.Slice(0, m, 0, k).(*mat.Dense), s[:k], v.Slice(0, n, 0, k).(*mat.Dense), eps)
	return W, H, nil
}

// orthonormalise replaces the l columns of the r x l row-major matrix a by an orthonormal basis
// of their span, by classical Gram-Schmidt applied twice to each column (CGS2: as accurate as
// modified Gram-Schmidt, and it reads a row by row; Giraud et al. 2005, Numer. Math. 101, from
// memory). A column that vanishes is left zero.
func orthonormalise(a []float64, r, l int) {
	d := make([]float64, l)
	for c := 0; c < l; c++ {
		for pass := 0; pass < 2 && c > 0; pass++ {
			clear(d[:c])
			for i := 0; i < r; i++ {
				row := a[i*l : i*l+l]
				v := row[c]
				for b := 0; b < c; b++ {
					d[b] += row[b] * v
				}
			}
			for i := 0; i < r; i++ {
				row := a[i*l : i*l+l]
				s := row[c]
				for b := 0; b < c; b++ {
					s -= d[b] * row[b]
				}
				row[c] = s
			}
		}
		nrm := 0.0
		for i := 0; i < r; i++ {
			nrm += a[i*l+c] * a[i*l+c]
		}
		nrm = math.Sqrt(nrm)
		for i := 0; i < r; i++ {
			if nrm > 0 {
				a[i*l+c] /= nrm
			} else {
				a[i*l+c] = 0
			}
		}
	}
}

// Random streams: the PCG stream of each use, so that no two draw the same numbers.
const (
	streamSVD     = 0x6e6e64737664 // "nndsvd"
	streamRestart = 0x72657374     // "rest", plus the restart index
)

func newRand(seed, stream uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, stream)) }

// uniform01 returns a uniform float64 in [0, 1) from 53 bits of one Uint64 draw. The
// initialisations draw only through it (and normal), so that they are fixed by the PCG
// generator's specified output rather than by how a Go release maps draws to floats.
func uniform01(rng *rand.Rand) float64 { return float64(rng.Uint64()>>11) * 0x1p-53 }

// normal returns a standard normal draw by the Box-Muller transform (one of the pair).
func normal(rng *rand.Rand) float64 {
	u := 1 - uniform01(rng) // (0, 1]
	v := uniform01(rng)
	return math.Sqrt(-2*math.Log(u)) * math.Cos(2*math.Pi*v)
}

// randomFactors returns random non-negative m x k and k x n factors (row-major W and row-major
// H^T) with entries uniform on [0, 2a), a = sqrt(mean/k) and mean the mean observed entry of X,
// so that W H has about the scale of X (scikit-learn's init='random' uses |N(0, a^2)|).
func randomFactors(p *Problem, k int, rng *rand.Rand) (w, ht []float64) {
	mean := 0.0
	if p.observed > 0 {
		s := 0.0
		for _, v := range p.xm.rowVal {
			s += v
		}
		mean = s / float64(p.observed)
	}
	a := 2 * math.Sqrt(mean/float64(k))
	w = make([]float64, p.m*k)
	ht = make([]float64, p.n*k)
	for i := range w {
		w[i] = a * uniform01(rng)
	}
	for i := range ht {
		ht[i] = a * uniform01(rng)
	}
	return w, ht
}

// rowFill returns the value the NNDSVD start gives the unobserved cells of each row: the mean
// of the row's observed cells (0 for a row with none). A lacuna is given the value the reading
// has on average among the witnesses extant there.
func rowFill(p *Problem) []float64 {
	fill := make([]float64, p.m)
	xm := p.xm
	for r := range fill {
		if obs := p.classes[p.rowClass[r]].observed; obs > 0 {
			s := 0.0
			for _, v := range xm.rowVal[xm.rowStart[r]:xm.rowStart[r+1]] {
				s += v
			}
			fill[r] = s / float64(obs)
		}
	}
	return fill
}

// filledDense returns the data with unobserved cells filled (rowFill) as a dense matrix.
func filledDense(p *Problem) *mat.Dense {
	fill := rowFill(p)
	d := mat.NewDense(p.m, p.n, nil)
	xm := p.xm
	for r := 0; r < p.m; r++ {
		for j, o := range p.maskRow(r) {
			if o == 0 {
				d.Set(r, j, fill[r])
			}
		}
		for e := xm.rowStart[r]; e < xm.rowStart[r+1]; e++ {
			d.Set(r, int(xm.rowCol[e]), xm.rowVal[e])
		}
	}
	return d
}

// filledOp is the filled data A = M .* X + F as a linear operator, with F_rj = fill_r where
// M_rj = 0, without forming A: F's products go through the mask classes, whose rows share their
// unobserved columns U_c. (F b)_r = fill_r sum_{j in U_c(r)} b_j, and (F^T q)_j = sum over the
// classes c lacking j of t_c, t_c = sum_{r in c} fill_r q_r; each sum is taken over the shorter
// list (the class's or column's own, or the complement as total minus the rest).
type filledOp struct {
	p    *Problem
	fill []float64
}

func (f *filledOp) mul(y, b []float64, l, workers int) {
	p := f.p
	p.xm.mul(y, b, l, workers)
	total := make([]float64, l)
	for j := 0; j < p.n; j++ {
		for i, v := range b[j*l : j*l+l] {
			total[i] += v
		}
	}
	u := make([]float64, len(p.classes)*l)
	_ = parallelFor(len(p.classes), workers, func(_, c int) error {
		cl := &p.classes[c]
		uc := u[c*l : c*l+l]
		for _, j := range cl.cols {
			for i, v := range b[int(j)*l : int(j)*l+l] {
				uc[i] += v
			}
		}
		if !cl.subtract {
			for i := range uc {
				uc[i] = total[i] - uc[i]
			}
		}
		return nil
	})
	for r := 0; r < p.m; r++ {
		if fr := f.fill[r]; fr != 0 {
			c := int(p.rowClass[r])
			yr := y[r*l : r*l+l]
			for i, v := range u[c*l : c*l+l] {
				yr[i] += fr * v
			}
		}
	}
}

func (f *filledOp) mulT(z, b []float64, l, workers int) {
	p := f.p
	p.xm.mulT(z, b, l, workers)
	t := make([]float64, len(p.classes)*l)
	total := make([]float64, l)
	for c := range p.classes {
		tc := t[c*l : c*l+l]
		for _, r := range p.classes[c].rows {
			if fr := f.fill[r]; fr != 0 {
				for i, v := range b[int(r)*l : int(r)*l+l] {
					tc[i] += fr * v
				}
			}
		}
		for i, v := range tc {
			total[i] += v
		}
	}
	_ = parallelFor(p.n, workers, func(_, j int) error {
		zj := z[j*l : j*l+l]
		list := p.colList[p.colListStart[j]:p.colListStart[j+1]]
		sign := 1.0
		if !p.colSubtract[j] { // list holds the observed classes: add the total, less them
			sign = -1
			for i, v := range total {
				zj[i] += v
			}
		}
		for _, c := range list {
			for i, v := range t[int(c)*l : int(c)*l+l] {
				zj[i] += sign * v
			}
		}
		return nil
	})
}
