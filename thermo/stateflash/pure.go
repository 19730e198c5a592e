package stateflash

import (
	"errors"
	"math"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// saturated evaluates the saturated liquid and vapour of the pure feed at
// (T, P) on the liquid and vapour roots. It reports false when the cubic
// has one real root there (no distinct phases).
func (ws *Workspace) saturated(T, P float64) (pl, pv eos.Properties, ok bool, err error) {
	ws.rep.LnPhiEvaluations += 2
	if pl, err = ws.mx.Properties(ws.ews, T, P, ws.z, eos.RootLiquid); err != nil {
		return pl, pv, false, err
	}
	if pv, err = ws.mx.Properties(ws.ews, T, P, ws.z, eos.RootVapour); err != nil {
		return pl, pv, false, err
	}
	return pl, pv, pl.Roots == 3 && pv.MolarVolume > pl.MolarVolume, nil
}

// purePressure handles P–H and P–S of a pure component. Below the
// critical pressure the saturation temperature Tsat(P) and the saturated
// liquid and vapour values X_L, X_V (X = H or S) split the specification:
//
//	X ≤ X_L: compressed liquid, T in [Tmin, Tsat];
//	X_L < X < X_V: two phases at Tsat with β = (X − X_L)/(X_V − X_L);
//	X ≥ X_V: superheated vapour, T in [Tsat, Tmax].
//
// It reports done when res holds the answer; otherwise (P ≥ Pc) the
// general path runs.
func (ws *Workspace) purePressure(res *Result) (bool, error) {
	c := ws.mx.Component(ws.pure)
	P := ws.o.P
	if P >= c.Pc {
		return false, nil
	}
	ws.rep.OuterIterations++
	sat, err := ws.mx.SaturationTemperature(ws.ews, ws.pure, P)
	ws.rep.LnPhiEvaluations += sat.Evaluations
	if err != nil {
		if errors.Is(err, eos.ErrNoSaturation) {
			return false, nil
		}
		return true, ws.pureErr(err, math.NaN(), P)
	}
	Ts := sat.T
	pl, pv, ok, err := ws.saturated(Ts, P)
	if err != nil {
		return true, err
	}
	if !ok {
		return false, nil
	}
	xl, xv := pl.H, pv.H
	if ws.spec == SpecPS {
		xl, xv = pl.S, pv.S
	}
	val := ws.o.val
	if val > xl && val < xv {
		beta := (val - xl) / (xv - xl)
		return true, ws.fillSaturated(res, Ts, P, beta, &pl, &pv)
	}
	lo, hi := ws.set.tmin, Ts
	if val >= xv {
		lo, hi = Ts, ws.set.tmax
	}
	if !(lo < hi) {
		return true, ws.rangeErrP(lo, val, xl, xv)
	}
	T, ok := ws.singlePhaseT(0.5*(lo+hi), lo, hi, seedConverge, nil)
	if !ok {
		if T-lo < 1e-9*T || hi-T < 1e-9*T {
			return true, ws.rangeErrP(T, val, xl, xv)
		}
		return true, ws.convErr("single-phase solve of a pure component", 60, nil)
	}
	ws.rep.OuterIterations++
	if err := ws.tp(T, P, nil); err != nil {
		return true, ws.innerErr(err, T, P)
	}
	ws.o.resid = ws.pressureResid()
	if len(ws.fres.Phases) != 1 || ws.o.resid > 1e3*ws.set.tol {
		return true, ws.convErr("single-phase solve of a pure component (flash disagrees)", 1, nil)
	}
	ws.finish(res, RouteSinglePhase, ws.o.resid)
	return true, nil
}

// rangeErrP reports a pure-component P–H/P–S specification beyond a
// temperature bound.
func (ws *Workspace) rangeErrP(T, val, xl, xv float64) error {
	pr, err := ws.mx.Properties(ws.ews, T, ws.o.P, ws.z, eos.RootMinGibbs)
	got := math.NaN()
	if err == nil {
		got = pr.H
		if ws.spec == SpecPS {
			got = pr.S
		}
	}
	return &RangeError{Spec: ws.spec, Variable: "T", Bound: T, Want: val, Got: got}
}

func (ws *Workspace) pureErr(err error, T, P float64) error {
	return &ConvergenceError{Spec: ws.spec, Stage: "pure-component saturation", Iterations: ws.rep.OuterIterations,
		T: T, P: P, Residual: math.NaN(), Phases: 0, Err: err}
}

// fillSaturated writes the saturated two-phase state of a pure component
// (vapour fraction beta) into res; beta at or beyond 0 or 1 gives the
// single saturated phase.
func (ws *Workspace) fillSaturated(res *Result, T, P, beta float64, pl, pv *eos.Properties) error {
	c := ws.mx.Component(ws.pure)
	fl, fv := ws.fug[0], ws.fug[1]
	ws.rep.LnPhiEvaluations += 2
	if err := ws.mx.Fugacity(ws.ews, T, P, ws.z, eos.RootLiquid, 0, fl); err != nil {
		return err
	}
	if err := ws.mx.Fugacity(ws.ews, T, P, ws.z, eos.RootVapour, 0, fv); err != nil {
		return err
	}
	res.T, res.P = T, P
	res.sensOK = false
	copy(res.Z, ws.z)
	liqLabel := flash.LabelLiquid
	if c.Family == component.FamilyWater {
		liqLabel = flash.LabelAqueous
	}
	type part struct {
		label flash.Label
		beta  float64
		f     *eos.Fugacity
		pr    *eos.Properties
	}
	var parts [2]part
	m := 0
	if beta > 0 {
		parts[m] = part{flash.LabelVapour, math.Min(beta, 1), fv, pv}
		m++
	}
	if beta < 1 {
		parts[m] = part{liqLabel, math.Min(1-beta, 1), fl, pl}
		m++
	}
	res.Phases = res.phaseBuf[:m]
	var o flash.Overall
	for k := range m {
		p, dst := &parts[k], &res.phaseBuf[k]
		dst.Label, dst.Beta, dst.Z, dst.Props = p.label, p.beta, p.pr.Z, *p.pr
		copy(dst.X, ws.z)
		copy(dst.LnPhi, p.f.LnPhi)
		b := p.beta
		o.MolarVolume += b * p.pr.MolarVolume
		o.MolarMass += b * p.pr.MolarMass
		o.H += b * p.pr.H
		o.S += b * p.pr.S
		o.G += b * p.pr.G
		o.U += b * p.pr.U
		o.A += b * p.pr.A
	}
	o.MolarDensity = 1 / o.MolarVolume
	o.MassDensity = o.MolarMass / o.MolarVolume
	res.Overall = o
	for i := range res.LnK {
		res.LnK[i] = 0
		if m == 2 && i != ws.pure {
			res.LnK[i] = fl.LnPhi[i] - fv.LnPhi[i]
		}
	}
	r := ws.rep
	r.Route = RouteSaturation
	r.Converged = true
	r.Phases = m
	r.Residual = 0
	if m == 2 {
		r.Residual = math.Abs(fl.LnPhi[ws.pure] - fv.LnPhi[ws.pure])
	}
	r.MinTPD = 0
	r.SpecResidual = 0
	return nil
}
