package flash

import "math"

// cholesky factors the symmetric positive-definite n×n matrix a (row-major)
// in place into its lower triangle L with a = L·Lᵀ, storing 1/L_jj on the
// diagonal (cholSolve multiplies by it). It reports false, with a partly
// overwritten a, when a pivot is not positive. The inner products below
// the diagonal, the bulk of the work, are summed from column 8 on in four
// partial sums (k mod 4) added at the end: four chains of additions that
// run side by side instead of one that waits on every term. The order is
// fixed, so the result is reproducible.
func cholesky(a []float64, n int) bool {
	a = a[:n*n]
	for j := range n {
		rj := a[j*n : j*n+j+1]
		rjj := rj[:j]
		s := rj[j]
		for _, v := range rjj {
			s -= v * v
		}
		if !(s > 0) {
			return false
		}
		inv := 1 / math.Sqrt(s)
		rj[j] = inv
		for i := j + 1; i < n; i++ {
			ri := a[i*n : i*n+j+1]
			x := ri[:j]
			y := rjj[:len(x)]
			if j < 8 {
				t := ri[j]
				for k, v := range x {
					t -= v * y[k]
				}
				ri[j] = t * inv
				continue
			}
			var s0, s1, s2, s3 float64
			k := 0
			for ; k+4 <= len(x); k += 4 {
				s0 += x[k] * y[k]
				s1 += x[k+1] * y[k+1]
				s2 += x[k+2] * y[k+2]
				s3 += x[k+3] * y[k+3]
			}
			for ; k < len(x); k++ {
				s0 += x[k] * y[k]
			}
			ri[j] = (ri[j] - ((s0 + s1) + (s2 + s3))) * inv
		}
	}
	return true
}

// cholSolve solves L·Lᵀ·x = b in place (b becomes x) with the factor from
// cholesky. The back substitution runs by rows of L: once x_i is known it
// is removed from every earlier equation, b_k −= L_ik·x_i.
func cholSolve(l []float64, n int, b []float64) {
	l, b = l[:n*n], b[:n]
	for i := range n {
		ri := l[i*n : i*n+i+1]
		s := b[i]
		for k, v := range ri[:i] {
			s -= v * b[k]
		}
		b[i] = s * ri[i]
	}
	for i := n - 1; i >= 0; i-- {
		ri := l[i*n : i*n+i+1]
		xi := b[i] * ri[i]
		b[i] = xi
		bk := b[:i]
		for k, v := range ri[:i] {
			bk[k] -= v * xi
		}
	}
}

// cholSolve2 is cholSolve for two right-hand sides b and c at once (one
// pass over the factor); each comes out exactly as cholSolve gives it.
func cholSolve2(l []float64, n int, b, c []float64) {
	b, c = b[:n], c[:n]
	for i := range n {
		ri := l[i*n : i*n+i+1]
		s, t := b[i], c[i]
		bk, ck := b[:i], c[:i]
		for k, v := range ri[:i] {
			s -= v * bk[k]
			t -= v * ck[k]
		}
		b[i], c[i] = s*ri[i], t*ri[i]
	}
	for i := n - 1; i >= 0; i-- {
		ri := l[i*n : i*n+i+1]
		xi, yi := b[i]*ri[i], c[i]*ri[i]
		b[i], c[i] = xi, yi
		bk, ck := b[:i], c[:i]
		for k, v := range ri[:i] {
			bk[k] -= v * xi
			ck[k] -= v * yi
		}
	}
}

// solveSPD solves h·x = −g for a symmetric matrix h (n×n, row-major, of
// which only the lower triangle j ≤ i is read), writing x into dx. The
// system is scaled to unit diagonal (Jacobi scaling); when the scaled
// matrix is not positive definite a multiple of the identity is added,
// μ = 1e-8, 1e-6, …, 1e8 (Levenberg–Marquardt shift), which keeps dx a
// descent direction of a function whose gradient is g. work must hold n·n
// values and sc n values. It reports false when no shift gives a
// factorisation (h has a non-finite entry), and shifted when the factor
// left in work is of a shifted matrix.
func solveSPD(h []float64, n int, g, dx, work, sc []float64) (ok, shifted bool) {
	h, work, sc = h[:n*n], work[:n*n], sc[:n]
	for i := range n {
		d := h[i*n+i]
		if !(d > 0) || math.IsInf(d, 0) {
			d = math.Abs(d)
			if !(d > 0) || math.IsInf(d, 0) {
				d = 1
			}
		}
		sc[i] = 1 / math.Sqrt(d)
	}
	mu := 0.0
	for range 10 {
		for i := range n {
			hi, wi := h[i*n:][:i+1], work[i*n:][:i+1]
			si := sc[i]
			for j, v := range hi {
				wi[j] = v * si * sc[j]
			}
			wi[i] += mu
		}
		if cholesky(work, n) {
			for i := range n {
				dx[i] = -g[i] * sc[i]
			}
			cholSolve(work, n, dx)
			for i := range n {
				dx[i] *= sc[i]
				if !finite(dx[i]) {
					return false, mu > 0
				}
			}
			return true, mu > 0
		}
		if mu == 0 {
			mu = 1e-8
		} else {
			mu *= 100
		}
	}
	return false, true
}
