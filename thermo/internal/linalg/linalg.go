// Package linalg holds the dense factorisations the solvers of package
// thermo share: Cholesky for the symmetric positive-definite Hessians of
// the flashes (with a Levenberg–Marquardt shift for the indefinite ones)
// and LU with partial pivoting for the Jacobians of the phase-envelope
// tracer. Matrices are row-major slices, factored in place; nothing
// allocates. Golub & Van Loan, Matrix Computations, 4th ed. (2013),
// algorithms 3.4.1 and 4.2.2 (edition and algorithm numbers from memory).
package linalg

import "math"

// Cholesky factors the symmetric positive-definite n×n matrix a (row-major)
// in place into its lower triangle L with a = L·Lᵀ, storing 1/L_jj on the
// diagonal (CholSolve multiplies by it); only the lower triangle of a is
// read, and its strict upper triangle is used as scratch. It reports
// false, with a partly overwritten a, when a pivot is not positive and finite.
//
// The factor is formed by columns, right-looking (Golub & Van Loan,
// Matrix Computations, 4th ed., alg. 4.2.2 as recalled, outer-product
// form): column k
// of L is scaled and copied into row k's upper part, then subtracted from
// the rows below it, two rows at a time sharing each load of the copy.
// Every entry gets the same subtractions in the same order as in the
// inner-product form, L_ij = (a_ij − Σ_{k<j} L_ik L_jk)/L_jj, so the
// factor is the same to the bit; the updates of one column are
// independent of each other, where an inner product waits on its own
// running sum at every term.
func Cholesky(a []float64, n int) bool {
	a = a[:n*n]
	for k := range n {
		rk := a[k*n : k*n+n]
		s := rk[k]
		if !(s > 0) || math.IsInf(s, 0) {
			return false
		}
		inv := 1 / math.Sqrt(s)
		rk[k] = inv
		for i := k + 1; i < n; i++ {
			l := a[i*n+k] * inv
			a[i*n+k] = l
			rk[i] = l
		}
		// c_j = L_jk for j > k; a_ij −= L_ik·L_jk for k < j ≤ i.
		c := rk[k+1:]
		i := k + 1
		for ; i+2 <= n; i += 2 {
			r0, r1 := a[i*n:i*n+n], a[(i+1)*n:(i+1)*n+n]
			l0, l1 := r0[k], r1[k]
			w := i - k // entries j = k+1..i of row i
			u0, u1 := r0[k+1:][:w], r1[k+1:][:w+1]
			for j, v := range c[:w] {
				u0[j] -= l0 * v
				u1[j] -= l1 * v
			}
			u1[w] -= l1 * c[w]
		}
		if i < n {
			ri := a[i*n : i*n+n]
			li := ri[k]
			w := i - k
			ui := ri[k+1:][:w]
			for j, v := range c[:w] {
				ui[j] -= li * v
			}
		}
	}
	return true
}

// CholSolve solves L·Lᵀ·x = b in place (b becomes x) with the factor from
// Cholesky. The back substitution runs by rows of L: once x_i is known it
// is removed from every earlier equation, b_k −= L_ik·x_i.
func CholSolve(l []float64, n int, b []float64) {
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

// CholSolve2 is CholSolve for two right-hand sides b and c at once (one
// pass over the factor); each comes out exactly as CholSolve gives it.
func CholSolve2(l []float64, n int, b, c []float64) {
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

// SolveSPD solves h·x = −g for a symmetric matrix h (n×n, row-major, of
// which only the lower triangle j ≤ i is read), writing x into dx. The
// system is scaled to unit diagonal (Jacobi scaling); when the scaled
// matrix is not positive definite a multiple of the identity is added,
// μ = 1e-8, 1e-6, …, 1e8 (Levenberg–Marquardt shift), which keeps dx a
// descent direction of a function whose gradient is g. work must hold n·n
// values and sc n values. It reports false when no shift gives a
// factorisation (h has a non-finite entry), and shifted when the factor
// left in work is of a shifted matrix.
func SolveSPD(h []float64, n int, g, dx, work, sc []float64) (ok, shifted bool) {
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
		if Cholesky(work, n) {
			for i := range n {
				dx[i] = -g[i] * sc[i]
			}
			CholSolve(work, n, dx)
			for i := range n {
				dx[i] *= sc[i]
				if math.IsNaN(dx[i]) || math.IsInf(dx[i], 0) {
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

// LUFactor factors the row-major m×m matrix a in place into L·U with
// partial pivoting (Golub & Van Loan, Matrix Computations, alg. 3.4.1 as
// recalled).
// It reports false when a pivot is zero or not finite.
func LUFactor(a []float64, m int, piv []int) bool {
	a = a[:m*m]
	for k := range m {
		p, best := k, math.Abs(a[k*m+k])
		for i := k + 1; i < m; i++ {
			if v := math.Abs(a[i*m+k]); v > best {
				p, best = i, v
			}
		}
		if !(best > 0) || math.IsInf(best, 0) {
			return false
		}
		piv[k] = p
		rk := a[k*m : k*m+m]
		if p != k {
			rp := a[p*m : p*m+m][:len(rk)]
			for j, v := range rk {
				rk[j], rp[j] = rp[j], v
			}
		}
		inv := 1 / rk[k]
		uk := rk[k+1:]
		// Rows are updated two at a time, sharing each load of row k;
		// every element gets the same single update as one row at a time.
		i := k + 1
		for ; i+2 <= m; i += 2 {
			r0, r1 := a[i*m:i*m+m], a[(i+1)*m:(i+1)*m+m]
			l0, l1 := r0[k]*inv, r1[k]*inv
			r0[k], r1[k] = l0, l1
			u0, u1 := r0[k+1:][:len(uk)], r1[k+1:][:len(uk)]
			for j, v := range uk {
				u0[j] -= l0 * v
				u1[j] -= l1 * v
			}
		}
		if i < m {
			ri := a[i*m : i*m+m]
			l := ri[k] * inv
			ri[k] = l
			ui := ri[k+1:][:len(uk)]
			for j, v := range uk {
				ui[j] -= l * v
			}
		}
	}
	return true
}

// LUSolve solves (L·U)x = b for the factors of LUFactor, overwriting b.
func LUSolve(a []float64, m int, piv []int, b []float64) {
	a, b = a[:m*m], b[:m]
	for k := range m {
		if p := piv[k]; p != k {
			b[k], b[p] = b[p], b[k]
		}
	}
	for i := range m {
		s := b[i]
		for j, v := range a[i*m : i*m+i] {
			s -= v * b[j]
		}
		b[i] = s
	}
	for i := m - 1; i >= 0; i-- {
		row := a[i*m : i*m+m]
		s := b[i]
		bi := b[i+1:]
		for j, v := range row[i+1:][:len(bi)] {
			s -= v * bi[j]
		}
		b[i] = s / row[i]
	}
}
