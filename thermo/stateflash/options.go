package stateflash

import (
	"math"

	"github.com/fugad/fugad/thermo/flash"
)

// Spec names the pair of state functions a flash is given.
type Spec int

// Specifications.
const (
	SpecUnspecified Spec = iota
	// SpecPH: pressure and molar enthalpy.
	SpecPH
	// SpecPS: pressure and molar entropy.
	SpecPS
	// SpecTV: temperature and molar volume.
	SpecTV
	// SpecUV: molar internal energy and molar volume.
	SpecUV
)

var specNames = [...]string{"unspecified", "P–H", "P–S", "T–V", "U–V"}

// String returns "P–H", "P–S", "T–V" or "U–V".
func (s Spec) String() string {
	if s < 0 || int(s) >= len(specNames) {
		return "unknown"
	}
	return specNames[s]
}

// quantity names the specified state function checked by the iteration.
func (s Spec) quantity() string {
	switch s {
	case SpecPH:
		return "H (J/mol)"
	case SpecPS:
		return "S (J/(mol·K))"
	case SpecTV:
		return "V (m³/mol)"
	case SpecUV:
		return "U (J/mol)"
	}
	return "value"
}

// Options configure a state-function flash. Every field works at its zero
// value, which selects the default given in its comment.
type Options struct {
	// Tolerance is the convergence criterion on the specification,
	//	|H − H_spec| ≤ Tolerance·R·T   (P–H; U likewise for U–V),
	//	|S − S_spec| ≤ Tolerance·R     (P–S),
	//	|V − V_spec| ≤ Tolerance·V_spec (T–V and U–V).
	// Valid range [1e-13, 1e-4]; default 1e-10.
	Tolerance float64
	// MaxIterations caps the outer iterations (each one T–P flash).
	// Valid range [5, 1000]; default 100.
	MaxIterations int
	// Tmin and Tmax bound the temperature search of the P–H, P–S and U–V
	// flashes, K. Valid range 1 ≤ Tmin < Tmax ≤ 10000; defaults 20 K and
	// 3000 K. The ideal-gas heat capacity correlations of most components
	// are fitted over a narrower range; outside it results are
	// extrapolations.
	Tmin, Tmax float64
	// Pmin and Pmax bound the pressure search of the T–V and U–V flashes,
	// Pa. Valid range 1e-3 ≤ Pmin < Pmax ≤ 1e11; defaults 1 Pa and 1e10 Pa.
	Pmin, Pmax float64
	// Flash configures the inner T–P flashes (tolerance, stability margin,
	// iteration caps, phase cap, cancellation). Its NoProperties is
	// ignored: the outer iteration needs the phase properties.
	Flash flash.Options
}

// settings are Options with defaults filled in.
type settings struct {
	tol        float64
	maxIt      int
	tmin, tmax float64
	pmin, pmax float64
	flash      flash.Options
}

func (o *Options) resolve() (settings, error) {
	s := settings{tol: 1e-10, maxIt: 100, tmin: 20, tmax: 3000, pmin: 1, pmax: 1e10, flash: o.Flash}
	s.flash.NoProperties = false
	if o.Tolerance != 0 {
		if !(o.Tolerance >= 1e-13 && o.Tolerance <= 1e-4) {
			return s, &InputError{Field: "opts.Tolerance", Value: o.Tolerance, Reason: "must lie in [1e-13, 1e-4] (or be zero for the default 1e-10)"}
		}
		s.tol = o.Tolerance
	}
	if o.MaxIterations != 0 {
		if o.MaxIterations < 5 || o.MaxIterations > 1000 {
			return s, &InputError{Field: "opts.MaxIterations", Value: float64(o.MaxIterations), Reason: "must lie in [5, 1000] (or be zero for the default 100)"}
		}
		s.maxIt = o.MaxIterations
	}
	if o.Tmin != 0 {
		if !(o.Tmin >= 1 && o.Tmin <= 10000) {
			return s, &InputError{Field: "opts.Tmin", Value: o.Tmin, Reason: "must lie in [1, 10000] K (or be zero for the default 20 K)"}
		}
		s.tmin = o.Tmin
	}
	if o.Tmax != 0 {
		if !(o.Tmax >= 1 && o.Tmax <= 10000) {
			return s, &InputError{Field: "opts.Tmax", Value: o.Tmax, Reason: "must lie in [1, 10000] K (or be zero for the default 3000 K)"}
		}
		s.tmax = o.Tmax
	}
	if !(s.tmin < s.tmax) {
		return s, &InputError{Field: "opts.Tmax", Value: s.tmax, Reason: "must exceed opts.Tmin"}
	}
	if o.Pmin != 0 {
		if !(o.Pmin >= 1e-3 && o.Pmin <= 1e11) {
			return s, &InputError{Field: "opts.Pmin", Value: o.Pmin, Reason: "must lie in [1e-3, 1e11] Pa (or be zero for the default 1 Pa)"}
		}
		s.pmin = o.Pmin
	}
	if o.Pmax != 0 {
		if !(o.Pmax >= 1e-3 && o.Pmax <= 1e11) {
			return s, &InputError{Field: "opts.Pmax", Value: o.Pmax, Reason: "must lie in [1e-3, 1e11] Pa (or be zero for the default 1e10 Pa)"}
		}
		s.pmax = o.Pmax
	}
	if !(s.pmin < s.pmax) {
		return s, &InputError{Field: "opts.Pmax", Value: s.pmax, Reason: "must exceed opts.Pmin"}
	}
	return s, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
