package envelope

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestLUAgainstGonum solves random non-symmetric systems of 1 to 60 rows
// with luFactor and luSolve and compares the solutions with gonum's LU
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
			if !luFactor(f, m, piv) {
				t.Fatalf("m = %d: luFactor refuses a regular matrix", m)
			}
			x := append([]float64(nil), b...)
			luSolve(f, m, piv, x)
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
		if luFactor(a, m, make([]int, m)) {
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
		if !luFactor(w, m, piv) {
			b.Fatal("singular")
		}
	}
}

// BenchmarkLU12 and BenchmarkLU52 time one factorisation of the Jacobian
// of a 10- and a 50-component envelope (n + 2 rows).
func BenchmarkLU12(b *testing.B) { benchmarkLU(b, 12) }
func BenchmarkLU52(b *testing.B) { benchmarkLU(b, 52) }
