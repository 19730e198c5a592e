package cache

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestQuantizeBound(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, tol := range []float64{1e-12, 1e-9, 1e-6, 1e-3, 0.1} {
		for i := 0; i < 20000; i++ {
			x := math.Exp(rng.Float64()*1400 - 700) // ~1e-304 … 1e304
			if i%2 == 1 {
				x = -x
			}
			q := Quantize(x, tol)
			if math.Signbit(q) != math.Signbit(x) {
				t.Fatalf("Quantize(%g, %g) = %g changed sign", x, tol, q)
			}
			// The bound stated on Quantize, with its rounding allowance.
			slack := 0x1p-52 * (2 + math.Abs(math.Log(math.Abs(x))))
			if rel := math.Abs(q-x) / math.Abs(x); rel > tol*(1+1e-9)+slack {
				t.Fatalf("Quantize(%g, %g) = %g: relative error %g over the bound", x, tol, q, rel)
			}
			if q2 := Quantize(q, tol); q2 != q {
				t.Fatalf("Quantize not idempotent at %g (tol %g): %g then %g", x, tol, q, q2)
			}
		}
	}
}

func TestQuantizeSharesNearbyValues(t *testing.T) {
	// Temperatures 1 mK apart at 300 K (relative 3.3e-6) share a grid point
	// at a tolerance of 1e-4 far more often than not; exact keys never do.
	same := 0
	for i := 0; i < 1000; i++ {
		x := 300 + float64(i)*0.01
		if Quantize(x, 1e-4) == Quantize(x+0.001, 1e-4) {
			same++
		}
	}
	if same < 900 {
		t.Errorf("only %d of 1000 nearby pairs shared a grid point", same)
	}
	if Quantize(1, 0.1) == Quantize(1.3, 0.1) {
		t.Error("values 30% apart shared a grid point at 10% tolerance")
	}
}

func TestQuantizeOffAndSpecials(t *testing.T) {
	x := 123.456
	for _, tol := range []float64{0, -1, math.NaN(), math.Inf(1)} {
		if Quantize(x, tol) != x {
			t.Errorf("Quantize(x, %g) changed x", tol)
		}
	}
	for _, v := range []float64{0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.MaxFloat64, 5e-324} {
		if q := Quantize(v, 1e-3); q != v && !(math.Abs(q-v) <= 1e-3*math.Abs(v)) {
			t.Errorf("Quantize(%g) = %g", v, q)
		}
	}
	if !math.IsNaN(Quantize(math.NaN(), 1e-3)) {
		t.Error("NaN not passed through")
	}
	if math.IsInf(Quantize(math.MaxFloat64, 0.5), 0) {
		t.Error("overflowed to Inf")
	}
}
