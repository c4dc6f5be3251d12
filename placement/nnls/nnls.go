// Package nnls solves non-negative least-squares problems exactly,
//
//	minimise ||A x - b||^2  subject to  x >= 0,
//
// by the active-set method of Lawson & Hanson (1974, Solving Least Squares Problems, ch. 23;
// from memory). Solve works on A and b and solves each passive-set subproblem by Householder QR
// of the passive columns. Solver.SolveGram runs the same active-set method on the normal
// equations, from G = A^T A and c = A^T b only, as in the fast NNLS of Bro & De Jong (1997,
// J. Chemometrics 11; from memory): callers that solve many problems sharing precomputed Gram
// matrices pay O(k^2) per step instead of O(m k), and nothing is allocated per call.
//
// Solver.SolveGramFrom runs the same method from a given feasible starting point, whose support
// is the first passive set: a caller with a good guess of the solution's support (a nearby
// problem's solution) skips most of the outer iterations and gets the same minimiser.
//
// # The method
//
// Write w = A^T (b - A x) = c - G x for the negative gradient of f(x) = ||A x - b||^2 / 2. The
// solution is characterised by the Karush-Kuhn-Tucker conditions
//
//	x >= 0,   w_i <= 0 where x_i = 0,   w_i = 0 where x_i > 0.
//
// The method keeps a passive set P (variables free to be positive) and its complement Z (held at
// zero). Starting from x = 0, P empty, each outer step moves into P the variable of Z whose
// directional derivative along its unit column, w_j / ||a_j||, is largest and exceeds the
// tolerance below; solves the unconstrained least-squares problem on P for z; and, while some
// z_i <= 0, steps from x towards z as far as feasibility allows (alpha = min x_i / (x_i - z_i)
// over z_i <= 0), moves the variables that reached zero back to Z and solves again. The method
// stops when no variable of Z has w_j above tolerance: then the KKT conditions hold.
//
// # Rank deficiency
//
// A variable is admitted to P only if its column is numerically independent of the columns
// already there: in QR form the part of a_j orthogonal to the passive columns must have norm
// above 1e-10 ||a_j|| (sine of the angle to their span); in Gram form the Cholesky pivot of the
// new variable must exceed 1e-12 G_jj (the squared sine). A variable that fails, or whose first
// unconstrained value z_j is not positive, is passed over until P next changes, as Lawson and
// Hanson do. When A is rank-deficient the minimiser x need not be unique (the fitted A x always
// is); the method then returns one minimiser whose passive columns are independent.
//
// # Tolerance
//
// Variable j may enter P only if w_j > tol_j with
//
//	tol_j = 1e-11 * ||a_j|| * max(beta, sum_i ||a_i|| x_i),
//
// where beta = ||b|| in Solve and beta = max_i |c_i| / sqrt(G_ii) (a lower bound on ||b|| by
// Cauchy-Schwarz) in SolveGram, and sum_i ||a_i|| x_i bounds the size of the terms cancelled when
// w is formed. On return, w_j = 0 on P up to rounding, and w_j <= tol_j for every j outside P
// except a variable passed over in the last step as dependent on P (or with z_j <= 0): for a
// column in the span of the passive columns w_j is zero in exact arithmetic at the
// least-squares point on P, so what is left there is rounding. The tests check the KKT
// conditions at 1e-9 ||a_j|| ||b|| on many random and degenerate problems.
package nnls

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// ErrNoConvergence is returned when the active-set method reaches its iteration limit.
var ErrNoConvergence = errors.New("nnls: iteration limit reached before the KKT conditions held")

const (
	// gradTol is the relative tolerance of the entering test w_j > tol_j (package doc).
	gradTol = 1e-11
	// qrDepTol: in QR form a column whose part orthogonal to the passive columns has norm at most
	// qrDepTol * ||a_j|| is taken as dependent on them.
	qrDepTol = 1e-10
	// cholDepTol: in Gram form a Cholesky pivot at most cholDepTol * G_jj marks a dependent column.
	cholDepTol = 1e-12
)

// DefaultMaxIter returns the default limit on outer iterations for k unknowns, 5k + 10. The
// method usually needs about as many outer iterations as there are positive x_i.
func DefaultMaxIter(k int) int { return 5*k + 10 }

// passiveLS is the least-squares subproblem on the passive set: a factorisation that grows by one
// column, shrinks by the last one, or is rebuilt, and solves for z on positions 0..p-1 of order.
type passiveLS interface {
	// grow extends the factorisation of positions 0..p-1 by variable order[p]. It reports false,
	// leaving the factorisation of 0..p-1 unchanged, if that column is dependent on the others.
	grow(order []int, p int) bool
	// shrink drops position p, undoing the grow that added it.
	shrink(order []int, p int)
	// rebuild refactors positions 0..p-1 from scratch and returns the first position whose column
	// is dependent on those before it, or -1.
	rebuild(order []int, p int) int
	// solve writes the unconstrained least-squares solution on positions 0..p-1 into z[:p].
	solve(order []int, p int, z []float64)
	// dual writes w = c - G x for every variable and the entering tolerance tol (package doc); x
	// is non-zero only on positions 0..p-1 of order.
	dual(x []float64, order []int, p int, w, tol []float64)
}

// activeSet is the state of the Lawson-Hanson iteration shared by both forms.
type activeSet struct {
	order   []int     // passive variables in the order they entered; positions 0..p-1 are live
	inP     []bool    // inP[i]: variable i is passive
	blocked []bool    // passed over until P next changes
	z       []float64 // subproblem solution by position
	w, tol  []float64 // negative gradient and entering tolerance by variable
	norm    []float64 // column norms ||a_i||
}

func newActiveSet(k int) activeSet {
	return activeSet{
		order: make([]int, k), inP: make([]bool, k), blocked: make([]bool, k),
		z: make([]float64, k), w: make([]float64, k), tol: make([]float64, k), norm: make([]float64, k),
	}
}

// run carries out the active-set method for k = len(x) unknowns from x = 0, P empty; s.norm
// must be set.
func (s *activeSet) run(ls passiveLS, x []float64, maxIter int) error {
	for i := range x {
		x[i] = 0
		s.inP[i] = false
		s.blocked[i] = false
	}
	return s.iterate(ls, x, 0, maxIter)
}

// runFrom carries out the active-set method from the feasible point x (x >= 0, finite): the
// passive set starts as {i : x_i > 0}, less the variables whose columns are dependent on those
// before them (taken in index order); the least-squares solution z on that set is computed and
// the inner loop steps from x towards z until z > 0 on what is left of P, as after an entering
// step. From there x is the least-squares point on P with x_P > 0, the state the outer loop
// keeps, so the usual iteration continues and ends at the same KKT point. s.norm must be set.
func (s *activeSet) runFrom(ls passiveLS, x []float64, maxIter int) error {
	p := 0
	for i := range x {
		s.inP[i] = false
		s.blocked[i] = false
		if !(x[i] > 0) || s.norm[i] == 0 {
			x[i] = 0
			continue
		}
		s.order[p] = i
		if !ls.grow(s.order, p) {
			x[i] = 0
			continue
		}
		s.inP[i] = true
		p++
	}
	if p > 0 {
		ls.solve(s.order, p, s.z)
		var err error
		if p, err = s.stepBack(ls, x, p); err != nil {
			return err
		}
	}
	return s.iterate(ls, x, p, maxIter)
}

// iterate is the outer loop of the active-set method, entered with p passive variables at
// positions 0..p-1 of s.order, x their least-squares solution (positive) and zero elsewhere.
func (s *activeSet) iterate(ls passiveLS, x []float64, p, maxIter int) error {
	k := len(x)
	for it := 0; ; it++ {
		ls.dual(x, s.order, p, s.w, s.tol)
		// Choose the entering variable.
		for {
			j, best := -1, 0.0
			for i := range k {
				if s.inP[i] || s.blocked[i] || s.norm[i] == 0 || !(s.w[i] > s.tol[i]) {
					continue
				}
				if r := s.w[i] / s.norm[i]; r > best {
					j, best = i, r
				}
			}
			if j < 0 {
				return nil // KKT conditions hold
			}
			if it >= maxIter {
				return fmt.Errorf("%w (%d outer iterations, %d unknowns)", ErrNoConvergence, it, k)
			}
			s.order[p] = j
			if !ls.grow(s.order, p) {
				s.blocked[j] = true
				continue
			}
			ls.solve(s.order, p+1, s.z)
			if !(s.z[p] > 0) {
				ls.shrink(s.order, p)
				s.blocked[j] = true
				continue
			}
			s.inP[j] = true
			p++
			break
		}
		for i := range k {
			s.blocked[i] = false
		}
		var err error
		if p, err = s.stepBack(ls, x, p); err != nil {
			return err
		}
	}
}

// stepBack is the inner loop: with s.z the least-squares solution on positions 0..p-1 and x
// feasible, it steps from x towards z as far as feasibility allows until z > 0 on P, then sets
// x = z on P, and returns the new p. Each pass moves at least one variable to Z, so it ends
// within p passes.
func (s *activeSet) stepBack(ls passiveLS, x []float64, p int) (int, error) {
	for {
		feasible := true
		for a := range p {
			if !(s.z[a] > 0) {
				feasible = false
				break
			}
		}
		if feasible {
			for a := range p {
				x[s.order[a]] = s.z[a]
			}
			return p, nil
		}
		alpha, q := math.Inf(1), -1
		for a := range p {
			if s.z[a] <= 0 {
				xa := x[s.order[a]]
				if t := xa / (xa - s.z[a]); t < alpha {
					alpha, q = t, a
				}
			}
		}
		if q < 0 {
			return p, errors.New("nnls: numerical breakdown (subproblem solution is not a number)")
		}
		for a := range p {
			i := s.order[a]
			x[i] += alpha * (s.z[a] - x[i])
		}
		x[s.order[q]] = 0
		p = s.compact(x, p)
		for {
			bad := ls.rebuild(s.order, p)
			if bad < 0 {
				break
			}
			// Rounding made a column that was independent look dependent on a subset of
			// its former companions: send it back to Z.
			x[s.order[bad]] = 0
			p = s.compact(x, p)
		}
		ls.solve(s.order, p, s.z)
	}
}

// compact removes from positions 0..p-1 the variables with x_i <= 0 and returns the new p.
func (s *activeSet) compact(x []float64, p int) int {
	np := 0
	for a := range p {
		i := s.order[a]
		if x[i] > 0 {
			s.order[np] = i
			np++
		} else {
			x[i] = 0
			s.inP[i] = false
		}
	}
	return np
}

// Objective returns x^T G x - 2 x^T c + btb, which equals ||A x - b||^2 when G = A^T A,
// c = A^T b and btb = b^T b, at O(k^2) cost. G is k x k row-major with k = len(c) = len(x). The
// value can come out slightly negative by cancellation when the fit is near perfect; callers
// wanting a residual should clamp it at zero.
func Objective(G, c []float64, btb float64, x []float64) float64 {
	k := len(x)
	q := 0.0
	for i := range k {
		if x[i] == 0 {
			continue
		}
		row := G[i*k : i*k+k]
		s := 0.0
		for j, xj := range x {
			s += row[j] * xj
		}
		q += x[i] * (s - 2*c[i])
	}
	return q + btb
}

// Solve returns the x >= 0 minimising ||A x - b||^2, by the Lawson-Hanson active-set method
// with Householder QR of the passive columns. A is m x k with m >= 1 rows; b has length m. A
// and b must be finite. For rank-deficient A it returns one minimiser (package doc).
func Solve(A *mat.Dense, b []float64) ([]float64, error) {
	if A == nil || A.IsEmpty() {
		return nil, errors.New("nnls: A is empty")
	}
	m, k := A.Dims()
	if len(b) != m {
		return nil, fmt.Errorf("nnls: b has length %d; A has %d rows", len(b), m)
	}
	ls := &qrLS{m: m, k: k, a: make([]float64, m*k), b: b}
	for i := range m {
		for j := range k {
			v := A.At(i, j)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("nnls: A[%d][%d] is %v", i, j, v)
			}
			ls.a[j*m+i] = v
		}
	}
	bb := 0.0
	for i, v := range b {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("nnls: b[%d] is %v", i, v)
		}
		bb += v * v
	}
	ls.bnorm = math.Sqrt(bb)
	ls.r = make([]float64, m*k)
	ls.v = make([]float64, m*k)
	ls.tau = make([]float64, k)
	ls.qb = make([]float64, m)
	copy(ls.qb, b) // Q^T b for the empty passive set
	ls.qbSave = make([]float64, m)
	ls.res = make([]float64, m)
	as := newActiveSet(k)
	for j := range k {
		col := ls.a[j*m : j*m+m]
		s := 0.0
		for _, v := range col {
			s += v * v
		}
		as.norm[j] = math.Sqrt(s)
	}
	ls.norm = as.norm
	x := make([]float64, k)
	if err := as.run(ls, x, DefaultMaxIter(k)); err != nil {
		return nil, err
	}
	return x, nil
}

// qrLS is the passive-set subproblem in QR form: position q of the factorisation holds column
// order[q] of A, reduced by Householder reflectors H_0..H_q.
type qrLS struct {
	m, k   int
	a      []float64 // A column-major: a[j*m+i] = A[i][j]
	b      []float64
	bnorm  float64
	norm   []float64 // column norms
	r      []float64 // r[q*m+i], i <= q: column q of R
	v      []float64 // v[q*m+i], i >= q: Householder vector of H_q = I - tau_q v v^T
	tau    []float64
	qb     []float64 // H_{p-1} ... H_0 b
	qbSave []float64 // qb before the last grow, for shrink
	res    []float64 // b - A x
}

func (f *qrLS) reflect(q int, y []float64) {
	m := f.m
	v := f.v[q*m : q*m+m]
	s := 0.0
	for i := q; i < m; i++ {
		s += v[i] * y[i]
	}
	s *= f.tau[q]
	for i := q; i < m; i++ {
		y[i] -= s * v[i]
	}
}

func (f *qrLS) grow(order []int, p int) bool {
	m := f.m
	if p >= m {
		return false // m columns already span R^m
	}
	j := order[p]
	col := f.r[p*m : p*m+m]
	copy(col, f.a[j*m:j*m+m])
	for q := range p {
		f.reflect(q, col)
	}
	s := 0.0
	for i := p; i < m; i++ {
		s += col[i] * col[i]
	}
	sigma := math.Sqrt(s)
	if !(sigma > qrDepTol*f.norm[j]) {
		return false
	}
	alpha := -sigma
	if col[p] < 0 {
		alpha = sigma
	}
	v := f.v[p*m : p*m+m]
	for i := p; i < m; i++ {
		v[i] = col[i]
	}
	v[p] -= alpha
	vv := 0.0
	for i := p; i < m; i++ {
		vv += v[i] * v[i]
	}
	f.tau[p] = 2 / vv
	col[p] = alpha
	for i := p + 1; i < m; i++ {
		col[i] = 0
	}
	copy(f.qbSave, f.qb)
	f.reflect(p, f.qb)
	return true
}

func (f *qrLS) shrink(order []int, p int) { copy(f.qb, f.qbSave) }

func (f *qrLS) rebuild(order []int, p int) int {
	copy(f.qb, f.b)
	for q := range p {
		if !f.grow(order, q) {
			return q
		}
	}
	return -1
}

func (f *qrLS) solve(order []int, p int, z []float64) {
	m := f.m
	for a := p - 1; a >= 0; a-- {
		s := f.qb[a]
		for c := a + 1; c < p; c++ {
			s -= f.r[c*m+a] * z[c]
		}
		z[a] = s / f.r[a*m+a]
	}
}

func (f *qrLS) dual(x []float64, order []int, p int, w, tol []float64) {
	m := f.m
	copy(f.res, f.b)
	scale := 0.0
	for a := range p {
		j := order[a]
		xj := x[j]
		col := f.a[j*m : j*m+m]
		for i := range m {
			f.res[i] -= col[i] * xj
		}
		scale += f.norm[j] * xj
	}
	scale = math.Max(scale, f.bnorm)
	for j := range f.k {
		col := f.a[j*m : j*m+m]
		s := 0.0
		for i := range m {
			s += col[i] * f.res[i]
		}
		w[j] = s
		tol[j] = gradTol * f.norm[j] * scale
	}
}

// Solver solves NNLS problems given in normal-equations form, min x^T G x - 2 c^T x over x >= 0,
// by the Lawson-Hanson active-set method with a Cholesky factorisation of G restricted to the
// passive set, grown by one row as a variable enters and rebuilt when variables leave. A Solver
// holds the workspace for up to the k unknowns it was made for; it is not safe for concurrent
// use (give each goroutine its own).
type Solver struct {
	as      activeSet
	ls      gramLS
	maxIter int
}

// NewSolver returns a Solver with workspace for problems of up to k unknowns (k >= 1).
func NewSolver(k int) *Solver {
	if k < 1 {
		k = 1
	}
	return &Solver{
		as: newActiveSet(k),
		ls: gramLS{l: make([]float64, k*k), y: make([]float64, k)},
	}
}

// Cap returns the largest number of unknowns the Solver accepts.
func (s *Solver) Cap() int { return len(s.as.order) }

// SetMaxIter sets the limit on outer iterations; n <= 0 restores the default DefaultMaxIter(k).
func (s *Solver) SetMaxIter(n int) { s.maxIter = n }

// SolveGram writes into x the x >= 0 minimising x^T G x - 2 c^T x, which is ||A x - b||^2 up to
// the constant b^T b when G = A^T A and c = A^T b. The problem size is k = len(c), at most
// s.Cap(); G is k x k row-major, symmetric positive semi-definite; x has length k. It does not
// allocate. It fails for mismatched lengths, non-finite entries, a negative diagonal entry or an
// asymmetric G (|G_ij - G_ji| > 1e-10 sqrt(G_ii G_jj)), and when the iteration limit is reached
// (ErrNoConvergence). A G that is indefinite in some other way is not detected; its
// negative-curvature directions are refused as dependent columns.
func (s *Solver) SolveGram(G, c, x []float64) error {
	maxIter, err := s.prepare(G, c, x)
	if err != nil {
		return err
	}
	err = s.as.run(&s.ls, x, maxIter)
	s.ls.g, s.ls.c = nil, nil
	return err
}

// SolveGramFrom solves the problem of SolveGram starting from the point given in x instead of
// x = 0: on entry x must be finite and non-negative, and its support {i : x_i > 0} is the first
// passive set (Bro & De Jong 1997 start the method from a feasible passive set; from memory).
// The unconstrained least-squares problem is solved on that set (less variables whose columns
// are dependent on those of lower index), the inner loop steps back from x towards feasibility,
// and the usual outer loop follows, so the result satisfies the same KKT conditions as
// SolveGram's. When G is positive definite on the support of the solution, the minimiser is
// unique and both return it, up to rounding; the start only changes how many steps it takes:
// from the support of the solution itself, none but one factorisation and one check. It does
// not allocate, and fails as SolveGram does, or for a negative or non-finite start.
func (s *Solver) SolveGramFrom(G, c, x []float64) error {
	maxIter, err := s.prepare(G, c, x)
	if err != nil {
		return err
	}
	for i, v := range x {
		if !(v >= 0) || math.IsInf(v, 0) {
			s.ls.g, s.ls.c = nil, nil
			return fmt.Errorf("nnls: starting point x[%d] is %v; it must be finite and non-negative", i, v)
		}
	}
	err = s.as.runFrom(&s.ls, x, maxIter)
	s.ls.g, s.ls.c = nil, nil
	return err
}

// prepare checks the problem, sets up the Gram-form subproblem and returns the iteration limit.
func (s *Solver) prepare(G, c, x []float64) (int, error) {
	k := len(c)
	switch {
	case k == 0:
		return 0, errors.New("nnls: no unknowns (c is empty)")
	case k > s.Cap():
		return 0, fmt.Errorf("nnls: %d unknowns; this Solver was made for at most %d", k, s.Cap())
	case len(G) != k*k:
		return 0, fmt.Errorf("nnls: G has %d entries; expected %d x %d = %d", len(G), k, k, k*k)
	case len(x) != k:
		return 0, fmt.Errorf("nnls: x has length %d; expected %d", len(x), k)
	}
	norm := s.as.norm[:k]
	beta := 0.0
	for i := range k {
		d := G[i*k+i]
		if !(d >= 0) || math.IsInf(d, 0) {
			return 0, fmt.Errorf("nnls: G[%d][%d] is %v; a Gram matrix has a finite non-negative diagonal", i, i, d)
		}
		ci := c[i]
		if math.IsNaN(ci) || math.IsInf(ci, 0) {
			return 0, fmt.Errorf("nnls: c[%d] is %v", i, ci)
		}
		norm[i] = math.Sqrt(d)
		if d > 0 {
			beta = math.Max(beta, math.Abs(ci)/norm[i])
		}
	}
	for i := range k {
		for j := i + 1; j < k; j++ {
			a, b := G[i*k+j], G[j*k+i]
			if math.IsNaN(a) || math.IsInf(a, 0) || math.IsNaN(b) || math.IsInf(b, 0) {
				return 0, fmt.Errorf("nnls: G[%d][%d] or G[%d][%d] is not finite (%v, %v)", i, j, j, i, a, b)
			}
			if math.Abs(a-b) > 1e-10*norm[i]*norm[j] {
				return 0, fmt.Errorf("nnls: G is not symmetric: G[%d][%d] = %v, G[%d][%d] = %v", i, j, a, j, i, b)
			}
		}
	}
	s.ls.g, s.ls.c, s.ls.k, s.ls.norm, s.ls.beta, s.ls.ny = G, c, k, norm, beta, 0
	maxIter := s.maxIter
	if maxIter <= 0 {
		maxIter = DefaultMaxIter(k)
	}
	return maxIter, nil
}

// gramLS is the passive-set subproblem in normal-equations form: the Cholesky factor L of G
// restricted to the passive positions, G_PP = L L^T, stored row-major with stride ldl.
type gramLS struct {
	g, c []float64
	k    int
	norm []float64
	beta float64
	l    []float64 // l[a*ldl+b], b <= a; ldl = cap
	y    []float64 // y = L^{-1} c_P, valid on positions 0..ny-1
	ny   int
}

func (f *gramLS) ldl() int { return len(f.y) }

// factorRow computes row p of L for variable order[p] and reports whether its pivot passed.
func (f *gramLS) factorRow(order []int, p int) bool {
	k, ld := f.k, f.ldl()
	j := order[p]
	lp := f.l[p*ld : p*ld+p+1]
	d := f.g[j*k+j]
	for a := range p {
		la := f.l[a*ld : a*ld+a+1]
		s := f.g[order[a]*k+j]
		for b := range a {
			s -= la[b] * lp[b]
		}
		s /= la[a]
		lp[a] = s
		d -= s * s
	}
	if !(d > cholDepTol*f.g[j*k+j]) {
		return false
	}
	lp[p] = math.Sqrt(d)
	return true
}

func (f *gramLS) grow(order []int, p int) bool {
	f.ny = min(f.ny, p) // rows 0..p-1 of L are unchanged, so is y there
	return f.factorRow(order, p)
}

func (f *gramLS) shrink(order []int, p int) { f.ny = min(f.ny, p) }

func (f *gramLS) rebuild(order []int, p int) int {
	f.ny = 0
	for q := range p {
		if !f.factorRow(order, q) {
			return q
		}
	}
	return -1
}

func (f *gramLS) solve(order []int, p int, z []float64) {
	ld := f.ldl()
	y := f.y
	// Forward substitution L y = c_P, only for the positions added since the last solve.
	for a := f.ny; a < p; a++ {
		la := f.l[a*ld : a*ld+a+1]
		s := f.c[order[a]]
		for b := range a {
			s -= la[b] * y[b]
		}
		y[a] = s / la[a]
	}
	f.ny = p
	for a := p - 1; a >= 0; a-- {
		s := y[a]
		for b := a + 1; b < p; b++ {
			s -= f.l[b*ld+a] * z[b]
		}
		z[a] = s / f.l[a*ld+a]
	}
}

func (f *gramLS) dual(x []float64, order []int, p int, w, tol []float64) {
	k := f.k
	copy(w[:k], f.c)
	scale := 0.0
	for a := range p {
		j := order[a]
		xj := x[j]
		col := f.g[j*k : j*k+k] // row j = column j by symmetry
		for i := range w[:k] {
			w[i] -= col[i] * xj
		}
		scale += f.norm[j] * xj
	}
	scale = math.Max(scale, f.beta)
	for i := range k {
		tol[i] = gradTol * f.norm[i] * scale
	}
}
