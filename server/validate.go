package server

import (
	"math"
	"strings"
	"unicode/utf8"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Accepted ranges of state variables. They are far wider than any
// equation of state is trustworthy over; they exist so that no solver ever
// sees a number that can only be a unit mistake or garbage.
const (
	minTemperatureK = 1.0   // K
	maxTemperatureK = 1e4   // K
	minPressurePa   = 1e-3  // Pa
	maxPressurePa   = 1e10  // Pa (10 GPa)
	minMolarVolume  = 1e-7  // m³/mol, below any liquid's co-volume
	maxMolarVolume  = 1e6   // m³/mol, a rarefied gas
	maxAbsMolarCal  = 1e9   // J/mol or J/(mol·K): any larger magnitude is a unit mistake
	maxIDLength     = 64    // characters of a component id
	maxFilterLength = 64    // characters of ListComponentsRequest.filter
	minIterationCap = 10    // SolverOptions.max_iterations, when not zero
	maxIterationCap = 10000 // SolverOptions.max_iterations
	minTolerance    = 1e-14
	maxTolerance    = 1e-4

	// sumTolerance is the relative distance of a composition's sum from 1
	// within which it is normalised; a sum farther from 1 is rejected,
	// because it usually means a missing component or a percentage sent as
	// a fraction.
	sumTolerance = 1e-6
)

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// checkFinite records a violation when x is NaN or ±Inf and reports
// whether x is finite.
func checkFinite(v *violations, field string, x float64) bool {
	if !finite(x) {
		v.add(field, "must be a finite number, got %v", x)
		return false
	}
	return true
}

// checkRange records a violation unless lo ≤ x ≤ hi.
func checkRange(v *violations, field string, x, lo, hi float64, unit string) {
	if !checkFinite(v, field, x) {
		return
	}
	if x < lo || x > hi {
		v.add(field, "must be within [%g, %g] %s, got %g", lo, hi, unit, x)
	}
}

// checkPositive records a violation unless x is finite and positive.
func checkPositive(v *violations, field string, x float64) {
	if !checkFinite(v, field, x) {
		return
	}
	if x <= 0 {
		v.add(field, "must be positive, got %g", x)
	}
}

func checkTemperature(v *violations, field string, t float64) {
	checkRange(v, field, t, minTemperatureK, maxTemperatureK, "K")
}

func checkPressure(v *violations, field string, p float64) {
	checkRange(v, field, p, minPressurePa, maxPressurePa, "Pa")
}

func checkMolarVolume(v *violations, field string, x float64) {
	checkRange(v, field, x, minMolarVolume, maxMolarVolume, "m³/mol")
}

func checkCaloric(v *violations, field string, x float64) {
	checkRange(v, field, x, -maxAbsMolarCal, maxAbsMolarCal, "")
}

func checkFraction(v *violations, field string, x float64) {
	checkRange(v, field, x, 0, 1, "")
}

func checkID(v *violations, field, id string) {
	switch {
	case id == "":
		v.add(field, "must not be empty")
	case !utf8.ValidString(id):
		v.add(field, "must be valid UTF-8")
	case utf8.RuneCountInString(id) > maxIDLength:
		v.add(field, "must be at most %d characters, got %d", maxIDLength, utf8.RuneCountInString(id))
	}
}

// composition validates mole fractions of an n-component fluid and returns
// them normalised to sum exactly 1, or nil after recording violations.
//
// Each entry must be finite and non-negative, the list must have one entry
// per component, and the sum must be within sumTolerance (relative) of 1:
// such a sum is normalised, any other is rejected.
func composition(v *violations, field string, x []float64, n int) []float64 {
	if out, ok := normalise(x, n); ok {
		return out
	}
	if len(x) == 0 {
		v.add(field, "required: one mole fraction per component (%d)", n)
		return nil
	}
	if len(x) != n {
		v.add(field, "has %d entries, the fluid has %d components", len(x), n)
		return nil
	}
	ok := true
	sum := 0.0
	for i, xi := range x {
		// The field path is built only for a violation: this loop runs for
		// every state of every batch.
		if !finite(xi) {
			checkFinite(v, index(field, i), xi)
			ok = false
			continue
		}
		if xi < 0 {
			v.add(index(field, i), "mole fraction must not be negative, got %g", xi)
			ok = false
			continue
		}
		sum += xi
	}
	if !ok {
		return nil
	}
	if math.Abs(sum-1) > sumTolerance {
		v.add(field, "mole fractions sum to %.9g; they must sum to 1 within %g (relative)", sum, sumTolerance)
		return nil
	}
	out := make([]float64, n)
	for i, xi := range x {
		out[i] = xi / sum
	}
	return out
}

// normalise is composition's accepting path without its messages: x
// normalised (the same sum in the same order, the same divisions) when
// composition accepts it, else ok false. Callers on the hot path use it to
// build the field path of a violation only when there is one.
func normalise(x []float64, n int) (out []float64, ok bool) {
	if len(x) != n || n == 0 {
		return nil, false
	}
	sum := 0.0
	for _, xi := range x {
		if !(xi >= 0) || math.IsInf(xi, 1) {
			return nil, false
		}
		sum += xi
	}
	if math.Abs(sum-1) > sumTolerance {
		return nil, false
	}
	out = make([]float64, n)
	for i, xi := range x {
		out[i] = xi / sum
	}
	return out, true
}

// inRange reports whether x is finite and lo ≤ x ≤ hi: checkRange's
// accepting case.
func inRange(x, lo, hi float64) bool { return x >= lo && x <= hi && finite(x) }

// solverOptions validates SolverOptions (nil is valid: all defaults).
func solverOptions(v *violations, field string, o *fugadv1.SolverOptions) {
	if o == nil {
		return
	}
	if t := o.GetTolerance(); t != 0 {
		checkRange(v, fieldPath(field, "tolerance"), t, minTolerance, maxTolerance, "")
	}
	if m := o.GetMaxIterations(); m != 0 && (m < minIterationCap || m > maxIterationCap) {
		v.add(fieldPath(field, "max_iterations"), "must be 0 (the solver's default) or within [%d, %d], got %d", minIterationCap, maxIterationCap, m)
	}
}

// warmStart validates an initial estimate for an n-component fluid.
func warmStart(v *violations, field string, w *fugadv1.WarmStart, n int) {
	if w == nil {
		return
	}
	if k := w.GetKValues(); len(k) > 0 {
		f := fieldPath(field, "k_values")
		if len(k) != n {
			v.add(f, "has %d entries, the fluid has %d components", len(k), n)
		} else {
			for i, ki := range k {
				checkRange(v, index(f, i), ki, 1e-300, 1e300, "")
			}
		}
	}
	if len(w.GetPhases()) > 3 {
		v.add(fieldPath(field, "phases"), "at most 3 phases, got %d", len(w.GetPhases()))
	} else {
		for i, p := range w.GetPhases() {
			f := index(fieldPath(field, "phases"), i)
			checkFraction(v, fieldPath(f, "amount"), p.GetAmount())
			composition(v, fieldPath(f, "mole_fractions"), p.GetMoleFractions(), n)
			if l := p.GetLabel(); fugadv1.PhaseLabel_name[int32(l)] == "" {
				v.add(fieldPath(f, "label"), "unknown phase label %d", l)
			}
		}
	}
	if w.TemperatureK != nil {
		checkTemperature(v, fieldPath(field, "temperature_k"), w.GetTemperatureK())
	}
	if w.PressurePa != nil {
		checkPressure(v, fieldPath(field, "pressure_pa"), w.GetPressurePa())
	}
	lnKSensitivity(v, fieldPath(field, "ln_k_temperature_sensitivity_per_k"), w.GetLnKTemperatureSensitivityPerK(), n, maxLnKTemperatureSensitivity, "1/K")
	lnKSensitivity(v, fieldPath(field, "ln_k_pressure_sensitivity_per_pa"), w.GetLnKPressureSensitivityPerPa(), n, maxLnKPressureSensitivity, "1/Pa")
	if w.MolarEnthalpyJPerMol != nil {
		checkRange(v, fieldPath(field, "molar_enthalpy_j_per_mol"), w.GetMolarEnthalpyJPerMol(), -maxAbsMolarCal, maxAbsMolarCal, "J/mol")
	}
	if w.MolarEntropyJPerMolK != nil {
		checkRange(v, fieldPath(field, "molar_entropy_j_per_mol_k"), w.GetMolarEntropyJPerMolK(), -maxAbsMolarCal, maxAbsMolarCal, "J/(mol·K)")
	}
	stateDerivatives(v, fieldPath(field, "state_derivatives"), w.GetStateDerivatives())
}

// lnKSensitivity validates a warm start's ln K sensitivities: empty, or
// one finite value per component of magnitude at most bound.
func lnKSensitivity(v *violations, field string, d []float64, n int, bound float64, unit string) {
	if len(d) == 0 {
		return
	}
	if len(d) != n {
		v.add(field, "has %d entries, the fluid has %d components", len(d), n)
		return
	}
	for i, di := range d {
		if !inRange(di, -bound, bound) {
			checkRange(v, index(field, i), di, -bound, bound, unit)
		}
	}
}

// specKind names a flash specification for metrics and logs.
type specKind string

const (
	specTP   specKind = "tp"
	specPH   specKind = "ph"
	specPS   specKind = "ps"
	specTV   specKind = "tv"
	specUV   specKind = "uv"
	specPVF  specKind = "p_vapour_fraction"
	specTVF  specKind = "t_vapour_fraction"
	specNone specKind = ""
)

// flashState is a validated FlashState: composition normalised, the
// specification checked.
type flashState struct {
	x    []float64
	spec specKind
	msg  *fugadv1.FlashState
}

// checkFlashState validates one state of an n-component fluid. def is the
// default composition (already validated and normalised) used when the
// state has none; nil when there is no default.
func checkFlashState(v *violations, field string, s *fugadv1.FlashState, n int, def []float64) flashState {
	out := flashState{msg: s}
	if s == nil {
		v.add(field, "required")
		return out
	}
	// Field paths are built only for a violation: this runs for every
	// state of every batch and stream.
	if len(s.GetMoleFractions()) == 0 && def != nil {
		out.x = def
	} else if x, ok := normalise(s.GetMoleFractions(), n); ok {
		out.x = x
	} else {
		out.x = composition(v, fieldPath(field, "mole_fractions"), s.GetMoleFractions(), n)
	}
	switch sp := s.GetSpecification().(type) {
	case *fugadv1.FlashState_Tp:
		out.spec = specTP
		if sp.Tp == nil {
			v.add(fieldPath(field, "tp"), "required")
			break
		}
		if T := sp.Tp.GetTemperatureK(); !inRange(T, minTemperatureK, maxTemperatureK) {
			checkTemperature(v, fieldPath(field, "tp", "temperature_k"), T)
		}
		if P := sp.Tp.GetPressurePa(); !inRange(P, minPressurePa, maxPressurePa) {
			checkPressure(v, fieldPath(field, "tp", "pressure_pa"), P)
		}
	case *fugadv1.FlashState_Ph:
		out.spec = specPH
		f := fieldPath(field, "ph")
		checkPressure(v, fieldPath(f, "pressure_pa"), sp.Ph.GetPressurePa())
		checkCaloric(v, fieldPath(f, "molar_enthalpy_j_per_mol"), sp.Ph.GetMolarEnthalpyJPerMol())
	case *fugadv1.FlashState_Ps:
		out.spec = specPS
		f := fieldPath(field, "ps")
		checkPressure(v, fieldPath(f, "pressure_pa"), sp.Ps.GetPressurePa())
		checkCaloric(v, fieldPath(f, "molar_entropy_j_per_mol_k"), sp.Ps.GetMolarEntropyJPerMolK())
	case *fugadv1.FlashState_Tv:
		out.spec = specTV
		f := fieldPath(field, "tv")
		checkTemperature(v, fieldPath(f, "temperature_k"), sp.Tv.GetTemperatureK())
		checkMolarVolume(v, fieldPath(f, "molar_volume_m3_per_mol"), sp.Tv.GetMolarVolumeM3PerMol())
	case *fugadv1.FlashState_Uv:
		out.spec = specUV
		f := fieldPath(field, "uv")
		checkCaloric(v, fieldPath(f, "molar_internal_energy_j_per_mol"), sp.Uv.GetMolarInternalEnergyJPerMol())
		checkMolarVolume(v, fieldPath(f, "molar_volume_m3_per_mol"), sp.Uv.GetMolarVolumeM3PerMol())
	case *fugadv1.FlashState_PVapourFraction:
		out.spec = specPVF
		f := fieldPath(field, "p_vapour_fraction")
		checkPressure(v, fieldPath(f, "pressure_pa"), sp.PVapourFraction.GetPressurePa())
		checkFraction(v, fieldPath(f, "vapour_fraction"), sp.PVapourFraction.GetVapourFraction())
	case *fugadv1.FlashState_TVapourFraction:
		out.spec = specTVF
		f := fieldPath(field, "t_vapour_fraction")
		checkTemperature(v, fieldPath(f, "temperature_k"), sp.TVapourFraction.GetTemperatureK())
		checkFraction(v, fieldPath(f, "vapour_fraction"), sp.TVapourFraction.GetVapourFraction())
	default:
		v.add(fieldPath(field, "specification"), "required: one of tp, ph, ps, tv, uv, p_vapour_fraction, t_vapour_fraction")
	}
	if w := s.GetWarmStart(); w != nil {
		warmStart(v, fieldPath(field, "warm_start"), w, n)
	}
	return out
}

// closeMatches formats suggestions for an unknown name.
func closeMatches(s []string) string {
	if len(s) == 0 {
		return "; see ListComponents for the known ids"
	}
	return "; close matches: " + strings.Join(s, ", ")
}
