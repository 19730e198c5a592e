package eos

import "math"

// cubicRoots solves the generalised cubic in Z,
//
//	Z³ − (1 + (1−u)B)Z² + (A + wB² − uB − uB²)Z − (AB + wB² + wB³) = 0,
//
// u = δ1 + δ2, w = δ1·δ2, for its real roots above B. The roots come from
// the trigonometric or Cardano solution of the depressed cubic and are
// polished by Newton steps on the original polynomial, which removes the
// cancellation error of the closed forms. It returns 1 or 3 and writes the
// roots in ascending order; with one root, only roots[0] is set.
func cubicRoots(A, B, d1, d2 float64, roots *[3]float64) int {
	c2, c1, c0 := cubicCoefficients(A, B, d1, d2)
	p := c1 - c2*c2/3
	q := 2*c2*c2*c2/27 - c2*c1/3 + c0
	shift := -c2 / 3
	disc := q*q/4 + p*p*p/27
	var z [3]float64
	nr := 0
	if disc > 0 {
		// Cardano with one cube root: u³ = −q/2 ± √disc, the sign taken
		// from −q/2 so nothing cancels, and the second cube root −p/(3u)
		// from u·v = −p/3.
		sd := math.Sqrt(disc)
		h := -q / 2
		u := math.Cbrt(h + math.Copysign(sd, h))
		z[0] = u - p/(3*u) + shift
		nr = 1
	} else {
		r := 0.0
		if p < 0 {
			r = math.Sqrt(-p / 3)
		}
		if r == 0 {
			z[0], z[1], z[2] = shift, shift, shift
		} else {
			c := -q / (2 * r * r * r)
			c = math.Max(-1, math.Min(1, c))
			th := math.Acos(c) / 3
			z[0] = 2*r*math.Cos(th) + shift
			z[1] = 2*r*math.Cos(th-2*math.Pi/3) + shift
			z[2] = 2*r*math.Cos(th+2*math.Pi/3) + shift
		}
		nr = 3
	}
	for k := range nr {
		z[k] = polish(z[k], c2, c1, c0)
	}
	return aboveB(&z, nr, B, roots)
}

// cubicCoefficients returns c2, c1, c0 of the cubic of cubicRoots.
func cubicCoefficients(A, B, d1, d2 float64) (c2, c1, c0 float64) {
	u, w := d1+d2, d1*d2
	return -(1 + (1-u)*B), A + w*B*B - u*B - u*B*B, -(A*B + w*B*B + w*B*B*B)
}

// cubicRootsFrom is cubicRoots by another route: Newton's method on the
// cubic from z0 (the root of a nearby state) to one root, then the other
// two, when real, from the quadratic left by deflating it,
//
//	Z³ + c2Z² + c1Z + c0 = (Z − r)(Z² + (c2 + r)Z + c1 + (c2 + r)r),
//
// solved without cancellation and polished on the cubic as cubicRoots
// polishes its roots. It returns 0, leaving roots unset, when Newton's
// method has not converged to round-off within eight steps (a double
// root, a start at an extremum): the caller then takes the closed form.
func cubicRootsFrom(A, B, d1, d2, z0 float64, roots *[3]float64) int {
	c2, c1, c0 := cubicCoefficients(A, B, d1, d2)
	r, ok := newtonCubic(z0, c2, c1, c0, 8)
	if !ok || !(r > 0) {
		return 0
	}
	var z [3]float64
	z[0] = r
	nr := 1
	b1 := c2 + r
	b0 := c1 + b1*r
	if disc := b1*b1 - 4*b0; disc >= 0 {
		q := -0.5 * (b1 + math.Copysign(math.Sqrt(disc), b1))
		if q != 0 {
			z[1], z[2] = polish(q, c2, c1, c0), polish(b0/q, c2, c1, c0)
			nr = 3
		}
	}
	return aboveB(&z, nr, B, roots)
}

// aboveB writes the roots z[:nr] that lie above B into roots, ascending,
// and returns their number as cubicRoots does (1 or 3).
func aboveB(z *[3]float64, nr int, B float64, roots *[3]float64) int {
	// Keep roots above B, ascending.
	m := 0
	for k := range nr {
		if z[k] > B {
			roots[m] = z[k]
			m++
		}
	}
	if m == 0 {
		// Cannot happen for P > 0 (P → +∞ as v → b); guard against round-off
		// by taking the largest root nudged above B.
		zmax := z[0]
		for k := 1; k < nr; k++ {
			zmax = math.Max(zmax, z[k])
		}
		roots[0] = math.Max(zmax, B*(1+1e-12))
		return 1
	}
	if m == 2 {
		// Only round-off puts exactly two roots above B (P(v) → +∞ as v → b
		// and → 0 as v → ∞); keep the largest as the single physical root.
		roots[0] = math.Max(roots[0], roots[1])
		return 1
	}
	if m == 3 {
		sort3(roots)
		if roots[2]-roots[0] <= 1e-14*roots[2] {
			return 1
		}
	}
	return m
}

func sort3(r *[3]float64) {
	if r[0] > r[1] {
		r[0], r[1] = r[1], r[0]
	}
	if r[1] > r[2] {
		r[1], r[2] = r[2], r[1]
	}
	if r[0] > r[1] {
		r[0], r[1] = r[1], r[0]
	}
}

// polish takes up to three Newton steps on Z³ + c2Z² + c1Z + c0.
func polish(z, c2, c1, c0 float64) float64 {
	z, _ = newtonCubic(z, c2, c1, c0, 3)
	return z
}

// newtonCubic takes up to steps Newton steps on Z³ + c2Z² + c1Z + c0 from
// z and reports whether the last one was of round-off size (|ΔZ| ≤
// 1e-15·|Z|); it stops, unconverged, where the derivative vanishes. A
// non-finite z stays non-finite and unconverged.
func newtonCubic(z, c2, c1, c0 float64, steps int) (float64, bool) {
	for range steps {
		f := ((z+c2)*z+c1)*z + c0
		df := (3*z+2*c2)*z + c1
		if df == 0 {
			return z, false
		}
		dz := f / df
		z -= dz
		if math.Abs(dz) <= 1e-15*math.Abs(z) {
			return z, true
		}
	}
	return z, false
}
