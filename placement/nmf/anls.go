package nmf

import (
	"context"
	"fmt"

	"strayleaf/placement/nnls"
)

// run is one factorisation from given initial factors: the ANLS iterations on a problem.
type run struct {
	p       *Problem
	k, kp   int   // rank and the length of a packed upper triangle, k(k+1)/2
	off     []int // off[i]: start of row i of a packed upper triangle, minus i
	workers int

	W []float64 // m x k row-major: row r is W_r
	// ws0 is diag(rowConst) W when every row of the data has equal entries (Problem.constRows).
	ws0 []float64
	Ht  []float64 // n x k row-major: row j is h_j, column j of H

	sc    []float64 // per class c: packed S_c = sum_{r in c} W_r W_r^T
	gfull []float64 // packed W^T W
	hht   []float64 // packed H H^T
	gcls  []float64 // per class: full k x k Gram matrix of its rows in the W step
	parts []float64 // per block: packed partial sums of H H^T
	cols  []int32   // 0..n-1
	fcol  []float64 // per column: objective terms (H step)
	frow  []float64 // per row: objective terms (W step)
	ws    []workspace
}

// workspace is one worker's scratch.
type workspace struct {
	solver *nnls.Solver
	g      []float64 // k x k
	gp     []float64 // packed
	c, x   []float64
	pred   []float64 // a row of W H (objective)
}

// hhtBlock is the number of columns per block in the fixed-order reduction of H H^T.
const hhtBlock = 64

func newRun(p *Problem, k, workers int) *run {
	kp := k * (k + 1) / 2
	r := &run{p: p, k: k, kp: kp, workers: workers,
		off:   make([]int, k),
		W:     make([]float64, p.m*k),
		Ht:    make([]float64, p.n*k),
		sc:    make([]float64, len(p.classes)*kp),
		gfull: make([]float64, kp),
		hht:   make([]float64, kp),
		gcls:  make([]float64, len(p.classes)*k*k),
		parts: make([]float64, ((p.n+hhtBlock-1)/hhtBlock)*kp),
		fcol:  make([]float64, p.n),
		frow:  make([]float64, p.m),
		ws:    make([]workspace, workers),
	}
	for i := 0; i < k; i++ {
		r.off[i] = i*k - i*(i-1)/2 - i
	}
	if p.constRows {
		r.ws0 = make([]float64, p.m*k)
	}
	r.cols = make([]int32, p.n)
	for j := range r.cols {
		r.cols[j] = int32(j)
	}
	for w := range r.ws {
		r.ws[w] = workspace{solver: nnls.NewSolver(k), g: make([]float64, k*k), gp: make([]float64, kp),
			c: make([]float64, k), x: make([]float64, k)}
	}
	return r
}

// unpack writes the packed upper triangle t as the full symmetric k x k matrix g. A diagonal
// entry at most 1e-12 times ref's (the full Gram matrix it was cut from; rounding can leave it
// slightly negative when G = full - unobserved and the observed part is zero) is taken as zero,
// with its row and column: such a variable carries no observed data.
func (r *run) unpack(g, t, ref []float64) {
	k := r.k
	for i := 0; i < k; i++ {
		row := t[r.off[i]:]
		for j := i; j < k; j++ {
			g[i*k+j] = row[j]
			g[j*k+i] = row[j]
		}
	}
	for i := 0; i < k; i++ {
		d := t[r.off[i]+i]
		if d > 1e-12*ref[r.off[i]+i] {
			continue
		}
		for j := 0; j < k; j++ {
			g[i*k+j] = 0
			g[j*k+i] = 0
		}
	}
}

// quad returns ||b||^2 - 2 x.c + x^T G x for the full k x k matrix G: the squared residual of x
// in the least-squares problem with Gram matrix G, right-hand side c and ||b||^2 = bb.
func quad(g, c, x []float64, bb float64) float64 {
	k := len(x)
	q := 0.0
	for i := 0; i < k; i++ {
		if x[i] == 0 {
			continue
		}
		q += x[i] * (dot(g[i*k:i*k+k], x) - 2*c[i])
	}
	return bb + q
}

// stepH solves every column of H given W: h_j = argmin_{h >= 0} ||m_j .* (x_j - W h)||^2, whose
// normal equations have G_j = sum over observed r of W_r W_r^T and c_j = W^T (m_j .* x_j). It
// returns the objective of the factors as they were before the step, from the same Gram
// matrices.
func (r *run) stepH() (float64, error) {
	p, k, kp := r.p, r.k, r.kp
	err := parallelFor(len(p.classes), r.workers, func(_, c int) error {
		gram(r.sc[c*kp:(c+1)*kp], r.W, k, p.classes[c].rows)
		return nil
	})
	if err != nil {
		return 0, err
	}
	if p.constRows {
		for row := 0; row < p.m; row++ {
			v := p.rowConst[row]
			for i, w := range r.W[row*k : row*k+k] {
				r.ws0[row*k+i] = v * w
			}
		}
	}
	clear(r.gfull)
	for c := range p.classes {
		s := r.sc[c*kp : (c+1)*kp]
		add(r.gfull, s)
	}
	err = parallelFor(p.n, r.workers, func(w, j int) error {
		ws := &r.ws[w]
		gp := ws.gp
		sumRows(gp, r.sc, kp, p.colList[p.colListStart[j]:p.colListStart[j+1]])
		if p.colSubtract[j] {
			for i, v := range r.gfull {
				gp[i] = v - gp[i]
			}
		}
		r.unpack(ws.g, gp, r.gfull)
		cv := ws.c
		xm := p.xm
		lo, hi := xm.colStart[j], xm.colStart[j+1]
		if p.constRows {
			sumRows(cv, r.ws0, k, xm.colRow[lo:hi])
		} else {
			gather(cv, r.W, k, xm.colRow[lo:hi], xm.colVal[lo:hi])
		}
		h := r.Ht[j*k : j*k+k]
		r.fcol[j] = quad(ws.g, cv, h, p.colSq[j])
		if p.colObserved[j] == 0 {
			clear(h)
			return nil
		}
		if err := ws.solver.SolveGram(ws.g, cv, ws.x); err != nil {
			return fmt.Errorf("solving column %d of H: %w", j, err)
		}
		copy(h, ws.x)
		return nil
	})
	if err != nil {
		return 0, err
	}
	return sumNonNeg(r.fcol), nil
}

// stepW solves every row of W given H: W_r = argmin_{w >= 0} ||m_r .* (x_r - w H)||^2, with
// Gram matrix sum over observed j of h_j h_j^T (shared by the rows of a mask class) and
// c_r = H (m_r .* x_r)^T. It returns the objective after the step.
func (r *run) stepW() (float64, error) {
	p, k, kp := r.p, r.k, r.kp
	nb := len(r.parts) / kp
	err := parallelFor(nb, r.workers, func(_, b int) error {
		gram(r.parts[b*kp:(b+1)*kp], r.Ht, k, r.cols[b*hhtBlock:min((b+1)*hhtBlock, p.n)])
		return nil
	})
	if err != nil {
		return 0, err
	}
	clear(r.hht)
	for b := 0; b < nb; b++ {
		add(r.hht, r.parts[b*kp:(b+1)*kp])
	}
	err = parallelFor(len(p.classes), r.workers, func(w, c int) error {
		ws := &r.ws[w]
		cl := &p.classes[c]
		gp := ws.gp
		gram(gp, r.Ht, k, cl.cols)
		if cl.subtract {
			for i, v := range r.hht {
				gp[i] = v - gp[i]
			}
		}
		r.unpack(r.gcls[c*k*k:(c+1)*k*k], gp, r.hht)
		return nil
	})
	if err != nil {
		return 0, err
	}
	err = parallelFor(p.m, r.workers, func(w, row int) error {
		ws := &r.ws[w]
		c := int(p.rowClass[row])
		wr := r.W[row*k : row*k+k]
		if p.classes[c].observed == 0 {
			clear(wr)
			r.frow[row] = 0
			return nil
		}
		g := r.gcls[c*k*k : (c+1)*k*k]
		cv := ws.c
		xm := p.xm
		lo, hi := xm.rowStart[row], xm.rowStart[row+1]
		if v := p.rowConst[row]; v != 0 {
			sumRows(cv, r.Ht, k, xm.rowCol[lo:hi])
			for i := range cv {
				cv[i] *= v
			}
		} else {
			gather(cv, r.Ht, k, xm.rowCol[lo:hi], xm.rowVal[lo:hi])
		}
		if err := ws.solver.SolveGram(g, cv, ws.x); err != nil {
			return fmt.Errorf("solving row %d of W: %w", row, err)
		}
		copy(wr, ws.x)
		r.frow[row] = quad(g, cv, wr, p.rowSq[row])
		return nil
	})
	if err != nil {
		return 0, err
	}
	return sumNonNeg(r.frow), nil
}

// sumNonNeg adds up terms in order and clamps the total at zero (a near-perfect fit can come
// out slightly negative by cancellation in ||b||^2 - 2 x.c + x^T G x).
func sumNonNeg(terms []float64) float64 {
	s := 0.0
	for _, v := range terms {
		s += v
	}
	return max(s, 0)
}

// iterate runs ANLS to convergence or the iteration cap. It returns the objective history
// (history[0] for the initial factors) and whether the relative decrease fell below tol.
func (r *run) iterate(ctx context.Context, maxIter int, tol float64, onIter func(it int, f float64)) ([]float64, bool, error) {
	history := make([]float64, 0, maxIter+1)
	// Below this the fit is exact to working precision and relative changes are rounding noise.
	floor := 1e-10 * r.p.total
	for it := 1; it <= maxIter; it++ {
		if err := ctx.Err(); err != nil {
			return history, false, err
		}
		before, err := r.stepH()
		if err != nil {
			return history, false, fmt.Errorf("iteration %d: %w", it, err)
		}
		if it == 1 {
			history = append(history, before)
		}
		f, err := r.stepW()
		if err != nil {
			return history, false, fmt.Errorf("iteration %d: %w", it, err)
		}
		history = append(history, f)
		if onIter != nil {
			onIter(it, f)
		}
		prev := history[len(history)-2]
		if f <= floor || prev-f <= tol*prev {
			return history, true, nil
		}
	}
	return history, false, nil
}

// objective returns ||M .* (X - W H)||_F^2 computed cell by cell from the factors; h is H as a
// k x n row-major array. Row r's prediction W_r H is formed as a sum of k rows of H, four at a
// time.
func (r *run) objective(h []float64) float64 {
	p, k, n := r.p, r.k, r.p.n
	_ = parallelFor(p.m, r.workers, func(w, row int) error {
		ws := &r.ws[w]
		if len(ws.pred) != n {
			ws.pred = make([]float64, n)
		}
		pred := ws.pred
		clear(pred)
		wr := r.W[row*k : row*k+k]
		g := 0
		for ; g+4 <= k; g += 4 {
			a0, a1, a2, a3 := wr[g], wr[g+1], wr[g+2], wr[g+3]
			h0, h1, h2, h3 := h[g*n:g*n+n], h[(g+1)*n:(g+1)*n+n], h[(g+2)*n:(g+2)*n+n], h[(g+3)*n:(g+3)*n+n]
			for j := range pred {
				pred[j] += a0*h0[j] + a1*h1[j] + a2*h2[j] + a3*h3[j]
			}
		}
		for ; g < k; g++ {
			a, hg := wr[g], h[g*n:g*n+n]
			for j := range pred {
				pred[j] += a * hg[j]
			}
		}
		xm := p.xm
		for e := xm.rowStart[row]; e < xm.rowStart[row+1]; e++ {
			pred[xm.rowCol[e]] -= xm.rowVal[e]
		}
		s := 0.0
		for j, o := range p.maskRow(row) {
			if o == 1 {
				s += pred[j] * pred[j]
			}
		}
		r.frow[row] = s
		return nil
	})
	return sumNonNeg(r.frow)
}

// add sets dst += x (len(x) >= len(dst)).
func add(dst, x []float64) {
	x = x[:len(dst)]
	for i := range dst {
		dst[i] += x[i]
	}
}
