package nmf

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestKernels checks the register-blocked loops against plain ones, for every width up to 19
// (so that the blocks of eight and four and the remainders are all exercised).
func TestKernels(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for k := 1; k <= 19; k++ {
		rows := 30
		a := make([]float64, rows*k)
		for i := range a {
			a[i] = rng.Float64()
		}
		idx := []int32{3, 0, 29, 7, 7, 12}
		val := []float64{0.5, -1, 2, 0.25, 1, 3}
		c := make([]float64, k)
		gather(c, a, k, idx, val)
		for i := 0; i < k; i++ {
			want := 0.0
			for e, r := range idx {
				want += val[e] * a[int(r)*k+i]
			}
			if math.Abs(c[i]-want) > 1e-12 {
				t.Errorf("gather k=%d: c[%d] = %g, want %g", k, i, c[i], want)
			}
		}
		sumRows(c, a, k, idx)
		for i := 0; i < k; i++ {
			want := 0.0
			for _, r := range idx {
				want += a[int(r)*k+i]
			}
			if math.Abs(c[i]-want) > 1e-12 {
				t.Errorf("sumRows k=%d: c[%d] = %g, want %g", k, i, c[i], want)
			}
		}
		tri := make([]float64, k*(k+1)/2)
		gram(tri, a, k, idx)
		p := 0
		for i := 0; i < k; i++ {
			for j := i; j < k; j++ {
				want := 0.0
				for _, r := range idx {
					want += a[int(r)*k+i] * a[int(r)*k+j]
				}
				if math.Abs(tri[p]-want) > 1e-12 {
					t.Errorf("gram k=%d: (%d,%d) = %g, want %g", k, i, j, tri[p], want)
				}
				p++
			}
		}
	}
}

// TestFilledOperator: the products of the filled data through the mask classes equal those of
// the filled matrix written out.
func TestFilledOperator(t *testing.T) {
	X, M := simTable(4, 40, 30, 3, 3, 0.3, 0.05, 0.2)
	// A few cell-level lacunae too, so that classes of one row occur.
	M.Set(5, 3, 0)
	M.Set(17, 30, 0)
	p, err := NewProblem(X, M)
	if err != nil {
		t.Fatal(err)
	}
	A := filledDense(p)
	op := &filledOp{p: p, fill: rowFill(p)}
	rng := rand.New(rand.NewPCG(3, 4))
	const l = 5
	b := make([]float64, p.n*l)
	q := make([]float64, p.m*l)
	for i := range b {
		b[i] = rng.Float64()
	}
	for i := range q {
		q[i] = rng.Float64()
	}
	y := make([]float64, p.m*l)
	z := make([]float64, p.n*l)
	op.mul(y, b, l, 2)
	op.mulT(z, q, l, 2)
	for r := 0; r < p.m; r++ {
		for i := 0; i < l; i++ {
			want := 0.0
			for j := 0; j < p.n; j++ {
				want += A.At(r, j) * b[j*l+i]
			}
			if math.Abs(y[r*l+i]-want) > 1e-10 {
				t.Fatalf("(A b)[%d][%d] = %g, want %g", r, i, y[r*l+i], want)
			}
		}
	}
	for j := 0; j < p.n; j++ {
		for i := 0; i < l; i++ {
			want := 0.0
			for r := 0; r < p.m; r++ {
				want += A.At(r, j) * q[r*l+i]
			}
			if math.Abs(z[j*l+i]-want) > 1e-10 {
				t.Fatalf("(A^T q)[%d][%d] = %g, want %g", j, i, z[j*l+i], want)
			}
		}
	}
}
