package flash

import (
	"math"

	"github.com/fugad/fugad/thermo/eos"
)

// splitStatus says how a phase-split solve ended.
type splitStatus int

const (
	splitOK      splitStatus = iota // converged with every β_k in (0, 1)
	splitTrivial                    // the phases merged (K → 1)
	splitSingle                     // converged outside 0 < β < 1: one phase
	splitFail                       // iteration limit
)

// Switching and stopping rules of the split (dimensionless).
const (
	newtonSwitch = 0.1   // residual below which SS hands over to Newton
	ssMax        = 5     // SS steps after which Newton is tried regardless
	demEvery     = 5     // dominant-eigenvalue extrapolation every demEvery SS steps
	betaVanish   = 1e-12 // a phase with β below this is removed
	// lazyDN: a Newton step from residual r is expected to converge when
	// r² < lazyDN·tolerance (quadratic convergence with a modest constant).
	lazyDN = 0.1
)

// residual returns max_{i,k} |ln f_ik − ln f_i0| over the present phases.
func (ws *Workspace) residual() float64 {
	r := 0.0
	for k := 1; k < ws.m; k++ {
		for _, i := range ws.act {
			r = max(r, math.Abs(ws.ph[k].lnf[i]-ws.ph[0].lnf[i]))
		}
	}
	if math.IsNaN(r) {
		return math.Inf(1)
	}
	return r
}

// gibbs returns G/RT per mole of feed, less the constant Σ z_i ln P:
//
//	G/RT = Σ_k Σ_i n_ik (ln x_ik + ln φ_ik).
func (ws *Workspace) gibbs() float64 {
	g := 0.0
	for k := range ws.m {
		p := &ws.ph[k]
		for _, i := range ws.act {
			g += p.nm[i] * p.lnf[i]
		}
	}
	return g
}

// evalAll evaluates every present phase.
func (ws *Workspace) evalAll(want eos.Want) error {
	for k := range ws.m {
		if err := ws.evalPhase(k, want); err != nil {
			return err
		}
	}
	return nil
}

// setTwoFromK sets the two phases from ws.lnK by Rachford–Rice, K_i =
// x_i0/x_i1, starting from β0 = start. It reports the RR status.
func (ws *Workspace) setTwoFromK(start float64) rrStatus {
	for _, i := range ws.act {
		ws.K[i] = math.Exp(ws.lnK[i])
	}
	b, it, st := rachfordRice(ws.z, ws.K, ws.act, start)
	ws.rep.RRIterations += it
	p0, p1 := &ws.ph[0], &ws.ph[1]
	s0, s1 := 0.0, 0.0
	for i := range ws.n {
		p0.x[i], p1.x[i] = 0, 0
	}
	for _, i := range ws.act {
		x := ws.z[i] / (1 + b*(ws.K[i]-1))
		if st != rrRoot || !(x > 0) {
			x = max(0, min(x, 1))
			if st != rrRoot {
				x = ws.z[i]
			}
		}
		p1.x[i] = x
		p0.x[i] = ws.K[i] * x
		s0 += p0.x[i]
		s1 += p1.x[i]
	}
	for _, i := range ws.act {
		p0.x[i] /= s0
		p1.x[i] /= s1
	}
	p0.beta, p1.beta = b, 1-b
	ws.setMoles()
	return st
}

// setMoles sets n_ik = β_k x_ik. When every β_k lies in (0, 1) the mole
// numbers are then scaled per component to the exact material balance
// Σ_k n_ik = z_i (removing what an inexact amount solve or the
// normalisation of x left), and β and x recomputed from them; Newton steps
// keep that balance exactly.
func (ws *Workspace) setMoles() {
	for k := range ws.m {
		p := &ws.ph[k]
		for i := range ws.n {
			p.nm[i] = p.beta * p.x[i]
		}
	}
	if !ws.betaInside() {
		return
	}
	for _, i := range ws.act {
		s := 0.0
		for k := range ws.m {
			s += ws.ph[k].nm[i]
		}
		f := ws.z[i] / s
		for k := range ws.m {
			ws.ph[k].nm[i] *= f
		}
	}
	ws.molesToX()
}

// syncK sets ws.lnK = ln(x_i0/x_i1) from the current two phases (whose
// ln x the last evaluation left).
func (ws *Workspace) syncK() {
	for _, i := range ws.act {
		ws.lnK[i] = ws.ph[0].lnx[i] - ws.ph[1].lnx[i]
		ws.dK1[i], ws.dK2[i] = 0, 0
	}
}

// removePhase drops phase k, keeping the others in order.
func (ws *Workspace) removePhase(k int) {
	for j := k; j < ws.m-1; j++ {
		ws.ph[j], ws.ph[j+1] = ws.ph[j+1], ws.ph[j]
	}
	ws.m--
}

// solveSplit converges the split of the ws.m phases in ws.ph, whose x and
// β are set (and mass-balanced), to fugacity equality. Two phases use
// successive substitution on ln K with Rachford–Rice and dominant-
// eigenvalue extrapolation (Crowe & Nishio 1975); more phases use
// successive substitution with Michelsen's (1994) convex split; both hand
// over to Newton's method on the Gibbs energy (newtonStep). With
// newtonFirst the first step is Newton (a warm start); with fresh the
// phases' ln φ are already evaluated. A phase whose amount vanishes is
// removed.
func (ws *Workspace) solveSplit(newtonFirst, fresh bool) (splitStatus, error) {
	newton := newtonFirst
	want := eos.Want(0)
	if newton {
		want = eos.WantN
	}
	if !fresh {
		if err := ws.evalAll(want); err != nil {
			return splitFail, err
		}
	}
	if ws.m == 2 {
		ws.syncK()
	}
	ss := 0 // SS steps since the last Newton attempt
	resid := ws.residual()
	for it := 0; it < ws.set.maxIt; it++ {
		if err := ws.stop(); err != nil {
			return splitFail, err
		}
		if resid <= ws.set.tol {
			if ws.betaInside() {
				return splitOK, nil
			}
			return splitSingle, nil
		}
		if newton {
			if !ws.ph[0].hasDN || !ws.ph[1].hasDN || (ws.m > 2 && !ws.ph[2].hasDN) {
				if err := ws.evalAll(eos.WantN); err != nil {
					return splitFail, err
				}
			}
			// Near the solution Newton converges quadratically: when the
			// step is expected to reach the tolerance its end point is
			// evaluated without the composition derivatives (they are
			// added at the top of the loop should it fall short).
			next := eos.WantN
			if resid*resid < lazyDN*ws.set.tol {
				next = 0
			}
			ok, err := ws.newtonStep(next)
			if err != nil {
				return splitFail, err
			}
			if ok {
				resid = ws.residual()
				if k := ws.vanished(); k >= 0 {
					ws.removePhase(k)
					if ws.m < 2 {
						return splitSingle, nil
					}
					ws.setMoles()
					if err := ws.evalAll(0); err != nil {
						return splitFail, err
					}
					newton = false
					ss = 0
					if ws.m == 2 {
						ws.syncK()
					}
					resid = ws.residual()
				}
				continue
			}
			newton = false
			ss = 0
			if ws.m == 2 {
				ws.syncK()
			}
		}
		// Successive substitution.
		ws.rep.SSIterations++
		ss++
		want := eos.Want(0)
		if resid < 2*newtonSwitch || ss+1 >= ssMax {
			want = eos.WantN
		}
		if ws.m == 2 {
			st, err := ws.ss2(ss, want)
			if err != nil {
				return splitFail, err
			}
			if st != splitOK {
				return st, nil
			}
		} else {
			if err := ws.ssMulti(want); err != nil {
				return splitFail, err
			}
			if ws.m < 2 {
				return splitSingle, nil
			}
		}
		resid = ws.residual()
		if ws.betaInside() && (resid < newtonSwitch || ss >= ssMax) {
			newton = true
		}
	}
	return splitFail, nil
}

// betaInside reports whether every phase amount lies in (0, 1).
func (ws *Workspace) betaInside() bool {
	for k := range ws.m {
		if !(ws.ph[k].beta > 0 && ws.ph[k].beta < 1) {
			return false
		}
	}
	return true
}

// vanished returns a phase whose amount fell below betaVanish, or −1.
func (ws *Workspace) vanished() int {
	for k := range ws.m {
		if ws.ph[k].beta < betaVanish {
			return k
		}
	}
	return -1
}

// ss2 takes one successive-substitution step of a two-phase split,
//
//	ln K_i ← ln φ_i1 − ln φ_i0,
//
// with the dominant-eigenvalue extrapolation of Crowe & Nishio (1975) as
// Michelsen (1982b) applies it: every demEvery steps, with
// λ = (Δ_k·Δ_{k−1})/(Δ_{k−1}·Δ_{k−1}) in (0, 1),
//
//	ln K ← ln K + Δ_k·λ/(1 − λ).
//
// Negative flash is allowed: β may leave [0, 1] while iterating.
func (ws *Workspace) ss2(ss int, want eos.Want) (splitStatus, error) {
	p0, p1 := &ws.ph[0], &ws.ph[1]
	triv := 0.0
	num, den := 0.0, 0.0
	for _, i := range ws.act {
		nk := p1.f.LnPhi[i] - p0.f.LnPhi[i]
		d := nk - ws.lnK[i]
		ws.dK2[i], ws.dK1[i] = ws.dK1[i], d
		num += d * ws.dK2[i]
		den += ws.dK2[i] * ws.dK2[i]
		ws.lnK[i] = nk
	}
	if ss%demEvery == 0 && den > 0 {
		if lam := num / den; lam > 0 && lam < 0.99 {
			f := lam / (1 - lam)
			for _, i := range ws.act {
				ws.lnK[i] += f * ws.dK1[i]
			}
		}
	}
	for _, i := range ws.act {
		triv += ws.lnK[i] * ws.lnK[i]
	}
	if triv < trivialTol {
		return splitTrivial, nil
	}
	st := ws.setTwoFromK(p0.beta)
	if st != rrRoot {
		return splitSingle, nil
	}
	if err := ws.evalAll(want); err != nil {
		return splitFail, err
	}
	return splitOK, nil
}

// ssMulti takes one successive-substitution step of an m-phase split:
// the amounts come from Michelsen's convex split with the current ln φ,
// the compositions from x_ik = z_i e_ik/E_i; phases whose amount is zero
// are removed.
func (ws *Workspace) ssMulti(want eos.Want) error {
	const st = MaxPhases + 1
	m := ws.m
	for _, i := range ws.act {
		c := math.Inf(1)
		for k := range m {
			c = min(c, ws.ph[k].f.LnPhi[i])
		}
		for k := range m {
			ws.e[i*st+k] = math.Exp(c - ws.ph[k].f.LnPhi[i])
		}
	}
	for k := range m {
		ws.qb[k] = max(ws.ph[k].beta, 1e-6)
	}
	it, _ := multiphaseSplit(ws.z, ws.e, ws.Ei, ws.act, m, ws.qb[:m])
	ws.rep.RRIterations += it
	for k := range m {
		p := &ws.ph[k]
		p.beta = ws.qb[k]
		s := 0.0
		for _, i := range ws.act {
			p.x[i] = ws.z[i] * ws.e[i*st+k] / ws.Ei[i]
			s += p.x[i]
		}
		for _, i := range ws.act {
			p.x[i] /= s
		}
	}
	for k := m - 1; k >= 0; k-- {
		if ws.ph[k].beta <= betaVanish {
			ws.removePhase(k)
		}
	}
	if ws.m < 2 {
		return nil
	}
	ws.setMoles()
	return ws.evalAll(want)
}

// newtonStep takes one step of Newton's method on the Gibbs energy of the
// split (Michelsen 1982b). For each component i the phase r_i holding most
// of it is the dependent one, n_{i,r_i} = z_i − Σ_{k≠r_i} n_ik (so a trace
// amount in some phase is never the difference of two large numbers); the
// unknowns are the other n_ik, with
//
//	g_ik = ln f_ik − ln f_{i,r_i},
//	H_(ik),(jl) = δ_kl A^k_ij − δ_{k,r_j} A^k_ij − δ_{l,r_i} A^l_ij + δ_{r_i,r_j} A^{r_i}_ij,
//	A^k_ij = (δ_ij/x_ik − 1 + DN^k_ij)/β_k,
//
// the analytic Hessian from the ln φ derivatives (DN for one mole of
// phase k). The Newton direction (Levenberg-shifted where H is not
// positive definite) is cut to keep every mole number positive and then
// halved until G decreases (Armijo); near the solution, where the
// predicted decrease is below round-off, the full step is taken. It
// reports false when no step is accepted (the caller falls back to
// successive substitution).
func (ws *Workspace) newtonStep(want eos.Want) (bool, error) {
	m := ws.m
	var dep [64]int8
	depOf := func(i int) int {
		if i < len(dep) {
			return int(dep[i])
		}
		return ws.depPhase(i)
	}
	for _, i := range ws.act {
		if i < len(dep) {
			dep[i] = int8(ws.depPhase(i))
		}
	}
	// Unknown p ↔ (component, phase).
	vi, vk := ws.vi, ws.vk
	dim := 0
	for _, i := range ws.act {
		r := depOf(i)
		for k := range m {
			if k != r {
				vi[dim], vk[dim] = i, k
				dim++
			}
		}
	}
	h, g, dx := ws.H[:dim*dim], ws.g[:dim], ws.dx[:dim]
	if m == 2 {
		ws.hessian2(dim)
	} else {
		ws.hessianM(dim, depOf)
	}
	if !solveSPD(h, dim, g, dx, ws.L[:dim*dim], ws.sc[:dim]) {
		return false, nil
	}
	slope := 0.0
	for p := range dim {
		slope += g[p] * dx[p]
	}
	if !(slope < 0) {
		return false, nil
	}
	// Change of the dependent mole numbers, and the largest step keeping
	// every mole number positive.
	ddep := ws.K
	for _, i := range ws.act {
		ddep[i] = 0
	}
	tmax := 1.0
	for p := range dim {
		i, k := vi[p], vk[p]
		d := dx[p]
		ddep[i] -= d
		if nm := ws.ph[k].nm[i]; d < 0 && nm+d <= 0 {
			tmax = min(tmax, 0.9*nm/-d)
		}
	}
	for _, i := range ws.act {
		if nm := ws.ph[depOf(i)].nm[i]; ddep[i] < 0 && nm+ddep[i] <= 0 {
			tmax = min(tmax, 0.9*nm/-ddep[i])
		}
	}
	g0 := ws.gibbs()
	for k := range m {
		copy(ws.ph[k].nm0, ws.ph[k].nm)
	}
	small := math.Abs(slope) < 1e-13*(1+math.Abs(g0))
	t := tmax
	for ls := 0; ls < 12; ls++ {
		ws.rep.NewtonIterations++
		if err := ws.stop(); err != nil {
			return false, err
		}
		for p := range dim {
			i, k := vi[p], vk[p]
			ws.ph[k].nm[i] = ws.ph[k].nm0[i] + t*dx[p]
		}
		for _, i := range ws.act {
			r := depOf(i)
			ws.ph[r].nm[i] = ws.ph[r].nm0[i] + t*ddep[i]
		}
		ws.molesToX()
		if err := ws.evalAll(want); err != nil {
			return false, err
		}
		g1 := ws.gibbs()
		if small || g1 <= g0+1e-4*t*slope {
			return true, nil
		}
		t *= 0.5
	}
	// Restore the start of the step.
	for k := range m {
		copy(ws.ph[k].nm, ws.ph[k].nm0)
	}
	ws.molesToX()
	return false, ws.evalAll(eos.WantN)
}

// depPhase returns the phase holding most of component i.
func (ws *Workspace) depPhase(i int) int {
	r := 0
	for k := 1; k < ws.m; k++ {
		if ws.ph[k].nm[i] > ws.ph[r].nm[i] {
			r = k
		}
	}
	return r
}

// hessian2 fills ws.H and ws.g for two phases. With σ_i = +1 when the
// unknown of component i is in phase 0 and −1 when it is in phase 1, the
// general expression of newtonStep reduces to
//
//	g_i = σ_i (ln f_i0 − ln f_i1),  H_ij = σ_i σ_j (A⁰_ij + A¹_ij).
func (ws *Workspace) hessian2(dim int) {
	n := ws.n
	p0, p1 := &ws.ph[0], &ws.ph[1]
	ib0, ib1 := 1/p0.beta, 1/p1.beta
	c := -(ib0 + ib1)
	sg := ws.sig[:dim]
	h := ws.H[:dim*dim]
	for a := range dim {
		i := ws.vi[a]
		sg[a] = 1
		if ws.vk[a] == 1 {
			sg[a] = -1
		}
		ws.g[a] = sg[a] * (p0.lnf[i] - p1.lnf[i])
	}
	// Lower triangle only: solveSPD reads no more.
	vi := ws.vi[:dim]
	for a, i := range vi {
		d0, d1 := p0.f.DN[i*n:][:n], p1.f.DN[i*n:][:n]
		row := h[a*dim:][:a+1]
		sa := sg[a]
		for b, j := range vi[:a+1] {
			row[b] = sa * sg[b] * (d0[j]*ib0 + d1[j]*ib1 + c)
		}
		row[a] += ib0/max(p0.x[i], tiny) + ib1/max(p1.x[i], tiny)
	}
}

// hessianM fills ws.H and ws.g for any phase count by the expression of
// newtonStep, from A^k_ij = (δ_ij/x_ik − 1 + DN^k_ij)/β_k stored per phase.
func (ws *Workspace) hessianM(dim int, depOf func(int) int) {
	n, m := ws.n, ws.m
	A := ws.A
	for k := range m {
		p := &ws.ph[k]
		ib := 1 / p.beta
		ak := A[k*n*n : (k+1)*n*n]
		for _, i := range ws.act {
			for _, j := range ws.act {
				ak[i*n+j] = (p.f.DN[i*n+j] - 1) * ib
			}
			ak[i*n+i] += ib / max(p.x[i], tiny)
		}
	}
	h, g := ws.H[:dim*dim], ws.g[:dim]
	for p := range dim {
		i, k := ws.vi[p], ws.vk[p]
		ri := depOf(i)
		g[p] = ws.ph[k].lnf[i] - ws.ph[ri].lnf[i]
		for q := p; q < dim; q++ {
			j, l := ws.vi[q], ws.vk[q]
			rj := depOf(j)
			ij := i*n + j
			v := 0.0
			if k == l {
				v += A[k*n*n+ij]
			}
			if k == rj {
				v -= A[k*n*n+ij]
			}
			if l == ri {
				v -= A[l*n*n+ij]
			}
			if ri == rj {
				v += A[ri*n*n+ij]
			}
			h[p*dim+q] = v
			h[q*dim+p] = v
		}
	}
}

// molesToX sets β_k and x_ik from the mole numbers.
func (ws *Workspace) molesToX() {
	for k := range ws.m {
		p := &ws.ph[k]
		s := 0.0
		for _, i := range ws.act {
			s += p.nm[i]
		}
		p.beta = s
		for _, i := range ws.act {
			p.x[i] = max(p.nm[i], 0) / s
		}
	}
}
