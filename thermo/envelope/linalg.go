package envelope

import "math"

// luFactor factors the row-major m×m matrix a in place into L·U with
// partial pivoting (Golub & Van Loan, Matrix Computations, alg. 3.4.1).
// It reports false when a pivot is zero or not finite.
func luFactor(a []float64, m int, piv []int) bool {
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

// luSolve solves (L·U)x = b for the factors of luFactor, overwriting b.
func luSolve(a []float64, m int, piv []int, b []float64) {
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

// symEigenMin returns the smallest eigenvalue of the symmetric row-major
// n×n matrix a and writes its unit eigenvector into u. It uses the cyclic
// Jacobi method (Golub & Van Loan, alg. 8.5.3), which is unconditionally
// convergent for symmetric matrices; a is overwritten and v (n×n) is
// scratch.
func symEigenMin(a []float64, n int, v, u []float64) float64 {
	for i := range n {
		for j := range n {
			v[i*n+j] = 0
		}
		v[i*n+i] = 1
	}
	for sweep := 0; sweep < 60; sweep++ {
		off, diag := 0.0, 0.0
		for i := range n {
			diag += a[i*n+i] * a[i*n+i]
			for j := i + 1; j < n; j++ {
				off += a[i*n+j] * a[i*n+j]
			}
		}
		if off <= 1e-30*diag || off == 0 {
			break
		}
		for p := range n {
			for q := p + 1; q < n; q++ {
				apq := a[p*n+q]
				if apq == 0 {
					continue
				}
				theta := (a[q*n+q] - a[p*n+p]) / (2 * apq)
				t := 1 / (math.Abs(theta) + math.Sqrt(theta*theta+1))
				if theta < 0 {
					t = -t
				}
				c := 1 / math.Sqrt(t*t+1)
				s := t * c
				for k := range n {
					akp, akq := a[k*n+p], a[k*n+q]
					a[k*n+p] = c*akp - s*akq
					a[k*n+q] = s*akp + c*akq
				}
				for k := range n {
					apk, aqk := a[p*n+k], a[q*n+k]
					a[p*n+k] = c*apk - s*aqk
					a[q*n+k] = s*apk + c*aqk
				}
				for k := range n {
					vkp, vkq := v[k*n+p], v[k*n+q]
					v[k*n+p] = c*vkp - s*vkq
					v[k*n+q] = s*vkp + c*vkq
				}
			}
		}
	}
	imin := 0
	for i := 1; i < n; i++ {
		if a[i*n+i] < a[imin*n+imin] {
			imin = i
		}
	}
	for k := range n {
		u[k] = v[k*n+imin]
	}
	return a[imin*n+imin]
}
