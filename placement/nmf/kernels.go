package nmf

// The inner loops. Go does not vectorise, so they keep partial sums in local variables (which
// the compiler holds in registers) rather than in memory, four at a time. Every sum is
// still taken in a fixed order, independent of the data's layout in memory or of the caller.

// gather sets c[i] = sum_e val[e] * a[idx[e]*stride + i] for i < len(c): a sparse vector times a
// dense row-major matrix, whose rows are of length stride >= len(c).
func gather(c, a []float64, stride int, idx []int32, val []float64) {
	n := len(c)
	val = val[:len(idx)]
	i := 0
	for ; i+4 <= n; i += 4 {
		var s0, s1, s2, s3 float64
		for e, r := range idx {
			v := val[e]
			o := int(r)*stride + i
			x := a[o : o+4 : o+4]
			s0 += v * x[0]
			s1 += v * x[1]
			s2 += v * x[2]
			s3 += v * x[3]
		}
		c[i], c[i+1], c[i+2], c[i+3] = s0, s1, s2, s3
	}
	for ; i+2 <= n; i += 2 {
		var s0, s1 float64
		for e, r := range idx {
			v := val[e]
			o := int(r)*stride + i
			x := a[o : o+2 : o+2]
			s0 += v * x[0]
			s1 += v * x[1]
		}
		c[i], c[i+1] = s0, s1
	}
	for ; i < n; i++ {
		s := 0.0
		for e, r := range idx {
			s += val[e] * a[int(r)*stride+i]
		}
		c[i] = s
	}
}

// gram sets the packed upper triangle t (row i holds entries (i, i..k-1)) to sum over the rows
// listed in idx of a_r a_r^T, a being row-major with rows of length k.
func gram(t, a []float64, k int, idx []int32) {
	p := 0
	for i := 0; i < k; i++ {
		j := i
		for ; j+4 <= k; j += 4 {
			var s0, s1, s2, s3 float64
			for _, r := range idx {
				o := int(r) * k
				x := a[o : o+k : o+k]
				xi := x[i]
				y := x[j : j+4 : j+4]
				s0 += xi * y[0]
				s1 += xi * y[1]
				s2 += xi * y[2]
				s3 += xi * y[3]
			}
			t[p], t[p+1], t[p+2], t[p+3] = s0, s1, s2, s3
			p += 4
		}
		for ; j < k; j++ {
			s := 0.0
			for _, r := range idx {
				o := int(r) * k
				s += a[o+i] * a[o+j]
			}
			t[p] = s
			p++
		}
	}
}

// sumRows sets c[i] = sum_e a[idx[e]*stride + i] for i < len(c): the sum of the listed rows.
func sumRows(c, a []float64, stride int, idx []int32) {
	n := len(c)
	i := 0
	for ; i+4 <= n; i += 4 {
		var s0, s1, s2, s3 float64
		for _, r := range idx {
			o := int(r)*stride + i
			x := a[o : o+4 : o+4]
			s0 += x[0]
			s1 += x[1]
			s2 += x[2]
			s3 += x[3]
		}
		c[i], c[i+1], c[i+2], c[i+3] = s0, s1, s2, s3
	}
	for ; i < n; i++ {
		s := 0.0
		for _, r := range idx {
			s += a[int(r)*stride+i]
		}
		c[i] = s
	}
}
