package linalg

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// randomSPD returns a random symmetric positive-definite n×n matrix
// (row-major), M·Mᵀ + n·I with M uniform in [−1, 1), and its condition
// spread by scaling row and column i by 10^(3i/n) like the Hessians of a
// flash, whose diagonal spans the mole fractions' orders of magnitude.
func randomSPD(rng *rand.Rand, n int) []float64 {
	m := make([]float64, n*n)
	for i := range m {
		m[i] = 2*rng.Float64() - 1
	}
	a := make([]float64, n*n)
	for i := range n {
		for j := range n {
			s := 0.0
			for k := range n {
				s += m[i*n+k] * m[j*n+k]
			}
			if i == j {
				s += float64(n)
			}
			a[i*n+j] = s * math.Pow(10, 3*float64(i+j)/float64(n))
		}
	}
	return a
}

// TestCholeskyAgainstGonum factors random symmetric positive-definite
// matrices of 1 to 60 rows with Cholesky and solves with CholSolve and
// CholSolve2, and compares the solutions with gonum's Cholesky
// factorisation (mat.Cholesky, a reference implementation of the same
// method) to a relative 1e-10 in the norm of x. Matrices that are not
// positive definite are refused.
func TestCholeskyAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	for n := 1; n <= 60; n++ {
		for range 5 {
			a := randomSPD(rng, n)
			b, c := make([]float64, n), make([]float64, n)
			for i := range b {
				b[i], c[i] = 2*rng.Float64()-1, 2*rng.Float64()-1
			}
			var ch mat.Cholesky
			if !ch.Factorize(mat.NewSymDense(n, append([]float64(nil), a...))) {
				t.Fatalf("n = %d: gonum refuses the matrix", n)
			}
			want, wantC := mat.NewVecDense(n, nil), mat.NewVecDense(n, nil)
			if err := ch.SolveVecTo(want, mat.NewVecDense(n, append([]float64(nil), b...))); err != nil {
				t.Fatal(err)
			}
			if err := ch.SolveVecTo(wantC, mat.NewVecDense(n, append([]float64(nil), c...))); err != nil {
				t.Fatal(err)
			}
			l := append([]float64(nil), a...)
			if !Cholesky(l, n) {
				t.Fatalf("n = %d: Cholesky refuses a positive-definite matrix", n)
			}
			x := append([]float64(nil), b...)
			CholSolve(l, n, x)
			x2, y2 := append([]float64(nil), b...), append([]float64(nil), c...)
			CholSolve2(l, n, x2, y2)
			for _, cmp := range []struct {
				name string
				got  []float64
				want *mat.VecDense
			}{{"CholSolve", x, want}, {"CholSolve2 b", x2, want}, {"CholSolve2 c", y2, wantC}} {
				num, den := 0.0, 0.0
				for i, v := range cmp.got {
					d := v - cmp.want.AtVec(i)
					num += d * d
					den += cmp.want.AtVec(i) * cmp.want.AtVec(i)
				}
				if rel := math.Sqrt(num / den); !(rel < 1e-10) {
					t.Fatalf("n = %d, %s: relative error %g against gonum", n, cmp.name, rel)
				}
			}
		}
	}
	// Not positive definite: the identity with one negative pivot.
	for n := 1; n <= 12; n++ {
		a := make([]float64, n*n)
		for i := range n {
			a[i*n+i] = 1
		}
		a[(n-1)*n+n-1] = -1
		if Cholesky(a, n) {
			t.Fatalf("n = %d: an indefinite matrix was factored", n)
		}
	}
}

func benchmarkCholesky(b *testing.B, n int) {
	rng := rand.New(rand.NewPCG(3, uint64(n)))
	a := randomSPD(rng, n)
	l := make([]float64, n*n)
	x := make([]float64, n)
	for b.Loop() {
		copy(l, a)
		if !Cholesky(l, n) {
			b.Fatal("not positive definite")
		}
		for i := range x {
			x[i] = 1
		}
		CholSolve(l, n, x)
	}
}

// BenchmarkCholesky10 and BenchmarkCholesky50 time one factorisation and
// one solve, as a Newton step of a 10- and a 50-component split does.
func BenchmarkCholesky10(b *testing.B) { benchmarkCholesky(b, 10) }
func BenchmarkCholesky50(b *testing.B) { benchmarkCholesky(b, 50) }

// TestLUAgainstGonum solves random non-symmetric systems of 1 to 60 rows
// with LUFactor and LUSolve and compares the solutions with gonum's LU
// factorisation with partial pivoting (mat.LU, a reference implementation
// of the same method) to a relative 1e-10 in the norm of x. The matrices
// need pivoting (a small diagonal) and span six orders of magnitude by
// row, as the Jacobians of the envelope do (ln K rows beside the balance
// and specification rows). A singular matrix is refused.
func TestLUAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 9))
	for m := 1; m <= 60; m++ {
		for range 5 {
			a := make([]float64, m*m)
			for i := range m {
				scale := math.Pow(10, 6*float64(i)/float64(m)-3)
				for j := range m {
					a[i*m+j] = (2*rng.Float64() - 1) * scale
				}
				a[i*m+i] *= 1e-3
			}
			b := make([]float64, m)
			for i := range b {
				b[i] = 2*rng.Float64() - 1
			}
			var lu mat.LU
			lu.Factorize(mat.NewDense(m, m, append([]float64(nil), a...)))
			want := mat.NewVecDense(m, nil)
			if err := lu.SolveVecTo(want, false, mat.NewVecDense(m, append([]float64(nil), b...))); err != nil {
				t.Fatalf("m = %d: gonum: %v", m, err)
			}
			f := append([]float64(nil), a...)
			piv := make([]int, m)
			if !LUFactor(f, m, piv) {
				t.Fatalf("m = %d: LUFactor refuses a regular matrix", m)
			}
			x := append([]float64(nil), b...)
			LUSolve(f, m, piv, x)
			num, den := 0.0, 0.0
			for i, v := range x {
				d := v - want.AtVec(i)
				num += d * d
				den += want.AtVec(i) * want.AtVec(i)
			}
			if rel := math.Sqrt(num / den); !(rel < 1e-10) {
				t.Fatalf("m = %d: relative error %g against gonum", m, rel)
			}
		}
	}
	for m := 2; m <= 12; m++ {
		a := make([]float64, m*m)
		for i := range m - 1 {
			a[i*m+i] = 1
		}
		if LUFactor(a, m, make([]int, m)) {
			t.Fatalf("m = %d: a singular matrix was factored", m)
		}
	}
}

func benchmarkLU(b *testing.B, m int) {
	rng := rand.New(rand.NewPCG(1, uint64(m)))
	a := make([]float64, m*m)
	for i := range a {
		a[i] = rng.Float64()
	}
	for i := range m {
		a[i*m+i] += float64(m)
	}
	w, piv := make([]float64, m*m), make([]int, m)
	for b.Loop() {
		copy(w, a)
		if !LUFactor(w, m, piv) {
			b.Fatal("singular")
		}
	}
}

// BenchmarkLU12 and BenchmarkLU52 time one factorisation of the Jacobian
// of a 10- and a 50-component envelope (n + 2 rows).
func BenchmarkLU12(b *testing.B) { benchmarkLU(b, 12) }
func BenchmarkLU52(b *testing.B) { benchmarkLU(b, 52) }
