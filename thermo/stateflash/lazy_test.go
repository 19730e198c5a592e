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
