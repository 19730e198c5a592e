package stateflash

import (
	"context"
	"errors"
	"math"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// TV finds the equilibrium state of feed z at temperature T (K) with molar
// volume V (m³ per mole of feed, translated when the mixture translates
// volumes), with up to three phases: the pressure and the phase split.
// The single-phase pressure P(T, V) of the equation of state is tried
// first (one T–P flash confirms it); otherwise ln P is iterated on the
// equilibrium volume (see the package documentation), which keeps dense
// liquids, where P(v) is steep, well conditioned. Errors as for PH, with
// *RangeError naming P when V is not reached between Options.Pmin and
// Options.Pmax. It allocates nothing.
func (ws *Workspace) TV(ctx context.Context, T, V float64, z []float64, opts Options, warm *Estimate, res *Result) error {
	if err := ws.begin(ctx, SpecTV, &opts, z, warm, res); err != nil {
		return err
	}
	if !finite(T) || T <= 0 {
		return &InputError{Field: "T", Value: T, Reason: "temperature must be a finite positive number of kelvin"}
	}
	if !finite(V) || V <= 0 {
		return &InputError{Field: "V", Value: V, Reason: "molar volume must be a finite positive number of m³/mol"}
	}
	ws.o = outer{T: T, val: V, resid: math.Inf(1)}
	P1, _, _, err := ws.mx.PressureTV(ws.ews, T, V, ws.z)
	ws.rep.LnPhiEvaluations++
	if err != nil {
		return &InputError{Field: "V", Value: V, Reason: "molar volume must exceed the co-volume b of the feed"}
	}
	if ws.pure >= 0 {
		if done, err := ws.pureTV(res, T, V); done || err != nil {
			return err
		}
	}
	var fwarm *flash.Estimate
	if warm != nil && warm.Flash.Phases > 0 {
		fwarm = &warm.Flash
	}
	P := math.NaN()
	if P1 >= ws.set.pmin && P1 <= ws.set.pmax && (fwarm == nil || fwarm.Phases <= 1 || warm.P == 0) {
		ws.rep.OuterIterations++
		if err := ws.tp(T, P1, fwarm); err != nil {
			return ws.innerErr(err, T, P1)
		}
		ws.o.resid = math.Abs(ws.fres.Overall.MolarVolume-V) / V
		if len(ws.fres.Phases) == 1 && ws.o.resid <= ws.set.tol {
			ws.finish(res, RouteSinglePhase, ws.o.resid)
			return nil
		}
		P = P1
	} else {
		P = ws.startP(T, warm)
		ws.rep.OuterIterations++
		if err := ws.tp(T, P, fwarm); err != nil {
			return ws.innerErr(err, T, P)
		}
	}
	if _, err := ws.solve1D(math.Log(P), math.Log(ws.set.pmin), math.Log(ws.set.pmax), true); err != nil {
		return err
	}
	ws.finish(res, RouteNested, ws.o.resid)
	return nil
}

// startP is the starting pressure of an iteration at T when the
// single-phase pressure is not usable: the estimate's pressure, else the
// geometric mean of Wilson's bubble- and dew-point pressures,
//
//	P_b = Σ z_i K_i·P,  1/P_d = Σ z_i/(K_i·P)  (K_i·P independent of P),
//
// clamped to the search range.
func (ws *Workspace) startP(T float64, warm *Estimate) float64 {
	if warm != nil && warm.P > 0 {
		return math.Min(math.Max(warm.P, ws.set.pmin), ws.set.pmax)
	}
	ws.mx.WilsonK(T, 1, ws.bT[:ws.n]) // K_i at 1 Pa: K_i·P in Pa
	pb, inv := 0.0, 0.0
	for _, i := range ws.act {
		k := ws.bT[i]
		pb += ws.z[i] * k
		inv += ws.z[i] / k
	}
	P := math.Sqrt(pb / inv)
	if !finite(P) || P <= 0 {
		P = 1e5
	}
	return math.Min(math.Max(P, ws.set.pmin), ws.set.pmax)
}

// pureTV handles T–V of a pure component below its critical temperature:
// with the saturated volumes V_L < V_V at Psat(T), a volume between them
// is the two-phase state at Psat with β = (V − V_L)/(V_V − V_L).
func (ws *Workspace) pureTV(res *Result, T, V float64) (bool, error) {
	c := ws.mx.Component(ws.pure)
	if T >= c.Tc {
		return false, nil
	}
	ws.rep.OuterIterations++
	sat, err := ws.mx.VapourPressure(ws.ews, ws.pure, T)
	ws.rep.LnPhiEvaluations += sat.Evaluations
	if err != nil {
		if errors.Is(err, eos.ErrNoSaturation) {
			return false, nil
		}
		return true, ws.pureErr(err, T, math.NaN())
	}
	if !(V > sat.VL && V < sat.VV) {
		return false, nil
	}
	pl, pv, ok, err := ws.saturated(T, sat.P)
	if err != nil || !ok {
		return err != nil, err
	}
	beta := (V - pl.MolarVolume) / (pv.MolarVolume - pl.MolarVolume)
	return true, ws.fillSaturated(res, T, sat.P, beta, &pl, &pv)
}

// UV finds the equilibrium state of feed z with molar internal energy U
// (J/mol) and molar volume V (m³/mol), with up to three phases: the
// temperature, pressure and phase split. The single-phase solve
// u(T, V) = U (Newton with Cv) is tried first and confirmed by one T–P
// flash; otherwise Newton's method on (ln T, ln P) with the equilibrium
// sensitivities solves
//
//	U(T, P) = U_spec,  V(T, P) = V_spec
//
// (see the package documentation), with step limits and step halving;
// should that fail, a nested iteration on T with an inner T–V flash takes
// over. Errors as for PH. It allocates nothing.
func (ws *Workspace) UV(ctx context.Context, U, V float64, z []float64, opts Options, warm *Estimate, res *Result) error {
	if err := ws.begin(ctx, SpecUV, &opts, z, warm, res); err != nil {
		return err
	}
	if !finite(U) {
		return &InputError{Field: "U", Value: U, Reason: "must be a finite number"}
	}
	if !finite(V) || V <= 0 {
		return &InputError{Field: "V", Value: V, Reason: "molar volume must be a finite positive number of m³/mol"}
	}
	ws.o = outer{val: U, val2: V, resid: math.Inf(1)}
	T := 300.0
	if warm != nil && warm.T > 0 {
		T = math.Min(math.Max(warm.T, ws.set.tmin), ws.set.tmax)
	}
	T1, P1, ok, err := ws.singlePhaseTV(T, V)
	if err != nil {
		return err
	}
	if ws.pure >= 0 {
		if done, err := ws.pureUV(res, T1, ok, U, V); done || err != nil {
			return err
		}
	}
	var fwarm *flash.Estimate
	if warm != nil && warm.Flash.Phases > 0 {
		fwarm = &warm.Flash
	}
	warmState := fwarm != nil && fwarm.Phases > 1 && warm.T > 0 && warm.P > 0
	if !warmState && !(ok && P1 >= ws.set.pmin && P1 <= ws.set.pmax) {
		// No single phase has this U and V (a condensed phase takes
		// more energy out than the homogeneous fluid can): iterate on T
		// from the estimate, else from 300 K.
		T0 := 300.0
		if warm != nil && warm.T > 0 {
			T0 = warm.T
		}
		T0 = math.Min(math.Max(T0, ws.set.tmin), ws.set.tmax)
		if err := ws.nestedUV(T0, ws.startP(T0, warm), fwarm); err != nil {
			return err
		}
		ws.finish(res, RouteNested, ws.o.resid)
		return nil
	}
	T, P := T1, P1
	if warmState {
		T = math.Min(math.Max(warm.T, ws.set.tmin), ws.set.tmax)
		P = math.Min(math.Max(warm.P, ws.set.pmin), ws.set.pmax)
	}
	T0 := 300.0
	if warm != nil && warm.T > 0 {
		T0 = math.Min(math.Max(warm.T, ws.set.tmin), ws.set.tmax)
	}
	ws.rep.OuterIterations++
	err = ws.tp(T, P, fwarm)
	if err == nil && len(ws.fres.Phases) == 1 && ws.uvResid() <= ws.set.tol {
		ws.finish(res, RouteSinglePhase, ws.o.resid)
		return nil
	}
	if err == nil {
		err = ws.newtonUV()
	} else {
		err = ws.innerErr(err, T, P)
	}
	if _, conv := err.(*ConvergenceError); conv {
		// Start again from the estimate's temperature (else 300 K): the
		// single-phase temperature can be far off when a condensed phase
		// forms.
		ws.haveEst = false
		err = ws.nestedUV(T0, ws.startP(T0, warm), nil)
	}
	if err != nil {
		return err
	}
	ws.finish(res, RouteNested, ws.o.resid)
	return nil
}

// uvResid sets and returns the U–V residual of the last inner flash.
func (ws *Workspace) uvResid() float64 {
	o := &ws.fres.Overall
	rU := math.Abs(o.U-ws.o.val) / (eos.R * ws.fres.T)
	rV := math.Abs(o.MolarVolume-ws.o.val2) / ws.o.val2
	ws.o.resid = math.Max(rU, rV)
	return ws.o.resid
}

// singlePhaseTV solves u(T, V) = U for a single phase at fixed molar
// volume by Newton's method with (∂u/∂T)_v = Cv, bracketed in
// [Tmin, Tmax]. It returns T, the pressure there, and whether it
// converged with a positive pressure.
func (ws *Workspace) singlePhaseTV(T, V float64) (float64, float64, bool, error) {
	lo, hi := ws.set.tmin, ws.set.tmax
	for range 60 {
		pr, err := ws.mx.PropertiesTV(ws.ews, T, V, ws.z)
		ws.rep.LnPhiEvaluations++
		if err != nil {
			return T, 0, false, &InputError{Field: "V", Value: V, Reason: "molar volume must exceed the co-volume b of the feed"}
		}
		F := pr.U - ws.o.val
		if math.Abs(F) <= ws.set.tol*eos.R*T {
			return T, pr.P, pr.P > 0, nil
		}
		if F < 0 {
			lo = T
		} else {
			hi = T
		}
		next := math.NaN()
		if pr.Cv > 0 && finite(pr.Cv) {
			next = T - math.Max(-0.25*T, math.Min(0.25*T, F/pr.Cv))
		}
		if !(next > lo && next < hi) {
			next = 0.5 * (lo + hi)
		}
		if hi-lo <= 1e-13*T {
			pr, _ := ws.mx.PropertiesTV(ws.ews, T, V, ws.z)
			return T, pr.P, false, nil
		}
		T = next
	}
	return T, 0, false, nil
}

// newtonUV runs Newton's method on (ln T, ln P) from the inner result:
//
//	J·(Δln T, Δln P) = −(r_U, r_V),
//	r_U = (U − U_spec)/RT,  r_V = (V − V_spec)/V_spec,
//	(∂U/∂T)_P = (∂H/∂T)_P − P(∂V/∂T)_P,
//	(∂U/∂P)_T = (∂H/∂P)_T − V − P(∂V/∂P)_T,
//
// with |Δln T| ≤ 0.1, |Δln P| ≤ 1 and the step halved (up to six times)
// when ‖r‖ grows.
func (ws *Workspace) newtonUV() error {
	T, P := ws.fres.T, ws.fres.P
	lnT, lnP := math.Log(T), math.Log(P)
	var dT, dP float64
	prev := math.Inf(1)
	halvings := 0
	maxIt := min(ws.set.maxIt, 30)
	for it := 0; it < maxIt; it++ {
		if err := ws.stop(); err != nil {
			return err
		}
		if it > 0 {
			ws.rep.OuterIterations++
			T, P = math.Exp(lnT), math.Exp(lnP)
			if T <= ws.set.tmin || T >= ws.set.tmax || P <= ws.set.pmin || P >= ws.set.pmax {
				return ws.convErr("U–V Newton (left the search range)", it, nil)
			}
			if err := ws.tp(T, P, nil); err != nil {
				return ws.innerErr(err, T, P)
			}
		}
		o := &ws.fres.Overall
		rU := (o.U - ws.o.val) / (eos.R * T)
		rV := (o.MolarVolume - ws.o.val2) / ws.o.val2
		ws.o.resid = math.Max(math.Abs(rU), math.Abs(rV))
		if ws.o.resid <= ws.set.tol {
			return nil
		}
		norm := math.Hypot(rU, rV)
		if norm > prev && halvings < 6 && it > 0 {
			halvings++
			dT, dP = 0.5*dT, 0.5*dP
			lnT, lnP = lnT-dT, lnP-dP
			continue
		}
		halvings = 0
		prev = norm
		ok, err := ws.sensitivities()
		if err != nil {
			return err
		}
		if !ok {
			return ws.convErr("U–V Newton (singular sensitivities)", it+1, nil)
		}
		s := &ws.sens
		V := o.MolarVolume
		rt := eos.R * T
		j11 := T * (s.HT - P*s.VT) / rt
		j12 := P * (s.HP - V - P*s.VP) / rt
		j21 := T * s.VT / ws.o.val2
		j22 := P * s.VP / ws.o.val2
		det := j11*j22 - j12*j21
		if !(math.Abs(det) > 0) || !finite(det) {
			return ws.convErr("U–V Newton (singular Jacobian)", it+1, nil)
		}
		dT = -(j22*rU - j12*rV) / det
		dP = -(-j21*rU + j11*rV) / det
		if f := math.Max(math.Abs(dT)/0.1, math.Abs(dP)/1); f > 1 {
			dT, dP = dT/f, dP/f
		}
		lnT = math.Min(math.Max(lnT+dT, math.Log(ws.set.tmin)), math.Log(ws.set.tmax))
		lnP = math.Min(math.Max(lnP+dP, math.Log(ws.set.pmin)), math.Log(ws.set.pmax))
	}
	return ws.convErr("U–V Newton", maxIt, nil)
}

// nestedUV is the fallback of UV: safeguarded Newton on T of
//
//	U(T, V_spec) − U_spec = 0,
//
// with an inner T–V flash at each T and the total isochoric heat capacity
//
//	C_v,total = (∂U/∂T)_P + (∂U/∂P)_T·(∂P/∂T)_V,  (∂P/∂T)_V = −(∂V/∂T)_P/(∂V/∂P)_T,
//
// from the sensitivities, bracketed (U increases with T at fixed V), with
// secant or bisection steps when Newton leaves the bracket. The inner
// iteration starts from the pressure predicted by (∂P/∂T)_V. It starts
// again from (T0, P0), the state of the first inner flash.
func (ws *Workspace) nestedUV(T, P float64, fwarm *flash.Estimate) error {
	U, V := ws.o.val, ws.o.val2
	lo, hi := ws.set.tmin, ws.set.tmax
	flo, fhi := math.NaN(), math.NaN()
	for it := 0; it < ws.set.maxIt; it++ {
		if err := ws.stop(); err != nil {
			return err
		}
		ws.o = outer{T: T, val: V, resid: math.Inf(1)}
		ws.spec = SpecTV
		ws.rep.OuterIterations++
		err := ws.tp(T, P, fwarm)
		fwarm = nil
		if err == nil {
			_, err = ws.solve1D(math.Log(P), math.Log(ws.set.pmin), math.Log(ws.set.pmax), true)
		}
		ws.spec = SpecUV
		ws.o = outer{val: U, val2: V, resid: math.Inf(1)}
		if re, ok := err.(*RangeError); ok {
			// V_spec is not reached at this T: too dense even at Pmin means
			// T is too low, too expanded at Pmax means too high.
			if re.Got < V {
				lo = T
			} else {
				hi = T
			}
			if !(hi-lo > 1e-13*T) {
				return ws.convErr("U–V nested iteration (no temperature reaches V)", it+1, err)
			}
			if !math.IsInf(hi, 0) && hi < ws.set.tmax || !math.IsNaN(fhi) {
				T = 0.5 * (lo + hi)
			} else {
				T = math.Min(1.25*T, hi)
			}
			P = ws.startP(T, nil)
			ws.haveEst = false
			continue
		}
		if err != nil {
			return err
		}
		P = ws.fres.P
		F := ws.fres.Overall.U - U
		if ws.uvResid() <= ws.set.tol {
			return nil
		}
		if F < 0 {
			lo, flo = T, F
		} else {
			hi, fhi = T, F
		}
		if hi-lo <= 1e-13*T {
			if ws.o.resid <= 1e3*ws.set.tol {
				return nil
			}
			return ws.convErr("U–V nested iteration (bracket collapsed)", it+1, nil)
		}
		s := &ws.sens
		dPdT := -s.VT / s.VP
		cv := (s.HT - P*s.VT) + (s.HP-V-P*s.VP)*dPdT
		next := math.NaN()
		if cv > 0 && finite(cv) {
			next = T - math.Max(-0.1*T, math.Min(0.1*T, F/cv))
		}
		if !(next > lo && next < hi) {
			switch {
			case !math.IsNaN(flo) && !math.IsNaN(fhi):
				w := hi - lo
				next = lo - flo*w/(fhi-flo)
				if !(next > lo+0.05*w && next < hi-0.05*w) {
					next = 0.5 * (lo + hi)
				}
			case math.IsNaN(fhi):
				next = math.Min(1.1*T, hi)
			default:
				next = math.Max(T/1.1, lo)
			}
		}
		if finite(dPdT) {
			P *= math.Exp(math.Max(-1, math.Min(1, dPdT*(next-T)/P)))
		}
		T = next
	}
	return ws.convErr("U–V nested iteration", ws.set.maxIt, nil)
}

// pureUV handles U–V of a pure component. T1 is the temperature of the
// single phase with the specified U and V; below Tc that phase is stable
// unless V lies between the saturated volumes at T1, V_L(T1) < V <
// V_V(T1), and then the state is two-phase: T solves
//
//	G(T) = U_L(T) + β(T)·(U_V(T) − U_L(T)) − U_spec = 0,
//	β(T) = (V − V_L(T))/(V_V(T) − V_L(T)),
//
// by bracketed secant/bisection on T below Tc (G increases with T: the
// two-phase Cv is positive).
func (ws *Workspace) pureUV(res *Result, T1 float64, single bool, U, V float64) (bool, error) {
	c := ws.mx.Component(ws.pure)
	tlow := math.Max(ws.set.tmin, 0.3*c.Tc)
	if single && T1 >= c.Tc {
		return false, nil
	}
	if single && T1 >= tlow {
		sat, err := ws.mx.VapourPressure(ws.ews, ws.pure, T1)
		ws.rep.LnPhiEvaluations += sat.Evaluations
		if err != nil {
			if errors.Is(err, eos.ErrNoSaturation) {
				return false, nil
			}
			return true, ws.pureErr(err, T1, math.NaN())
		}
		if !(V > sat.VL && V < sat.VV) {
			return false, nil
		}
	} else {
		// No usable single phase has this U and V: search the two-phase
		// state from 0.7 Tc.
		T1 = 0.7 * c.Tc
	}
	var pl, pv eos.Properties
	g := func(T float64) (float64, float64, error) {
		ws.rep.OuterIterations++
		s, err := ws.mx.VapourPressure(ws.ews, ws.pure, T)
		ws.rep.LnPhiEvaluations += s.Evaluations
		if err != nil {
			return 0, 0, err
		}
		var ok bool
		pl, pv, ok, err = ws.saturated(T, s.P)
		if err != nil {
			return 0, 0, err
		}
		if !ok {
			return 0, 0, ws.pureErr(errors.New("saturated phases coincide"), T, s.P)
		}
		b := (V - pl.MolarVolume) / (pv.MolarVolume - pl.MolarVolume)
		return pl.U + b*(pv.U-pl.U) - U, s.P, nil
	}
	tcap := c.Tc * (1 - 1e-7)
	lo, hi := math.NaN(), math.NaN()
	var flo, fhi float64
	T := T1
	F, P, err := g(T)
	if err != nil {
		return true, ws.pureErr(err, T, math.NaN())
	}
	// Bracket the root, moving away from T1 in steps that double.
	step := 0.01 * T1
	for k := 0; k < 40 && (math.IsNaN(lo) || math.IsNaN(hi)); k++ {
		if F < 0 {
			lo, flo = T, F
			if math.IsNaN(hi) {
				T = math.Min(T+step, tcap)
			}
		} else {
			hi, fhi = T, F
			if math.IsNaN(lo) {
				T = math.Max(T-step, tlow)
			}
		}
		if !math.IsNaN(lo) && !math.IsNaN(hi) {
			break
		}
		step *= 2
		if F, P, err = g(T); err != nil {
			return true, ws.pureErr(err, T, math.NaN())
		}
	}
	if math.IsNaN(lo) || math.IsNaN(hi) {
		return true, ws.convErr("pure-component U–V (no bracket below Tc)", 40, nil)
	}
	for it := 0; it < ws.set.maxIt; it++ {
		if err := ws.stop(); err != nil {
			return true, err
		}
		w := hi - lo
		T = lo - flo*w/(fhi-flo)
		if !(T > lo+0.02*w && T < hi-0.02*w) {
			T = 0.5 * (lo + hi)
		}
		if F, P, err = g(T); err != nil {
			return true, ws.pureErr(err, T, math.NaN())
		}
		ws.o.resid = math.Abs(F) / (eos.R * T)
		if ws.o.resid <= ws.set.tol || w <= 1e-13*T {
			beta := (V - pl.MolarVolume) / (pv.MolarVolume - pl.MolarVolume)
			if err := ws.fillSaturated(res, T, P, beta, &pl, &pv); err != nil {
				return true, err
			}
			res.Report.SpecResidual = ws.o.resid
			return true, nil
		}
		if F < 0 {
			lo, flo = T, F
		} else {
			hi, fhi = T, F
		}
	}
	return true, ws.convErr("pure-component U–V", ws.set.maxIt, nil)
}
