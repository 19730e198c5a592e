package component

import (
	"errors"
	"fmt"
	"math"
)

// Unit conversions used by the correlations, which were published in
// American customary units.
const (
	rankinePerKelvin = 1.8
	paPerPsi         = 6894.757293168 // 1 psi = 0.45359237 kg·9.80665 m/s² / (0.0254 m)²
	atmPa            = 101325.0
	psiaAtm          = atmPa / paPerPsi // 14.696 psia
)

// Ranges accepted by the pseudo-component constructors. They bracket the
// data the correlations were fitted to (Kesler & Lee 1976: Tb up to about
// 1200 °F; Riazi & Daubert 1987: M 70–700), with a margin.
const (
	pseudoTbMin = 250.0  // K
	pseudoTbMax = 1000.0 // K
	pseudoSGMin = 0.55
	pseudoSGMax = 1.30
	pseudoMMin  = 0.060 // kg/mol
	pseudoMMax  = 0.800 // kg/mol
	pseudoKMin  = 8.5   // Watson K of polynuclear aromatics is about 9–10
	pseudoKMax  = 14.0  // n-paraffins reach about 13
)

// Range of the Kesler–Lee ideal-gas Cp correlation, 0–1200 °F (from memory
// of Kesler & Lee 1976).
const (
	keslerLeeCpTmin = 255.0 // K
	keslerLeeCpTmax = 922.0 // K
)

// WatsonK returns the Watson (UOP) characterisation factor
//
//	K = (1.8·Tb)^(1/3) / SG,
//
// with Tb the normal boiling point in K (the definition uses °R) and SG the
// specific gravity at 60 °F/60 °F. Watson & Nelson (1933), Ind. Eng. Chem.
// 25(8):880–887.
func WatsonK(tb, sg float64) float64 {
	return math.Cbrt(rankinePerKelvin*tb) / sg
}

// KeslerLeeTc returns the critical temperature in K of a petroleum fraction
// with normal boiling point tb (K) and specific gravity sg by Kesler & Lee
// (1976), with T in °R:
//
//	Tc = 341.7 + 811·SG + (0.4244 + 0.1174·SG)·Tb + (0.4669 − 3.2623·SG)·10⁵/Tb.
//
// Reference: Kesler, M. G.; Lee, B. I., Improve prediction of enthalpy of
// fractions, Hydrocarbon Processing 55(3):153–158, 1976.
func KeslerLeeTc(tb, sg float64) float64 {
	t := rankinePerKelvin * tb
	tc := 341.7 + 811*sg + (0.4244+0.1174*sg)*t + (0.4669-3.2623*sg)*1e5/t
	return tc / rankinePerKelvin
}

// KeslerLeePc returns the critical pressure in Pa by Kesler & Lee (1976),
// with Tb in °R and Pc in psia:
//
//	ln Pc = 8.3634 − 0.0566/SG − (0.24244 + 2.2898/SG + 0.11857/SG²)·10⁻³·Tb
//	        + (1.4685 + 3.648/SG + 0.47227/SG²)·10⁻⁷·Tb²
//	        − (0.42019 + 1.6977/SG²)·10⁻¹⁰·Tb³.
//
// Reference as for KeslerLeeTc.
func KeslerLeePc(tb, sg float64) float64 {
	t := rankinePerKelvin * tb
	s2 := sg * sg
	lnP := 8.3634 - 0.0566/sg -
		(0.24244+2.2898/sg+0.11857/s2)*1e-3*t +
		(1.4685+3.648/sg+0.47227/s2)*1e-7*t*t -
		(0.42019+1.6977/s2)*1e-10*t*t*t
	return math.Exp(lnP) * paPerPsi
}

// KeslerLeeMolarMass returns the molar mass in kg/mol by Kesler & Lee
// (1976), with Tb in °R:
//
//	M = −12272.6 + 9486.4·SG + (4.6523 − 3.3287·SG)·Tb
//	    + (1 − 0.77084·SG − 0.02058·SG²)·(1.3437 − 720.79/Tb)·10⁷/Tb
//	    + (1 − 0.80882·SG + 0.02226·SG²)·(1.8828 − 181.98/Tb)·10¹²/Tb³.
//
// Reference as for KeslerLeeTc. Against the n-alkanes C6–C12 this form
// gives values 6–8 % high (benzene: exact), which suggests a coefficient
// recalled wrongly; PseudoFromBoilingPoint therefore uses
// RiaziDaubertMolarMass.
func KeslerLeeMolarMass(tb, sg float64) float64 {
	t := rankinePerKelvin * tb
	s2 := sg * sg
	m := -12272.6 + 9486.4*sg + (4.6523-3.3287*sg)*t +
		(1-0.77084*sg-0.02058*s2)*(1.3437-720.79/t)*1e7/t +
		(1-0.80882*sg+0.02226*s2)*(1.8828-181.98/t)*1e12/(t*t*t)
	return m / gPerKg
}

// KeslerLeeOmega returns the acentric factor by Kesler & Lee (1976) from
// the normal boiling point tb (K), the critical constants tc (K) and pc
// (Pa), and the Watson factor k. With Tbr = Tb/Tc and Pbr = 101 325 Pa/Pc,
// for Tbr ≤ 0.8 (the Lee–Kesler vapour-pressure equation solved for ω)
//
//	ω = (ln Pbr − 5.92714 + 6.09648/Tbr + 1.28862·ln Tbr − 0.169347·Tbr⁶)
//	    / (15.2518 − 15.6875/Tbr − 13.4721·ln Tbr + 0.43577·Tbr⁶),
//
// and for Tbr > 0.8
//
//	ω = −7.904 + 0.1352·K − 0.007465·K² + 8.359·Tbr + (1.408 − 0.01063·K)/Tbr.
//
// Reference as for KeslerLeeTc; the vapour-pressure form is Lee & Kesler
// (1975), AIChE J. 21(3):510–527.
func KeslerLeeOmega(tb, tc, pc, k float64) float64 {
	tbr := tb / tc
	if tbr > 0.8 {
		return -7.904 + 0.1352*k - 0.007465*k*k + 8.359*tbr + (1.408-0.01063*k)/tbr
	}
	lnPbr := math.Log(atmPa / pc)
	t6 := math.Pow(tbr, 6)
	lt := math.Log(tbr)
	return (lnPbr - 5.92714 + 6.09648/tbr + 1.28862*lt - 0.169347*t6) /
		(15.2518 - 15.6875/tbr - 13.4721*lt + 0.43577*t6)
}

// KeslerLeeCp returns the ideal-gas heat capacity of a petroleum fraction
// by Kesler & Lee (1976) in the polynomial form of IdealGasCp. The
// correlation, in its SI statement (Cp in kJ/(kg·K), T in K),
//
//	Cp = A0 + A1·T + A2·T² − C·(B0 + B1·T + B2·T²)
//	A0 = −1.41779 + 0.11828·K
//	A1 = −(6.99724 − 8.69326·K + 0.27715·K²)·10⁻⁴
//	A2 = −2.2582·10⁻⁶
//	B0 = 1.09223 − 2.48245·ω
//	B1 = −(3.434 − 7.14·ω)·10⁻³
//	B2 = −(7.2661 − 9.2561·ω)·10⁻⁷
//	C  = [(12.8 − K)·(10 − K)/(10·ω)]²  for 10 < K < 12.8, else 0,
//
// is quadratic in T, so it maps exactly (no fit is needed) onto
// Cp°/R = a0 + a1·T + a2·T² with a_i = (M·1000/R)·(A_i − C·B_i), M in
// kg/mol. The stated range is 0–1200 °F (255–922 K). Coefficients are
// from memory of Kesler & Lee (1976) as restated in SI units by Riazi,
// Characterization and Properties of Petroleum Fractions, ASTM MNL50
// (2005), ch. 7.
func KeslerLeeCp(k, omega, molarMass float64) IdealGasCp {
	a0 := -1.41779 + 0.11828*k
	a1 := -(6.99724 - 8.69326*k + 0.27715*k*k) * 1e-4
	a2 := -2.2582e-6
	c := 0.0
	if k > 10 && k < 12.8 && omega > 0 {
		f := (12.8 - k) * (10 - k) / (10 * omega)
		c = f * f
	}
	b0 := 1.09223 - 2.48245*omega
	b1 := -(3.434 - 7.14*omega) * 1e-3
	b2 := -(7.2661 - 9.2561*omega) * 1e-7
	s := molarMass * 1e3 / R // kJ/(kg·K) · kg/mol · 1000 J/kJ / R
	return IdealGasCp{
		A:    [5]float64{s * (a0 - c*b0), s * (a1 - c*b1), s * (a2 - c*b2)},
		Tmin: keslerLeeCpTmin,
		Tmax: keslerLeeCpTmax,
	}
}

// RiaziDaubertMolarMass returns the molar mass in kg/mol from the normal
// boiling point tb (K) and specific gravity sg by Riazi & Daubert (1987),
//
//	M = 42.965·exp(2.097·10⁻⁴·Tb − 7.78712·SG + 2.08476·10⁻³·Tb·SG)·Tb^1.26007·SG^4.98308,
//
// fitted for M 70–700. Reference: Riazi, M. R.; Daubert, T. E.,
// Characterization parameters for petroleum fractions, Ind. Eng. Chem. Res.
// 26(4):755–759, 1987.
func RiaziDaubertMolarMass(tb, sg float64) float64 {
	m := 42.965 * math.Exp(2.097e-4*tb-7.78712*sg+2.08476e-3*tb*sg) *
		math.Pow(tb, 1.26007) * math.Pow(sg, 4.98308)
	return m / gPerKg
}

// RiaziDaubertTb returns the normal boiling point in K from the molar mass
// (kg/mol) and specific gravity by Riazi & Daubert (1987), with M in g/mol,
//
//	Tb = 3.76587·exp(3.7741·10⁻³·M + 2.98404·SG − 4.25288·10⁻³·M·SG)·M^0.40167·SG^−1.58262,
//
// fitted for M 70–700. Reference as for RiaziDaubertMolarMass.
func RiaziDaubertTb(molarMass, sg float64) float64 {
	m := molarMass * gPerKg
	return 3.76587 * math.Exp(3.7741e-3*m+2.98404*sg-4.25288e-3*m*sg) *
		math.Pow(m, 0.40167) * math.Pow(sg, -1.58262)
}

// LeeKeslerPsat returns the vapour pressure in Pa at T (K) from the
// corresponding-states correlation of Lee & Kesler (1975),
//
//	ln Pr = f0(Tr) + ω·f1(Tr)
//	f0 = 5.92714 − 6.09648/Tr − 1.28862·ln Tr + 0.169347·Tr⁶
//	f1 = 15.2518 − 15.6875/Tr − 13.4721·ln Tr + 0.43577·Tr⁶.
//
// Reference: Lee, B. I.; Kesler, M. G., A generalized thermodynamic
// correlation based on three-parameter corresponding states, AIChE J.
// 21(3):510–527, 1975.
func LeeKeslerPsat(T, tc, pc, omega float64) float64 {
	tr := T / tc
	lt := math.Log(tr)
	t6 := math.Pow(tr, 6)
	f0 := 5.92714 - 6.09648/tr - 1.28862*lt + 0.169347*t6
	f1 := 15.2518 - 15.6875/tr - 13.4721*lt + 0.43577*t6
	return pc * math.Exp(f0+omega*f1)
}

// LeeKeslerTb returns the temperature in K at which LeeKeslerPsat equals
// 101 325 Pa, found by bisection on Tr in [0.2, 1]. It fails when Pc is not
// above one atmosphere or the vapour pressure is not monotonic there
// (unusual ω).
func LeeKeslerTb(tc, pc, omega float64) (float64, error) {
	if !(pc > atmPa) {
		return 0, errors.New("the critical pressure is not above 101 325 Pa")
	}
	g := func(tr float64) float64 { return math.Log(LeeKeslerPsat(tr*tc, tc, pc, omega) / atmPa) }
	lo, hi := 0.2, 1.0
	if !(g(lo) < 0 && g(hi) > 0) {
		return 0, fmt.Errorf("the Lee–Kesler vapour pressure does not cross 101 325 Pa for Tr in [%g, %g]", lo, hi)
	}
	for range 100 {
		mid := 0.5 * (lo + hi)
		if g(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
		if hi-lo < 1e-13 {
			break
		}
	}
	return 0.5 * (lo + hi) * tc, nil
}

// keslerLeeSGFromTc solves KeslerLeeTc(tb, sg) = tc for sg in [0.3, 1.6]
// by bisection; ∂Tc/∂SG = 811 + 0.1174·Tb − 3.2623·10⁵/Tb (°R) is positive
// for Tb above about 210 K, so the root is unique there.
func keslerLeeSGFromTc(tb, tc float64) (float64, bool) {
	lo, hi := 0.3, 1.6
	f := func(sg float64) float64 { return KeslerLeeTc(tb, sg) - tc }
	if tb < 210 || !(f(lo) < 0 && f(hi) > 0) {
		return 0, false
	}
	for range 100 {
		mid := 0.5 * (lo + hi)
		if f(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
		if hi-lo < 1e-13 {
			break
		}
	}
	return 0.5 * (lo + hi), true
}

// PseudoFromBoilingPoint returns a petroleum pseudo-component with normal
// boiling point tb (K) and specific gravity sg (60 °F/60 °F):
//   - Tc and Pc by Kesler & Lee (1976) (KeslerLeeTc, KeslerLeePc);
//   - molar mass by Riazi & Daubert (1987) (RiaziDaubertMolarMass): against
//     the n-alkanes C6–C12 the Kesler–Lee molar-mass equation, as stated at
//     KeslerLeeMolarMass, reads 6–8 % high where Riazi–Daubert is within
//     2 %, so the latter is used;
//   - ω by Kesler & Lee (1976) (KeslerLeeOmega) with the Watson K;
//   - ideal-gas Cp by Kesler & Lee (1976) (KeslerLeeCp).
//
// Vc and Z_RA are left unknown (0) and Hf is 0: pseudo-components take part
// in phase and energy balances without reaction. Tb must lie in
// [250, 1000] K, SG in [0.55, 1.30], and their Watson K in [8.5, 14];
// anything else, or a result that is not physical (Tc ≤ Tb, Pc ≤ 1 atm,
// ω outside (−0.5, 2.5)), gives an *InputError.
func PseudoFromBoilingPoint(id string, tb, sg float64) (Component, error) {
	if err := checkPseudoInputs(id, tb, sg); err != nil {
		return Component{}, err
	}
	m := RiaziDaubertMolarMass(tb, sg)
	return buildPseudo(id, tb, sg, m, fmt.Sprintf("pseudo-component from Tb = %.2f K, SG = %.4f: Tc, Pc, ω by Kesler & Lee (1976), M by Riazi & Daubert (1987)", tb, sg))
}

// PseudoFromMolarMass returns a petroleum pseudo-component with molar mass
// mw (kg/mol) and specific gravity sg (60 °F/60 °F). The normal boiling
// point comes from Riazi & Daubert (1987) (RiaziDaubertTb); Tc, Pc, ω and
// Cp then follow as in PseudoFromBoilingPoint, and the molar mass is kept
// as given. mw must lie in [0.060, 0.800] kg/mol; the other limits are those
// of PseudoFromBoilingPoint.
func PseudoFromMolarMass(id string, mw, sg float64) (Component, error) {
	if err := checkUserID(id); err != nil {
		return Component{}, err
	}
	if err := inRange("MolarMass", mw, pseudoMMin, pseudoMMax, false, "molar mass (kg/mol) of a petroleum fraction"); err != nil {
		return Component{}, err
	}
	if err := inRange("SG", sg, pseudoSGMin, pseudoSGMax, false, "specific gravity of a petroleum fraction"); err != nil {
		return Component{}, err
	}
	tb := RiaziDaubertTb(mw, sg)
	if err := checkPseudoInputs(id, tb, sg); err != nil {
		var ie *InputError
		if errors.As(err, &ie) && ie.Field == "Tb" {
			return Component{}, &InputError{Field: "MolarMass", Value: mw, Reason: fmt.Sprintf("with SG = %g the Riazi–Daubert boiling point is %.4g K, outside [%g, %g] K", sg, tb, pseudoTbMin, pseudoTbMax)}
		}
		return Component{}, err
	}
	return buildPseudo(id, tb, sg, mw, fmt.Sprintf("pseudo-component from M = %.4f kg/mol, SG = %.4f: Tb by Riazi & Daubert (1987); Tc, Pc, ω by Kesler & Lee (1976)", mw, sg))
}

func checkPseudoInputs(id string, tb, sg float64) error {
	if err := checkUserID(id); err != nil {
		return err
	}
	if err := inRange("Tb", tb, pseudoTbMin, pseudoTbMax, false, "normal boiling point (K) of a petroleum fraction"); err != nil {
		return err
	}
	if err := inRange("SG", sg, pseudoSGMin, pseudoSGMax, false, "specific gravity of a petroleum fraction"); err != nil {
		return err
	}
	if k := WatsonK(tb, sg); k < pseudoKMin || k > pseudoKMax {
		return &InputError{Field: "SG", Value: sg, Reason: fmt.Sprintf("with Tb = %g K the Watson K is %.3g, outside [%g, %g]: no petroleum fraction has this combination", tb, k, pseudoKMin, pseudoKMax)}
	}
	return nil
}

func buildPseudo(id string, tb, sg, m float64, src string) (Component, error) {
	k := WatsonK(tb, sg)
	tc := KeslerLeeTc(tb, sg)
	pc := KeslerLeePc(tb, sg)
	if !(tc > tb) || !finite(tc) {
		return Component{}, &InputError{Field: "SG", Value: sg, Reason: fmt.Sprintf("Kesler–Lee gives Tc = %.4g K, not above Tb = %g K: unphysical combination of Tb and SG", tc, tb)}
	}
	if !(pc > atmPa) || !finite(pc) {
		return Component{}, &InputError{Field: "SG", Value: sg, Reason: fmt.Sprintf("Kesler–Lee gives Pc = %.4g Pa, not above one atmosphere: unphysical combination of Tb = %g K and SG", pc, tb)}
	}
	if !(m > 0) || !finite(m) {
		return Component{}, &InputError{Field: "SG", Value: sg, Reason: fmt.Sprintf("Kesler–Lee gives a molar mass of %.4g kg/mol: unphysical combination of Tb = %g K and SG", m, tb)}
	}
	w := KeslerLeeOmega(tb, tc, pc, k)
	if !(w > -0.5 && w < 2.5) {
		return Component{}, &InputError{Field: "SG", Value: sg, Reason: fmt.Sprintf("Kesler–Lee gives ω = %.4g: unphysical combination of Tb = %g K and SG", w, tb)}
	}
	cp := KeslerLeeCp(k, w, m)
	if err := checkCpPositive(&cp); err != nil {
		return Component{}, &InputError{Field: "SG", Value: sg, Reason: "the Kesler–Lee Cp is not positive over its range: " + err.Error()}
	}
	return Component{
		ID:        id,
		Name:      id,
		Family:    FamilyPseudo,
		MolarMass: m,
		Tc:        tc,
		Pc:        pc,
		Omega:     w,
		Tb:        tb,
		SG:        sg,
		Cp:        cp,
		Source:    src,
		CpSource:  fmt.Sprintf("Kesler & Lee (1976) petroleum-fraction Cp with Watson K = %.3f", k),
	}, nil
}
