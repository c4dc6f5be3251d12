package calibrate

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// FitLogistic fits a logistic regression P(y = 1 | x) = 1 / (1 + exp(-(b0 + b . x))) by penalised
// maximum likelihood,
//
//	minimise  sum_i w_i [log(1 + exp(z_i)) - y_i z_i] + (lambda / 2) ||b||^2,   z_i = b0 + b . x_i,
//
// with the intercept b0 unpenalised (Cox 1958, J. R. Stat. Soc. B 20; the L2 penalty as in
// scikit-learn's LogisticRegression with C = 1 / lambda; from memory). It is solved by Newton's
// method (iteratively reweighted least squares; McCullagh & Nelder 1989, Generalized Linear
// Models, 2nd ed., §4.4; from memory) with step halving, which converges from zero in a few steps
// because the objective is convex. x holds one row of features per sample; y is 0 or 1; w may be
// nil. It returns the intercept and the coefficients.
func FitLogistic(x [][]float64, y []float64, w []float64, lambda float64) (b0 float64, b []float64, err error) {
	n := len(x)
	if n == 0 {
		return 0, nil, fmt.Errorf("logistic regression: no samples")
	}
	if len(y) != n || (w != nil && len(w) != n) {
		return 0, nil, fmt.Errorf("logistic regression: %d rows, %d labels, %d weights", n, len(y), len(w))
	}
	if !(lambda >= 0) {
		return 0, nil, fmt.Errorf("logistic regression: penalty %v; expected >= 0", lambda)
	}
	d := len(x[0])
	for i, row := range x {
		if len(row) != d {
			return 0, nil, fmt.Errorf("logistic regression: row %d has %d features; row 0 has %d", i, len(row), d)
		}
		for _, v := range row {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return 0, nil, fmt.Errorf("logistic regression: row %d has a feature %v", i, v)
			}
		}
	}
	p := d + 1 // parameter 0 is the intercept
	beta := make([]float64, p)
	weight := func(i int) float64 {
		if w == nil {
			return 1
		}
		return w[i]
	}
	objective := func(beta []float64) float64 {
		f := 0.0
		for i, row := range x {
			z := beta[0]
			for j, v := range row {
				z += beta[j+1] * v
			}
			f += weight(i) * (softplus(z) - y[i]*z)
		}
		for j := 1; j < p; j++ {
			f += lambda / 2 * beta[j] * beta[j]
		}
		return f
	}
	grad := make([]float64, p)
	hess := mat.NewSymDense(p, nil)
	next := make([]float64, p)
	f := objective(beta)
	for it := 0; it < 100; it++ {
		for j := range grad {
			grad[j] = 0
		}
		hess.Zero()
		for i, row := range x {
			z := beta[0]
			for j, v := range row {
				z += beta[j+1] * v
			}
			mu := sigmoid(z)
			wi := weight(i)
			r := wi * (mu - y[i])
			s := wi * mu * (1 - mu)
			for a := 0; a < p; a++ {
				xa := 1.0
				if a > 0 {
					xa = row[a-1]
				}
				grad[a] += r * xa
				for c := a; c < p; c++ {
					xc := 1.0
					if c > 0 {
						xc = row[c-1]
					}
					hess.SetSym(a, c, hess.At(a, c)+s*xa*xc)
				}
			}
		}
		for j := 1; j < p; j++ {
			grad[j] += lambda * beta[j]
			hess.SetSym(j, j, hess.At(j, j)+lambda)
		}
		// A tiny ridge keeps the system solvable for separable data or constant features.
		for j := 0; j < p; j++ {
			hess.SetSym(j, j, hess.At(j, j)+1e-10)
		}
		var chol mat.Cholesky
		if !chol.Factorize(hess) {
			return 0, nil, fmt.Errorf("logistic regression: Hessian not positive definite at step %d", it)
		}
		step := mat.NewVecDense(p, nil)
		if err := chol.SolveVecTo(step, mat.NewVecDense(p, grad)); err != nil {
			return 0, nil, fmt.Errorf("logistic regression: %w", err)
		}
		decrement := mat.Dot(step, mat.NewVecDense(p, grad)) // Newton decrement squared
		t := 1.0
		var fn float64
		for h := 0; h < 50; h++ {
			for j := range next {
				next[j] = beta[j] - t*step.AtVec(j)
			}
			fn = objective(next)
			if fn <= f-1e-4*t*decrement || fn <= f {
				break
			}
			t /= 2
		}
		copy(beta, next)
		if decrement/2 < 1e-14*(1+math.Abs(f)) {
			f = fn
			break
		}
		f = fn
	}
	return beta[0], beta[1:], nil
}

// sigmoid is 1 / (1 + exp(-z)), computed without overflow.
func sigmoid(z float64) float64 {
	if z >= 0 {
		return 1 / (1 + math.Exp(-z))
	}
	e := math.Exp(z)
	return e / (1 + e)
}

// softplus is log(1 + exp(z)), computed without overflow.
func softplus(z float64) float64 {
	if z > 0 {
		return z + math.Log1p(math.Exp(-z))
	}
	return math.Log1p(math.Exp(z))
}
