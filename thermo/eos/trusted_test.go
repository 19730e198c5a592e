package eos

import (
	"errors"
	"math"
	"testing"
)

// TestTrustedMatchesChecked checks that the unchecked entry points give
// what the checked ones give for normalised compositions (to the rounding
// of the normalisation), on both roots and all derivatives, and that
// CheckState reports exactly the error Fugacity reports.
func TestTrustedMatchesChecked(t *testing.T) {
	mx := mixture(t, PR78, Options{VolumeTranslation: true}, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-hexane")
	x := []float64{0.02, 0.03, 0.6, 0.1, 0.1, 0.1, 0.05}
	ws1, ws2 := mx.NewWorkspace(), mx.NewWorkspace()
	f1, f2 := mx.NewFugacity(), mx.NewFugacity()
	near := func(a, b float64) bool { return math.Abs(a-b) <= 1e-13*(1+math.Abs(a)) }
	for _, st := range []struct{ T, P float64 }{{250, 5e6}, {200, 1e6}, {350, 2e7}, {160, 3e6}} {
		for _, root := range []RootChoice{RootMinGibbs, RootVapour, RootLiquid} {
			if err := mx.Fugacity(ws1, st.T, st.P, x, root, WantAll, f1); err != nil {
				t.Fatal(err)
			}
			mx.FugacityTrusted(ws2, st.T, st.P, x, root, WantAll, f2)
			if f1.Branch != f2.Branch || f1.Roots != f2.Roots || !near(f1.Z, f2.Z) {
				t.Fatalf("T %g P %g root %v: branch %v/%v, Z %g/%g", st.T, st.P, root, f1.Branch, f2.Branch, f1.Z, f2.Z)
			}
			for i := range f1.LnPhi {
				if !near(f1.LnPhi[i], f2.LnPhi[i]) || !near(f1.DT[i], f2.DT[i]) || !near(f1.DP[i], f2.DP[i]) {
					t.Fatalf("T %g P %g root %v component %d: trusted and checked differ", st.T, st.P, root, i)
				}
			}
			for k := range f1.DN {
				if !near(f1.DN[k], f2.DN[k]) {
					t.Fatalf("T %g P %g root %v DN[%d]: %g vs %g", st.T, st.P, root, k, f1.DN[k], f2.DN[k])
				}
			}
			p1, err := mx.Properties(ws1, st.T, st.P, x, root)
			if err != nil {
				t.Fatal(err)
			}
			p2 := mx.PropertiesTrusted(ws2, st.T, st.P, x, root)
			if !near(p1.H, p2.H) || !near(p1.S, p2.S) || !near(p1.Cp, p2.Cp) || !near(p1.MolarVolume, p2.MolarVolume) {
				t.Fatalf("T %g P %g root %v: properties %+v vs %+v", st.T, st.P, root, p1, p2)
			}
		}
	}
	for _, bad := range []struct {
		T, P float64
		x    []float64
	}{{math.NaN(), 1e5, x}, {300, 1e14, x}, {300, 1e5, x[:3]}, {300, 1e5, []float64{1, -1, 0, 0, 0, 0, 1}}} {
		want := mx.Fugacity(ws1, bad.T, bad.P, bad.x, RootMinGibbs, 0, f1)
		got := mx.CheckState(ws1, bad.T, bad.P, bad.x)
		var we, ge *InputError
		if !errors.As(want, &we) || !errors.As(got, &ge) || we.Field != ge.Field || we.Reason != ge.Reason {
			t.Fatalf("T %g P %g x %v: CheckState %v, Fugacity %v", bad.T, bad.P, bad.x, got, want)
		}
	}
	if err := mx.CheckState(ws1, 250, 5e6, x); err != nil {
		t.Fatal(err)
	}
}
