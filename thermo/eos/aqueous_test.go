package eos

import (
	"errors"
	"math"
	"testing"
)

// TestAqueousKijValues checks the aqueous set against hand evaluations of
// the Søreide & Whitson (1992) correlations with the library's constants
// (methane ω = 0.011, Tc = 190.56 K; CO2 Tc = 304.13 K), its clamping
// outside 273.15 K … Tc(water), and that the other pairs and the
// non-aqueous set are untouched.
func TestAqueousKijValues(t *testing.T) {
	mx := mixture(t, PR78, Options{}, "methane", "carbon-dioxide", "ethane", "water")
	if !mx.HasAqueous() || mx.IsAqueous() {
		t.Fatal("a fluid with water should carry an aqueous set")
	}
	aq := mx.Aqueous()
	if !aq.IsAqueous() || aq.Aqueous() != aq || aq.HasAqueous() {
		t.Fatal("the aqueous view should be its own aqueous view")
	}
	co2Tc := mx.Component(1).Tc
	for _, c := range []struct {
		i    int
		T    float64
		want float64 // hand evaluation
	}{
		// A0 = 1.1120 − 1.7369·0.011^−0.1 = −1.614689, A1 = 1.109296,
		// A2 = −0.169507; Tr = 310/190.56.
		{0, 310, -0.258691},
		// −0.31092 + 0.23580·Tr − 21.2566·exp(−6.7222·Tr), Tr = 323.15/Tc.
		{1, 323.15, -0.31092 + 0.23580*323.15/co2Tc - 21.2566*math.Exp(-6.7222*323.15/co2Tc)},
	} {
		k, src := aq.Kij(c.i, 3, c.T)
		if math.Abs(k-c.want) > 2e-5 || src != aqueousSource {
			t.Errorf("k^AQ(%s–water, %g K) = %.6f (%q), want %.6f", mx.Component(c.i).ID, c.T, k, src, c.want)
		}
		kna, _ := mx.Kij(c.i, 3, c.T)
		if kna == k {
			t.Errorf("non-aqueous k_ij of %s–water changed to the aqueous value", mx.Component(c.i).ID)
		}
	}
	lo, _ := aq.Kij(0, 3, 273.15)
	hi, _ := aq.Kij(0, 3, mx.Component(3).Tc)
	for _, T := range []float64{1, 200, 273.15} {
		if k, _ := aq.Kij(0, 3, T); k != lo {
			t.Errorf("k^AQ at %g K = %g, want the 273.15 K value %g", T, k, lo)
		}
	}
	for _, T := range []float64{700, 1e6} {
		if k, _ := aq.Kij(0, 3, T); k != hi {
			t.Errorf("k^AQ at %g K = %g, want the Tc(water) value %g", T, k, hi)
		}
	}
	for _, T := range []float64{250, 310, 500} {
		a, _ := aq.Kij(0, 2, T)
		b, _ := mx.Kij(0, 2, T)
		if a != b {
			t.Errorf("methane–ethane k_ij differs between the sets at %g K: %g vs %g", T, a, b)
		}
	}
}

// TestAqueousModes: AqueousKijNone and dry fluids have no aqueous set, an
// undefined mode is an input error.
func TestAqueousModes(t *testing.T) {
	for _, c := range []struct {
		opts Options
		ids  []string
		want bool
	}{
		{Options{}, []string{"methane", "water"}, true},
		{Options{AqueousKij: AqueousKijSoreideWhitson}, []string{"methane", "water"}, true},
		{Options{AqueousKij: AqueousKijNone}, []string{"methane", "water"}, false},
		{Options{}, []string{"methane", "ethane"}, false},
	} {
		mx := mixture(t, PR78, c.opts, c.ids...)
		if mx.HasAqueous() != c.want || (mx.Aqueous() == mx) == c.want {
			t.Errorf("%v %v: HasAqueous %v, want %v", c.opts.AqueousKij, c.ids, mx.HasAqueous(), c.want)
		}
	}
	_, err := NewMixture(PR78, lookup(t, "methane", "water"), Options{AqueousKij: 7})
	var ie *InputError
	if !errors.As(err, &ie) || ie.Field != "AqueousKij" {
		t.Errorf("mode 7: got %v, want an InputError for AqueousKij", err)
	}
}

// TestAqueousDerivatives: through the aqueous view, with k_ij(T) of the
// Søreide & Whitson form, ∂ln φ/∂T matches a central difference, Cp
// matches dH/dT and ∂ln φ/∂n_j is symmetric (1e-6 relative).
func TestAqueousDerivatives(t *testing.T) {
	mx := mixture(t, PR78, Options{VolumeTranslation: true}, "nitrogen", "carbon-dioxide", "methane", "propane", "hydrogen-sulfide", "water")
	aq := mx.Aqueous()
	ws, f, fp, fm := aq.NewWorkspace(), aq.NewFugacity(), aq.NewFugacity(), aq.NewFugacity()
	x := []float64{2e-5, 0.012, 8e-4, 1e-5, 0.003, 0.98418}
	n := len(x)
	for _, st := range []struct{ T, P float64 }{{300, 5e6}, {350, 20e6}, {420, 1e6}} {
		if err := aq.Fugacity(ws, st.T, st.P, x, RootLiquid, WantAll, f); err != nil {
			t.Fatal(err)
		}
		h := 2e-5 * st.T
		aq.Fugacity(ws, st.T+h, st.P, x, RootLiquid, 0, fp)
		aq.Fugacity(ws, st.T-h, st.P, x, RootLiquid, 0, fm)
		for i := range n {
			fd := (fp.LnPhi[i] - fm.LnPhi[i]) / (2 * h)
			if math.Abs(f.DT[i]-fd) > 1e-6*math.Max(math.Abs(fd), 1/st.T) {
				t.Errorf("T=%g P=%g: ∂lnφ/∂T[%d] analytic %.10g, finite difference %.10g", st.T, st.P, i, f.DT[i], fd)
			}
			for j := range n {
				if f.DN[i*n+j] != f.DN[j*n+i] {
					t.Errorf("DN not symmetric at (%d,%d)", i, j)
				}
			}
		}
		p0, err := aq.Properties(ws, st.T, st.P, x, RootLiquid)
		if err != nil {
			t.Fatal(err)
		}
		pp, _ := aq.Properties(ws, st.T+h, st.P, x, RootLiquid)
		pm, _ := aq.Properties(ws, st.T-h, st.P, x, RootLiquid)
		if fd := (pp.H - pm.H) / (2 * h); math.Abs(p0.Cp-fd) > 1e-6*math.Abs(fd) {
			t.Errorf("T=%g P=%g: Cp %.10g, dH/dT %.10g", st.T, st.P, p0.Cp, fd)
		}
	}
}
