package server

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"

	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/flash"
	"github.com/fugad/fugad/thermo/stateflash"
)

// ReasonUnreachable is the ErrorInfo reason of a state-function flash whose
// specification no state inside the solver's search range reaches
// (INVALID_ARGUMENT, with a field violation on the specified value).
const ReasonUnreachable = "SPECIFICATION_UNREACHABLE"

// maxStateOuterIterations is stateflash.Options.MaxIterations' upper
// bound; a larger wire max_iterations is capped to it for the outer
// iteration and passed whole to the inner T–P flashes.
const maxStateOuterIterations = 1000

// stateOptions maps the wire solver options onto a state-function
// flash's: the tolerance applies to both the specification and the inner
// flashes' fugacity equality, the iteration cap to the inner flashes'
// stages and (capped) to the outer iteration. Zero selects the defaults.
func stateOptions(o *fugadv1.SolverOptions) stateflash.Options {
	opts := stateflash.Options{Tolerance: o.GetTolerance(), Flash: flashOptions(o)}
	if m := int(o.GetMaxIterations()); m > 0 {
		opts.MaxIterations = min(m, maxStateOuterIterations)
	}
	return opts
}

// solveState is the translation of a P–H, P–S, T–V or U–V flash onto
// stateflash.Workspace: the job's two specified values, composition,
// options and warm start (temperature_k, pressure_pa, the phase split or
// K-values, the ln K sensitivities, the molar enthalpy and entropy and the
// state derivatives, which all hold at that temperature and pressure) in,
// a FlashResult out, whose warm_start carries the solved temperature and
// pressure besides the phases, the inner split's ln K sensitivities for
// two phases, and the enthalpy, entropy and state derivatives of
// Result.Estimate when they are within the bounds of the validation (see
// setStateWarm). Errors: see stateError.
func (s *Server) solveState(ctx context.Context, job *flashJob) (*fugadv1.FlashResult, error) {
	cf := job.fluid
	sc := getSolverScratch(cf)
	defer putSolverScratch(cf, sc)
	ws, res := sc.stateFlash()
	opts := stateOptions(job.opts)
	if s.flashOptionsHook != nil {
		s.flashOptionsHook(&opts.Flash)
	}
	var warm *stateflash.Estimate
	var est stateflash.Estimate
	if w := job.warm; w != nil {
		est.T, est.P = w.GetTemperatureK(), w.GetPressurePa()
		if fe := sc.fe.estimate(w); fe != nil {
			est.Flash = *fe
		}
		stateEstimate(&est, w)
		warm = &est
	}
	var err error
	switch job.spec {
	case specPH:
		err = ws.PH(ctx, job.a, job.b, job.x, opts, warm, res)
	case specPS:
		err = ws.PS(ctx, job.a, job.b, job.x, opts, warm, res)
	case specTV:
		err = ws.TV(ctx, job.a, job.b, job.x, opts, warm, res)
	case specUV:
		err = ws.UV(ctx, job.a, job.b, job.x, opts, warm, res)
	default:
		return nil, errInternal("state-function flash of specification " + string(job.spec))
	}
	if err != nil {
		return nil, s.stateError(err, res, opts, job)
	}
	fr := flash.Result{T: res.T, P: res.P, Z: res.Z, Phases: res.Phases, Overall: res.Overall, LnK: res.LnK}
	out := s.flashResult(&fr, s.stateReport(&res.Report, job.quant), true)
	if out == nil {
		return nil, errInternal("the state-function flash produced a non-finite number")
	}
	// The inner split's sensitivities are not in fr (they are unexported
	// state of the flash result): they come from the state-function
	// result's own estimate, whose inner state is (res.T, res.P), the
	// warm start's temperature_k and pressure_pa.
	e := res.Estimate()
	if len(res.Phases) == 2 && sendableSensitivities(e.Flash.DLnKDT, e.Flash.DLnKDP, len(res.Z)) {
		n := len(res.Z)
		buf := make([]float64, 2*n)
		copy(buf, e.Flash.DLnKDT)
		copy(buf[n:], e.Flash.DLnKDP)
		out.WarmStart.LnKTemperatureSensitivityPerK, out.WarmStart.LnKPressureSensitivityPerPa = buf[:n:n], buf[n:]
	}
	setStateWarm(out.WarmStart, &e)
	return out, nil
}

// Bounds of the state derivatives a warm start may carry
// (fugadv1.StateDerivatives). The total heat capacity (∂H/∂T)_P of a
// stable state is positive (Callen, Thermodynamics and an Introduction to
// Thermostatistics, 2nd ed., 1985, ch. 8, from memory) and, like the
// enthalpy, at most
// maxAbsMolarCal. (∂V/∂P)_T of a gas is about −V/P, at most 1e9
// m³/(mol·Pa) at the accepted extremes of molar volume (1e6 m³/mol) and
// pressure (1e-3 Pa); (∂V/∂T)_P ≈ V/T and (∂H/∂P)_T = V − T·(∂V/∂T)_P
// away from a critical point are smaller. A magnitude beyond
// maxStateDerivative can only be garbage; results whose derivatives fall
// outside the bounds are sent without them, so that a warm start copied
// back unchanged is always accepted.
const (
	maxHeatCapacity    = maxAbsMolarCal // J/(mol·K)
	maxStateDerivative = 1e12           // J/(mol·Pa), m³/(mol·K), m³/(mol·Pa)
)

// stateDerivativeFields are the fields of fugadv1.StateDerivatives in the
// order of stateDerivativeValues, with their units.
var stateDerivativeFields = [4]struct{ name, unit string }{
	{"enthalpy_temperature_derivative_j_per_mol_k", "J/(mol·K)"},
	{"enthalpy_pressure_derivative_j_per_mol_pa", "J/(mol·Pa)"},
	{"volume_temperature_derivative_m3_per_mol_k", "m³/(mol·K)"},
	{"volume_pressure_derivative_m3_per_mol_pa", "m³/(mol·Pa)"},
}

// stateDerivativeValues lists d's fields in the order of
// stateDerivativeFields.
func stateDerivativeValues(d *fugadv1.StateDerivatives) [4]float64 {
	return [4]float64{d.GetEnthalpyTemperatureDerivativeJPerMolK(), d.GetEnthalpyPressureDerivativeJPerMolPa(),
		d.GetVolumeTemperatureDerivativeM3PerMolK(), d.GetVolumePressureDerivativeM3PerMolPa()}
}

// validStateDerivatives reports whether the four derivatives are finite
// and within their bounds ((∂H/∂T)_P in (0, maxHeatCapacity], the others
// of magnitude at most maxStateDerivative).
func validStateDerivatives(d [4]float64) bool {
	if !(d[0] > 0) || !inRange(d[0], 0, maxHeatCapacity) {
		return false
	}
	for _, x := range d[1:] {
		if !inRange(x, -maxStateDerivative, maxStateDerivative) {
			return false
		}
	}
	return true
}

// stateDerivatives validates a warm start's state_derivatives (absent is
// valid), naming the offending field.
func stateDerivatives(v *violations, field string, d *fugadv1.StateDerivatives) {
	if d == nil {
		return
	}
	vals := stateDerivativeValues(d)
	for i, x := range vals {
		f := fieldPath(field, stateDerivativeFields[i].name)
		switch {
		case i == 0 && finite(x) && !(x > 0):
			v.add(f, "must be positive (the heat capacity of a stable state), got %g", x)
		case i == 0:
			checkRange(v, f, x, 0, maxHeatCapacity, stateDerivativeFields[i].unit)
		default:
			checkRange(v, f, x, -maxStateDerivative, maxStateDerivative, stateDerivativeFields[i].unit)
		}
	}
}

// stateEstimate adds a warm start's molar enthalpy, entropy and state
// derivatives to est. The derivatives count (HasDeriv) only with both
// caloric values present, as the wire documents; absent values are zero.
func stateEstimate(est *stateflash.Estimate, w *fugadv1.WarmStart) {
	est.H, est.S = w.GetMolarEnthalpyJPerMol(), w.GetMolarEntropyJPerMolK()
	if d := w.GetStateDerivatives(); d != nil && w.MolarEnthalpyJPerMol != nil && w.MolarEntropyJPerMolK != nil {
		vals := stateDerivativeValues(d)
		est.Deriv = flash.StateDerivatives{HT: vals[0], HP: vals[1], VT: vals[2], VP: vals[3]}
		est.HasDeriv = true
	}
}

// setStateWarm writes the molar enthalpy and entropy of a state-function
// result's estimate e into its warm start ws, each when finite and within
// ±maxAbsMolarCal, and the state derivatives when e has them, both
// caloric values were written and all four derivatives are within their
// bounds: a warm start copied back unchanged passes the validation and
// gives the library call with e itself.
func setStateWarm(ws *fugadv1.WarmStart, e *stateflash.Estimate) {
	if ws == nil {
		return
	}
	if inRange(e.H, -maxAbsMolarCal, maxAbsMolarCal) {
		ws.MolarEnthalpyJPerMol = proto.Float64(e.H)
	}
	if inRange(e.S, -maxAbsMolarCal, maxAbsMolarCal) {
		ws.MolarEntropyJPerMolK = proto.Float64(e.S)
	}
	d := e.Deriv
	if e.HasDeriv && ws.MolarEnthalpyJPerMol != nil && ws.MolarEntropyJPerMolK != nil && validStateDerivatives([4]float64{d.HT, d.HP, d.VT, d.VP}) {
		ws.StateDerivatives = &fugadv1.StateDerivatives{
			EnthalpyTemperatureDerivativeJPerMolK: d.HT, EnthalpyPressureDerivativeJPerMolPa: d.HP,
			VolumeTemperatureDerivativeM3PerMolK: d.VT, VolumePressureDerivativeM3PerMolPa: d.VP,
		}
	}
}

// stateReport translates a stateflash.Report: the outer iteration as stage
// STATE_FUNCTION, then the inner flashes' stages summed, in the order of
// flashReport. The initial estimate is WARM_START when the call had an
// estimate, except WARM_START_REJECTED when every inner flash that used an
// estimate fell back to full stability analysis; the final residual is the
// larger of the fugacity and the specification residual.
func (s *Server) stateReport(r *stateflash.Report, quant float64) *fugadv1.SolverReport {
	fr := flash.Report{
		Converged: r.Converged, Phases: r.Phases,
		StabilityTrials: r.StabilityTrials, StabilityIterations: r.StabilityIterations,
		SSIterations: r.SSIterations, NewtonIterations: r.NewtonIterations, RRIterations: r.RRIterations,
		LnPhiEvaluations: r.LnPhiEvaluations, Residual: math.Max(r.Residual, r.SpecResidual), MinTPD: r.MinTPD,
	}
	rep := s.flashReport(&fr, quant)
	outer := &fugadv1.StageReport{Stage: fugadv1.SolverStage_SOLVER_STAGE_STATE_FUNCTION, Iterations: uint32(r.OuterIterations), Converged: r.Converged}
	rep.Stages = append([]*fugadv1.StageReport{outer}, rep.Stages...)
	switch {
	case !r.Warm:
		rep.InitialEstimate = fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION
	case r.WarmFlashes == 0 && r.FallbackFlashes > 0:
		rep.InitialEstimate = fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START_REJECTED
	default:
		rep.InitialEstimate = fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START
	}
	return rep
}

// specFields are the wire fields, below the state, of each specified
// variable of the state-function and vapour-fraction specifications, by
// the variable names the thermo packages use in their errors.
var specFields = map[specKind]map[string]string{
	specPH:  {"P": "ph.pressure_pa", "H": "ph.molar_enthalpy_j_per_mol"},
	specPS:  {"P": "ps.pressure_pa", "S": "ps.molar_entropy_j_per_mol_k"},
	specTV:  {"T": "tv.temperature_k", "V": "tv.molar_volume_m3_per_mol"},
	specUV:  {"U": "uv.molar_internal_energy_j_per_mol", "V": "uv.molar_volume_m3_per_mol"},
	specPVF: {"P": "p_vapour_fraction.pressure_pa", "beta": "p_vapour_fraction.vapour_fraction"},
	specTVF: {"T": "t_vapour_fraction.temperature_k", "beta": "t_vapour_fraction.vapour_fraction"},
}

// commonFields maps the other argument names of the thermo packages'
// input errors onto wire fields (below the state, or options.*).
var commonFields = map[string]string{
	"z":                     "mole_fractions",
	"warm.T":                "warm_start.temperature_k",
	"warm.P":                "warm_start.pressure_pa",
	"warm.X":                "warm_start.phases",
	"warm.Beta":             "warm_start.phases",
	"warm.LnK":              "warm_start.k_values",
	"warm.Phases":           "warm_start.phases",
	"warm.DLnKDT":           "warm_start.ln_k_temperature_sensitivity_per_k",
	"warm.DLnKDP":           "warm_start.ln_k_pressure_sensitivity_per_pa",
	"Hint.Start":            "warm_start",
	"Hint.LnK":              "warm_start.k_values",
	"Options.Tolerance":     "options.tolerance",
	"Options.MaxIterations": "options.max_iterations",
	"opts.Tolerance":        "options.tolerance",
	"opts.MaxIterations":    "options.max_iterations",
}

// inputViolation maps an input error's argument name to a field violation
// of the job's state (or of the request's options).
func inputViolation(job *flashJob, name, reason string, value float64) error {
	if i := strings.IndexByte(name, '['); i >= 0 {
		name = name[:i]
	}
	f, ok := specFields[job.spec][name]
	if !ok {
		f, ok = commonFields[name]
	}
	var v violations
	switch {
	case ok && strings.HasPrefix(f, "options."):
		v.add(f, "%s (value %g)", reason, value)
	case ok:
		v.add(fieldPath(job.field, f), "%s (value %g)", reason, value)
	default:
		v.add(job.field, "%s: %s (value %g)", name, reason, value)
	}
	return v.err()
}

// stateError maps an error of a state-function flash to a status:
//   - *stateflash.RangeError: INVALID_ARGUMENT, reason
//     SPECIFICATION_UNREACHABLE, a violation on the specified value that
//     the fluid does not reach, with the bound and the value there;
//   - *stateflash.ConvergenceError: ABORTED/NOT_CONVERGED with the best
//     estimate (temperature, pressure, report; no phases) and residual;
//   - input errors: INVALID_ARGUMENT naming the field;
//   - the end of the context: its code, counted as stopped work.
func (s *Server) stateError(err error, res *stateflash.Result, opts stateflash.Options, job *flashJob) error {
	var re *stateflash.RangeError
	var ce *stateflash.ConvergenceError
	var ie *stateflash.InputError
	var fie *flash.InputError
	switch {
	case errors.As(err, &re):
		return unreachable(job, re)
	case errors.As(err, &ce):
		stage := "other"
		var inner *flash.ConvergenceError
		if errors.As(ce.Err, &inner) {
			stage = failedStage(inner.Stage)
		}
		s.metrics.nonConverged.WithLabelValues(ReasonNotConverged, stage).Inc()
		rep := s.stateReport(&res.Report, job.quant)
		rep.Converged = false
		for _, st := range rep.Stages {
			st.Converged = false
		}
		resid := ce.Residual
		if !finite(resid) {
			resid = noFiniteResidual
			rep.FinalResidual = 0
		} else {
			rep.FinalResidual = resid
		}
		tol := opts.Tolerance
		if tol == 0 {
			tol = defaultFlashTolerance
		}
		d := &fugadv1.NotConvergedDetail{Residual: resid, Tolerance: tol, Report: rep}
		if finite(ce.T) && finite(ce.P) && ce.T > 0 && ce.P > 0 {
			d.BestEstimate = &fugadv1.NotConvergedDetail_Flash{Flash: &fugadv1.FlashResult{TemperatureK: ce.T, PressurePa: ce.P, Report: rep}}
		}
		what := fmt.Sprintf("%v flash: %s", ce.Spec, ce.Stage)
		return notConverged(what, ce.Iterations, resid, d)
	case errors.As(err, &ie):
		return inputViolation(job, ie.Field, ie.Reason, ie.Value)
	case errors.As(err, &fie):
		return inputViolation(job, fie.Field, fie.Reason, fie.Value)
	}
	return s.flashError(err, job)
}

// unreachable is the INVALID_ARGUMENT status of a specification outside
// what the fluid reaches inside the search range.
func unreachable(job *flashJob, re *stateflash.RangeError) error {
	var name, unit string
	switch {
	case job.spec == specPH:
		name, unit = "H", "J/mol"
	case job.spec == specPS:
		name, unit = "S", "J/(mol·K)"
	case job.spec == specTV, job.spec == specUV && re.Variable == "P":
		name, unit = "V", "m³/mol"
	default:
		name, unit = "U", "J/mol"
	}
	bunit := "K"
	if re.Variable == "P" {
		bunit = "Pa"
	}
	var v violations
	v.add(fieldPath(job.field, specFields[job.spec][name]),
		"%g %s is not reached by the fluid inside the search range: at %s = %g %s, the bound of the search, it has %g %s",
		re.Want, unit, re.Variable, re.Bound, bunit, re.Got, unit)
	v.reason = ReasonUnreachable
	return v.err()
}
