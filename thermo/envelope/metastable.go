package envelope

import (
	"math"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// Settings of the third-phase test (dimensionless).
const (
	// tpdTol: a trial with tpd < −tpdTol proves the feed unstable (the
	// margin of thermo/flash's stability test).
	tpdTol = 1e-8
	// fallTol and fallFrac: a trial whose next iterate lies within
	// min(fallTol, fallFrac·D) of the feed or of the incipient phase (in
	// Σ_i (ln W_i − ln x_i)², D the same distance between feed and
	// incipient phase) is falling onto that stationary point and stops.
	fallTol  = 1e-3
	fallFrac = 0.05
	// incTol is the larger tolerance for the incipient phase, a known
	// stationary point of tpd = 0 that successive substitution approaches
	// slowly.
	incTol = 1e-2
	// maxTrialIt caps the successive-substitution steps of one trial.
	maxTrialIt = 25
	// stopTM: a trial with tm above it whose geometrically extrapolated
	// remaining decrease is below a quarter of tm cannot become negative.
	stopTM = 1e-2
)

// stabScratch is the memory of the third-phase test.
type stabScratch struct {
	act                    []int // components present
	d, lnz, lnx, lnKw      []float64
	W, lnW, lnWn, w, cand  []float64
	dPrev, back            []float64
	best                   []float64
	haveCand               bool
	trials, evals, special int
}

func newStabScratch(n int) stabScratch {
	v := func() []float64 { return make([]float64, n) }
	return stabScratch{act: make([]int, 0, n), d: v(), lnz: v(), lnx: v(), lnKw: v(), W: v(), lnW: v(), lnWn: v(), w: v(), cand: v(), best: v(), dPrev: v(), back: v()}
}

// Trial starts of the third-phase test.
const (
	trialCandidate = iota // the neighbouring point's third-phase stationary point
	trialFeedLiquid
	trialFeedVapour
	trialIncipientLiquid
	trialPure // pure-component-like, component in stabScratch.special order
)

// fullTestSpacing is the distance Σ|Δln T| + |Δln P| along the envelope
// after which the full set of trials runs again (see checkStability).
const fullTestSpacing = 0.3

// thirdPhase tests whether the feed z, as the phase on the root the
// envelope labels it with (vapour on the dew branch, liquid on the bubble
// branch, the lower-Gibbs-energy root at a critical point), is stable at
// (T, P) against every phase other than the incipient one x_i ∝ z_i/K_i.
// At a point of the phase boundary the tangent plane of the feed touches
// the Gibbs surface at x as well (equal fugacities), so the boundary is
// the phase boundary of the equilibrium system only if no other trial
// phase w lies below that plane (Michelsen 1982a):
//
//	tpd(w) = Σ_i w_i (ln w_i + ln φ_i(w) − ln z_i − ln φ_i(z)) ≥ 0.
//
// Each trial iterates the modified tangent-plane function
// tm(W) = 1 + Σ W_i (ln W_i + ln φ_i(w) − d_i − 1) by successive
// substitution ln W_i ← d_i − ln φ_i(w), w = W/ΣW, which decreases tm
// monotonically, with the root of lower Gibbs energy for w and the
// dominant-eigenvalue extrapolation of Crowe & Nishio (1975) every fifth
// step. The trials are, in order: the stationary point found at the
// neighbouring point (the continuation, when there is one), and with full
// set, Wilson's liquid-like z_i/K_i and vapour-like z_i·K_i, the
// liquid-like trial from the incipient phase x_i/K_i (a second, lighter
// liquid beside the incipient vapour of a bubble point, or a heavier one
// beside the incipient liquid of a dew point), and a pure-component-like
// trial (0.999 of it) of each water, alcohol or glycol present. A trial
// stops as soon as tpd < −1e-8 after three steps (the point is
// metastable), when it falls onto the feed or the incipient phase, when it
// converges, when the extrapolated decrease of tm cannot make it negative,
// or after 25 steps (counted as fallen back). A feed whose labelled root is not its root of lower
// Gibbs energy is metastable without a trial.
//
// It returns the smallest tpd of the trials that ended away from the feed
// and the incipient phase (0 when none did), whether the point is
// metastable and whether a trial ended away; the trial composition of
// that tpd is left in ss.best and its last iterate in ss.cand.
//
// References:
//   - Michelsen, M.L.: The isothermal flash problem. Part I. Stability.
//     Fluid Phase Equilib. 9, 1–19 (1982).
//   - Michelsen, M.L., Mollerup, J.M.: Thermodynamic Models: Fundamentals
//     & Computational Aspects, 2nd ed., ch. 10. Tie-Line Publications
//     (2007).
//   - Crowe, A.M., Nishio, M.: Convergence promotion in the simulation of
//     chemical processes — the general dominant eigenvalue method. AIChE
//     J. 21(3), 528–533 (1975).
func (s *Solver) thirdPhase(T, P float64, lnK []float64, kind Kind, full bool) (tpd float64, meta, away bool) {
	ss := &s.stab
	n := s.n
	root := eos.RootMinGibbs
	switch kind {
	case Dew:
		root = eos.RootVapour
	case Bubble:
		root = eos.RootLiquid
	}
	f := s.fy
	if s.mx.Fugacity(s.ws, T, P, s.z, eos.RootMinGibbs, 0, f) != nil {
		return 0, false, false
	}
	ss.evals++
	if f.Roots == 3 && ((root == eos.RootVapour && f.Branch == eos.BranchLiquid) || (root == eos.RootLiquid && f.Branch == eos.BranchVapour)) {
		// The labelled phase lies above the tangent plane of the other root
		// at the same composition: tpd = g_min − g_labelled < 0.
		g := 0.0
		for _, i := range ss.act {
			g += s.z[i] * f.LnPhi[i]
		}
		if s.mx.Fugacity(s.ws, T, P, s.z, root, 0, f) != nil {
			return 0, false, false
		}
		ss.evals++
		for _, i := range ss.act {
			g -= s.z[i] * f.LnPhi[i]
		}
		if g < -tpdTol {
			copy(ss.best, s.z)
			return g, true, false
		}
	}
	sx := 0.0
	for _, i := range ss.act {
		sx += s.z[i] / fastmath.Exp(lnK[i])
	}
	D := 0.0
	for _, i := range ss.act {
		ss.d[i] = ss.lnz[i] + f.LnPhi[i]
		ss.lnx[i] = ss.lnz[i] - lnK[i] - fastmath.Log(sx)
		e := ss.lnx[i] - ss.lnz[i]
		D += e * e
	}
	feedTol := min(fallTol, fallFrac*D)
	xTol := min(incTol, fallFrac*D)
	if D == 0 {
		feedTol, xTol = fallTol, -1
	}
	if full {
		s.mx.LnWilsonK(T, P, ss.lnKw[:n])
	}
	nt := 1
	if full {
		nt = trialPure + ss.special
	}
	tpd = 0
	for t := range nt {
		if t == trialCandidate {
			if !ss.haveCand {
				continue
			}
			copy(ss.lnW, ss.cand)
		}
		for _, i := range ss.act {
			var l float64
			switch {
			case t == trialCandidate:
				continue
			case t == trialFeedLiquid:
				l = ss.lnz[i] - ss.lnKw[i]
			case t == trialFeedVapour:
				l = ss.lnz[i] + ss.lnKw[i]
			case t == trialIncipientLiquid:
				l = ss.lnx[i] - ss.lnKw[i]
			default:
				l = lnPureMinor + ss.lnz[i]
				if i == s.specialComp(t-trialPure) {
					l = lnPureMajor
				}
			}
			ss.lnW[i] = max(-maxLnK, min(maxLnK, l))
		}
		t1, aw := s.runTrial(T, P, feedTol, xTol)
		if !aw {
			continue
		}
		if t1 < tpd || !away {
			tpd = t1
			copy(ss.best, ss.w)
			copy(ss.cand, ss.lnW)
		}
		away = true
		if t1 < -tpdTol {
			return tpd, true, true
		}
	}
	return tpd, false, away
}

// specialComp returns the component of the k-th pure-component-like trial.
func (s *Solver) specialComp(k int) int {
	for _, i := range s.stab.act {
		switch s.mx.Component(i).Family {
		case component.FamilyWater, component.FamilyAlcohol, component.FamilyGlycol:
			if k == 0 {
				return i
			}
			k--
		}
	}
	return -1
}

// lnPureMajor and lnPureMinor start a pure-component-like trial:
// W_j = 0.999 for its component, W_i = 1e-3·z_i for the others.
const (
	lnPureMajor = -1.0005003335835344e-3 // ln 0.999
	lnPureMinor = -6.907755278982137     // ln 1e-3
)

// runTrial iterates one trial from ss.lnW (see thirdPhase). It returns the
// trial's smallest tpd and whether it ended away from the feed and the
// incipient phase; ss.w holds the composition of that tpd and ss.lnW the
// last iterate.
func (s *Solver) runTrial(T, P, feedTol, xTol float64) (float64, bool) {
	ss := &s.stab
	f := s.fx
	ss.trials++
	best := math.Inf(1)
	tmPrev, dPrev := math.Inf(1), math.Inf(1)
	for it := range maxTrialIt {
		sw := 0.0
		for _, i := range ss.act {
			ss.W[i] = fastmath.Exp(ss.lnW[i])
			sw += ss.W[i]
		}
		for _, i := range ss.act {
			ss.W[i] /= sw
		}
		if s.mx.Fugacity(s.ws, T, P, ss.W, eos.RootMinGibbs, 0, f) != nil {
			return 0, false
		}
		ss.evals++
		lsw := fastmath.Log(sw)
		tpd, tm, res := 0.0, 1.0, 0.0
		dz, dx := 0.0, 0.0
		for _, i := range ss.act {
			r := ss.lnW[i] + f.LnPhi[i] - ss.d[i]
			tpd += ss.W[i] * (r - lsw)
			tm += sw * ss.W[i] * (r - 1)
			res = max(res, math.Abs(r))
			ln := ss.lnW[i] - r
			ss.lnWn[i] = ln
			e := ln - ss.lnz[i]
			dz += e * e
			e = ln - ss.lnx[i]
			dx += e * e
		}
		if tpd < best {
			best = tpd
			copy(ss.w, ss.W)
		}
		if tpd < -tpdTol && (it >= 2 || res < 1e-6) {
			return best, true
		}
		if dz < feedTol || dx < xTol {
			return best, false
		}
		if res < 1e-9 {
			return best, true
		}
		if it >= 2 {
			d := tmPrev - tm
			if r := d / dPrev; it >= 3 && d >= 0 && r >= 0 && r < 0.8 && tm > stopTM && d*r/(1-r) < 0.25*tm {
				return best, true
			}
			dPrev = d
		} else if it >= 1 {
			dPrev = tmPrev - tm
		}
		tmPrev = tm
		// Dominant-eigenvalue extrapolation of successive substitution
		// (Crowe & Nishio 1975) every fifth step: with Δ_k the last step,
		// λ = Δ_k·Δ_k/Δ_{k−1}·Δ_k and ln W ← ln W + Δ_k·λ/(1 − λ).
		num, den := 0.0, 0.0
		for _, i := range ss.act {
			dk := ss.lnWn[i] - ss.lnW[i]
			num += dk * dk
			den += ss.dPrev[i] * dk
			ss.dPrev[i] = dk
		}
		acc := 1.0
		if it%5 == 4 && den > 0 {
			if l := num / den; l > 0 && l < 0.98 {
				acc = 1 / (1 - l)
			}
		}
		for _, i := range ss.act {
			ss.lnW[i] = max(-maxLnK, min(maxLnK, ss.lnW[i]+acc*ss.dPrev[i]))
		}
	}
	// Still creeping after maxTrialIt steps without a negative tpd: next to
	// a critical point, where feed and incipient phase nearly coincide and
	// successive substitution slows down, the trial is drifting toward
	// them; it is not taken for a third phase.
	return best, false
}

// checkStability gives every point of a traced β = 1 line its
// third-phase verdict (thirdPhase). The points are taken in order along the
// line, each test starting from the stationary point the previous one left
// (the continuation), and the full set of trials runs at the first and
// last point and wherever the line has moved
// by fullTestSpacing in Σ|Δln T| + |Δln P| since the last full test. When a
// full test finds a stationary point away from the feed and the incipient
// phase that the continuation did not carry, the points back to the
// previous full test are tested again from it, walking backward, so that a
// third phase appearing between two full tests is not missed where it has
// already reached negative tpd. A third phase that appears and vanishes
// again between two full tests (within 0.3 in ln T plus ln P) can be missed.
func (s *Solver) checkStability(env *Envelope, pts []EnvelopePoint, rep *EnvelopeReport) {
	ss := &s.stab
	ss.act = ss.act[:0]
	ss.special = 0
	for i, v := range s.z {
		if v > 0 {
			ss.act = append(ss.act, i)
			ss.lnz[i] = fastmath.Log(v)
			switch s.mx.Component(i).Family {
			case component.FamilyWater, component.FamilyAlcohol, component.FamilyGlycol:
				ss.special++
			}
		}
	}
	ss.haveCand = false
	ss.trials, ss.evals = 0, 0
	lastFull := -1
	path := 0.0
	for k := range pts {
		p := &pts[k]
		if k > 0 {
			path += math.Abs(fastmath.Log(p.T/pts[k-1].T)) + math.Abs(fastmath.Log(p.P/pts[k-1].P))
		}
		full := lastFull < 0 || k == len(pts)-1 || path >= fullTestSpacing
		had := ss.haveCand
		s.verdict(env, p, full)
		if !full {
			continue
		}
		if !had && ss.haveCand && lastFull >= 0 {
			// A new third-phase stationary point: carry it backward.
			copy(ss.back, ss.cand)
			for j := k - 1; j > lastFull; j-- {
				if !s.verdict(env, &pts[j], false) {
					break
				}
			}
			copy(ss.cand, ss.back)
			ss.haveCand = true
		}
		lastFull, path = k, 0
	}
	for k := range pts {
		p := &pts[k]
		if !p.Metastable {
			continue
		}
		if rep.Metastable == 0 {
			rep.MetastableTMin, rep.MetastableTMax = p.T, p.T
			rep.MetastablePMin, rep.MetastablePMax = p.P, p.P
		}
		rep.Metastable++
		rep.MetastableTMin = min(rep.MetastableTMin, p.T)
		rep.MetastableTMax = max(rep.MetastableTMax, p.T)
		rep.MetastablePMin = min(rep.MetastablePMin, p.P)
		rep.MetastablePMax = max(rep.MetastablePMax, p.P)
	}
	rep.StabilityTrials += ss.trials
	rep.StabilityEvaluations += ss.evals
	rep.LnPhiEvaluations += ss.evals
}

// verdict runs thirdPhase at p and records the result; it reports whether
// a trial ended away from the feed and the incipient phase (ss.cand then
// holds it for the next point).
func (s *Solver) verdict(env *Envelope, p *EnvelopePoint, full bool) bool {
	ss := &s.stab
	tpd, meta, away := s.thirdPhase(p.T, p.P, p.LnK, p.Kind, full)
	ss.haveCand = away
	p.Checked = true
	if !meta && p.Metastable {
		// A backward pass never clears a verdict.
		return away
	}
	p.TPD = tpd
	p.Metastable = meta
	if meta {
		if p.ThirdPhase == nil {
			p.ThirdPhase = env.alloc(s.n)
		}
		copy(p.ThirdPhase, ss.best)
	}
	return away
}
