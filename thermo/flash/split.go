package flash

import (
	"math"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/internal/fastmath"
	"github.com/fugad/fugad/thermo/internal/linalg"
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
	// sameTol: two phases with Σ_i (ln x_i,α − ln x_i,β)² below it are one
	// phase (a trivial solution of the equal-fugacity equations, which any
	// split of identical phases satisfies; Michelsen 1982b). Genuine
	// splits that close lie within about 1e-6 in K of a critical point.
	sameTol = 1e-12
	// lazyDN: a Newton step from residual r is expected to converge when
	// r² < lazyDN·tolerance (quadratic convergence with a modest constant).
	lazyDN = 0.1
	// chordMax and chordGain: a chord step (the factor of an earlier
	// Hessian with the current gradient) is taken when the residual at the
	// factor's point was below chordMax and the last step reduced the
	// residual by at least chordGain.
	chordMax  = 1e-3
	chordGain = 0.1
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
	n := ws.n
	for k := range ws.m {
		p := &ws.ph[k]
		nm, lnf := p.nm[:n], p.lnf[:n]
		for _, i := range ws.act {
			g += nm[i] * lnf[i]
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
		ws.K[i] = fastmath.Exp(ws.lnK[i])
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
	if ws.m == 2 {
		// The same arithmetic with the two phases' slices in locals.
		n := ws.n
		n0, n1, z := ws.ph[0].nm[:n], ws.ph[1].nm[:n], ws.z[:n]
		for _, i := range ws.act {
			s := 0.0
			s += n0[i]
			s += n1[i]
			f := z[i] / s
			n0[i] *= f
			n1[i] *= f
		}
		ws.molesToX()
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
	prevResid := math.Inf(1) // residual before the last Newton step
	ws.facOK = false
	tp := eos.Want(0)
	if ws.m == 2 {
		tp = eos.WantT | eos.WantP
	}
	for it := 0; it < ws.set.maxIt; it++ {
		if err := ws.stop(); err != nil {
			return splitFail, err
		}
		if resid <= ws.set.tol {
			if k := ws.duplicate(); k >= 0 {
				// Converged onto a trivial solution: two phases of one
				// composition. Two phases are one; of three, the
				// smaller of the pair goes and the rest is solved again.
				ws.facOK = false
				if ws.m == 2 {
					return splitSingle, nil
				}
				ws.removePhase(k)
				ws.setMoles()
				if err := ws.evalAll(0); err != nil {
					return splitFail, err
				}
				newton, ss = false, 0
				if ws.m == 2 {
					ws.syncK()
					tp = eos.WantT | eos.WantP
				}
				resid = ws.residual()
				continue
			}
			if ws.betaInside() {
				ws.sensitivities()
				if !ws.sensOK && it == 0 && ws.warmSens && ws.m == 2 {
					// Converged where the estimate was, which brought
					// its sensitivities (copyShift).
					ws.sensOK = true
				}
				return splitOK, nil
			}
			return splitSingle, nil
		}
		if newton {
			// A chord step reuses the factor of an earlier Hessian: near
			// the solution its error contracts by a factor of the order of
			// the residual at that earlier point, so it finishes what a
			// Newton step started without the composition derivatives.
			chord := ws.facOK && ws.facResid < chordMax && resid < chordGain*prevResid
			if !chord && (!ws.ph[0].hasDN || !ws.ph[1].hasDN || (ws.m > 2 && !ws.ph[2].hasDN)) {
				if err := ws.evalAll(eos.WantN); err != nil {
					return splitFail, err
				}
			}
			// Near the solution the end point of the step is evaluated
			// without the composition derivatives (they are added at the
			// top of the loop should a Newton step be needed), and with
			// the T and P derivatives when the step is expected to
			// converge (for the sensitivities of the result).
			next := eos.WantN
			var ok bool
			var err error
			if chord {
				next = 0
				if ws.facResid*resid < lazyDN*ws.set.tol {
					next = tp
				}
				prevResid = resid
				ok, err = ws.chordStep(next)
			} else {
				switch {
				case resid*resid < lazyDN*ws.set.tol:
					next = tp
				case resid < chordMax && ws.m == 2:
					next = 0
				}
				prevResid = resid
				ok, err = ws.newtonStep(next, resid)
			}
			if err != nil {
				return splitFail, err
			}
			if !ok && chord {
				// The line search restored the start with ∂ln φ/∂n: take
				// a Newton step from there.
				ws.facOK = false
				continue
			}
			if ok {
				resid = ws.residual()
				if k := ws.vanished(); k >= 0 {
					ws.facOK = false
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
			ws.facOK = false
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

// duplicate returns the smaller (in amount) of two phases whose
// compositions coincide to sameTol, or −1.
func (ws *Workspace) duplicate() int {
	for k := 0; k < ws.m; k++ {
		for l := k + 1; l < ws.m; l++ {
			if ws.phaseDist(k, l) < sameTol {
				if ws.ph[k].beta < ws.ph[l].beta {
					return k
				}
				return l
			}
		}
	}
	return -1
}

// phaseDist is Σ_i (ln x_ik − ln x_il)² over the present components, the
// squared distance of phases k and l.
func (ws *Workspace) phaseDist(k, l int) float64 {
	a, b := ws.ph[k].lnx, ws.ph[l].lnx
	d := 0.0
	for _, i := range ws.act {
		e := a[i] - b[i]
		d += e * e
	}
	return d
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
			ws.e[i*st+k] = fastmath.Exp(c - ws.ph[k].f.LnPhi[i])
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
func (ws *Workspace) newtonStep(want eos.Want, resid float64) (bool, error) {
	m := ws.m
	for _, i := range ws.act {
		ws.dep[i] = ws.depPhase(i)
	}
	// Unknown p ↔ (component, phase).
	vi, vk := ws.vi, ws.vk
	dim := 0
	for _, i := range ws.act {
		r := ws.dep[i]
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
		ws.hessianM(dim)
	}
	ws.facOK = false
	ok, shifted := linalg.SolveSPD(h, dim, g, dx, ws.L[:dim*dim], ws.sc[:dim])
	if !ok {
		return false, nil
	}
	if m == 2 {
		ws.facOK, ws.facDim, ws.facResid, ws.facShift = true, dim, resid, shifted
	}
	return ws.lineSearch(dim, want)
}

// chordStep takes the step of newtonStep with the Hessian factor kept from
// the last Newton step of a two-phase split (ws.facOK) and the current
// gradient: a chord (simplified Newton) step, whose error contracts by a
// factor of the order of the distance from the factor's point.
func (ws *Workspace) chordStep(want eos.Want) (bool, error) {
	dim := ws.facDim
	p0, p1 := &ws.ph[0], &ws.ph[1]
	g, dx, sc := ws.g[:dim], ws.dx[:dim], ws.sc[:dim]
	for a, i := range ws.vi[:dim] {
		d := p0.lnf[i] - p1.lnf[i]
		if ws.vk[a] == 1 {
			d = -d
		}
		g[a] = d
		dx[a] = -d * sc[a]
	}
	linalg.CholSolve(ws.L[:dim*dim], dim, dx)
	for a := range dx {
		dx[a] *= sc[a]
		if !finite(dx[a]) {
			return false, nil
		}
	}
	return ws.lineSearch(dim, want)
}

// lineSearch moves the mole numbers along the direction ws.dx of the
// unknowns ws.vi, ws.vk (dependent phases ws.dep) with the step cut and
// Armijo halving of newtonStep, evaluating the phases with want.
func (ws *Workspace) lineSearch(dim int, want eos.Want) (bool, error) {
	if ws.m == 2 {
		return ws.lineSearch2(dim, want)
	}
	m := ws.m
	vi, vk := ws.vi, ws.vk
	g, dx := ws.g[:dim], ws.dx[:dim]
	dep := ws.dep
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
		if nm := ws.ph[dep[i]].nm[i]; ddep[i] < 0 && nm+ddep[i] <= 0 {
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
			r := dep[i]
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

// lineSearch2 is lineSearch for two phases, where every component has
// one unknown: the step moves n_i0 by d_i = ±dx (the sign σ_i of
// hessian2) and n_i1 by −d_i, which keeps the balance exactly. It does the
// same arithmetic as the general form, in the same order.
func (ws *Workspace) lineSearch2(dim int, want eos.Want) (bool, error) {
	g, dx := ws.g[:dim], ws.dx[:dim]
	vi, vk := ws.vi[:dim], ws.vk[:dim]
	slope := 0.0
	for p := range g {
		slope += g[p] * dx[p]
	}
	if !(slope < 0) {
		return false, nil
	}
	p0, p1 := &ws.ph[0], &ws.ph[1]
	n := ws.n
	n0, n1 := p0.nm[:n], p1.nm[:n]
	s0, s1 := p0.nm0[:n], p1.nm0[:n]
	// d holds the change of n_i0 for a full step; the largest step keeping
	// every mole number positive follows from both phases.
	d := ws.K[:n]
	tmax := 1.0
	for p, i := range vi {
		di := dx[p]
		if vk[p] == 1 {
			// n_i1 is the unknown: it moves by dx, n_i0 by −dx.
			if nm := n1[i]; di < 0 && nm+di <= 0 {
				tmax = min(tmax, 0.9*nm/-di)
			}
			if nm := n0[i]; -di < 0 && nm-di <= 0 {
				tmax = min(tmax, 0.9*nm/di)
			}
			d[i] = -di
			continue
		}
		if nm := n0[i]; di < 0 && nm+di <= 0 {
			tmax = min(tmax, 0.9*nm/-di)
		}
		if nm := n1[i]; -di < 0 && nm-di <= 0 {
			tmax = min(tmax, 0.9*nm/di)
		}
		d[i] = di
	}
	g0 := ws.gibbs()
	copy(s0, n0)
	copy(s1, n1)
	small := math.Abs(slope) < 1e-13*(1+math.Abs(g0))
	t := tmax
	act := ws.act
	x0, x1 := p0.x[:n], p1.x[:n]
	for ls := 0; ls < 12; ls++ {
		ws.rep.NewtonIterations++
		if err := ws.stop(); err != nil {
			return false, err
		}
		b0, b1 := 0.0, 0.0
		for _, i := range act {
			td := t * d[i]
			n0[i] = s0[i] + td
			n1[i] = s1[i] - td
			b0 += n0[i]
			b1 += n1[i]
		}
		p0.beta, p1.beta = b0, b1
		i0, i1 := 1/b0, 1/b1
		for _, i := range act {
			x0[i] = max(n0[i], 0) * i0
			x1[i] = max(n1[i], 0) * i1
		}
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
	copy(n0, s0)
	copy(n1, s1)
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
	vi, vk, g := ws.vi[:dim], ws.vk[:dim], ws.g[:dim]
	l0, l1 := p0.lnf[:n], p1.lnf[:n]
	x0, x1 := p0.x[:n], p1.x[:n]
	dn0, dn1 := p0.f.DN[:n*n], p1.f.DN[:n*n]
	for a, i := range vi {
		s := 1.0
		if vk[a] == 1 {
			s = -1
		}
		sg[a] = s
		g[a] = s * (l0[i] - l1[i])
	}
	// Lower triangle only: linalg.SolveSPD reads no more.
	for a, i := range vi {
		d0, d1 := dn0[i*n:][:n], dn1[i*n:][:n]
		row := h[a*dim:][:a+1]
		sa := sg[a]
		for b, j := range vi[:a+1] {
			row[b] = sa * sg[b] * (d0[j]*ib0 + d1[j]*ib1 + c)
		}
		row[a] += ib0/max(x0[i], tiny) + ib1/max(x1[i], tiny)
	}
}

// hessianM fills ws.H and ws.g for any phase count by the expression of
// newtonStep, from A^k_ij = (δ_ij/x_ik − 1 + DN^k_ij)/β_k stored per phase.
func (ws *Workspace) hessianM(dim int) {
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
		ri := ws.dep[i]
		g[p] = ws.ph[k].lnf[i] - ws.ph[ri].lnf[i]
		for q := p; q < dim; q++ {
			j, l := ws.vi[q], ws.vk[q]
			rj := ws.dep[j]
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
	n := ws.n
	for k := range ws.m {
		p := &ws.ph[k]
		nm, x := p.nm[:n], p.x[:n]
		s := 0.0
		for _, i := range ws.act {
			s += nm[i]
		}
		p.beta = s
		inv := 1 / s
		for _, i := range ws.act {
			x[i] = max(nm[i], 0) * inv
		}
	}
}

// sensitivities computes the first-order change of the converged
// two-phase split with temperature and pressure, from the equilibrium
// condition g(n; T, P) = 0 of newtonStep differentiated at fixed feed,
//
//	H·∂n/∂θ = −∂g/∂θ,  ∂g_i/∂θ = σ_i (∂ln φ_i0/∂θ − ∂ln φ_i1/∂θ),  θ = T, P,
//
// with the Hessian factor kept from the last Newton step (a point within
// the residual of the last steps of the solution, which is accurate
// enough for a starting estimate), and then
//
//	d ln K_i/dθ = dn_i0/dθ·(1/n_i0 + 1/n_i1) − dβ_0/dθ·(1/β_0 + 1/β_1),
//
// K_i = x_i0/x_i1, dβ_0 = Σ_i dn_i0 (Michelsen & Mollerup 2007, ch. 11).
// It needs ∂ln φ/∂T and ∂ln φ/∂P of both phases at the solution; without
// them (or the factor) ws.sensOK stays false.
func (ws *Workspace) sensitivities() {
	ws.sensOK, ws.pcOK = false, false
	p0, p1 := &ws.ph[0], &ws.ph[1]
	if ws.m != 2 || !ws.facOK || !p0.hasTP || !p1.hasTP {
		return
	}
	dim := ws.facDim
	bT, bP, sc := ws.dx[:dim], ws.g[:dim], ws.sc[:dim]
	for a, i := range ws.vi[:dim] {
		s := sc[a]
		if ws.vk[a] == 1 {
			s = -s
		}
		bT[a] = -(p0.f.DT[i] - p1.f.DT[i]) * s
		bP[a] = -(p0.f.DP[i] - p1.f.DP[i]) * s
	}
	l := ws.L[:dim*dim]
	linalg.CholSolve2(l, dim, bT, bP)
	for i := range ws.n {
		ws.sensT[i], ws.sensP[i] = 0, 0
	}
	dbT, dbP := 0.0, 0.0
	for a, i := range ws.vi[:dim] {
		s := sc[a]
		if ws.vk[a] == 1 {
			s = -s
		}
		ws.sensT[i], ws.sensP[i] = s*bT[a], s*bP[a]
		dbT += ws.sensT[i]
		dbP += ws.sensP[i]
	}
	cb := 1/p0.beta + 1/p1.beta
	var q [4]float64
	for _, i := range ws.act {
		eT, eP := p1.f.DT[i]-p0.f.DT[i], p1.f.DP[i]-p0.f.DP[i]
		nT, nP := ws.sensT[i], ws.sensP[i]
		q[0] += eT * nT
		q[1] += eT * nP
		q[2] += eP * nT
		q[3] += eP * nP
		c := 1/max(p0.nm[i], tiny) + 1/max(p1.nm[i], tiny)
		ws.sensT[i] = nT*c - dbT*cb
		ws.sensP[i] = nP*c - dbP*cb
		if !finite(ws.sensT[i]) || !finite(ws.sensP[i]) {
			return
		}
	}
	// Phase-change parts of the state derivatives (see StateDerivatives):
	// Σ_i (h̄_i1 − h̄_i0)·dn_i1/dθ with h̄_i1 − h̄_i0 = −RT²(∂ln φ_i1/∂T −
	// ∂ln φ_i0/∂T) and dn_i1 = −dn_i0, and likewise for v̄ with RT ∂/∂P.
	rt := eos.R * ws.T
	ws.pc = StateDerivatives{HT: rt * ws.T * q[0], HP: rt * ws.T * q[1], VT: -rt * q[2], VP: -rt * q[3]}
	ws.sensOK, ws.pcOK = true, true
}
