// Package nmf learns a non-negative factorisation of a partly observed matrix,
//
//	minimise f(W, H) = ||M .* (X - W H)||_F^2  subject to  W >= 0, H >= 0,
//
// where X is m x n (readings x witnesses in strayleaf), M its 0/1 observation mask, W is m x k
// (group profiles) and H is k x n (group coefficients of each witness). Unobserved cells (lacunae)
// contribute nothing to f: they are not zeros.
//
// # Method
//
// Alternating non-negative least squares (ANLS) with an exact NNLS solver for each block (Kim &
// Park 2008, SIAM J. Matrix Anal. Appl. 30; J. Kim & Park 2011, SIAM J. Sci. Comput. 33; from
// memory). Each iteration solves, for every column j of H,
//
//	h_j = argmin_{h >= 0} ||m_j .* (x_j - W h)||^2,  normal equations G_j h = c_j with
//	G_j = sum_{r : M_rj = 1} W_r W_r^T,  c_j = W^T (m_j .* x_j),
//
// then, for every row r of W, the same problem with the roles of W and H exchanged. The NNLS
// problems are solved in Gram form by the Lawson-Hanson active-set method (package nnls). Since
// every block is solved exactly, f never increases from one iteration to the next.
//
// The masked Gram matrices are formed cheaply (see Problem): rows with the same mask (all readings
// of a variation unit) are handled together, and each G_j is the full Gram matrix W^T W less the
// few terms of the rows column j lacks (or the sum of those it has, if fewer).
//
// Columns of H, and rows of W, are solved in parallel on Options.Workers goroutines. Each solve
// depends only on its own data and every sum is taken in a fixed order, so the result does not
// depend on the number of workers: the same data, options and seed give the same factors, bit for
// bit.
//
// # Stopping
//
// An iteration is one update of H followed by one of W. The run stops when the relative decrease
// (f_{t-1} - f_t) / f_{t-1} falls to Options.Tolerance or below, when f_t falls below 1e-10
// ||M .* X||^2 (an exact fit, to working precision), or after Options.MaxIterations iterations.
//
// # Scale and order of the components
//
// W H is unchanged by W -> W D, H -> D^-1 H for a positive diagonal D. Factorize returns W with
// unit-L2-norm columns (H's rows scaled to compensate; a zero component stays zero), and orders
// the components by decreasing norm of their H row, ties in their original order.
//
// # Degenerate cases
//
// A witness (column) with no observed cell gets a zero column of H, and a reading (row) with no
// observed cell a zero row of W. A k larger than the rank of the data is allowed: components that
// the data cannot support come out zero or redundant, and the objective is still minimised.
package nmf

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"slices"

	"gonum.org/v1/gonum/mat"
)

// Options are the settings of a factorisation.
type Options struct {
	// K is the number of components (groups), >= 1.
	K int
	// MaxIterations caps the ANLS iterations of each restart (default 200).
	MaxIterations int
	// Tolerance is the relative decrease of the objective at which a restart stops (default
	// 1e-5; a negative value never stops early).
	Tolerance float64
	// Seed seeds the random initialisations (and the randomized SVD of a large NNDSVD).
	Seed uint64
	// Restarts is the number of runs from different starting points (default 1); the run with
	// the lowest objective is kept.
	Restarts int
	// Init is InitNNDSVD (the default: the first restart from NNDSVD, the others random) or
	// InitRandom (every restart random).
	Init string
	// Workers is the number of goroutines (default runtime.GOMAXPROCS(0)). It does not change
	// the result.
	Workers int
	// Progress, if set, is called after each restart with the number done and the total.
	Progress func(done, total int)
	// OnIteration, if set, is called after every iteration with the restart (from 0), the
	// iteration (from 1) and the objective.
	OnIteration func(restart, iteration int, objective float64)
}

// Defaults.
const (
	DefaultMaxIterations = 200
	DefaultTolerance     = 1e-5
)

// DefaultOptions returns the defaults for k components: NNDSVD start, one restart, at most 200
// iterations, tolerance 1e-5, seed 0, all cores.
func DefaultOptions(k int) Options {
	return Options{K: k, MaxIterations: DefaultMaxIterations, Tolerance: DefaultTolerance, Restarts: 1, Init: InitNNDSVD}
}

// withDefaults fills unset fields with their defaults.
func (o Options) withDefaults() Options {
	if o.MaxIterations == 0 {
		o.MaxIterations = DefaultMaxIterations
	}
	if o.Tolerance == 0 {
		o.Tolerance = DefaultTolerance
	}
	if o.Restarts == 0 {
		o.Restarts = 1
	}
	if o.Init == "" {
		o.Init = InitNNDSVD
	}
	if o.Workers <= 0 {
		o.Workers = runtime.GOMAXPROCS(0)
	}
	return o
}

// validate reports an option out of range for an m x n problem.
func (o Options) validate(m, n int) error {
	switch {
	case o.K < 1:
		return fmt.Errorf("k is %d; expected at least 1 component", o.K)
	case o.MaxIterations < 1:
		return fmt.Errorf("max iterations is %d; expected at least 1", o.MaxIterations)
	case math.IsNaN(o.Tolerance):
		return fmt.Errorf("tolerance is not a number")
	case o.Restarts < 1:
		return fmt.Errorf("restarts is %d; expected at least 1", o.Restarts)
	case o.Init != InitNNDSVD && o.Init != InitRandom:
		return fmt.Errorf("init is %q; expected %q or %q", o.Init, InitNNDSVD, InitRandom)
	case o.Init == InitNNDSVD && o.K > min(m, n):
		return fmt.Errorf("k is %d but an NNDSVD start of a %d x %d matrix has at most %d components; use init %q", o.K, m, n, min(m, n), InitRandom)
	}
	return nil
}

// Result is a factorisation X ~ W H.
type Result struct {
	// W is m x k with unit-norm columns; H is k x n.
	W, H *mat.Dense
	// Objective is ||M .* (X - W H)||_F^2 of the returned factors: from the normal equations of
	// the last W step (relative error about 1e-16 ||M .* X||^2 / Objective), or, for a fit
	// closer than 1e-6 ||M .* X||^2, summed cell by cell.
	Objective float64
	// Iterations is the number of ANLS iterations of the kept restart.
	Iterations int
	// History holds the kept restart's objective: History[0] at its starting point, History[i]
	// after iteration i, from the normal equations.
	History []float64
	// Converged reports that the kept restart stopped on the tolerance, not on the cap.
	Converged bool
	// Restart is the index of the kept restart; RestartObjectives the final objective of each.
	Restart           int
	RestartObjectives []float64
}

// Factorize computes the masked NMF of X with mask M (nil: every cell observed). X is m x n;
// observed cells must be finite and non-negative; M holds 0 and 1 only.
func Factorize(X, M *mat.Dense, opt Options) (*Result, error) {
	return FactorizeContext(context.Background(), X, M, opt)
}

// FactorizeContext is Factorize with a context, checked between iterations.
func FactorizeContext(ctx context.Context, X, M *mat.Dense, opt Options) (*Result, error) {
	p, err := NewProblem(X, M)
	if err != nil {
		return nil, fmt.Errorf("nmf: %w", err)
	}
	return p.Factorize(ctx, opt)
}

// Factorize computes the masked NMF of the problem's data with the given options. A Problem
// is read-only here: several factorisations of one Problem may run at once.
func (p *Problem) Factorize(ctx context.Context, opt Options) (*Result, error) {
	opt = opt.withDefaults()
	if err := opt.validate(p.m, p.n); err != nil {
		return nil, fmt.Errorf("nmf: %w", err)
	}
	var best *Result
	objectives := make([]float64, opt.Restarts)
	for rs := 0; rs < opt.Restarts; rs++ {
		init := InitRandom
		if rs == 0 {
			init = opt.Init
		}
		res, err := factorizeOnce(ctx, p, opt, init, DeriveSeed(opt.Seed, uint64(rs)), rs)
		if err != nil {
			return nil, fmt.Errorf("nmf: restart %d: %w", rs, err)
		}
		objectives[rs] = res.Objective
		if best == nil || res.Objective < best.Objective {
			best = res
		}
		if opt.Progress != nil {
			opt.Progress(rs+1, opt.Restarts)
		}
	}
	best.RestartObjectives = objectives
	return best, nil
}

// DeriveSeed returns a seed for the stream-th use of seed (the splitmix64 finaliser; Steele, Lea
// & Flood 2014, from memory), so that restarts, or the starts of a rank sweep, draw unrelated
// numbers from one user seed.
func DeriveSeed(seed, stream uint64) uint64 {
	z := seed + (stream+1)*0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// factorizeOnce runs one restart from the given initialisation.
func factorizeOnce(ctx context.Context, p *Problem, opt Options, init string, seed uint64, restart int) (*Result, error) {
	k := opt.K
	r := newRun(p, k, opt.Workers)
	switch init {
	case InitNNDSVD:
		var W, H *mat.Dense
		var err error
		eps := nndsvdEps * math.Sqrt(p.maxValue)
		if min(p.m, p.n) <= exactSVDLimit {
			W, H, err = nndsvd(filledDense(p), k, eps)
		} else {
			W, H, err = randomizedNNDSVD(&filledOp{p: p, fill: rowFill(p)}, p.m, p.n, k, opt.Seed, opt.Workers, eps)
		}
		if err != nil {
			return nil, err
		}
		copy(r.W, W.RawMatrix().Data)
		for g := 0; g < k; g++ {
			for j := 0; j < p.n; j++ {
				r.Ht[j*k+g] = H.At(g, j)
			}
		}
	default:
		r.W, r.Ht = randomFactors(p, k, newRand(seed, streamRestart+uint64(restart)))
	}
	var onIter func(int, float64)
	if opt.OnIteration != nil {
		onIter = func(it int, f float64) { opt.OnIteration(restart, it, f) }
	}
	history, converged, err := r.iterate(ctx, opt.MaxIterations, opt.Tolerance, onIter)
	if err != nil {
		return nil, err
	}
	res := &Result{History: history, Iterations: len(history) - 1, Converged: converged, Restart: restart}
	res.W, res.H = r.normalised()
	// The last W step's normal equations give the objective of the final factors; with a
	// near-exact fit their cancellation would leave only rounding, so it is then summed cell by
	// cell instead.
	res.Objective = history[len(history)-1]
	if res.Objective < 1e-6*p.total {
		res.Objective = r.objective(res.H.RawMatrix().Data)
	}
	return res, nil
}

// normalised returns W with unit-norm columns and H scaled to match, components ordered by
// decreasing norm of their H row (package doc). It also leaves r's factors in that form.
func (r *run) normalised() (W, H *mat.Dense) {
	p, k := r.p, r.k
	scale := make([]float64, k)
	hnorm := make([]float64, k)
	for g := 0; g < k; g++ {
		s := 0.0
		for i := 0; i < p.m; i++ {
			s += r.W[i*k+g] * r.W[i*k+g]
		}
		scale[g] = math.Sqrt(s)
		if scale[g] == 0 {
			scale[g] = 1
		}
		for j := 0; j < p.n; j++ {
			v := r.Ht[j*k+g] * scale[g]
			hnorm[g] += v * v
		}
	}
	order := make([]int, k)
	for g := range order {
		order[g] = g
	}
	slices.SortStableFunc(order, func(a, b int) int {
		switch {
		case hnorm[a] > hnorm[b]:
			return -1
		case hnorm[a] < hnorm[b]:
			return 1
		}
		return 0
	})
	W = mat.NewDense(p.m, k, nil)
	H = mat.NewDense(k, p.n, nil)
	w := make([]float64, k)
	for i := 0; i < p.m; i++ {
		for g, old := range order {
			w[g] = r.W[i*k+old] / scale[old]
		}
		copy(r.W[i*k:i*k+k], w)
		W.SetRow(i, w)
	}
	for j := 0; j < p.n; j++ {
		for g, old := range order {
			w[g] = r.Ht[j*k+old] * scale[old]
		}
		copy(r.Ht[j*k:j*k+k], w)
		for g := 0; g < k; g++ {
			H.Set(g, j, w[g])
		}
	}
	return W, H
}
