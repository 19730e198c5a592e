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
	u, w := d1+d2, d1*d2
	c2 := -(1 + (1-u)*B)
	c1 := A + w*B*B - u*B - u*B*B
	c0 := -(A*B + w*B*B + w*B*B*B)
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
	for range 3 {
		f := ((z+c2)*z+c1)*z + c0
		df := (3*z+2*c2)*z + c1
		if df == 0 {
			break
		}
		dz := f / df
		z -= dz
		if math.Abs(dz) <= 1e-15*math.Abs(z) {
			break
		}
	}
	return z
}
