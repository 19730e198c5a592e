package envelope

import "math"

// symEigenMin returns the smallest eigenvalue of the symmetric row-major
// n×n matrix a and writes its unit eigenvector into u. It uses the cyclic
// Jacobi method (Golub & Van Loan, alg. 8.5.3, number from memory), which
// is unconditionally convergent for symmetric matrices; a is overwritten
// and v (n×n) is scratch.
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
