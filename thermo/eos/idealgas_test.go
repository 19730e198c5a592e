package eos

import (
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/component"
)

// TestIdealGasPrepared checks the prepared ideal-gas polynomials against
// component.HIG, SIG and CpIG (the reference forms) for every library
// component from 50 to 3000 K: they agree to rounding (1e-12 of the
// magnitude of the terms), at TRef H° = Hf and S° = 0 exactly as the
// reference state defines.
func TestIdealGasPrepared(t *testing.T) {
	for _, c := range component.All() {
		g := newIdealGas(&c)
		for _, T := range []float64{50, 150, 298.15, 500, 1000, 3000} {
			h, s, cp := g.at(T, math.Log(T))
			scale := math.Abs(c.Hf) + math.Abs(c.CpIG(T))*T
			if d := math.Abs(h - c.HIG(T)); d > 1e-12*scale {
				t.Errorf("%s at %g K: H° %.17g, HIG %.17g", c.ID, T, h, c.HIG(T))
			}
			if d := math.Abs(s - c.SIG(T)); d > 1e-12*(1+math.Abs(c.CpIG(T))*math.Abs(math.Log(T))) {
				t.Errorf("%s at %g K: S° %.17g, SIG %.17g", c.ID, T, s, c.SIG(T))
			}
			if d := math.Abs(cp - c.CpIG(T)); d > 1e-14*math.Abs(cp) {
				t.Errorf("%s at %g K: Cp° %.17g, CpIG %.17g", c.ID, T, cp, c.CpIG(T))
			}
		}
		if h, s, _ := g.at(component.TRef, math.Log(component.TRef)); math.Abs(h-c.Hf) > 1e-12*(1+math.Abs(c.Hf)) || math.Abs(s) > 1e-12 {
			t.Errorf("%s at TRef: H° − Hf = %g, S° = %g", c.ID, h-c.Hf, s)
		}
	}
}

// TestPairsConstantKMatchesLinear sets the attraction matrix of a
// ten-component mixture with default (constant) k_ij by the prepared
// products and by the general k0 + k1·T form with k1 = 0: a_ij, ∂a_ij/∂T
// and ∂²a_ij/∂T² agree to rounding.
func TestPairsConstantKMatchesLinear(t *testing.T) {
	mx := mixture(t, PR78, Options{}, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "n-pentane", "n-hexane", "water")
	if mx.hasK1 {
		t.Fatal("default k_ij have a temperature term; the test needs constant ones")
	}
	n := mx.n
	ws := mx.NewWorkspace()
	for _, T := range []float64{150, 300, 600} {
		ws.tValid = false
		ws.setT(T)
		a := append([]float64(nil), ws.aij[:n*n]...)
		aT := append([]float64(nil), ws.aijT[:n*n]...)
		aTT := append([]float64(nil), ws.aijTT[:n*n]...)
		ws.pairsLinearK(T)
		for k := range n * n {
			for _, c := range [][2]float64{{a[k], ws.aij[k]}, {aT[k], ws.aijT[k]}, {aTT[k], ws.aijTT[k]}} {
				if math.Abs(c[0]-c[1]) > 1e-14*math.Abs(c[1]) {
					t.Fatalf("T = %g, pair %d: prepared %.17g, general %.17g", T, k, c[0], c[1])
				}
			}
		}
	}
}
