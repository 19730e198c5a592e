package fastmath

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestLogAgainstMath compares Log with math.Log (the reference) over
// random arguments spanning the normal range, arguments near 1 (where
// ln x is small), powers of two and the table points, and every special
// value.
func TestLogAgainstMath(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	check := func(x float64) {
		got, want := Log(x), math.Log(x)
		if math.IsNaN(want) || math.IsInf(want, 0) {
			if !(got == want || math.IsNaN(got) && math.IsNaN(want)) {
				t.Fatalf("Log(%g) = %g, math.Log %g", x, got, want)
			}
			return
		}
		if d := math.Abs(got - want); d > 5e-16*math.Max(1, math.Abs(want)) {
			t.Fatalf("Log(%.17g) = %.17g, math.Log %.17g (diff %g)", x, got, want, d)
		}
	}
	for range 2_000_000 {
		check(math.Exp(rng.Float64()*1400 - 700))
		check(1 + (rng.Float64()-0.5)*1e-3)
		check(math.Float64frombits(rng.Uint64() &^ (1 << 63)))
	}
	for e := -1022; e <= 1023; e++ {
		check(math.Ldexp(1, e))
		check(math.Ldexp(1.5, e))
	}
	for j := range 1 << logBits {
		c := 1 + float64(j)/(1<<logBits)
		check(c)
		check(math.Nextafter(c, 0))
		check(math.Nextafter(c, 2))
	}
	for _, x := range []float64{0, math.Copysign(0, -1), -1, -math.SmallestNonzeroFloat64, math.SmallestNonzeroFloat64, 1e-310, math.MaxFloat64, math.Inf(1), math.Inf(-1), math.NaN(), 1} {
		check(x)
	}
}

// TestExpAgainstMath compares Exp with math.Exp over (−700, 700), near 0,
// at the reduction boundaries, and at the special values.
func TestExpAgainstMath(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	check := func(x float64) {
		got, want := Exp(x), math.Exp(x)
		if math.IsNaN(want) || math.IsInf(want, 0) || want == 0 {
			if !(got == want || math.IsNaN(got) && math.IsNaN(want)) {
				t.Fatalf("Exp(%g) = %g, math.Exp %g", x, got, want)
			}
			return
		}
		if d := math.Abs(got-want) / want; d > 5e-16 {
			t.Fatalf("Exp(%.17g) = %.17g, math.Exp %.17g (relative diff %g)", x, got, want, d)
		}
	}
	for range 2_000_000 {
		check(rng.Float64()*1400 - 700)
		check((rng.Float64() - 0.5) * 1e-3)
		check((rng.Float64() - 0.5) * 40)
	}
	for k := -64 * 1000; k <= 64*1000; k += 7 {
		x := float64(k) * ln2 / 64
		check(x)
		check(math.Nextafter(x, math.Inf(1)))
		check(math.Nextafter(x, math.Inf(-1)))
	}
	for _, x := range []float64{0, math.Copysign(0, -1), -700, 700, -745, 709.7, 710, -1e300, 1e300, math.Inf(1), math.Inf(-1), math.NaN()} {
		check(x)
	}
}

var sink float64

func BenchmarkLog(b *testing.B) {
	x := 0.0123
	for b.Loop() {
		sink += Log(x)
		x += 1e-9
	}
}

func BenchmarkMathLog(b *testing.B) {
	x := 0.0123
	for b.Loop() {
		sink += math.Log(x)
		x += 1e-9
	}
}

func BenchmarkExp(b *testing.B) {
	x := -3.21
	for b.Loop() {
		sink += Exp(x)
		x += 1e-9
	}
}

func BenchmarkMathExp(b *testing.B) {
	x := -3.21
	for b.Loop() {
		sink += math.Exp(x)
		x += 1e-9
	}
}
