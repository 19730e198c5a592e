package component

import (
	"fmt"
	"math"
	"strings"
)

// InputError reports a bad value supplied by a caller: which field, the
// value, and why it was refused. Value is 0 for fields that are not numbers
// (such as ID); it may be NaN or ±Inf when that was the offending input.
type InputError struct {
	Field  string
	Value  float64
	Reason string
}

// Error states the field, value and reason.
func (e *InputError) Error() string {
	return fmt.Sprintf("component: invalid %s = %g: %s", e.Field, e.Value, e.Reason)
}

// Definition describes a user-defined component. Tc, Pc, Omega and
// MolarMass are required; the other numbers are optional and zero means
// unknown.
type Definition struct {
	ID        string  // lower-case identifier, not one of the library's names
	Name      string  // display name; ID when empty
	Family    Family  // FamilyOther when zero
	MolarMass float64 // kg/mol, in (0, 5]
	Tc        float64 // critical temperature, K, in (0, 2000]
	Pc        float64 // critical pressure, Pa, in (0, 1e8]
	Omega     float64 // acentric factor, in [-1, 3]
	Vc        float64 // critical volume, m³/mol; 0 = unknown
	ZRA       float64 // Rackett compressibility; 0 = unknown, else in [0.15, 0.35]
	Tb        float64 // normal boiling point, K; 0 = unknown, else in (0, Tc)
	SG        float64 // liquid specific gravity 60 °F/60 °F; 0 = unknown, else in [0.3, 2]
	Hf        float64 // ideal-gas enthalpy of formation at 298.15 K, J/mol; 0 when unknown
	// Cp holds ideal-gas Cp coefficients; nil asks for the Kesler–Lee
	// estimate (see Define).
	Cp     *IdealGasCp
	Source string // free-text provenance, recorded in Component.Source
}

func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// inRange returns an *InputError unless lo ≤ x ≤ hi (lo < x when open).
func inRange(field string, x, lo, hi float64, open bool, what string) error {
	if !finite(x) {
		return &InputError{Field: field, Value: x, Reason: "must be a finite number"}
	}
	if (open && x <= lo) || (!open && x < lo) || x > hi {
		l := "["
		if open {
			l = "("
		}
		return &InputError{Field: field, Value: x, Reason: fmt.Sprintf("%s must lie in %s%g, %g]", what, l, lo, hi)}
	}
	return nil
}

// checkUserID validates a user-supplied identifier.
func checkUserID(id string) error {
	if !validID(id) {
		return &InputError{Field: "ID", Value: 0, Reason: fmt.Sprintf("%q must be 1–64 lower-case characters without blanks, '|', '#' or ';'", id)}
	}
	if i, taken := library.byKey[normalize(id)]; taken {
		return &InputError{Field: "ID", Value: 0, Reason: fmt.Sprintf("%q already names library component %s", id, library.comps[i].ID)}
	}
	if _, taken := library.ambiguous[normalize(id)]; taken {
		return &InputError{Field: "ID", Value: 0, Reason: fmt.Sprintf("%q is the formula of library components", id)}
	}
	return nil
}

// maxCpCoefficient bounds the magnitude of each caller-supplied Cp°/R
// coefficient. Real coefficients are many orders of magnitude smaller; the
// bound keeps Cp, H = ∫Cp dT and S = ∫Cp/T dT finite in float64 at every
// temperature an equation of state evaluates (a4·T⁵ with T ≤ 10⁶ K stays
// below 10¹³⁰), where merely finite coefficients such as 10³⁰⁵ overflow.
const maxCpCoefficient = 1e100

// checkCp validates caller-supplied coefficients.
func checkCp(cp *IdealGasCp) error {
	for i, a := range cp.A {
		if !finite(a) {
			return &InputError{Field: fmt.Sprintf("Cp.A[%d]", i), Value: a, Reason: "must be a finite number"}
		}
		if math.Abs(a) > maxCpCoefficient {
			return &InputError{Field: fmt.Sprintf("Cp.A[%d]", i), Value: a, Reason: fmt.Sprintf("magnitude must not exceed %g", maxCpCoefficient)}
		}
	}
	if err := inRange("Cp.Tmin", cp.Tmin, 0, 10000, true, "lower temperature bound (K)"); err != nil {
		return err
	}
	if err := inRange("Cp.Tmax", cp.Tmax, cp.Tmin, 10000, true, "upper temperature bound (K), above Tmin,"); err != nil {
		return err
	}
	if err := checkCpPositive(cp); err != nil {
		return &InputError{Field: "Cp.A", Value: cp.A[0], Reason: err.Error()}
	}
	return nil
}

// Define builds a component from user-supplied constants after checking
// every field; it does not add it to the library.
//
// When d.Cp is nil the ideal-gas heat capacity is estimated with the
// Kesler–Lee (1976) correlation for petroleum fractions (see KeslerLeeCp),
// which needs the Watson factor K = (1.8·Tb)^(1/3)/SG:
//   - Tb, if not given, is the temperature where the Lee–Kesler (1975)
//     vapour pressure (LeeKeslerPsat) reaches 101 325 Pa;
//   - SG, if not given, is the value for which the Kesler–Lee (1976) Tc
//     correlation reproduces the given Tc at that Tb.
//
// The estimate is meant for hydrocarbon-like components (typically within
// a few percent for paraffins and aromatics, worse for naphthenes, not
// meaningful for small inorganic molecules); when it does not apply (no
// normal boiling point, K outside 8.5–14) Define returns an *InputError on
// field "Cp" asking for coefficients.
func Define(d Definition) (Component, error) {
	if err := checkUserID(d.ID); err != nil {
		return Component{}, err
	}
	checks := []struct {
		field  string
		x      float64
		lo, hi float64
		what   string
	}{
		// The lower bounds sit below the lightest real substances
		// (hydrogen 2.016e-3 kg/mol, helium Tc 5.2 K and Pc 0.23 MPa):
		// smaller values are unit mistakes, and they drive the cubic's
		// co-volume and attraction out of floating-point range.
		{"MolarMass", d.MolarMass, 1e-3, 5, "molar mass (kg/mol)"},
		{"Tc", d.Tc, 1, 2000, "critical temperature (K)"},
		{"Pc", d.Pc, 1e4, 1e8, "critical pressure (Pa)"},
	}
	for _, c := range checks {
		if err := inRange(c.field, c.x, c.lo, c.hi, false, c.what); err != nil {
			return Component{}, err
		}
	}
	if err := inRange("Omega", d.Omega, -1, 3, false, "acentric factor"); err != nil {
		return Component{}, err
	}
	optional := []struct {
		field  string
		x      float64
		lo, hi float64
		what   string
	}{
		{"Vc", d.Vc, 0, 0.1, "critical volume (m³/mol)"},
		{"ZRA", d.ZRA, 0.15, 0.35, "Rackett compressibility"},
		{"Tb", d.Tb, 0, d.Tc, "normal boiling point (K), below Tc,"},
		{"SG", d.SG, 0.3, 2, "specific gravity"},
	}
	for _, c := range optional {
		if c.x == 0 {
			continue
		}
		if err := inRange(c.field, c.x, c.lo, c.hi, true, c.what); err != nil {
			return Component{}, err
		}
	}
	if d.Tb != 0 && d.Tb >= d.Tc {
		return Component{}, &InputError{Field: "Tb", Value: d.Tb, Reason: fmt.Sprintf("normal boiling point must lie below Tc = %g K", d.Tc)}
	}
	if !finite(d.Hf) || math.Abs(d.Hf) > 1e7 {
		return Component{}, &InputError{Field: "Hf", Value: d.Hf, Reason: "enthalpy of formation must be finite with |Hf| ≤ 1e7 J/mol"}
	}
	if d.Family < 0 || int(d.Family) >= len(familyNames) {
		return Component{}, &InputError{Field: "Family", Value: float64(d.Family), Reason: "unknown family"}
	}
	c := Component{
		ID: d.ID, Name: d.Name, Family: d.Family, MolarMass: d.MolarMass,
		Tc: d.Tc, Pc: d.Pc, Omega: d.Omega, Vc: d.Vc, ZRA: d.ZRA, Tb: d.Tb, SG: d.SG, Hf: d.Hf,
		Source: strings.TrimSpace(d.Source),
	}
	if c.Name == "" {
		c.Name = c.ID
	}
	if c.Source == "" {
		c.Source = "user-defined"
	}
	if d.Cp != nil {
		if err := checkCp(d.Cp); err != nil {
			return Component{}, err
		}
		c.Cp = *d.Cp
		c.CpSource = "user-supplied"
		return c, nil
	}
	cp, src, err := estimateCp(d)
	if err != nil {
		return Component{}, err
	}
	c.Cp, c.CpSource = cp, src
	return c, nil
}

// estimateCp implements the fallback described at Define.
func estimateCp(d Definition) (IdealGasCp, string, error) {
	tb, sg := d.Tb, d.SG
	var how []string
	if tb == 0 {
		var err error
		if tb, err = LeeKeslerTb(d.Tc, d.Pc, d.Omega); err != nil {
			return IdealGasCp{}, "", &InputError{Field: "Cp", Value: 0, Reason: "no Cp given and no normal boiling point could be estimated for the Kesler–Lee Cp: " + err.Error() + "; supply Cp coefficients"}
		}
		how = append(how, "Tb from the Lee–Kesler (1975) vapour pressure")
	}
	if sg == 0 {
		var ok bool
		if sg, ok = keslerLeeSGFromTc(tb, d.Tc); !ok {
			return IdealGasCp{}, "", &InputError{Field: "Cp", Value: 0, Reason: fmt.Sprintf("no Cp given and no specific gravity in [0.3, 1.6] reproduces Tc = %g K at Tb = %.4g K with the Kesler–Lee correlation; supply SG or Cp coefficients", d.Tc, tb)}
		}
		how = append(how, "SG by inverting the Kesler–Lee (1976) Tc correlation")
	}
	k := WatsonK(tb, sg)
	if !(k >= 8.5 && k <= 14) {
		return IdealGasCp{}, "", &InputError{Field: "Cp", Value: k, Reason: "no Cp given and the Watson K of the estimate lies outside 8.5–14, where the Kesler–Lee Cp does not apply; supply Cp coefficients"}
	}
	cp := KeslerLeeCp(k, d.Omega, d.MolarMass)
	src := fmt.Sprintf("Kesler & Lee (1976) petroleum-fraction Cp with Watson K = %.3f", k)
	if len(how) > 0 {
		src += " (" + strings.Join(how, "; ") + ")"
	}
	if err := checkCpPositive(&cp); err != nil {
		return IdealGasCp{}, "", &InputError{Field: "Cp", Value: k, Reason: "the Kesler–Lee estimate is not positive over its range (" + err.Error() + "); supply Cp coefficients"}
	}
	return cp, src, nil
}
