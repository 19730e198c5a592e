package flash

import (
	"context"
	"math"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/internal/fastmath"
	"github.com/fugad/fugad/thermo/internal/linalg"
)

// Stability criteria (dimensionless).
const (
	// trivialTol: a trial with Σ_i (ln W_i − ln x_i)² below it, x the
	// reference or an existing phase, is converging to that phase and is
	// stopped (Michelsen 1982a, section 4).
	trivialTol = 1e-4
	// stabConv ends a trial when max_i |ln W_i + ln φ_i(w) − d_i| is below it.
	stabConv = 1e-9
	// stabSS is the number of successive-substitution steps of a trial
	// before it switches to Newton.
	stabSS = 6
	// existTol and existFrac: a trial closer than
	// min(existTol, existFrac·d_min) (same measure as trivialTol; d_min the
	// smallest such distance between two phases already found) to a phase
	// already found is stopped: it is converging to that phase. Scaling by
	// d_min keeps the test strict where the phases are close (near a
	// critical point), where a different stationary point could lie near
	// one of them.
	existTol  = 1e-2
	existFrac = 0.05
	// existNear and nearTM: a trial whose tm is already in [0, nearTM)
	// and whose next iterate is closer than min(existNear, existFrac·d_min)
	// to a phase already found is stopped as well. Successive substitution
	// decreases tm monotonically (Michelsen 1982a) and the phase found is a
	// minimum of tm with tm = 0 (it lies on the tangent plane), so an
	// iterate this close to it whose tm has nearly reached that level
	// cannot leave its basin for a negative tpd.
	existNear = 5e-2
	nearTM    = 1e-2
	// acidGasTrial is the feed mole fraction of CO2 or H2S from which a
	// pure-component-like trial of it is added.
	acidGasTrial = 0.1
	// posTM: a trial with tm above it whose extrapolated remaining
	// decrease is below a quarter of tm is stable.
	posTM = 1e-2
	// lnPureMajor and lnPureMinor start a pure-component-like trial:
	// W_j = 0.999 for its component, W_i = 1e-3·z_i for the others.
	lnPureMajor = -1.0005003335835344e-3 // ln 0.999
	lnPureMinor = -6.907755278982137     // ln 1e-3
)

// StabilityResult is the outcome of a stability test.
type StabilityResult struct {
	// Stable is true when no trial reached tpd < −TPDTolerance.
	Stable bool
	// MinTPD is the smallest tangent-plane distance found,
	//	tpd(w) = Σ_i w_i (ln w_i + ln φ_i(w) − ln x_i − ln φ_i(x)).
	MinTPD float64
	// W is the trial composition (mole fractions) of MinTPD.
	W []float64
	// Trials, Iterations and LnPhiEvaluations count the work done.
	Trials, Iterations, LnPhiEvaluations int
}

// NewStabilityResult returns a StabilityResult sized for mx.
func NewStabilityResult(mx *eos.Mixture) *StabilityResult {
	return &StabilityResult{W: make([]float64, mx.N())}
}

// Stability tests whether a phase of composition x (mole fractions or mole
// numbers) at T and P is stable, by Michelsen's tangent-plane criterion
// (Michelsen 1982a): the phase is unstable when some trial composition w
// has
//
//	tpd(w) = Σ_i w_i (ln w_i + ln φ_i(w) − d_i) < 0,  d_i = ln x_i + ln φ_i(x).
//
// The trials are the Wilson-K vapour-like and liquid-like compositions and
// pure-component-like compositions of the components that may form a
// second liquid (see the package documentation); each is iterated to a
// stationary point of the modified function
//
//	tm(W) = 1 + Σ_i W_i (ln W_i + ln φ_i(w) − d_i − 1),  w = W/ΣW,
//
// first by successive substitution, ln W_i ← d_i − ln φ_i(w), then by
// Newton's method in α_i = 2√W_i with the Hessian
// δ_ij + √(W_i W_j)·∂ln φ_i/∂W_j (Michelsen & Mollerup 2007, ch. 10). A
// trial that approaches x (the trivial solution) is stopped early. It
// allocates nothing.
func (ws *Workspace) Stability(ctx context.Context, T, P float64, x []float64, opts Options, out *StabilityResult) error {
	set, err := opts.resolve()
	if err != nil {
		return err
	}
	var rep Report
	if err := ws.begin(ctx, set, &rep, T, P, x, "x"); err != nil {
		return err
	}
	if len(out.W) != ws.n {
		return &InputError{Field: "out", Value: float64(len(out.W)), Reason: "StabilityResult not sized for this mixture (use NewStabilityResult)"}
	}
	if err := ws.feedReference(); err != nil {
		return err
	}
	tpd, best, err := ws.stabilityTest(ws.lnz, 0)
	if err != nil {
		return err
	}
	out.MinTPD = tpd
	out.Stable = !(tpd < -set.tpdTol)
	if best >= 0 {
		copy(out.W, ws.trialW[best])
	} else {
		copy(out.W, ws.z)
	}
	out.Trials = rep.StabilityTrials
	out.Iterations = rep.StabilityIterations
	out.LnPhiEvaluations = rep.LnPhiEvaluations
	return nil
}

// feedReference sets d_i = ln z_i + ln φ_i(z) for a stability test of the
// feed, keeping the feed's ln φ in phase slot 0.
func (ws *Workspace) feedReference() error {
	p := &ws.ph[0]
	copy(p.x, ws.z)
	if err := ws.evalPhase(0, 0); err != nil {
		return err
	}
	for _, i := range ws.act {
		ws.d[i] = p.lnf[i]
	}
	return nil
}

// setupTrials lists the trial phases for the current feed: the two Wilson
// trials, then a pure-component-like trial for each component present of
// family water, alcohol or glycol, or of family acid gas with a feed mole
// fraction of at least acidGasTrial, and, when any of those is present,
// for the heaviest component (by molar mass).
func (ws *Workspace) setupTrials() {
	ws.trials = ws.trials[:0]
	ws.trials = append(ws.trials, trialSpec{kind: trialVapour}, trialSpec{kind: trialLiquid})
	if len(ws.act) < 2 {
		return
	}
	special := false
	heavy := -1
	for _, i := range ws.act {
		switch ws.family[i] {
		case component.FamilyWater, component.FamilyAlcohol, component.FamilyGlycol, component.FamilyAcidGas:
			if ws.family[i] == component.FamilyAcidGas && ws.z[i] < acidGasTrial {
				// A CO2- or H2S-rich liquid needs a feed rich in it.
				continue
			}
			if len(ws.trials) < maxTrials-1 {
				ws.trials = append(ws.trials, trialSpec{kind: trialPure, comp: i})
				special = true
			}
		default:
			if heavy < 0 || ws.mw[i] > ws.mw[heavy] {
				heavy = i
			}
		}
	}
	if special && heavy >= 0 {
		ws.trials = append(ws.trials, trialSpec{kind: trialPure, comp: heavy})
	}
}

// stabilityTest runs every trial against the reference fugacities ws.d of
// a phase with ln x = lnRef; the first nExist phases in ws.ph are phases
// already found (a trial approaching one of them is stopped). It returns
// the smallest tpd and the index of its trial (−1 when all trials were
// trivial).
func (ws *Workspace) stabilityTest(lnRef []float64, nExist int) (float64, int, error) {
	minTPD, best := math.Inf(1), -1
	ws.nTrial = len(ws.trials)
	ws.nearTol, ws.nearLoose = existTol, existNear
	for k := 0; k < nExist; k++ {
		for l := k + 1; l < nExist; l++ {
			d := ws.phaseDist(k, l)
			ws.nearTol = min(ws.nearTol, existFrac*d)
			ws.nearLoose = min(ws.nearLoose, existFrac*d)
		}
	}
	for t := range ws.trials {
		tpd, ok, err := ws.runTrial(t, lnRef, nExist)
		if err != nil {
			return 0, -1, err
		}
		ws.trialT[t], ws.trialOK[t] = tpd, ok
		if ok && tpd < minTPD {
			minTPD, best = tpd, t
		}
		if ok && tpd < -0.05 && !ws.fullTest {
			// Clearly unstable; the remaining trials would not change the
			// decision and the split starts from this one.
			ws.nTrial = t + 1
			break
		}
	}
	if best < 0 {
		minTPD = 0
	}
	ws.rep.MinTPD = minTPD
	return minTPD, best, nil
}

// runTrial iterates trial t. It returns the trial's smallest tpd and
// whether the trial ended away from the reference and the existing phases
// (a trivial trial reports ok = false).
func (ws *Workspace) runTrial(t int, lnRef []float64, nExist int) (float64, bool, error) {
	ws.rep.StabilityTrials++
	spec := ws.trials[t]
	W, lnW := ws.W, ws.lnW
	for i := range W {
		W[i], lnW[i] = 0, 0
	}
	for _, i := range ws.act {
		switch spec.kind {
		case trialVapour:
			lnW[i] = ws.lnz[i] + ws.lnKw[i]
		case trialLiquid:
			lnW[i] = ws.lnz[i] - ws.lnKw[i]
		default:
			if i == spec.comp {
				lnW[i] = lnPureMajor
			} else {
				lnW[i] = lnPureMinor + ws.lnz[i]
			}
		}
		W[i] = fastmath.Exp(lnW[i])
	}
	wbest := ws.trialW[t]
	bestTPD := math.Inf(1)
	tmAcc := math.Inf(1)
	newton := false
	step := 1.0
	ok := true
	tmPrev, dPrev := math.Inf(1), math.Inf(1)
	// Slices in locals: stores through them would otherwise make the
	// compiler reload every ws field in every component loop.
	n := ws.n
	act := ws.act
	w, lnWn, d := ws.w[:n], ws.lnWn[:n], ws.d[:n]
	W, lnW = W[:n], lnW[:n]
	for it := 0; it < ws.set.maxIt; it++ {
		if err := ws.stop(); err != nil {
			return 0, false, err
		}
		ws.rep.StabilityIterations++
		sw := 0.0
		for _, i := range act {
			sw += W[i]
		}
		if !(sw > 0) || math.IsInf(sw, 0) {
			break
		}
		for _, i := range act {
			w[i] = W[i] / sw
		}
		want := eos.Want(0)
		if newton {
			want = eos.WantN
		}
		if err := ws.eval(w, want, ws.tf); err != nil {
			return 0, false, err
		}
		lp := ws.tf.LnPhi[:n]
		tpd, tm, res := 0.0, 1.0, 0.0
		lsw := fastmath.Log(sw)
		for _, i := range act {
			r := lnW[i] + lp[i] - d[i]
			lnWn[i] = r
			tpd += w[i] * (r - lsw)
			tm += W[i] * (r - 1)
			res = max(res, math.Abs(r))
		}
		if newton && tm > tmAcc+1e-12*math.Abs(tmAcc) && step > 1e-3 {
			// Backtrack along the last Newton direction.
			step *= 0.5
			ws.alphaStep(step)
			continue
		}
		if tpd < bestTPD {
			bestTPD = tpd
			copy(wbest, w)
		}
		if tpd < -ws.set.tpdTol && (it >= 2 || tpd < -0.01 || res < 1e-6) {
			return bestTPD, true, nil
		}
		// Distance of the next iterate from the reference and from every
		// phase already found.
		dRef := ws.dist(lnW, lnWn, lnRef)
		near := dRef < trivialTol
		tol := ws.nearTol
		if tm >= 0 && tm < nearTM {
			tol = ws.nearLoose
		}
		for k := 0; k < nExist && !near; k++ {
			if lnx := ws.ph[k].lnx; &lnx[0] == &lnRef[0] {
				// The reference is this phase (the test of a split).
				near = dRef < tol
			} else {
				near = ws.dist(lnW, lnWn, lnx) < tol
			}
		}
		if near {
			ok = false
			break
		}
		if res < stabConv {
			break
		}
		// Successive substitution decreases tm monotonically and linearly
		// (Michelsen 1982a); when the geometric extrapolation of the
		// decrease still leaves tm clearly positive the trial cannot reach
		// a negative tpd and is stopped.
		if !newton && it >= 2 {
			d := tmPrev - tm
			if r := d / dPrev; it >= 3 && d >= 0 && r >= 0 && r < 0.8 && tm > posTM && d*r/(1-r) < 0.25*tm {
				break
			}
			dPrev = d
		} else if it >= 1 {
			dPrev = tmPrev - tm
		}
		tmPrev = tm
		if !newton {
			for _, i := range act {
				lnW[i] -= lnWn[i]
				W[i] = fastmath.Exp(lnW[i])
			}
			if it+1 >= stabSS {
				// The next evaluation brings the derivatives for Newton.
				newton = true
				tmAcc = math.Inf(1)
			}
			continue
		}
		tmAcc = tm
		step = 1
		if !ws.trialNewtonStep(sw) {
			newton = false
			for _, i := range act {
				lnW[i] -= lnWn[i]
				W[i] = fastmath.Exp(lnW[i])
			}
		}
	}
	if math.IsInf(bestTPD, 1) {
		return 0, false, nil
	}
	return bestTPD, ok, nil
}

// dist is Σ_i (ln W_i − r_i − ln x_i)² over the present components: the
// squared distance of the next successive-substitution iterate from x.
func (ws *Workspace) dist(lnW, r, lnx []float64) float64 {
	n := ws.n
	lnW, r, lnx = lnW[:n], r[:n], lnx[:n]
	s := 0.0
	for _, i := range ws.act {
		d := lnW[i] - r[i] - lnx[i]
		s += d * d
	}
	return s
}

// trialNewtonStep takes a Newton step on tm in α_i = 2√W_i:
//
//	g_i = √W_i (ln W_i + ln φ_i − d_i),
//	H_ij = δ_ij + √(W_i W_j)·DN_ij/ΣW,
//
// (the term ½δ_ij(ln W_i + ln φ_i − d_i), zero at the solution, is left
// out as Michelsen & Mollerup 2007 recommend). ws.lnWn holds the residuals
// and ws.tf the derivatives at the current W.
func (ws *Workspace) trialNewtonStep(sw float64) bool {
	na := len(ws.act)
	h, g := ws.H[:na*na], ws.g[:na]
	dn := ws.tf.DN
	n := ws.n
	// √W_i in Wp (doubled to α_i below); the lower triangle of H only.
	for _, i := range ws.act {
		ws.Wp[i] = math.Sqrt(ws.W[i])
	}
	isw := 1 / sw
	for a, i := range ws.act {
		si := ws.Wp[i]
		g[a] = si * ws.lnWn[i]
		row := h[a*na:][:a+1]
		dni := dn[i*n:][:n]
		c := si * isw
		for b, j := range ws.act[:a+1] {
			row[b] = c * ws.Wp[j] * dni[j]
		}
		row[a]++
	}
	if ok, _ := linalg.SolveSPD(h, na, g, ws.dx[:na], ws.L[:na*na], ws.sc[:na]); !ok {
		return false
	}
	for a, i := range ws.act {
		ws.Wp[i] *= 2
		ws.dir[i] = ws.dx[a]
	}
	ws.alphaStep(1)
	return true
}

// alphaStep sets α = α_prev + t·dir and W = α²/4, keeping α positive.
func (ws *Workspace) alphaStep(t float64) {
	for _, i := range ws.act {
		a := ws.Wp[i] + t*ws.dir[i]
		if a <= 0 {
			a = 0.1 * ws.Wp[i]
		}
		ws.W[i] = max(a*a/4, tiny)
		ws.lnW[i] = fastmath.Log(ws.W[i])
	}
}
