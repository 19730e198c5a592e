package stateflash

import (
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// Route says how a state-function flash reached its result.
type Route int

// Routes.
const (
	// RouteSinglePhase: the single-phase equation of state solved the
	// specification directly and one T–P flash confirmed a stable single
	// phase there.
	RouteSinglePhase Route = iota
	// RouteNested: the outer iteration ran T–P flashes until the
	// specification was met.
	RouteNested
	// RouteSaturation: a pure component inside its two-phase region; the
	// result is the saturated liquid and vapour split by the lever rule.
	RouteSaturation
)

var routeNames = [...]string{"single-phase", "nested", "saturation"}

// String returns "single-phase", "nested" or "saturation".
func (r Route) String() string {
	if r < 0 || int(r) >= len(routeNames) {
		return "unknown"
	}
	return routeNames[r]
}

// Report says what a state-function flash did. Counts of the inner T–P
// flashes are summed over all of them.
type Report struct {
	Spec  Spec
	Route Route
	// Warm is true when the call was given an estimate.
	Warm bool
	// Converged is true for a returned result.
	Converged bool
	// Phases is the phase count of the result.
	Phases int
	// OuterIterations counts the outer iterations (one per T–P flash on
	// the nested route, plus the single-phase and saturation solves).
	OuterIterations int
	// Flashes counts the inner T–P flashes; WarmFlashes those that
	// converged from their estimate, FallbackFlashes those whose estimate
	// was rejected.
	Flashes, WarmFlashes, FallbackFlashes int
	// StabilityTrials … RRIterations are the inner flash reports summed.
	StabilityTrials     int
	StabilityIterations int
	SSIterations        int
	NewtonIterations    int
	RRIterations        int
	// LnPhiEvaluations counts ln φ evaluations of the inner flashes plus
	// the phase evaluations of the outer iteration itself (single-phase
	// solves, sensitivities, saturation points).
	LnPhiEvaluations int
	// Residual is max |ln f_i,α − ln f_i,β| of the result (zero for one
	// phase).
	Residual float64
	// SpecResidual is the final specification residual in the measure of
	// Options.Tolerance (the larger of the two for U–V).
	SpecResidual float64
	// MinTPD is the smallest tangent-plane distance of the last stability
	// test of the final inner flash.
	MinTPD float64
}

// Result is the outcome of a state-function flash: the equilibrium state
// (T, P, phases) that has the specified pair of state functions. Make one
// with NewResult and reuse it; a flash writes into its preallocated
// slices.
type Result struct {
	T, P float64
	// Z is the normalised feed.
	Z []float64
	// Phases lists the phases in the order and with the labels of
	// flash.Result (vapour first, liquids by decreasing molar volume,
	// aqueous last); each carries its properties.
	Phases []flash.Phase
	// Overall holds the mole-averaged properties of the feed.
	Overall flash.Overall
	// LnK holds ln(x_i of Phases[0]/x_i of Phases[last]) with two or more
	// phases, zeros otherwise.
	LnK    []float64
	Report Report

	// dLnKdT and dLnKdP carry the K-value sensitivities of a two-phase
	// inner result (when sensOK) into Estimate.
	dLnKdT, dLnKdP []float64
	sensOK         bool
	// deriv holds the state derivatives of the final inner result when
	// derivOK.
	deriv   flash.StateDerivatives
	derivOK bool

	phaseBuf [flash.MaxPhases]flash.Phase
	betaBuf  [flash.MaxPhases]float64
	xBuf     [flash.MaxPhases][]float64
	n        int
}

// NewResult returns a Result sized for mx.
func NewResult(mx *eos.Mixture) *Result {
	n := mx.N()
	r := &Result{Z: make([]float64, n), LnK: make([]float64, n), n: n,
		dLnKdT: make([]float64, n), dLnKdP: make([]float64, n)}
	for k := range r.phaseBuf {
		r.phaseBuf[k].X = make([]float64, n)
		r.phaseBuf[k].LnPhi = make([]float64, n)
		r.xBuf[k] = r.phaseBuf[k].X
	}
	r.Phases = r.phaseBuf[:0]
	return r
}

// Estimate is a starting point for a state-function flash, typically the
// result of the previous timestep: its temperature and pressure and the
// phase split as a T–P flash estimate.
type Estimate struct {
	// T and P are the estimated temperature (K) and pressure (Pa); zero
	// means unknown. P–H and P–S use T; T–V uses P; U–V uses both.
	T, P float64
	// Flash is the estimate of the phase split (may be zero-valued).
	Flash flash.Estimate
	// H and S are the molar enthalpy (J/mol) and entropy (J/(mol·K)) of
	// the estimate's state (T, P), and Deriv its state derivatives
	// (flash.StateDerivatives: total heat capacity and the like, with the
	// change of the phase split), valid when HasDeriv is set (optional).
	// With them and two or more phases in Flash, P–H and P–S start from
	// the temperature of the first-order step to the specification,
	//	T + (H_spec − H − (∂H/∂P)_T·ΔP)/(∂H/∂T)_P,
	//	T + (S_spec − S + (∂V/∂T)_P·ΔP)/((∂H/∂T)_P/T),  ΔP = P_spec − P,
	// instead of from T (Maxwell: (∂S/∂P)_T = −(∂V/∂T)_P), which saves an
	// inner flash; the outer iteration converges from either start, so the
	// answer does not depend on them.
	H, S     float64
	Deriv    flash.StateDerivatives
	HasDeriv bool
}

// Estimate returns the result as a warm start for the next flash. The
// returned value shares the result's memory (no allocation); a flash
// copies what it needs before writing, so passing a Result's own estimate
// back into a flash that writes the same Result is safe.
func (r *Result) Estimate() Estimate {
	k := len(r.Phases)
	for i := range k {
		r.betaBuf[i] = r.Phases[i].Beta
	}
	e := Estimate{T: r.T, P: r.P, Flash: flash.Estimate{Phases: k, Beta: r.betaBuf[:k], X: r.xBuf[:k], T: r.T, P: r.P}}
	if k >= 2 {
		e.Flash.LnK = r.LnK
	}
	if k == 2 && r.sensOK {
		e.Flash.DLnKDT, e.Flash.DLnKDP = r.dLnKdT, r.dLnKdP
	}
	e.H, e.S = r.Overall.H, r.Overall.S
	e.Deriv, e.HasDeriv = r.deriv, r.derivOK
	return e
}

// copyFrom fills r from a T–P flash result.
func (r *Result) copyFrom(f *flash.Result) {
	r.T, r.P = f.T, f.P
	copy(r.Z, f.Z)
	m := len(f.Phases)
	r.Phases = r.phaseBuf[:m]
	for k := range m {
		src, dst := &f.Phases[k], &r.phaseBuf[k]
		dst.Label, dst.Beta, dst.Z, dst.Props = src.Label, src.Beta, src.Z, src.Props
		copy(dst.X, src.X)
		copy(dst.LnPhi, src.LnPhi)
	}
	r.Overall = f.Overall
	copy(r.LnK, f.LnK)
	e := f.Estimate()
	r.sensOK = e.DLnKDT != nil && e.DLnKDP != nil
	if r.sensOK {
		copy(r.dLnKdT, e.DLnKDT)
		copy(r.dLnKdP, e.DLnKDP)
	}
	r.deriv, r.derivOK = f.Derivatives()
}
