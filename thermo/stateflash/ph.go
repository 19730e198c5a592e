package stateflash

import (
	"context"
	"errors"
	"math"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// PH finds the equilibrium state of feed z (mole fractions or mole
// numbers) at pressure P (Pa) with molar enthalpy H (J/mol, on the
// reference state of package eos), with up to three phases, writing it
// into res (made by NewResult for the same mixture). See the package
// documentation for the method. warm may be nil or the Estimate of a
// nearby result.
//
// Errors: *InputError (or *flash.InputError) for bad arguments;
// *RangeError (ErrOutOfRange) when H is not reached between Options.Tmin
// and Options.Tmax; *ConvergenceError (ErrNotConverged) when the outer or
// an inner iteration fails; a wrapped ctx.Err() or flash.ErrStopped on
// cancellation, checked in every outer iteration. It allocates nothing.
func (ws *Workspace) PH(ctx context.Context, P, H float64, z []float64, opts Options, warm *Estimate, res *Result) error {
	return ws.pressureSpec(ctx, SpecPH, P, H, z, &opts, warm, res)
}

// PS is PH with the molar entropy S (J/(mol·K)) specified instead of the
// enthalpy; (∂S/∂T)_P = C_p,total/T replaces (∂H/∂T)_P = C_p,total.
// Errors as for PH.
func (ws *Workspace) PS(ctx context.Context, P, S float64, z []float64, opts Options, warm *Estimate, res *Result) error {
	return ws.pressureSpec(ctx, SpecPS, P, S, z, &opts, warm, res)
}

// outer holds the specification of the current call.
type outer struct {
	T, P  float64 // the fixed one of the pair (P for P–H/P–S, T for T–V)
	val   float64 // H, S or V (for U–V: U)
	val2  float64 // V for U–V
	last  float64 // state function of the last evaluation (for range errors)
	resid float64 // last specification residual, measure of Options.Tolerance
}

func (ws *Workspace) pressureSpec(ctx context.Context, spec Spec, P, val float64, z []float64, opts *Options, warm *Estimate, res *Result) error {
	if err := ws.begin(ctx, spec, opts, z, warm, res); err != nil {
		return err
	}
	if !finite(P) || P <= 0 {
		return &InputError{Field: "P", Value: P, Reason: "pressure must be a finite positive number of pascal"}
	}
	name := "H"
	if spec == SpecPS {
		name = "S"
	}
	if !finite(val) {
		return &InputError{Field: name, Value: val, Reason: "must be a finite number"}
	}
	ws.o = outer{P: P, val: val, resid: math.Inf(1)}
	if ws.pure >= 0 {
		done, err := ws.purePressure(res)
		if done || err != nil {
			return err
		}
	}
	var fwarm *flash.Estimate
	T := 300.0
	if warm != nil {
		if warm.T > 0 {
			T = warm.T
		}
		if warm.Flash.Phases > 0 {
			fwarm = &warm.Flash
		}
	}
	if fwarm != nil && fwarm.Phases >= 2 {
		T = ws.warmStep(T, warm)
	}
	T = math.Min(math.Max(T, ws.set.tmin), ws.set.tmax)
	if fwarm == nil || fwarm.Phases <= 1 {
		// Single-phase solve, then one flash to confirm it.
		T, _ = ws.singlePhaseT(T, ws.set.tmin, ws.set.tmax, seedEarly, nil)
	}
	ws.rep.OuterIterations++
	ws.lazy = true
	if err := ws.tp(T, P, fwarm); err != nil {
		return ws.innerErr(err, T, P)
	}
	if len(ws.fres.Phases) == 1 {
		r := ws.pressureResid()
		if r > ws.set.tol && ws.seedLoose {
			// One phase after all: finish the single-phase solve from
			// the phase the flash found and confirm it with another
			// flash.
			ws.seedLoose = false
			T, _ = ws.singlePhaseT(T, ws.set.tmin, ws.set.tmax, seedPredict, &ws.fres.Phases[0].Props)
			ws.rep.OuterIterations++
			ws.haveEst = false
			if err := ws.tp(T, P, nil); err != nil {
				return ws.innerErr(err, T, P)
			}
			r = math.Inf(1)
			if len(ws.fres.Phases) == 1 {
				r = ws.pressureResid()
			}
		}
		if r <= ws.set.tol {
			ws.finish(res, RouteSinglePhase, r)
			return nil
		}
	}
	T, err := ws.solve1D(T, ws.set.tmin, ws.set.tmax, true)
	if err != nil {
		return err
	}
	if ws.unverified {
		// Confirm the final state with a full flash from its own split: a
		// stable split takes no Newton step and comes back unchanged; any
		// other outcome restarts the outer solve with every inner flash
		// tested, so a metastable path never changes the answer.
		ws.lazy = false
		ws.est = ws.fres.Estimate()
		d, dOK := ws.fres.Derivatives()
		if err := ws.tp(T, P, &ws.est); err != nil {
			return ws.innerErr(err, T, P)
		}
		if ws.fres.Report.Path != flash.PathWarm || ws.pressureResid() > ws.set.tol {
			if _, err := ws.solve1D(T, ws.set.tmin, ws.set.tmax, true); err != nil {
				return err
			}
		} else {
			ws.o.resid = ws.pressureResid()
			if _, ok := ws.fres.Derivatives(); !ok && dOK && ws.fres.Report.NewtonIterations == 0 {
				// The confirmation took no Newton step, so the split is
				// the unverified one, whose derivatives still hold.
				ws.finish(res, RouteNested, ws.o.resid)
				res.deriv, res.derivOK = d, true
				return nil
			}
		}
	}
	ws.finish(res, RouteNested, ws.o.resid)
	return nil
}

// warmStep returns the temperature of the first-order step from the
// estimate's state to the specification (see Estimate.H), or T when the
// estimate does not carry what it needs. The step is limited to a tenth
// of T: it only chooses where the outer iteration starts.
func (ws *Workspace) warmStep(T float64, warm *Estimate) float64 {
	d := &warm.Deriv
	if !warm.HasDeriv || warm.T <= 0 || warm.P <= 0 || !(d.HT > 0) || !finite(d.HT) {
		return T
	}
	dP := ws.o.P - warm.P
	var step float64
	if ws.spec == SpecPS {
		step = (ws.o.val - warm.S + d.VT*dP) / (d.HT / warm.T)
	} else {
		step = (ws.o.val - warm.H - d.HP*dP) / d.HT
	}
	if !finite(step) {
		return T
	}
	return warm.T + math.Max(-0.1*warm.T, math.Min(0.1*warm.T, step))
}

// pressureResid is the specification residual of the last inner flash
// for P–H and P–S.
func (ws *Workspace) pressureResid() float64 {
	o := &ws.fres.Overall
	if ws.spec == SpecPS {
		return math.Abs(o.S-ws.o.val) / eos.R
	}
	return math.Abs(o.H-ws.o.val) / (eos.R * ws.fres.T)
}

// seedMode says where singlePhaseT may stop short of the tolerance.
type seedMode int

const (
	// seedConverge: only at the tolerance.
	seedConverge seedMode = iota
	// seedPredict: also with the Newton step from a scaled residual below
	// predictTol, returned unevaluated for a T–P flash to check.
	seedPredict
	// seedEarly: as seedPredict, and also where Wilson's K-values predict
	// two phases (see looseTol) or the root of lowest Gibbs energy jumps.
	seedEarly
)

// singlePhaseT solves the single-phase specification at fixed P on the
// root of lowest Gibbs energy,
//
//	h(T, P) = H  or  s(T, P) = S,
//
// by Newton's method with Cp (or Cp/T) inside the bracket [lo, hi],
// bisecting when a step leaves it. It returns the last T and whether the
// specification was met (or, by mode, the seed is good enough: see
// seedMode). first, when not nil, holds the properties at T already (of
// a single phase a T–P flash found there), which saves their evaluation.
//
// Near the solution the residual falls as r_{k+1} ≈ C·r_k², with
// C = |F″|·scale/(2F′²) estimated from the change of F′ between the last
// two points. With seedEarly the solve stops where Wilson's K-values put
// the next temperature inside the two-phase region only while the
// residual predicted after the next step, C·r², is above looseNext: one or
// two more evaluations of the single phase cost less than the T–P flash
// that an early stop wastes when the state has one phase after all.
//
// Where the root of lowest Gibbs energy switches between a vapour-like
// and a liquid-like volume, h(T) jumps and the bracket closes on the jump
// by bisection; with seedEarly the solve stops there after jumpBisections
// bisections in a row (the jump lies inside the two-phase region).
func (ws *Workspace) singlePhaseT(T, lo, hi float64, mode seedMode, first *eos.Properties) (float64, bool) {
	tPrev, dFPrev := math.NaN(), math.NaN()
	bisections := 0
	for range 60 {
		var pr eos.Properties
		if first != nil {
			pr, first = *first, nil
		} else {
			var err error
			pr, err = ws.mx.Properties(ws.ews, T, ws.o.P, ws.z, eos.RootMinGibbs)
			ws.rep.LnPhiEvaluations++
			if err != nil {
				return T, false
			}
		}
		F, dF, scale := pr.H-ws.o.val, pr.Cp, eos.R*T
		if ws.spec == SpecPS {
			F, dF, scale = pr.S-ws.o.val, pr.Cp/T, eos.R
		}
		r := math.Abs(F) / scale
		if r <= ws.set.tol {
			return T, true
		}
		if F < 0 {
			lo = T
		} else {
			hi = T
		}
		// C of the quadratic convergence, from F″ ≈ ΔF′/ΔT.
		c := math.Inf(1)
		if finite(tPrev) && T != tPrev && dF > 0 {
			c = math.Abs((dF-dFPrev)/(T-tPrev)) * scale / (2 * dF * dF)
		}
		tPrev, dFPrev = T, dF
		next := math.NaN()
		if dF > 0 && finite(dF) {
			step := -F / dF
			step = math.Max(-0.25*T, math.Min(0.25*T, step))
			next = T + step
		}
		switch {
		case !(next > lo && next < hi):
			next = 0.5 * (lo + hi)
			bisections++
			if mode == seedEarly && bisections >= jumpBisections && r > looseTol {
				// h(T) jumps inside [lo, hi]: the T–P flash there decides.
				ws.seedLoose = true
				return next, true
			}
		case mode == seedEarly && r <= looseTol && !(c*r*r <= looseNext) && ws.wilsonTwoPhase(next):
			// Wilson's K-values put the feed inside the two-phase
			// region here: the T–P flash that follows most likely finds
			// two phases, for which a converged single-phase
			// temperature is no better a start than this one.
			ws.seedLoose = r > predictTol
			return next, true
		case mode != seedConverge && r <= predictTol:
			// Newton's method converges quadratically here: the step
			// lands within the tolerance, which the T–P flash that
			// follows checks (and the outer iteration corrects).
			return next, true
		default:
			bisections = 0
		}
		if hi-lo <= 1e-13*T {
			return T, false
		}
		T = next
	}
	return T, false
}

// predictTol is the scaled residual of the single-phase solve below which
// its next Newton step is taken without another evaluation: from
// |F|/scale = 1e-5 the step leaves about 1e-10·C, C = |F″|·scale/(2F′²)
// of order one for h(T) and s(T) away from critical points.
const predictTol = 1e-5

// looseTol is the scaled residual at which the single-phase solve may stop
// early when Wilson's K-values (Wilson 1968) predict two phases at the
// next temperature: the nested iteration then starts from that step.
// looseNext is the residual predicted after the next step below which it
// does not (ten times predictTol, so that a prediction near predictTol
// does not cost a flash).
const (
	looseTol  = 0.3
	looseNext = 10 * predictTol
)

// jumpRatio and maxInnerRetries: see solve1D.
const (
	jumpRatio       = 4
	maxInnerRetries = 8
)

// jumpBisections is the number of bisections in a row after which the
// single-phase solve takes the bracket to hold a jump of h(T).
const jumpBisections = 3

// wilsonTwoPhase reports whether Wilson's K-values at (T, P) put the
// feed between its bubble and dew points, Σ z_i K_i > 1 and
// Σ z_i/K_i > 1 (Michelsen & Mollerup 2007, ch. 10).
func (ws *Workspace) wilsonTwoPhase(T float64) bool {
	k := ws.bT[:ws.n]
	ws.mx.WilsonK(T, ws.o.P, k)
	a, b := 0.0, 0.0
	for _, i := range ws.act {
		a += ws.z[i] * k[i]
		b += ws.z[i] / k[i]
	}
	return a > 1 && b > 1
}

// evalOuter runs the inner flash at the outer variable y (T for P–H and
// P–S, ln P for T–V) unless flashed, and returns the specification
// function F (increasing in y), its derivative from the sensitivities
// (NaN when they are not available) and the residual scale.
func (ws *Workspace) evalOuter(y float64, flashed bool) (F, dF, scale float64, err error) {
	T, P := y, ws.o.P
	if ws.spec == SpecTV {
		T, P = ws.o.T, math.Exp(y)
	}
	if !flashed {
		if err := ws.tp(T, P, nil); err != nil {
			return 0, 0, 0, ws.innerErr(err, T, P)
		}
	}
	ok, err := ws.sensitivities()
	if err != nil {
		return 0, 0, 0, err
	}
	s := &ws.sens
	o := &ws.fres.Overall
	switch ws.spec {
	case SpecPH:
		ws.o.last = o.H
		F, dF, scale = o.H-ws.o.val, s.HT, eos.R*T
	case SpecPS:
		ws.o.last = o.S
		F, dF, scale = o.S-ws.o.val, s.HT/T, eos.R
	default: // T–V: V decreases with P, so ln V_spec − ln V increases with ln P.
		ws.o.last = o.MolarVolume
		F, dF, scale = math.Log(ws.o.val/o.MolarVolume), -P*s.VP/o.MolarVolume, 1
	}
	if !ok {
		dF = math.NaN()
	}
	return F, dF, scale, nil
}

// solve1D solves F(y) = 0 for the increasing specification function of
// evalOuter inside the bracket [lo, hi] by safeguarded Newton: a Newton
// step with the sensitivity derivative, limited in size; when it leaves
// the bracket known so far, or |F| fails to halve twice running, a secant
// step between the bracket ends (kept off them) or a bisection. A
// derivative that is huge or discontinuous — the total heat capacity of a
// narrow-boiling mixture — then costs bisection steps, never a failure.
// flashed says the inner result already holds the state at y.
//
// For P–H and P–S (ws.lazy) two refinements save inner flashes: between
// two points of the same phase count with exact derivatives the step is
// the root of the quadratic model
//
//	F(y+s) ≈ F + F′·s + c·s²,  c = (F′ − F′_prev)/(2(y − y_prev)),
//
// (kept when within half the Newton step of it), and when the residual
// of an unverified split is below predictTol the step lands within the
// tolerance, so the inner flash there is the full T–P flash that confirms
// the final state instead of one more unverified split.
func (ws *Workspace) solve1D(y, lo, hi float64, flashed bool) (float64, error) {
	loB, hiB := lo, hi
	flo, fhi := math.NaN(), math.NaN()
	prev, prev2 := math.Inf(1), math.Inf(1)
	slow := 0
	accel := ws.lazy
	havePrev := false
	yp, dFp, mp := 0.0, 0.0, 0
	// The bracket ends set by tested inner flashes (vlo, vhi), and
	// whether lo and hi came from untested splits (loUnv, hiUnv). A
	// bracket with an untested end whose values differ by more than
	// jumpRatio times the larger end derivative allows over its width
	// holds a jump: untested splits have followed a metastable branch (a
	// two-phase split where the stable state has a third phase, say) or
	// hopped between branches. Their ends are then dropped for the tested
	// ones and every later inner flash is tested.
	vlo, vflo, vhi, vfhi := lo, flo, hi, fhi
	loUnv, hiUnv := false, false
	dlo, dhi := math.NaN(), math.NaN()
	// An inner flash that fails to converge at a trial point (far from
	// the answer, say, where the model has states no flash should meet)
	// does not end the solve while another point has been evaluated: the
	// failed point bounds the search (failLo, failHi), and the next trial
	// lies halfway back towards the last good point, yGood. After
	// maxInnerRetries such failures the last one is returned.
	failLo, failHi := math.Inf(-1), math.Inf(1)
	yGood, haveGood, retries := 0.0, false, 0
	distrust := func() {
		lo, flo, hi, fhi = vlo, vflo, vhi, vfhi
		dlo, dhi = math.NaN(), math.NaN()
		loUnv, hiUnv = false, false
		ws.lazy, accel, havePrev = false, false, false
		slow = 0
		prev, prev2 = math.Inf(1), math.Inf(1)
	}
	for it := 0; it < ws.set.maxIt; it++ {
		if err := ws.stop(); err != nil {
			return y, err
		}
		if it > 0 {
			ws.rep.OuterIterations++
		}
		F, dF, scale, err := ws.evalOuter(y, flashed && it == 0)
		if err != nil {
			var ce *ConvergenceError
			if !haveGood || retries >= maxInnerRetries || !errors.As(err, &ce) || ce.Stage != innerStage {
				return y, err
			}
			retries++
			if y < yGood {
				failLo = math.Max(failLo, y)
			} else {
				failHi = math.Min(failHi, y)
			}
			y = 0.5 * (y + yGood)
			continue
		}
		yGood, haveGood = y, true
		ws.o.resid = math.Abs(F) / scale
		if ws.o.resid <= ws.set.tol {
			return y, nil
		}
		m := len(ws.fres.Phases)
		unv := ws.unverified
		if F < 0 {
			lo, flo, dlo, loUnv = y, F, dF, unv
			if !unv {
				vlo, vflo = y, F
			}
			if y >= hiB {
				return y, ws.rangeErr(y)
			}
		} else {
			hi, fhi, dhi, hiUnv = y, F, dF, unv
			if !unv {
				vhi, vfhi = y, F
			}
			if y <= loB {
				return y, ws.rangeErr(y)
			}
		}
		if (loUnv || hiUnv) && dlo > 0 && dhi > 0 && fhi-flo > jumpRatio*math.Max(dlo, dhi)*(hi-lo) {
			distrust()
		}
		if hi-lo <= 1e-14*math.Max(math.Abs(lo), math.Abs(hi)) {
			if ws.o.resid <= 1e3*ws.set.tol {
				return y, nil
			}
			return y, ws.convErr("outer iteration (bracket collapsed: the state function jumps here)", it+1, nil)
		}
		maxStep := 0.25 * y
		if ws.spec == SpecTV {
			maxStep = 2
		}
		next := math.NaN()
		if finite(dF) && dF > 0 {
			next = y - math.Max(-maxStep, math.Min(maxStep, F/dF))
		}
		if math.Abs(F) > 0.5*prev {
			slow++
		} else {
			slow = 0
		}
		// Newton steps that alternate across a kink of F (a phase boundary
		// inside the bracket), each landing on the other side about as far
		// from the root as the last, halve |F| every other step at best:
		// then the bracket is bisected.
		pingPong := math.Abs(F) > 0.5*prev2
		prev2, prev = prev, math.Abs(F)
		if finite(dF) && dF > 0 && havePrev && mp == len(ws.fres.Phases) {
			// Quadratic model through the derivative of the previous
			// point: F(y+s) ≈ F + F′s + c·s², c = (F′ − F′_prev)/(2(y − y_prev)).
			c := (dF - dFp) / (2 * (y - yp))
			disc := dF*dF - 4*c*F
			if finite(c) && disc > 0 {
				s := -2 * F / (dF + math.Sqrt(disc))
				sn := -F / dF
				if math.Abs(s-sn) <= 0.5*math.Abs(sn) {
					next = y + s
				}
			}
		}
		havePrev = accel && finite(dF) && dF > 0 && m >= 2
		yp, dFp, mp = y, dF, m
		if ws.lazy && ws.unverified && finite(dF) && dF > 0 && ws.o.resid <= predictTol && next > lo && next < hi {
			// The step from an unverified split lands within the
			// tolerance (see predictTol): the inner flash there is the
			// full T–P flash that confirms the final state.
			ws.lazy = false
		}
		if !(next > lo && next < hi) || slow >= 2 || pingPong && !math.IsNaN(flo) && !math.IsNaN(fhi) {
			switch {
			case !math.IsNaN(flo) && !math.IsNaN(fhi):
				w := hi - lo
				next = lo - flo*w/(fhi-flo)
				if slow >= 2 || pingPong || !(next > lo+0.05*w && next < hi-0.05*w) {
					next = 0.5 * (lo + hi)
				}
				slow = 0
			case math.IsNaN(fhi):
				next = math.Min(y+maxStep, hiB)
			default:
				next = math.Max(y-maxStep, loB)
			}
		}
		if next <= failLo {
			next = 0.5 * (y + failLo)
		} else if next >= failHi {
			next = 0.5 * (y + failHi)
		}
		y = next
	}
	return y, ws.convErr("outer iteration", ws.set.maxIt, nil)
}

// rangeErr reports that the specification is not reached at bound y.
func (ws *Workspace) rangeErr(y float64) error {
	e := &RangeError{Spec: ws.spec, Variable: "T", Bound: y, Want: ws.o.val, Got: ws.o.last}
	if ws.spec == SpecTV {
		e.Variable, e.Bound = "P", math.Exp(y)
	}
	return e
}

// convErr builds the convergence error of the current estimate.
func (ws *Workspace) convErr(stage string, it int, cause error) error {
	return &ConvergenceError{Spec: ws.spec, Stage: stage, Iterations: it,
		T: ws.fres.T, P: ws.fres.P, Residual: ws.o.resid, Phases: len(ws.fres.Phases), Err: cause}
}

// innerStage is the Stage of a ConvergenceError wrapping a failed inner
// T–P flash.
const innerStage = "inner T–P flash"

// innerErr wraps a failed inner flash; input and cancellation errors pass
// through unchanged.
func (ws *Workspace) innerErr(err error, T, P float64) error {
	if solverFailure(err) {
		return &ConvergenceError{Spec: ws.spec, Stage: innerStage, Iterations: ws.rep.OuterIterations,
			T: T, P: P, Residual: ws.o.resid, Phases: len(ws.fres.Phases), Err: err}
	}
	return err
}
