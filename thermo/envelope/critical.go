package envelope

import (
	"context"
	"math"
	"sort"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// CriticalOptions configure CriticalPoints. The zero value selects the
// defaults.
type CriticalOptions struct {
	// MinVolumeRatio and MaxVolumeRatio bound the search in κ = v/b (molar
	// volume over the mixture co-volume b = Σ z_i b_i). Defaults 1.2 and
	// 20, which take in liquid-like critical points (κ near 1.5) as well as
	// the cubic's own critical point at κ ≈ 3.95 (PR) or 3.85 (SRK).
	MinVolumeRatio, MaxVolumeRatio float64
	// GridPoints is the number of κ values (log-spaced) scanned for sign
	// changes of the cubic form; default 30 (steps of about 10 % in κ).
	GridPoints int
}

// CriticalResult is a critical point from the direct method.
type CriticalResult struct {
	T, P float64 // K, Pa
	// V is the molar volume (m³/mol, translated when the mixture
	// translates volumes).
	V float64
	// LambdaMin is the smallest eigenvalue of the scaled Hessian B at the
	// solution and Cubic the cubic form c (both zero at a critical point).
	LambdaMin, Cubic float64
	// Iterations counts the outer (volume) steps and InnerIterations the
	// temperature steps of all inner solves.
	Iterations, InnerIterations int
	// LnPhiEvaluations counts calls of the ln φ kernel.
	LnPhiEvaluations int
}

// CriticalPoints finds the critical points of feed z directly, without
// tracing an envelope, by the criticality conditions of Heidemann &
// Khalil (1980) in the scaled form of Michelsen (1984). At temperature T
// and molar volume v (the pressure follows from the equation of state)
// let
//
//	B_ij = δ_ij + √(z_i z_j)·F_ij,   F_ij = n·(∂²(A^r/RT)/∂n_i∂n_j)_{T,V},
//
// the Helmholtz-energy Hessian of the mixture scaled by √z; it is formed
// from the equation of state's ∂ln φ_i/∂n_j at fixed T, P (DN) as
//
//	F_ij = DN_ij − 1 − v̄_i·v̄_j·(∂P/∂V)_{T,n}/RT,   v̄_i = RT(∂ln φ_i/∂P + 1/P).
//
// Unlike the fixed-T,P form, B stays finite where (∂P/∂V) vanishes. The
// stability limit is λ_min(B) = 0 with unit eigenvector u; the critical
// point adds the vanishing of the cubic form along Δn_i = √z_i·u_i at
// fixed T and total volume,
//
//	c = d/ds [Δnᵀ H(z + sΔn) Δn] at s = 0,   H_ij(w) = δ_ij/w_i + F_ij(w)/W,
//
// with F evaluated at composition w/W and molar volume v/W, W = Σ w_i. The
// derivative is the central difference (q(ε) − q(−ε))/(2ε) of the
// quadratic form q(s) = Δnᵀ H(z + sΔn) Δn with
// ε = 10⁻⁴·min(1, min_i z_i/|Δn_i|), so that w stays positive; its
// truncation error is O(ε²) and its rounding error about 10⁻¹²/ε
// relative. The sign of u is fixed by Σ_i Δn_i b_i > 0 (toward the heavier
// side), so that c is a continuous function of v.
//
// The inner loop solves λ_min(T; v) = 0 for T by Illinois regula falsi
// (Dowell & Jarratt 1971); the outer scans κ = v/b on a log grid for sign
// changes of c(κ) and refines each by regula falsi in ln κ. Each root is a
// critical point, returned in order of decreasing volume (the
// vapour-like first). A feed without a critical point in the scanned
// range gives a nil slice and nil error.
//
// References:
//   - Heidemann, R.A., Khalil, A.M.: The calculation of critical points.
//     AIChE J. 26(5), 769–779 (1980).
//   - Michelsen, M.L.: Calculation of critical points and phase
//     boundaries in the critical region. Fluid Phase Equilib. 16, 57–76
//     (1984).
//   - Dowell, M., Jarratt, P.: A modified regula falsi method for
//     computing the root of an equation. BIT 11, 168–174 (1971).
func (s *Solver) CriticalPoints(ctx context.Context, z []float64, opts CriticalOptions) ([]CriticalResult, error) {
	if err := s.setFeed(z); err != nil {
		return nil, err
	}
	lo, hi, ng := 1.2, 20.0, 30
	if opts.MinVolumeRatio != 0 {
		lo = opts.MinVolumeRatio
	}
	if opts.MaxVolumeRatio != 0 {
		hi = opts.MaxVolumeRatio
	}
	if opts.GridPoints != 0 {
		ng = opts.GridPoints
	}
	if !(lo > 1 && hi > lo && hi <= 100) {
		return nil, &InputError{Field: "CriticalOptions.MaxVolumeRatio", Value: hi, Reason: "need 1 < MinVolumeRatio < MaxVolumeRatio ≤ 100"}
	}
	if ng < 4 || ng > 1000 {
		return nil, &InputError{Field: "CriticalOptions.GridPoints", Value: float64(ng), Reason: "must lie in [4, 1000]"}
	}
	if c, k := s.present(); c == 1 {
		comp := s.mx.Component(k)
		return []CriticalResult{{T: comp.Tc, P: comp.Pc, V: s.mx.Model().CriticalCompressibility()*eos.R*comp.Tc/comp.Pc - s.mx.VolumeShift(k)}}, nil
	}
	s.evals = 0
	bm, cm, tpc := 0.0, 0.0, 0.0
	for i, zi := range s.z {
		bm += zi * s.mx.CoVolume(i)
		cm += zi * s.mx.VolumeShift(i)
		tpc += zi * s.mx.Component(i).Tc
	}
	type sample struct {
		lk, c, T float64
		ok       bool
	}
	grid := make([]sample, ng)
	T := tpc
	var res CriticalResult
	// Scan from the vapour side (large κ) inward, warm-starting T.
	lnHi, lnLo := fastmath.Log(hi), fastmath.Log(lo)
	for j := range ng {
		if err := ctx.Err(); err != nil {
			return nil, &canceledError{stage: "critical point", err: err}
		}
		lk := lnHi - (lnHi-lnLo)*float64(j)/float64(ng-1)
		v := fastmath.Exp(lk) * bm
		Ts, it, ok := s.spinodalT(v, T)
		res.InnerIterations += it
		grid[j] = sample{lk: lk, T: Ts, ok: ok}
		if ok {
			T = Ts
			grid[j].c, grid[j].ok = s.cubicForm(Ts, v)
		}
	}
	var out []CriticalResult
	for j := 0; j+1 < ng; j++ {
		a, b := grid[j], grid[j+1]
		if !a.ok || !b.ok || a.c*b.c > 0 {
			continue
		}
		r := res
		cr, ok := s.refineCritical(ctx, a.lk, a.c, a.T, b.lk, b.c, bm, cm, &r)
		if ok {
			out = append(out, cr)
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].V > out[j].V })
	return out, nil
}

// refineCritical solves c(ln κ) = 0 between a and b by Illinois regula
// falsi, each c from an inner spinodal solve.
func (s *Solver) refineCritical(ctx context.Context, la, ca, Ta, lb, cb, bm, cm float64, r *CriticalResult) (CriticalResult, bool) {
	T := Ta
	last := 0
	var v, c float64
	for it := 1; it <= 100; it++ {
		if ctx.Err() != nil {
			return *r, false
		}
		lk := la - ca*(lb-la)/(cb-ca)
		v = fastmath.Exp(lk) * bm
		Ts, in, ok := s.spinodalT(v, T)
		r.InnerIterations += in
		if !ok {
			return *r, false
		}
		T = Ts
		c, ok = s.cubicForm(T, v)
		if !ok {
			return *r, false
		}
		r.Iterations = it
		if math.Abs(lb-la) < 1e-13 || c == 0 {
			break
		}
		if c*cb < 0 {
			la, ca = lb, cb
			lb, cb = lk, c
			last = 0
		} else {
			lb, cb = lk, c
			if last == 1 {
				ca /= 2
			}
			last = 1
		}
	}
	P, _, _, err := s.mx.PressureTV(s.ws, T, v-cm, s.z)
	if err != nil {
		return *r, false
	}
	lam, _ := s.lambdaMin(T, v)
	r.T, r.P, r.V, r.LambdaMin, r.Cubic = T, P, v-cm, lam, c
	r.LnPhiEvaluations = s.evals
	return *r, true
}

// helmholtzHessian fills s.bq with F_ij (see CriticalPoints) of
// composition x (normalised) at T and untranslated molar volume vu, and
// returns false where the pressure is not positive.
func (s *Solver) helmholtzHessian(T, vu float64, x []float64) bool {
	n := s.n
	sum, cs := 0.0, 0.0
	for i, v := range x {
		sum += v
		cs += v * s.mx.VolumeShift(i)
	}
	cs /= sum
	P, err := s.mx.FugacityTV(s.ws, T, vu-cs, x, eos.WantN|eos.WantP, s.fy)
	if err != nil {
		return false
	}
	_, dPdV, _, err := s.mx.PressureTV(s.ws, T, vu-cs, x)
	if err != nil {
		return false
	}
	s.evals++
	rt := eos.R * T
	for i := range n {
		s.w[i] = rt*(s.fy.DP[i]+1/P) + s.mx.VolumeShift(i)
	}
	for i := range n {
		for j := range n {
			s.bq[i*n+j] = s.fy.DN[i*n+j] - 1 - s.w[i]*s.w[j]*dPdV/rt
		}
	}
	return true
}

// lambdaMin returns the smallest eigenvalue of B at (T, vu) (vu the
// untranslated molar volume), its eigenvector in s.u, and whether the
// state could be evaluated (P > 0).
func (s *Solver) lambdaMin(T, vu float64) (float64, bool) {
	n := s.n
	if !s.helmholtzHessian(T, vu, s.z) {
		return 0, false
	}
	for i := range n {
		si := math.Sqrt(s.z[i])
		for j := range n {
			s.bq[i*n+j] *= si * math.Sqrt(s.z[j])
		}
		s.bq[i*n+i] += 1
	}
	return symEigenMin(s.bq, n, s.bv, s.u), true
}

// spinodalT solves λ_min(B(T, v)) = 0 for T at fixed v, from T0: the
// bracket is found by steps of 5 % (λ_min grows with T at fixed volume
// near the critical point), then narrowed by Illinois regula falsi to
// |ΔT| < 1e-11·T.
func (s *Solver) spinodalT(v, T0 float64) (float64, int, bool) {
	it := 0
	f := func(T float64) float64 {
		it++
		l, ok := s.lambdaMin(T, v)
		if !ok {
			return -1 // non-positive pressure: deep inside the unstable region
		}
		return l
	}
	a, fa := T0, f(T0)
	b, fb := a, fa
	for k := 0; fa*fb > 0; k++ {
		if k > 80 {
			return 0, it, false
		}
		if fa < 0 {
			b = a * 1.05
		} else {
			b = a / 1.05
		}
		if b < minT || b > maxT {
			return 0, it, false
		}
		fb = f(b)
		if fa*fb > 0 {
			a, fa = b, fb
		}
	}
	last := 0
	x := a
	for k := 0; k < 200; k++ {
		x = a - fa*(b-a)/(fb-fa)
		fx := f(x)
		if fx == 0 || math.Abs(b-a) < 1e-11*x {
			break
		}
		if fx*fb < 0 {
			a, fa = b, fb
			b, fb = x, fx
			last = 0
		} else {
			b, fb = x, fx
			if last == 1 {
				fa /= 2
			}
			last = 1
		}
	}
	return x, it, true
}

// cubicForm evaluates c at (T, vu) with the eigenvector of λ_min; see
// CriticalPoints.
func (s *Solver) cubicForm(T, vu float64) (float64, bool) {
	n := s.n
	if _, ok := s.lambdaMin(T, vu); !ok {
		return 0, false
	}
	orient := 0.0
	for i := range n {
		s.dn[i] = math.Sqrt(s.z[i]) * s.u[i]
		orient += s.dn[i] * s.mx.CoVolume(i)
	}
	if orient < 0 {
		for i := range n {
			s.dn[i] = -s.dn[i]
		}
	}
	eps := 1.0
	for i := range n {
		if s.dn[i] != 0 {
			eps = min(eps, s.z[i]/math.Abs(s.dn[i]))
		}
	}
	eps *= 1e-4
	q := func(sg float64) (float64, bool) {
		W := 0.0
		for i := range n {
			s.x[i] = s.z[i] + sg*s.dn[i]
			W += s.x[i]
		}
		if !s.helmholtzHessian(T, vu/W, s.x) {
			return 0, false
		}
		r := 0.0
		for i := range n {
			if s.x[i] > 0 {
				r += s.dn[i] * s.dn[i] / s.x[i]
			}
			row := s.bq[i*n : i*n+n]
			t := 0.0
			for j, d := range row {
				t += d * s.dn[j]
			}
			r += s.dn[i] * t / W
		}
		return r, true
	}
	qp, ok1 := q(eps)
	qm, ok2 := q(-eps)
	if !ok1 || !ok2 {
		return 0, false
	}
	return (qp - qm) / (2 * eps), true
}
