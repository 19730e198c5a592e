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

// TestPropertiesFromFugacity checks that the properties rebuilt from the
// last trusted evaluation with WantT are PropertiesTrusted's bit for bit
// (the same root and sums, so every field identical), with and without
// the composition derivatives and with another state evaluated on the
// workspace in between, and that it declines a Fugacity without that
// state: no WantT, a checked evaluation, another T or P, another mixture.
func TestPropertiesFromFugacity(t *testing.T) {
	mx := mixture(t, PR78, Options{VolumeTranslation: true}, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-hexane")
	other := mixture(t, SRK, Options{}, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-hexane")
	x := []float64{0.02, 0.03, 0.6, 0.1, 0.1, 0.1, 0.05}
	y := []float64{0.001, 0.01, 0.2, 0.1, 0.2, 0.3, 0.189}
	ws, f, g := mx.NewWorkspace(), mx.NewFugacity(), mx.NewFugacity()
	for _, st := range []struct{ T, P float64 }{{250, 5e6}, {200, 1e6}, {350, 2e7}, {160, 3e6}} {
		for _, root := range []RootChoice{RootMinGibbs, RootVapour, RootLiquid} {
			for _, want := range []Want{WantT, WantT | WantP, WantAll} {
				mx.FugacityTrusted(ws, st.T, st.P, x, root, want, f)
				mx.FugacityTrusted(ws, st.T, st.P, y, root, WantN, g)
				got, ok := mx.PropertiesFromFugacity(ws, st.T, st.P, x, f)
				if !ok {
					t.Fatalf("T %g P %g root %v want %v: declined", st.T, st.P, root, want)
				}
				if ref := mx.PropertiesTrusted(ws, st.T, st.P, x, root); got != ref {
					t.Fatalf("T %g P %g root %v want %v:\n%+v\n%+v", st.T, st.P, root, want, got, ref)
				}
			}
		}
	}
	mx.FugacityTrusted(ws, 250, 5e6, x, RootMinGibbs, WantP|WantN, f)
	if _, ok := mx.PropertiesFromFugacity(ws, 250, 5e6, x, f); ok {
		t.Fatal("accepted an evaluation without WantT")
	}
	if err := mx.Fugacity(ws, 250, 5e6, x, RootMinGibbs, WantAll, f); err != nil {
		t.Fatal(err)
	}
	if _, ok := mx.PropertiesFromFugacity(ws, 250, 5e6, x, f); ok {
		t.Fatal("accepted a checked evaluation")
	}
	mx.FugacityTrusted(ws, 250, 5e6, x, RootMinGibbs, WantT, f)
	for _, s := range []struct{ T, P float64 }{{250.1, 5e6}, {250, 5.1e6}} {
		if _, ok := mx.PropertiesFromFugacity(ws, s.T, s.P, x, f); ok {
			t.Fatalf("accepted the state of 250 K, 5 MPa for %g K, %g Pa", s.T, s.P)
		}
	}
	if _, ok := other.PropertiesFromFugacity(other.NewWorkspace(), 250, 5e6, x, f); ok {
		t.Fatal("accepted another mixture's evaluation")
	}
}
