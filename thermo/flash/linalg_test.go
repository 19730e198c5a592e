package flash

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
// matrices of 1 to 60 rows with cholesky and solves with cholSolve and
// cholSolve2, and compares the solutions with gonum's Cholesky
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
			if !cholesky(l, n) {
				t.Fatalf("n = %d: cholesky refuses a positive-definite matrix", n)
			}
			x := append([]float64(nil), b...)
			cholSolve(l, n, x)
			x2, y2 := append([]float64(nil), b...), append([]float64(nil), c...)
			cholSolve2(l, n, x2, y2)
			for _, cmp := range []struct {
				name string
				got  []float64
				want *mat.VecDense
			}{{"cholSolve", x, want}, {"cholSolve2 b", x2, want}, {"cholSolve2 c", y2, wantC}} {
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
		if cholesky(a, n) {
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
		if !cholesky(l, n) {
			b.Fatal("not positive definite")
		}
		for i := range x {
			x[i] = 1
		}
		cholSolve(l, n, x)
	}
}

// BenchmarkCholesky10 and BenchmarkCholesky50 time one factorisation and
// one solve, as a Newton step of a 10- and a 50-component split does.
func BenchmarkCholesky10(b *testing.B) { benchmarkCholesky(b, 10) }
func BenchmarkCholesky50(b *testing.B) { benchmarkCholesky(b, 50) }
