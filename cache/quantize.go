package cache

import "math"

// Quantize rounds x to the nearest point of a logarithmic grid whose
// neighbouring points differ by the factor (1 + relTol)², so that
//
//	|Quantize(x, relTol) − x| ≤ relTol·|x|
//
// up to the rounding of the logarithm, the grid step and the exponential, a
// relative 2⁻⁵²·(2 + |ln|x||), below 2·10⁻¹³ for every normal x. It lets nearly equal requests share a cache key: the grid
// point is k·2·ln(1 + relTol) in ln|x|, with k = round(ln|x| / (2·ln(1 + relTol))),
// and the sign of x is kept.
//
// Quantisation is off unless a caller applies it: relTol ≤ 0 (or NaN) returns
// x unchanged, as do 0, ±Inf, NaN and the rare x whose grid point would
// overflow or fall below the smallest normal number.
//
// The error it introduces is the error of the answer, not only of the key:
// a quantised key maps all inputs within about relTol of each other to one
// entry. To keep the service deterministic (same request, same bytes) the
// solve must then use the quantised inputs, not the caller's exact ones;
// otherwise the stored answer would be that of whichever nearby request came
// first. The answer is then exact for an input perturbed by up to relTol·|x|,
// and its own error is that perturbation times the sensitivity of the result
// (near a phase boundary or a critical point that sensitivity is large and
// the phase count itself may change; choose relTol well below the accuracy
// the caller needs, or leave quantisation off).
func Quantize(x float64, relTol float64) float64 {
	if !(relTol > 0) || x == 0 || math.IsInf(x, 0) || math.IsNaN(x) || math.IsInf(relTol, 0) {
		return x
	}
	step := 2 * math.Log1p(relTol)
	ax := math.Abs(x)
	k := math.Round(math.Log(ax) / step)
	q := math.Exp(k * step)
	if q < 0x1p-1022 || math.IsInf(q, 0) || math.IsNaN(q) {
		return x
	}
	return math.Copysign(q, x)
}
