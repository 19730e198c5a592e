package stateflash

import (
	"context"
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/flash"
)

// TestMisleadingEstimate: P–H and P–S flashes warm-started from the
// two-phase result of a distant state (whose inner flashes converge splits
// without their stability test until the final state is confirmed) give
// the cold answer, at single-phase and two-phase targets.
func TestMisleadingEstimate(t *testing.T) {
	ctx := context.Background()
	mx, z := benchGas(t)
	fws, fr := flash.NewWorkspace(mx), flash.NewResult(mx)
	ws, cold, warm, far := NewWorkspace(mx), NewResult(mx), NewResult(mx), NewResult(mx)
	if err := fws.PT(ctx, 240, 3e6, z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	if err := ws.PH(ctx, 3e6, fr.Overall.H, z, Options{}, nil, far); err != nil {
		t.Fatal(err)
	}
	if len(far.Phases) != 2 {
		t.Fatalf("estimate state has %d phases, want 2", len(far.Phases))
	}
	e := far.Estimate()
	for _, st := range []struct{ T, P float64 }{{350, 5e6}, {250, 5e6}, {220, 2e6}, {300, 1e6}} {
		if err := fws.PT(ctx, st.T, st.P, z, flash.Options{}, nil, fr); err != nil {
			t.Fatal(err)
		}
		for _, spec := range []Spec{SpecPH, SpecPS} {
			run := func(e *Estimate, r *Result) error {
				if spec == SpecPH {
					return ws.PH(ctx, st.P, fr.Overall.H, z, Options{}, e, r)
				}
				return ws.PS(ctx, st.P, fr.Overall.S, z, Options{}, e, r)
			}
			if err := run(nil, cold); err != nil {
				t.Fatal(err)
			}
			if err := run(&e, warm); err != nil {
				t.Fatalf("%v at T %g P %g from a distant estimate: %v", spec, st.T, st.P, err)
			}
			if math.Abs(cold.T-st.T) > 1e-6 || math.Abs(warm.T-cold.T) > 1e-8 || len(warm.Phases) != len(fr.Phases) || len(cold.Phases) != len(fr.Phases) {
				t.Errorf("%v at T %g P %g: cold T %.9f (%d phases), warm T %.9f (%d phases), T–P %d phases",
					spec, st.T, st.P, cold.T, len(cold.Phases), warm.T, len(warm.Phases), len(fr.Phases))
			}
			if warm.Report.MinTPD < -1e-8 || !warm.Report.Converged {
				t.Errorf("%v at T %g P %g: warm result not confirmed stable: %+v", spec, st.T, st.P, warm.Report)
			}
		}
	}
}

// TestWarmDerivativeStep checks the first-order start of P–H and P–S from
// an estimate's state derivatives: a two-phase result hands them on; with
// them the warm solve needs fewer inner flashes than from the estimate's
// temperature alone; and derivatives or state functions that are wrong
// (a heat capacity 100 times too small or large, the sign of ∂H/∂P
// flipped, an enthalpy 5 kJ/mol off) change the work done, never the
// answer (the same temperature to 1e-8 K and phase count as the cold
// solve).
func TestWarmDerivativeStep(t *testing.T) {
	ctx := context.Background()
	mx, z := benchGas(t)
	fws, fr := flash.NewWorkspace(mx), flash.NewResult(mx)
	ws, prev, cold, warm := NewWorkspace(mx), NewResult(mx), NewResult(mx), NewResult(mx)
	for _, spec := range []Spec{SpecPH, SpecPS} {
		run := func(P, val float64, e *Estimate, r *Result) {
			t.Helper()
			var err error
			if spec == SpecPS {
				err = ws.PS(ctx, P, val, z, Options{}, e, r)
			} else {
				err = ws.PH(ctx, P, val, z, Options{}, e, r)
			}
			if err != nil {
				t.Fatal(err)
			}
		}
		value := func(o flash.Overall) float64 {
			if spec == SpecPS {
				return o.S
			}
			return o.H
		}
		// The previous timestep at 249.5 K, 4.975 MPa; the state at 250 K, 5 MPa.
		if err := fws.PT(ctx, 249.5, 4.975e6, z, flash.Options{}, nil, fr); err != nil {
			t.Fatal(err)
		}
		run(4.975e6, value(fr.Overall), nil, prev)
		est := prev.Estimate()
		if len(prev.Phases) != 2 || !est.HasDeriv || !(est.Deriv.HT > 0) {
			t.Fatalf("%v: two-phase result (%d phases) gave no state derivatives: %+v", spec, len(prev.Phases), est.Deriv)
		}
		if err := fws.PT(ctx, 250, 5e6, z, flash.Options{}, nil, fr); err != nil {
			t.Fatal(err)
		}
		val := value(fr.Overall)
		run(5e6, val, nil, cold)
		run(5e6, val, &est, warm)
		plain := est
		plain.HasDeriv = false
		ref := NewResult(mx)
		run(5e6, val, &plain, ref)
		if warm.Report.Flashes >= ref.Report.Flashes {
			t.Errorf("%v: %d inner flashes with the derivative step, %d without", spec, warm.Report.Flashes, ref.Report.Flashes)
		}
		wrong := []func(e *Estimate){
			func(e *Estimate) { e.Deriv.HT *= 100 },
			func(e *Estimate) { e.Deriv.HT /= 100 },
			func(e *Estimate) { e.Deriv.HP, e.Deriv.VT = -e.Deriv.HP, -e.Deriv.VT },
			func(e *Estimate) { e.H -= 5000; e.S -= 20 },
		}
		for k, spoil := range append(wrong, func(*Estimate) {}) {
			e := est
			spoil(&e)
			run(5e6, val, &e, warm)
			if math.Abs(warm.T-cold.T) > 1e-8 || len(warm.Phases) != len(cold.Phases) {
				t.Errorf("%v estimate %d: T %.10f (%d phases), cold %.10f (%d phases)", spec, k, warm.T, len(warm.Phases), cold.T, len(cold.Phases))
			}
		}
	}
}
