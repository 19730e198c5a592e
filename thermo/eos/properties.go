package eos

import (
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/component"

	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// Properties are the thermodynamic properties of one phase (or of a
// single-phase fluid). Energies are on the reference state of the package
// documentation; every value is per mole unless its name says otherwise.
type Properties struct {
	T, P          float64 // K, Pa
	Z             float64 // compressibility factor of the (translated) volume
	MolarVolume   float64 // m³/mol
	MolarDensity  float64 // mol/m³
	MassDensity   float64 // kg/m³
	MolarMass     float64 // kg/mol
	H             float64 // enthalpy, J/mol
	S             float64 // entropy, J/(mol·K)
	G             float64 // Gibbs energy, J/mol
	U             float64 // internal energy, J/mol
	A             float64 // Helmholtz energy, J/mol
	Cp            float64 // isobaric heat capacity, J/(mol·K)
	Cv            float64 // isochoric heat capacity, J/(mol·K)
	SpeedOfSound  float64 // m/s
	JouleThomson  float64 // (∂T/∂P)_H, K/Pa
	Compressivity float64 // isothermal compressibility −(1/v)(∂v/∂P)_T, 1/Pa
	DPDT          float64 // (∂P/∂T)_v, Pa/K
	DPDV          float64 // (∂P/∂v)_T, Pa·mol/m³
	HRes          float64 // residual enthalpy H − H^ig(T), J/mol
	SRes          float64 // residual entropy at T, P, J/(mol·K) (at T, v where the model gives P ≤ 0)
	Branch        Branch
	Roots         int
}

// Properties evaluates a phase of composition x at T and P on the chosen
// root. Ideal-gas parts come from each component's Cp° correlation; the
// residual parts from F = A^r/(nRT) and its derivatives (Michelsen &
// Mollerup 2007, ch. 2):
//
//	S^r(T,V)/R = −(T·F_T + F),  U^r/RT = −T·F_T,
//	Cv^r/R = −T(2F_T + T·F_TT),  Cp = Cv − T(∂P/∂T)²_V/(∂P/∂V)_T,
//	H^r = U^r + PV − RT,  S^r(T,P) = S^r(T,V) + R·ln Z.
//
// It allocates nothing.
func (mx *Mixture) Properties(ws *Workspace, T, P float64, x []float64, root RootChoice) (Properties, error) {
	if err := mx.checkTPX(ws, T, P, x); err != nil {
		return Properties{}, err
	}
	ws.setT(T)
	mx.composition(ws, x, true, true, true)
	mx.solveZ(ws, T, P, root)
	mx.residual(ws, false)
	return mx.props(ws), nil
}

// PropertiesTV evaluates a phase of composition x at temperature T and
// molar volume v (m³/mol, translated when the mixture translates volumes);
// the pressure follows from the equation of state. v must exceed the
// co-volume b (minus the shift).
func (mx *Mixture) PropertiesTV(ws *Workspace, T, v float64, x []float64) (Properties, error) {
	if err := mx.checkTVX(ws, T, v, x); err != nil {
		return Properties{}, err
	}
	return mx.props(ws), nil
}

// PressureTV returns the pressure (Pa) and (∂P/∂v)_T, (∂P/∂T)_v at T and
// molar volume v. It allocates nothing.
func (mx *Mixture) PressureTV(ws *Workspace, T, v float64, x []float64) (P, dPdv, dPdT float64, err error) {
	if err := mx.checkTVX(ws, T, v, x); err != nil {
		return 0, 0, 0, err
	}
	st := &ws.st
	return st.P, st.dPdV, st.dPdT, nil
}

// FugacityTV evaluates ln φ_i (and the derivatives selected by want, at
// fixed T and P) of composition x at T and molar volume v. The pressure is
// returned in out's state and by PressureTV; out.Z is P·v/RT.
func (mx *Mixture) FugacityTV(ws *Workspace, T, v float64, x []float64, want Want, out *Fugacity) (P float64, err error) {
	if err := mx.checkTVX(ws, T, v, x); err != nil {
		return 0, err
	}
	if ws.st.P <= 0 {
		return ws.st.P, &InputError{Field: "v", Value: v, Reason: "the equation of state gives a non-positive pressure at this volume"}
	}
	mx.lnPhi(ws, want, out)
	return ws.st.P, nil
}

func (mx *Mixture) checkTVX(ws *Workspace, T, v float64, x []float64) error {
	if ws == nil || ws.mx != mx {
		return &InputError{Field: "workspace", Reason: "workspace belongs to another mixture (use NewWorkspace)"}
	}
	if err := positive("T", T); err != nil {
		return err
	}
	if err := inDomain("T", T, minT, maxT, "K"); err != nil {
		return err
	}
	if err := positive("v", v); err != nil {
		return err
	}
	if v > maxV {
		return &InputError{Field: "v", Value: v, Reason: fmt.Sprintf("must not exceed %g m³/mol", maxV)}
	}
	if err := mx.checkX(x); err != nil {
		return err
	}
	ws.setT(T)
	mx.composition(ws, x, true, true, true)
	st := &ws.st
	ve := v + st.cshift
	if !(ve > st.Bm) {
		return &InputError{Field: "v", Value: v, Reason: "molar volume must exceed the mixture co-volume b"}
	}
	st.T, st.V = T, ve
	st.roots, st.branch = 1, BranchSingle
	mx.residual(ws, true)
	return nil
}

// props assembles Properties from the last kernel evaluation.
func (mx *Mixture) props(ws *Workspace) Properties {
	st := &ws.st
	T, P, V := st.T, st.P, st.V
	rt := R * T
	if !ws.igOK || ws.igT != T {
		lnT := fastmath.Log(T)
		for i := range mx.n {
			ws.hig[i], ws.sig[i], ws.cpg[i] = mx.ig[i].at(T, lnT)
		}
		ws.igOK, ws.igT = true, T
	}
	var hig, sig, cpig, mix float64
	for i := range mx.n {
		xi := ws.x[i]
		if xi == 0 {
			continue
		}
		hig += xi * ws.hig[i]
		sig += xi * ws.sig[i]
		cpig += xi * ws.cpg[i]
		mix += xi * fastmath.Log(xi)
	}
	Ur := -rt * T * st.FT
	SrTV := -R * (T*st.FT + st.F)
	Zeos := P * V / rt
	Hr := Ur + P*V - rt
	// S = S^ig(T, P) + S^r(T, P) with S^ig(T, P) = S°(T) − R Σx ln x −
	// R ln(P/P°) and S^r(T, P) = S^r(T, V) + R ln Z: the ln P cancel, so S
	// is formed from ln(RT/(V·P°)), which stays finite where the equation
	// of state gives P ≤ 0 (a liquid under tension at fixed T, V). There
	// the residual entropy at T, P is undefined and SRes is reported
	// relative to the ideal gas at the same T and V.
	sig -= R * (mix + fastmath.Log(rt/(V*component.PRef)))
	Sr := SrTV
	if P > 0 {
		Sr += R * fastmath.Log(Zeos)
	}
	Cvr := -R * T * (2*st.FT + T*st.FTT)
	cv := cpig - R + Cvr
	cp := cv - T*st.dPdT*st.dPdT/st.dPdV
	vt := V - st.cshift
	h := hig + Hr - st.cshift*P
	s := sig + SrTV
	p := Properties{
		T: T, P: P,
		Z:             P * vt / rt,
		MolarVolume:   vt,
		MolarDensity:  1 / vt,
		MassDensity:   st.mw / vt,
		MolarMass:     st.mw,
		H:             h,
		S:             s,
		G:             h - T*s,
		U:             h - P*vt,
		A:             h - P*vt - T*s,
		Cp:            cp,
		Cv:            cv,
		DPDT:          st.dPdT,
		DPDV:          st.dPdV,
		HRes:          Hr - st.cshift*P,
		SRes:          Sr,
		Branch:        st.branch,
		Roots:         st.roots,
		Compressivity: -1 / (vt * st.dPdV),
	}
	p.JouleThomson = (-T*st.dPdT/st.dPdV - vt) / cp
	if w2 := -(cp / cv) * vt * vt * st.dPdV / st.mw; w2 > 0 {
		p.SpeedOfSound = math.Sqrt(w2)
	}
	return p
}
