package flash

import (
	"github.com/fugad/fugad/thermo/eos"
)

// Label names the kind of a phase.
type Label int

// Phase labels, assigned by the rule in the package documentation
// ("Phase labels").
const (
	LabelUnknown Label = iota
	// LabelVapour: the least dense non-aqueous phase, when it is
	// vapour-like (v/b above the model's critical v/b).
	LabelVapour
	// LabelLiquid: any other non-aqueous phase.
	LabelLiquid
	// LabelAqueous: a phase with water mole fraction above 0.5.
	LabelAqueous
)

var labelNames = [...]string{"unknown", "vapour", "liquid", "aqueous"}

// String names the label.
func (l Label) String() string {
	if l < 0 || int(l) >= len(labelNames) {
		return "unknown"
	}
	return labelNames[l]
}

// Path says which route a flash took.
type Path int

// Paths.
const (
	// PathCold: full stability analysis of the feed, no estimate used.
	PathCold Path = iota
	// PathWarm: the caller's estimate converged and the result passed the
	// stability test.
	PathWarm
	// PathWarmFallback: the estimate was rejected (did not converge, gave a
	// trivial or out-of-range split, or failed the stability test) and the
	// cold path produced the result.
	PathWarmFallback
	// PathUnverified: a split converged from the estimate by
	// Workspace.Split, not tested for stability (PT never returns it).
	PathUnverified
)

var pathNames = [...]string{"cold", "warm", "warm-fallback", "unverified"}

// String returns "cold", "warm", "warm-fallback" or "unverified".
func (p Path) String() string {
	if p < 0 || int(p) >= len(pathNames) {
		return "unknown"
	}
	return pathNames[p]
}

// Report says what a flash did. Counts add up over all stages of one call.
type Report struct {
	Path Path
	// Converged is true when the result meets Options.Tolerance and passed
	// its stability test.
	Converged bool
	// Phases is the phase count found.
	Phases int
	// StabilityTrials and StabilityIterations count the trial phases of
	// all stability tests and their iterations (successive substitution
	// and Newton).
	StabilityTrials     int
	StabilityIterations int
	// SSIterations and NewtonIterations count the phase-split iterations.
	SSIterations     int
	NewtonIterations int
	// RRIterations counts the Rachford–Rice (two-phase) and convex
	// multiphase-split iterations.
	RRIterations int
	// LnPhiEvaluations counts calls of the ln φ kernel (with or without
	// derivatives), excluding the final property evaluations.
	LnPhiEvaluations int
	// Residual is max |ln f_i,α − ln f_i,β| over the phases of the result
	// (zero for one phase).
	Residual float64
	// MinTPD is the smallest tangent-plane distance found by the last
	// stability test, tpd = Σ w_i (ln w_i + ln φ_i(w) − ln x_i − ln φ_i(x));
	// it is ≥ −TPDTolerance for a returned result.
	MinTPD float64
}

// Phase is one equilibrium phase.
type Phase struct {
	Label Label
	// Beta is the phase's mole fraction of the feed, in (0, 1].
	Beta float64
	// X is the composition (mole fractions).
	X []float64
	// LnPhi holds ln φ_i of the phase.
	LnPhi []float64
	// Z is the compressibility factor (of the translated volume when the
	// mixture translates volumes).
	Z float64
	// Props holds the phase properties (zero with Options.NoProperties).
	Props eos.Properties
}

// Overall holds mole-averaged properties of the whole feed at T and P,
// Σ_k β_k·(property of phase k). Heat capacities are not given: in a
// multiphase fluid they include the heat of phase change, which a sum of
// phase values leaves out.
type Overall struct {
	MolarVolume  float64 // m³/mol
	MolarDensity float64 // mol/m³
	MassDensity  float64 // kg/m³
	MolarMass    float64 // kg/mol
	H            float64 // J/mol
	S            float64 // J/(mol·K)
	G            float64 // J/mol
	U            float64 // J/mol
	A            float64 // J/mol
}

// Result is the outcome of a T–P flash. Make one with NewResult and reuse
// it: a flash writes into its preallocated slices and allocates nothing.
type Result struct {
	T, P float64
	// Z is the normalised feed.
	Z []float64
	// Phases lists the phases: the vapour first (if any), then liquids by
	// decreasing molar volume, then the aqueous phase.
	Phases []Phase
	// Overall is filled unless Options.NoProperties.
	Overall Overall
	// LnK holds ln K_i = ln(x_i of Phases[0] / x_i of Phases[last]) when
	// there are two or more phases, and zeros otherwise.
	LnK    []float64
	Report Report

	// dLnKdT and dLnKdP hold d ln K_i/dT and d ln K_i/dP of a converged
	// two-phase result when sensOK.
	dLnKdT, dLnKdP []float64
	sensOK         bool
	deriv          StateDerivatives
	derivOK        bool

	phaseBuf [MaxPhases]Phase
	betaBuf  [MaxPhases]float64
	xBuf     [MaxPhases][]float64
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

// StateDerivatives are derivatives of the equilibrium state per mole of
// feed at fixed feed, the change of the phase split included: (∂H/∂T)_P
// (the total heat capacity, J/(mol·K)), (∂H/∂P)_T (J/(mol·Pa)),
// (∂V/∂T)_P (m³/(mol·K)) and (∂V/∂P)_T (m³/(mol·Pa)). With two phases
// (Michelsen & Mollerup 2007, ch. 11)
//
//	∂H/∂θ = Σ_k β_k ∂h_k/∂θ + Σ_i (h̄_i1 − h̄_i0)·dn_i1/dθ,  θ = T, P,
//
// h̄ the partial molar enthalpies and dn_i1/dθ the change of the split
// from the differentiated fugacity equality; V likewise with v̄.
type StateDerivatives struct {
	HT, HP, VT, VP float64
}

// Derivatives returns the state derivatives of a converged two-phase
// result, computed with the Hessian factor of the Newton solve (accurate
// to about the residual of its last steps, enough for a Newton method on
// T or P), and false when they are not available: other phase counts,
// Options.NoProperties, a split converged without a Newton step or with a
// shifted Hessian.
func (r *Result) Derivatives() (StateDerivatives, bool) {
	return r.deriv, r.derivOK
}

// Estimate is a starting point for a flash: the phase count, amounts and
// compositions of a nearby state (typically the previous timestep of a
// simulation). Either X (one composition per phase) or, for two phases,
// LnK alone may be given; X wins when both are set.
type Estimate struct {
	// Phases is the phase count, 1 to MaxPhases.
	Phases int
	// Beta holds the phase amounts (optional; len Phases when set).
	Beta []float64
	// X holds one composition per phase (len Phases, each len n).
	X [][]float64
	// LnK holds ln(x_i,phase0/x_i,phase1) for a two-phase estimate.
	LnK []float64
	// T and P are the temperature (K) and pressure (Pa) of the state the
	// estimate describes (optional; zero means unknown).
	T, P float64
	// DLnKDT and DLnKDP hold d ln K_i/dT (1/K) and d ln K_i/dP (1/Pa) of a
	// two-phase estimate at (T, P), K_i as in LnK (optional, len n each;
	// nil means unknown). With T, P and both set, a flash at (T', P')
	// starts from the K-values shifted to first order,
	//	ln K_i + DLnKDT_i·(T' − T) + DLnKDP_i·(P' − P),
	// (the largest shift limited to 1), which saves Newton steps when the
	// state moves by small steps, as between timesteps.
	DLnKDT, DLnKDP []float64
}

// Estimate returns the result as a warm start for the next flash, with
// its state (T, P) and, for a converged two-phase result, the
// sensitivities of its K-values (from the end of the Newton solve). The
// returned value shares the result's memory (no allocation); a flash
// copies its estimate before writing, so passing a Result's own estimate
// back into a flash that writes the same Result is safe.
func (r *Result) Estimate() Estimate {
	k := len(r.Phases)
	for i := range k {
		r.betaBuf[i] = r.Phases[i].Beta
	}
	e := Estimate{Phases: k, Beta: r.betaBuf[:k], X: r.xBuf[:k], T: r.T, P: r.P}
	if k >= 2 {
		e.LnK = r.LnK
	}
	if k == 2 && r.sensOK {
		e.DLnKDT, e.DLnKDP = r.dLnKdT, r.dLnKdP
	}
	return e
}
