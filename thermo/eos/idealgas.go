package eos

import (
	"math"

	"github.com/fugad/fugad/thermo/component"
)

// idealGas is a component's ideal-gas heat capacity polynomial
// (component.IdealGasCp, Cp°/R = Σ_k A_k T^k) prepared for evaluation at
// many temperatures:
//
//	Cp°(T) = R·Σ_k A_k T^k,
//	H°(T)  = Hf + R·T·Σ_k A_k T^k/(k+1) − R·TRef·Σ_k A_k TRef^k/(k+1),
//	S°(T)  = R·(A_0 ln T + Σ_{k≥1} A_k T^k/k) − (the same at TRef),
//
// with the divisions and the reference-temperature terms done once, so
// that a new temperature costs one logarithm for all components instead
// of two for each (the figures of component.HIG, SIG and CpIG to
// rounding).
type idealGas struct {
	a  [5]float64 // A_k
	h  [5]float64 // A_k/(k+1)
	s  [4]float64 // A_k/k, k = 1…4
	h0 float64    // Hf − R·TRef·Σ A_k TRef^k/(k+1), J/mol
	s0 float64    // R·(A_0 ln TRef + Σ A_k TRef^k/k), J/(mol·K)
}

func newIdealGas(c *component.Component) idealGas {
	a := c.Cp.A
	g := idealGas{a: a}
	for k := range a {
		g.h[k] = a[k] / float64(k+1)
	}
	for k := 1; k < len(a); k++ {
		g.s[k-1] = a[k] / float64(k)
	}
	g.h0 = c.Hf - g.hAnti(component.TRef)
	g.s0 = g.sAnti(component.TRef, math.Log(component.TRef))
	return g
}

func (g *idealGas) hAnti(T float64) float64 {
	h := &g.h
	return R * T * (h[0] + T*(h[1]+T*(h[2]+T*(h[3]+T*h[4]))))
}

func (g *idealGas) sAnti(T, lnT float64) float64 {
	s := &g.s
	return R * (g.a[0]*lnT + T*(s[0]+T*(s[1]+T*(s[2]+T*s[3]))))
}

// at returns H°, S° (at component.PRef) and Cp° at T, lnT = ln T.
func (g *idealGas) at(T, lnT float64) (h, s, cp float64) {
	a := &g.a
	cp = R * (a[0] + T*(a[1]+T*(a[2]+T*(a[3]+T*a[4]))))
	return g.hAnti(T) + g.h0, g.sAnti(T, lnT) - g.s0, cp
}
