package flash

import (
	"math"

	"github.com/fugad/fugad/thermo/internal/fastmath"
	"github.com/fugad/fugad/thermo/internal/linalg"
)

// rrStatus says what the Rachford–Rice solve found.
type rrStatus int

const (
	rrRoot   rrStatus = iota // a root inside the window
	rrAllVap                 // every K_i ≥ 1: no root, the feed is vapour-like
	rrAllLiq                 // every K_i ≤ 1: no root, the feed is liquid-like
)

// rachfordRice solves the two-phase Rachford–Rice equation
//
//	F(β) = Σ_i z_i (K_i − 1)/(1 + β(K_i − 1)) = 0
//
// for the amount β of the phase with compositions y_i = K_i x_i. F is
// monotone decreasing between its poles; the root is searched in the
// window of Leibovici & Neoschil (1992),
//
//	max_{K_i>1} (K_i z_i − 1)/(K_i − 1) ≤ β ≤ min_{K_i<1} (1 − z_i)/(1 − K_i),
//
// which lies inside the poles, contains the root and may extend beyond
// [0, 1] (negative flash: Whitson & Michelsen 1989). Newton steps that
// leave the current bracket are replaced by bisection. start is the first
// iterate (clamped to the window). It returns β, the iteration count and
// the status; with no root (all K on one side of 1) β is 1 or 0.
//
// References:
//   - Rachford, H.H., Rice, J.D.: Procedure for use of electronic digital
//     computers in calculating flash vaporization hydrocarbon equilibrium.
//     J. Petrol. Technol. 4(10), 19 (1952).
//   - Leibovici, C.F., Neoschil, J.: A new look at the Rachford–Rice
//     equation. Fluid Phase Equilib. 74, 303–308 (1992).
//   - Whitson, C.H., Michelsen, M.L.: The negative flash. Fluid Phase
//     Equilib. 53, 51–71 (1989).
func rachfordRice(z, K []float64, act []int, start float64) (float64, int, rrStatus) {
	lo, hi := math.Inf(-1), math.Inf(1)
	kmax, kmin := 0.0, math.Inf(1)
	for _, i := range act {
		k := K[i]
		kmax = max(kmax, k)
		kmin = min(kmin, k)
		switch {
		case k > 1:
			lo = max(lo, (k*z[i]-1)/(k-1))
		case k < 1:
			hi = min(hi, (1-z[i])/(1-k))
		}
	}
	if kmin >= 1 {
		return 1, 0, rrAllVap
	}
	if kmax <= 1 {
		return 0, 0, rrAllLiq
	}
	b := start
	if !(b > lo && b < hi) {
		b = 0.5 * (lo + hi)
	}
	it := 0
	for it < 100 {
		it++
		f, df := 0.0, 0.0
		for _, i := range act {
			km := K[i] - 1
			r := km / (1 + b*km)
			f += z[i] * r
			df -= z[i] * r * r
		}
		if f == 0 {
			break
		}
		if f > 0 {
			lo = b
		} else {
			hi = b
		}
		nb := b - f/df
		// Converged before the bracket test: at the root the Newton step
		// is of round-off size and may land on the bracket end just set
		// (b itself), which must not be taken for a step out of it.
		if math.Abs(nb-b) <= 1e-15*(1+math.Abs(b)) {
			if nb > lo && nb < hi {
				b = nb
			}
			break
		}
		if !(nb > lo && nb < hi) {
			nb = 0.5 * (lo + hi)
		}
		b = nb
	}
	return b, it, rrRoot
}

// multiphaseSplit finds the phase amounts β_k ≥ 0 of m phases with fixed
// fugacity coefficients by Michelsen's (1994) convex minimisation
//
//	Q(β) = Σ_k β_k − Σ_i z_i ln E_i,  E_i = Σ_k β_k e_ik,  e_ik = 1/φ_ik,
//
// whose minimum satisfies the material balance with x_ik = z_i e_ik/E_i
// and Σ_i x_ik = 1 for every phase present; a phase whose bound β_k = 0 is
// active is absent. Newton steps on the free β with a step cut at the
// bounds and halving on Q. e holds e_ik scaled per component (any positive
// factor per i leaves the minimiser unchanged) as e[i*(MaxPhases+1)+k];
// beta holds the start and receives the solution. It returns the
// iteration count and whether the solve converged.
//
// Reference: Michelsen, M.L.: Calculation of multiphase equilibrium.
// Comput. Chem. Eng. 18(7), 545–550 (1994).
func multiphaseSplit(z, e, Ei []float64, act []int, m int, beta []float64) (int, bool) {
	const st = MaxPhases + 1
	var g, dx [MaxPhases + 1]float64
	var h, l [(MaxPhases + 1) * (MaxPhases + 1)]float64
	var free [MaxPhases + 1]int
	q := func(b []float64) float64 {
		s := 0.0
		for k := range m {
			s += b[k]
		}
		for _, i := range act {
			E := 0.0
			for k := range m {
				E += b[k] * e[i*st+k]
			}
			s -= z[i] * fastmath.Log(E)
		}
		return s
	}
	q0 := q(beta)
	for it := 1; it <= 100; it++ {
		for k := range m {
			g[k] = 1
			for j := range m {
				h[k*st+j] = 0
			}
		}
		for _, i := range act {
			E := 0.0
			for k := range m {
				E += beta[k] * e[i*st+k]
			}
			Ei[i] = E
			zi := z[i] / (E * E)
			for k := range m {
				eik := e[i*st+k]
				g[k] -= z[i] * eik / E
				for j := k; j < m; j++ {
					h[k*st+j] += zi * eik * e[i*st+j]
				}
			}
		}
		nf := 0
		gmax := 0.0
		for k := range m {
			if beta[k] > 0 || g[k] < 0 {
				free[nf] = k
				nf++
				gmax = max(gmax, math.Abs(g[k]))
			}
		}
		if gmax < 1e-13 {
			return it, true
		}
		for a := range nf {
			for b := range nf {
				ka, kb := free[a], free[b]
				if ka > kb {
					ka, kb = kb, ka
				}
				l[a*nf+b] = h[ka*st+kb]
			}
			l[a*nf+a] *= 1 + 1e-12
			dx[a] = -g[free[a]]
		}
		if !linalg.Cholesky(l[:nf*nf], nf) {
			return it, false
		}
		linalg.CholSolve(l[:nf*nf], nf, dx[:nf])
		t := 1.0
		for a := range nf {
			k := free[a]
			if dx[a] < 0 && beta[k]+dx[a] < 0 {
				t = min(t, -beta[k]/dx[a])
			}
		}
		var nb [MaxPhases + 1]float64
		for ls := 0; ; ls++ {
			copy(nb[:m], beta[:m])
			for a := range nf {
				k := free[a]
				nb[k] = beta[k] + t*dx[a]
				if nb[k] < 1e-300 || (t < 1 && math.Abs(nb[k]) <= 1e-14*math.Abs(beta[k])) {
					nb[k] = 0
				}
			}
			pos := false
			for k := range m {
				pos = pos || nb[k] > 0
			}
			if pos {
				if q1 := q(nb[:m]); q1 <= q0+1e-14*math.Abs(q0) || ls >= 30 {
					q0 = q1
					break
				}
			}
			t *= 0.5
		}
		copy(beta[:m], nb[:m])
	}
	return 100, false
}
