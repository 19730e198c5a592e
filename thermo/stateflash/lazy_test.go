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

// TestHardOuterPaths replays states where the outer iteration used to
// fail, each warm-started from the P–H result of another state of the
// same sweep stream (or cold), and checks that the flash now returns the
// T–P state it was built from, in at most 20 outer iterations:
//   - wet gas, P–H cold: untested two-phase splits led to 229.02 K, where
//     the tested flash has three phases, and the bracket collapsed between
//     the two (now caught as a jump);
//   - wet gas, P–S from 267 K: untested splits hopped between branches,
//     F jumping from −61 to +4.6 J/(mol·K) within 0.04 K while its
//     derivative was 0.3–0.5 (now caught as a jump);
//   - lean gas, T–V from 171.5 K: Newton steps alternated across the dew
//     point, ln P between 14.2 and 16.1, for 100 iterations (bisected);
//   - gas condensate, P–S from 429 K: the second step reached 59.6 K,
//     where the T–P flash of the model does not converge (halved back).
func TestHardOuterPaths(t *testing.T) {
	ctx := context.Background()
	fl := sweepFluids(t)
	for _, c := range []struct {
		fluid      int
		spec       Spec
		T, P       float64
		estT, estP float64 // 0: cold
	}{
		{4, SpecPH, 225.8, 7.1988e6, 0, 0},
		{4, SpecPS, 160.24259320025925, 184186.30422164887, 267.02303107961421, 206045.96287433553},
		{0, SpecTV, 208.19833701073173, 5643650.7500830581, 171.52328460592793, 1414086.7530615241},
		{1, SpecPS, 151.9467, 3.90809e6, 429.0760, 1.94633e6},
	} {
		f := fl[c.fluid]
		fws, fr := flash.NewWorkspace(f.mx), flash.NewResult(f.mx)
		ws, r, src := NewWorkspace(f.mx), NewResult(f.mx), NewResult(f.mx)
		var est *Estimate
		if c.estT > 0 {
			if err := fws.PT(ctx, c.estT, c.estP, f.z, flash.Options{}, nil, fr); err != nil {
				t.Fatal(err)
			}
			if err := ws.PH(ctx, c.estP, fr.Overall.H, f.z, Options{}, nil, src); err != nil {
				t.Fatal(err)
			}
			e := src.Estimate()
			est = &e
		}
		if err := fws.PT(ctx, c.T, c.P, f.z, flash.Options{}, nil, fr); err != nil {
			t.Fatal(err)
		}
		if err := solveSpec(ctx, ws, c.spec, c.T, c.P, fr.Overall, f.z, est, r); err != nil {
			t.Errorf("%s %v at T=%g P=%g: %v", f.name, c.spec, c.T, c.P, err)
			continue
		}
		// The rules take these paths to the answer in 8–10 outer
		// iterations; without the jump rule the first two end on a
		// collapsed bracket.
		if r.Report.OuterIterations > 20 {
			t.Errorf("%s %v at T=%g P=%g: %d outer iterations", f.name, c.spec, c.T, c.P, r.Report.OuterIterations)
		}
		if math.Abs(r.T-c.T) > 1e-6*c.T || math.Abs(r.P-c.P) > 1e-6*c.P || len(r.Phases) != len(fr.Phases) {
			t.Errorf("%s %v at T=%g P=%g (%d phases): T=%.9f P=%.9g with %d phases", f.name, c.spec, c.T, c.P, len(fr.Phases), r.T, r.P, len(r.Phases))
		}
	}
}
