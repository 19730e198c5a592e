package eos

import (
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/component"
)

// AqueousKijMode selects the interaction parameters of a mixture's aqueous
// phases (water mole fraction above AqueousWaterFraction).
//
// With van der Waals one-fluid mixing no single k_ij describes both sides
// of a water–gas equilibrium: k_ij(CH4–H2O) ≈ 0.5 gives the water content
// of a natural gas (Peng & Robinson 1980), but then Peng–Robinson puts
// about 5e-7 mole fraction of methane into water at 310 K and 7 MPa where
// about 1e-3 is measured (Culberson & McKetta 1951); the aqueous side needs
// k_ij ≈ −0.25. Peng & Robinson (1980) and Søreide & Whitson (1992)
// therefore use a second set of interaction parameters, k_ij^AQ, for the
// aqueous phase only. Søreide & Whitson (1992), eqs. for zero salinity,
// with Tr = T/Tc of the non-water component:
//
//	hydrocarbons:  k^AQ = A0 + A1·Tr + A2·Tr²,
//	               A0 = 1.1120 − 1.7369·ω^−0.1,
//	               A1 = 1.1001 + 0.8360·ω,
//	               A2 = −0.15742 − 1.0988·ω;
//	N2:            k^AQ = −1.70235 + 0.44338·Tr;
//	CO2:           k^AQ = −0.31092 + 0.23580·Tr − 21.2566·exp(−6.7222·Tr);
//	H2S:           k^AQ = −0.20441 + 0.23426·Tr
//
// (coefficients from memory). Every other pair keeps its non-aqueous
// value. The correlations are held at their end values outside
// 273.15 K ≤ T ≤ Tc(water), where they were not fitted and where no
// aqueous liquid exists, so the aqueous attraction stays positive at any
// temperature the kernel accepts. The non-aqueous set (the mixture
// itself, used for every other phase) is unchanged: Søreide & Whitson's
// own non-aqueous values are close to the default table's 0.48–0.55 for
// water–hydrocarbon pairs. Their modified α-function of water and the
// salinity terms are not used.
//
// Consequence of two parameter sets: the Gibbs energy of the fluid is
// G_AQ(x) where x_water > AqueousWaterFraction and G_NA(x) elsewhere, a
// function with a jump at that boundary rather than one smooth model.
// Equilibrium (equal fugacities with each phase on its own set) is still
// the minimum of that piecewise function, and a stability test evaluates
// every trial composition on the set its own water fraction selects, so
// the aqueous phase is tested against its own model. Results are
// discontinuous where a phase's water fraction crosses the boundary (near
// the water–hydrocarbon critical region at high temperature), and the
// fugacity coefficients of the mixture itself (Mixture.Fugacity) are those
// of the non-aqueous set: evaluate an aqueous composition through
// Mixture.Aqueous to match a flash result.
//
// References:
//   - Peng, D.-Y., Robinson, D.B.: Two- and three-phase equilibrium
//     calculations for coal gasification and related processes. In:
//     Newman, S.A. (ed.) Thermodynamics of Aqueous Systems with Industrial
//     Applications, ACS Symp. Ser. 133, 393–414 (1980) (series and pages from
//     memory).
//   - Søreide, I., Whitson, C.H.: Peng–Robinson predictions for
//     hydrocarbons, CO2, N2, and H2S with pure water and NaCl brine.
//     Fluid Phase Equilib. 77, 217–240 (1992).
//   - Culberson, O.L., McKetta, J.J.: Phase equilibria in hydrocarbon–water
//     systems III — the solubility of methane in water at pressures to
//     10,000 psia. J. Petrol. Technol. 3(8), 223–226 (1951).
type AqueousKijMode int

// Aqueous interaction-parameter modes.
const (
	// AqueousKijDefault (the zero value) compiles the Søreide & Whitson
	// (1992) aqueous set when the fluid contains water, and nothing
	// otherwise: the better engineering answer for gas–water and
	// oil–water equilibria, at no cost for dry fluids.
	AqueousKijDefault AqueousKijMode = iota
	// AqueousKijNone uses one interaction-parameter set for every phase
	// (classical van der Waals mixing).
	AqueousKijNone
	// AqueousKijSoreideWhitson asks for the Søreide & Whitson (1992) set
	// explicitly (the same as the default).
	AqueousKijSoreideWhitson
)

var aqueousModeNames = [...]string{"default", "none", "soreide-whitson"}

// String names the mode.
func (m AqueousKijMode) String() string {
	if m < 0 || int(m) >= len(aqueousModeNames) {
		return fmt.Sprintf("AqueousKijMode(%d)", int(m))
	}
	return aqueousModeNames[m]
}

// AqueousWaterFraction is the water mole fraction above which a phase is
// aqueous: evaluated with Mixture.Aqueous (and labelled aqueous by package
// flash).
const AqueousWaterFraction = 0.5

// aqueousSource is the source recorded for pairs of the aqueous set.
const aqueousSource = "Soreide-Whitson 1992 aqueous"

// kijTerm is a temperature-dependent interaction parameter of one pair,
//
//	k(T) = c0 + c1·θ + c2·θ² + cE·exp(cR·θ),  θ = clamp(T, tLo, tHi)/Tc,
//
// whose value and first two temperature derivatives setT applies in place
// of the k0 + k1·T form (the derivatives are zero where T is clamped).
type kijTerm struct {
	i, j         int
	c0, c1, c2   float64
	cE, cR       float64
	tc, tLo, tHi float64
	kLo, kHi     float64 // values at the clamps
	source       string
}

// at returns k, dk/dT and d²k/dT² at T.
func (e *kijTerm) at(T float64) (k, dk, d2k float64) {
	switch {
	case T <= e.tLo:
		return e.kLo, 0, 0
	case T >= e.tHi:
		return e.kHi, 0, 0
	}
	th := T / e.tc
	ex := 0.0
	if e.cE != 0 {
		ex = e.cE * math.Exp(e.cR*th)
	}
	k = e.c0 + th*(e.c1+th*e.c2) + ex
	inv := 1 / e.tc
	dk = (e.c1 + 2*e.c2*th + e.cR*ex) * inv
	d2k = (2*e.c2 + e.cR*e.cR*ex) * inv * inv
	return k, dk, d2k
}

func (e *kijTerm) value(T float64) float64 {
	th := T / e.tc
	k := e.c0 + th*(e.c1+th*e.c2)
	if e.cE != 0 {
		k += e.cE * math.Exp(e.cR*th)
	}
	return k
}

// soreideWhitson returns the aqueous term of water with component c, and
// false for a component the correlations do not cover.
func soreideWhitson(c *component.Component) (kijTerm, bool) {
	var e kijTerm
	switch {
	case c.ID == "nitrogen":
		e.c0, e.c1 = -1.70235, 0.44338
	case c.ID == "carbon-dioxide":
		e.c0, e.c1, e.cE, e.cR = -0.31092, 0.23580, -21.2566, -6.7222
	case c.ID == "hydrogen-sulfide":
		e.c0, e.c1 = -0.20441, 0.23426
	case c.Family.IsHydrocarbon() && c.Omega > 0:
		w := c.Omega
		e.c0 = 1.1120 - 1.7369*math.Pow(w, -0.1)
		e.c1 = 1.1001 + 0.8360*w
		e.c2 = -0.15742 - 1.0988*w
	default:
		return e, false
	}
	e.tc = c.Tc
	return e, true
}

// compileAqueous builds the aqueous view of mx (see AqueousKijMode).
func (mx *Mixture) compileAqueous(mode AqueousKijMode) error {
	if mode < AqueousKijDefault || mode > AqueousKijSoreideWhitson {
		return &InputError{Field: "AqueousKij", Value: float64(mode), Reason: "not a defined mode (default, none or Søreide–Whitson)"}
	}
	if mode == AqueousKijNone {
		return nil
	}
	w := -1
	for i := range mx.comps {
		if mx.comps[i].Family == component.FamilyWater {
			w = i
			break
		}
	}
	if w < 0 {
		return nil
	}
	v := *mx
	v.kx = nil
	for j := range mx.comps {
		if j == w {
			continue
		}
		e, ok := soreideWhitson(&mx.comps[j])
		if !ok {
			continue
		}
		e.i, e.j = w, j
		e.tLo, e.tHi = 273.15, mx.comps[w].Tc
		e.kLo, e.kHi = e.value(e.tLo), e.value(e.tHi)
		e.source = aqueousSource
		v.kx = append(v.kx, e)
	}
	v.aq = &v
	v.aqueous = true
	mx.aq = &v
	return nil
}

// Aqueous returns the view of the mixture that evaluates aqueous phases:
// the same components, model and volume translation with the aqueous
// interaction parameters of AqueousKijMode. It returns mx itself when the
// mixture has no aqueous set (no water, or AqueousKijNone), and the view
// is its own Aqueous. The view is immutable and safe for concurrent use;
// evaluations through it need a Workspace made by its own NewWorkspace.
func (mx *Mixture) Aqueous() *Mixture {
	if mx.aq != nil {
		return mx.aq
	}
	return mx
}

// HasAqueous reports whether the mixture carries a separate aqueous
// interaction-parameter set (Aqueous differs from the mixture itself).
func (mx *Mixture) HasAqueous() bool { return mx.aq != nil && !mx.aqueous }

// IsAqueous reports whether mx is the aqueous view of a mixture.
func (mx *Mixture) IsAqueous() bool { return mx.aqueous }
