// Package fastmath has the natural logarithm and exponential the solvers
// call in their inner loops (ln x_i and exp(ln W_i) of every component at
// every iteration), table-driven after Tang (1989, 1990):
//
//	ln x = e·ln 2 + ln c_j + ln(1 + r),  x = 2^e·m,  r = m/c_j − 1,
//	exp x = 2^k·2^(j/64)·exp(r),         x = (64k + j)·ln 2/64 + r,
//
// with c_j = 1 + j/128 the table point below the mantissa m ∈ [1, 2), so
// |r| < 2⁻⁷ for the logarithm and |r| ≤ ln 2/128 for the exponential, and
// short Taylor polynomials for ln(1 + r) and exp(r). Both agree with the
// math package to a few units in the last place (absolute 5e-16 for ln x
// of order one, relative 5e-16 beyond; relative 5e-16 for exp), checked
// in the tests over the whole range, and cost about half as much. Every
// argument outside the normal range (zero, negative, subnormal, ±Inf,
// NaN, and for Exp |x| > 700) is passed to the math package, so special
// values come out as math.Log and math.Exp give them.
//
// References (volume and page numbers from memory, not checked against
// the journal):
//   - Tang, P.T.P.: Table-driven implementation of the exponential
//     function in IEEE floating-point arithmetic. ACM Trans. Math.
//     Softw. 15(2), 144–157 (1989).
//   - Tang, P.T.P.: Table-driven implementation of the logarithm function
//     in IEEE floating-point arithmetic. ACM Trans. Math. Softw. 16(4),
//     378–400 (1990).
package fastmath

import "math"

const (
	logBits = 7 // table of 128 points c_j = 1 + j/128
	expBits = 6 // table of 64 points 2^(j/64)

	ln2    = 0.693147180559945309417232121458176568
	ln2Hi  = 6.93147180369123816490e-01 // ln 2 with its low 32 bits of mantissa zero
	ln2Lo  = 1.90821492927058770002e-10 // ln 2 − ln2Hi
	invL64 = 64 / ln2

	shifter = 6755399441055744.0 // 1.5·2⁵²
)

var (
	lnC, invC [1 << logBits]float64 // ln c_j, 1/c_j
	pow2      [1 << expBits]float64 // 2^(j/64)
)

func init() {
	for j := range lnC {
		c := 1 + float64(j)/(1<<logBits)
		lnC[j] = math.Log(c)
		invC[j] = 1 / c
	}
	for j := range pow2 {
		pow2[j] = math.Exp2(float64(j) / (1 << expBits))
	}
}

// Log returns the natural logarithm of x.
func Log(x float64) float64 {
	b := math.Float64bits(x)
	// Positive normal numbers only: b − 2⁵² < 0x7fe…0 (unsigned) excludes
	// zero, subnormals, negatives, ±Inf and NaN.
	if b-(1<<52) >= 0x7fe0000000000000 {
		return math.Log(x)
	}
	e := float64(int64(b>>52) - 1023)
	j := (b >> (52 - logBits)) & (1<<logBits - 1)
	m := math.Float64frombits(b&(1<<52-1) | 1023<<52)
	r := m*invC[j] - 1
	// ln(1 + r) to r⁷/7 (the next term is below 2⁻⁵⁹).
	p := r - r*r*(0.5-r*(1.0/3-r*(0.25-r*(0.2-r*(1.0/6-r*(1.0/7))))))
	return e*ln2 + lnC[j] + p
}

// Exp returns e^x.
func Exp(x float64) float64 {
	if !(x > -700 && x < 700) {
		return math.Exp(x)
	}
	// n = x·64/ln 2 rounded to the nearest integer by adding and
	// subtracting 1.5·2⁵² (exact for |n| < 2⁵¹; math.Floor is a call on
	// the baseline amd64 target).
	n := (x*invL64 + shifter) - shifter
	// r = x − n·ln 2/64 in two parts, exact to well below round-off of x.
	r := (x - n*(ln2Hi/64)) - n*(ln2Lo/64)
	k := int64(n)
	j := k & (1<<expBits - 1)
	k >>= expBits // floor division: j ∈ [0, 64)
	// exp(r) − 1 to r⁶/720 (|r| ≤ 0.0055, the next term is below 2⁻⁶⁴).
	q := r * (1 + r*(0.5+r*(1.0/6+r*(1.0/24+r*(1.0/120+r*(1.0/720))))))
	t := pow2[j]
	return math.Float64frombits(math.Float64bits(t+t*q) + uint64(k)<<52)
}
