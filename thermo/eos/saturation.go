package eos

import (
	"fmt"
	"math"
)

// Saturation is a pure component's vapour–liquid equilibrium on the model.
type Saturation struct {
	T, P        float64 // K, Pa
	VL, VV      float64 // saturated liquid and vapour molar volumes, m³/mol
	ZL, ZV      float64
	LnPhi       float64 // ln φ of both phases at the solution
	Iterations  int
	Residual    float64 // |ln φ_L − ln φ_V| at the solution
	Evaluations int     // phase evaluations (two per iteration)
	DLnPDInvT   float64 // d ln Psat/d(1/T) from the model (Clapeyron slope), K
	EnthalpyVap float64 // H_V − H_L, J/mol
}

// satTol is the fugacity-equality tolerance of the pure-component solves.
const satTol = 1e-12

// VapourPressure solves equal fugacity of liquid and vapour for component
// i alone at temperature T (Newton on ln P with a bracket):
//
//	ln φ_L(T, P) = ln φ_V(T, P),  d(ln φ_L − ln φ_V)/d ln P = Z_L − Z_V.
//
// The start is Wilson's correlation. Where the cubic has a single root the
// bracket moves toward the three-root region (a single vapour-like root
// means P is below the saturation pressure). It returns a
// *SaturationError at or above the model's critical temperature and a
// *ConvergenceError if the iteration stalls.
func (mx *Mixture) VapourPressure(ws *Workspace, i int, T float64) (Saturation, error) {
	if i < 0 || i >= mx.n {
		return Saturation{}, &InputError{Field: "component", Value: float64(i), Reason: fmt.Sprintf("index out of range [0, %d)", mx.n)}
	}
	if err := positive("T", T); err != nil {
		return Saturation{}, err
	}
	if ws == nil || ws.mx != mx {
		return Saturation{}, &InputError{Field: "workspace", Reason: "workspace belongs to another mixture (use NewWorkspace)"}
	}
	c := &mx.comps[i]
	if T >= c.Tc {
		return Saturation{}, &SaturationError{Component: c.ID, T: T, Tc: c.Tc}
	}
	ws.setT(T)
	// Pure-component mixing sums (composition e_i).
	st := &ws.st
	st.D, st.DT, st.DTT = ws.aij[i*mx.n+i], ws.aijT[i*mx.n+i], ws.aijTT[i*mx.n+i]
	st.hasTT = true
	st.Bm, st.cshift, st.mw = mx.b[i], mx.c[i], mx.mw[i]
	d1, d2 := mx.p.d1, mx.p.d2
	rt := R * T
	lnP := math.Log(c.Pc) + 5.373*(1+c.Omega)*(1-c.Tc/T)
	lo, hi := math.Inf(-1), math.Log(c.Pc)
	if lnP >= hi {
		lnP = hi - 1e-3
	}
	var sat Saturation
	var roots [3]float64
	resid := math.Inf(1)
	for it := 1; it <= 200; it++ {
		P := math.Exp(lnP)
		A := st.D * P / (rt * rt)
		B := st.Bm * P / rt
		nr := cubicRoots(A, B, d1, d2, &roots)
		sat.Evaluations += 2
		var next float64
		if nr == 1 {
			z := roots[0]
			// Inflection of the cubic at −c2/3: a single root above it is
			// vapour-like (P below saturation), below it liquid-like.
			zinf := (1 + (1-(d1+d2))*B) / 3
			if z > zinf {
				lo = lnP
				next = lnP + 0.5
			} else {
				hi = lnP
				next = lnP - 0.5
			}
		} else {
			zl, zv := roots[0], roots[2]
			gl := pureLnPhi(zl, A, B, d1, d2)
			gv := pureLnPhi(zv, A, B, d1, d2)
			F := gl - gv
			resid = math.Abs(F)
			if resid <= satTol {
				sat.T, sat.P = T, P
				sat.ZL, sat.ZV = zl, zv
				sat.LnPhi = gv
				sat.VL = zl*rt/P - st.cshift
				sat.VV = zv*rt/P - st.cshift
				sat.ZL = P * sat.VL / rt
				sat.ZV = P * sat.VV / rt
				sat.Iterations = it
				sat.Residual = resid
				mx.clapeyron(ws, &sat, zl, zv)
				return sat, nil
			}
			if F > 0 {
				lo = lnP
			} else {
				hi = lnP
			}
			next = lnP - F/(zl-zv)
		}
		if next <= lo || next >= hi {
			if math.IsInf(lo, -1) {
				next = hi - 1
			} else {
				next = 0.5 * (lo + hi)
			}
		}
		if math.Abs(next-lnP) < 1e-15 && resid < 1e-9 {
			lnP = next
			continue
		}
		lnP = next
	}
	return Saturation{}, &ConvergenceError{What: "vapour pressure of " + c.ID, Iterations: 200, Estimate: math.Exp(lnP), Residual: resid}
}

// pureLnPhi is ln φ of a pure fluid on root z.
func pureLnPhi(z, A, B, d1, d2 float64) float64 {
	return z - 1 - math.Log(z-B) - A/(B*(d1-d2))*math.Log((z+d1*B)/(z+d2*B))
}

// clapeyron fills the enthalpy of vaporisation from the residual enthalpies
// of the two roots and the model's Clapeyron slope
//
//	d ln Psat/d(1/T) = −ΔH_vap/(R·ΔZ).
func (mx *Mixture) clapeyron(ws *Workspace, sat *Saturation, zl, zv float64) {
	st := &ws.st
	T, P := sat.T, sat.P
	rt := R * T
	hr := func(z float64) float64 {
		st.T, st.P, st.Z = T, P, z
		st.V = z * rt / P
		mx.residual(ws, false)
		Ur := -rt * T * st.FT
		return Ur + P*st.V - rt
	}
	dh := hr(zv) - hr(zl)
	sat.EnthalpyVap = dh
	sat.DLnPDInvT = -dh / (R * (zv - zl))
}

// SaturationTemperature solves the temperature at which pure component i
// boils at pressure P, by a bracketed secant/bisection on 1/T of
// VapourPressure. P at or above Pc gives a *SaturationError.
func (mx *Mixture) SaturationTemperature(ws *Workspace, i int, P float64) (Saturation, error) {
	if i < 0 || i >= mx.n {
		return Saturation{}, &InputError{Field: "component", Value: float64(i), Reason: fmt.Sprintf("index out of range [0, %d)", mx.n)}
	}
	if err := positive("P", P); err != nil {
		return Saturation{}, err
	}
	c := &mx.comps[i]
	if P >= c.Pc {
		return Saturation{}, &SaturationError{Component: c.ID, T: math.NaN(), Tc: c.Tc}
	}
	// Invert Wilson for a start, then Newton on 1/T with the model's own
	// Clapeyron slope d ln Psat/d(1/T).
	lnPr := math.Log(P / c.Pc)
	inv := (1 - lnPr/(5.373*(1+c.Omega))) / c.Tc
	loInv, hiInv := 1/c.Tc, math.Inf(1)
	var sat Saturation
	var err error
	for it := 1; it <= 100; it++ {
		T := 1 / inv
		if T >= c.Tc {
			T = c.Tc * (1 - 1e-9)
			inv = 1 / T
		}
		sat, err = mx.VapourPressure(ws, i, T)
		if err != nil {
			return Saturation{}, err
		}
		F := math.Log(sat.P / P)
		if math.Abs(F) < 1e-12 {
			sat.Iterations = it
			return sat, nil
		}
		if F > 0 { // too hot
			loInv = inv
		} else {
			hiInv = inv
		}
		next := inv - F/sat.DLnPDInvT
		if !(next > loInv && next < hiInv) {
			if math.IsInf(hiInv, 1) {
				next = inv * 1.2
			} else {
				next = 0.5 * (loInv + hiInv)
			}
		}
		inv = next
	}
	return Saturation{}, &ConvergenceError{What: "saturation temperature of " + c.ID, Iterations: 100, Estimate: 1 / inv, Residual: math.NaN()}
}
