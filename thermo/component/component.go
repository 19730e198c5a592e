package component

import (
	"math"
	"strconv"
)

// R is the molar gas constant in J/(mol·K) (CODATA 2018, exact in the 2019 SI).
const R = 8.314462618

// Reference conditions for ideal-gas enthalpy and entropy integrals.
const (
	TRef = 298.15   // K
	PRef = 101325.0 // Pa
)

// Family groups components by the behaviour the solvers care about, such
// as which ones may form a second liquid.
type Family int

// Families.
const (
	FamilyOther     Family = iota
	FamilyParaffin         // n- and iso-alkanes
	FamilyNaphthene        // cycloalkanes
	FamilyAromatic
	FamilyOlefin
	FamilyInert   // N2, O2, Ar, He, H2, CO
	FamilyAcidGas // CO2, H2S
	FamilyWater   // H2O
	FamilyAlcohol // methanol
	FamilyGlycol  // monoethylene glycol
	FamilyPseudo  // petroleum fraction
)

// IdealGasCp is the ideal-gas heat capacity as a polynomial in T,
//
//	Cp°/R = A[0] + A[1]·T + A[2]·T² + A[3]·T³ + A[4]·T⁴,
//
// the form tabulated in Poling, Prausnitz & O'Connell, The Properties of
// Gases and Liquids, 5th ed. (2001), Appendix A. Tmin and Tmax bound the
// range the coefficients were fitted over; outside it the polynomial is
// still evaluated (callers may report the extrapolation).
type IdealGasCp struct {
	A          [5]float64
	Tmin, Tmax float64 // K
}

// Cp returns the ideal-gas heat capacity at T in J/(mol·K).
func (c *IdealGasCp) Cp(T float64) float64 {
	a := &c.A
	return R * (a[0] + T*(a[1]+T*(a[2]+T*(a[3]+T*a[4]))))
}

// dH returns ∫ Cp dT from TRef to T in J/mol.
func (c *IdealGasCp) dH(T float64) float64 {
	return c.hAnti(T) - c.hAnti(TRef)
}

func (c *IdealGasCp) hAnti(T float64) float64 {
	a := &c.A
	return R * T * (a[0] + T*(a[1]/2+T*(a[2]/3+T*(a[3]/4+T*a[4]/5))))
}

// dS returns ∫ Cp/T dT from TRef to T in J/(mol·K).
func (c *IdealGasCp) dS(T float64) float64 {
	return c.sAnti(T) - c.sAnti(TRef)
}

func (c *IdealGasCp) sAnti(T float64) float64 {
	a := &c.A
	return R * (a[0]*math.Log(T) + T*(a[1]+T*(a[2]/2+T*(a[3]/3+T*a[4]/4))))
}

// Component is one pure substance or pseudo-component.
type Component struct {
	ID        string   // canonical identifier, lower case, e.g. "methane", "n-butane"
	Name      string   // display name
	Formula   string   // e.g. "CH4"; empty for pseudo-components
	CAS       string   // CAS registry number; empty for pseudo-components
	Aliases   []string // other accepted names (short forms such as "nC4", "MEG"); Formula and CAS are looked up as well
	Family    Family
	MolarMass float64 // kg/mol
	Tc        float64 // critical temperature, K
	Pc        float64 // critical pressure, Pa
	Omega     float64 // Pitzer acentric factor
	Vc        float64 // critical molar volume, m³/mol (0 when unknown)
	ZRA       float64 // Rackett compressibility (0 when unknown)
	Tb        float64 // normal boiling point, K (0 when unknown); for CO2 the sublimation point at 101 325 Pa
	SG        float64 // liquid specific gravity at 60 °F/60 °F (0 when unknown)
	Cp        IdealGasCp
	Hf        float64 // ideal-gas enthalpy of formation at 298.15 K, J/mol
	Source    string  // where the constants come from
	CpSource  string  // where the ideal-gas Cp coefficients come from
	Recalled  bool    // true when values were recalled from memory rather than read from the source
}

// CpIG returns the ideal-gas heat capacity at T in J/(mol·K).
func (c *Component) CpIG(T float64) float64 { return c.Cp.Cp(T) }

// HIG returns the ideal-gas molar enthalpy at T in J/mol on the reference
// state of the thermo package: Hf at 298.15 K plus ∫ Cp dT.
func (c *Component) HIG(T float64) float64 { return c.Hf + c.Cp.dH(T) }

// SIG returns the ideal-gas molar entropy at T and PRef in J/(mol·K),
// relative to the pure ideal gas at 298.15 K and PRef (zero there).
func (c *Component) SIG(T float64) float64 { return c.Cp.dS(T) }

// familyNames maps each Family to the name used in the data file and in
// messages.
var familyNames = [...]string{
	FamilyOther:     "other",
	FamilyParaffin:  "paraffin",
	FamilyNaphthene: "naphthene",
	FamilyAromatic:  "aromatic",
	FamilyOlefin:    "olefin",
	FamilyInert:     "inert",
	FamilyAcidGas:   "acid-gas",
	FamilyWater:     "water",
	FamilyAlcohol:   "alcohol",
	FamilyGlycol:    "glycol",
	FamilyPseudo:    "pseudo",
}

// String returns the family's name as written in the data file, e.g.
// "paraffin" or "acid-gas".
func (f Family) String() string {
	if f >= 0 && int(f) < len(familyNames) {
		return familyNames[f]
	}
	return "Family(" + strconv.Itoa(int(f)) + ")"
}

// ParseFamily returns the Family named s (as produced by String).
func ParseFamily(s string) (Family, bool) {
	for i, n := range familyNames {
		if n == s {
			return Family(i), true
		}
	}
	return FamilyOther, false
}

// IsHydrocarbon reports whether the family holds hydrocarbons (including
// petroleum pseudo-components).
func (f Family) IsHydrocarbon() bool {
	switch f {
	case FamilyParaffin, FamilyNaphthene, FamilyAromatic, FamilyOlefin, FamilyPseudo:
		return true
	}
	return false
}

// H returns ∫ Cp dT from TRef to T in J/mol.
func (c *IdealGasCp) H(T float64) float64 { return c.dH(T) }

// S returns ∫ Cp/T dT from TRef to T in J/(mol·K).
func (c *IdealGasCp) S(T float64) float64 { return c.dS(T) }

// InRange reports whether T lies inside the range the coefficients were
// fitted over.
func (c *IdealGasCp) InRange(T float64) bool { return T >= c.Tmin && T <= c.Tmax }
