package flash

import (
	"context"
	"math"
	"testing"
)

// TestSplitMatchesWarmPT checks Workspace.Split against the warm path of
// PT from the same estimate: the same split (it is the same Newton
// solve), marked unverified and not converged-and-tested, and refused
// for an estimate of fewer than two phases without touching the result.
func TestSplitMatchesWarmPT(t *testing.T) {
	mx, z := benchGas(t)
	ctx := context.Background()
	ws := NewWorkspace(mx)
	prev, a, b := NewResult(mx), NewResult(mx), NewResult(mx)
	if err := ws.PT(ctx, 249.5, 5e6*0.995, z, Options{}, nil, prev); err != nil {
		t.Fatal(err)
	}
	e := prev.Estimate()
	if err := ws.PT(ctx, 250, 5e6, z, Options{}, &e, a); err != nil || a.Report.Path != PathWarm {
		t.Fatalf("warm PT: %v, path %v", err, a.Report.Path)
	}
	ok, err := ws.Split(ctx, 250, 5e6, z, Options{}, &e, b)
	if err != nil || !ok {
		t.Fatalf("Split: ok %v, %v", ok, err)
	}
	if b.Report.Path != PathUnverified || b.Report.Converged || b.Report.StabilityTrials != 0 {
		t.Fatalf("Split report %+v", b.Report)
	}
	if len(a.Phases) != len(b.Phases) {
		t.Fatalf("%d phases vs %d", len(a.Phases), len(b.Phases))
	}
	for k := range a.Phases {
		if a.Phases[k].Beta != b.Phases[k].Beta || a.Phases[k].Props.H != b.Phases[k].Props.H {
			t.Fatalf("phase %d: β %v/%v, H %v/%v", k, a.Phases[k].Beta, b.Phases[k].Beta, a.Phases[k].Props.H, b.Phases[k].Props.H)
		}
		for i := range a.Phases[k].X {
			if a.Phases[k].X[i] != b.Phases[k].X[i] {
				t.Fatalf("phase %d x[%d]: %v vs %v", k, i, a.Phases[k].X[i], b.Phases[k].X[i])
			}
		}
	}
	one := Estimate{Phases: 1}
	beta := b.Phases[0].Beta
	if ok, err := ws.Split(ctx, 250, 5e6, z, Options{}, &one, b); ok || err != nil || b.Phases[0].Beta != beta {
		t.Fatalf("Split from a one-phase estimate: ok %v, err %v, β %v (was %v)", ok, err, b.Phases[0].Beta, beta)
	}
	if _, err := ws.Split(ctx, math.NaN(), 5e6, z, Options{}, &e, b); err == nil {
		t.Fatal("Split accepted T = NaN")
	}
}
