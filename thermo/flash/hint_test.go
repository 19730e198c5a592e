package flash

import (
	"context"
	"math"
	"testing"
)

// TestRootHintKeepsAnswers flashes the five sweep mixtures on a 30 × 30
// grid over 150–600 K and 0.1–30 MPa twice, with the evaluation slots'
// root hints (eos.Fugacity.UseRootHint, the default) and without them
// (every cubic by the closed form): the same phase count and labels at
// every state, phase amounts within 1e-9 and compositions within 1e-9.
// The two routes find the same roots to round-off, so the solvers take
// the same path; only the last bits may differ.
func TestRootHintKeepsAnswers(t *testing.T) {
	n := 30
	if testing.Short() {
		n = 12
	}
	ctx := context.Background()
	for _, f := range sweepFluids(t) {
		hinted, plain := NewWorkspace(f.mx), NewWorkspace(f.mx)
		plain.tf.UseRootHint(false)
		for k := range plain.ph {
			plain.ph[k].f.UseRootHint(false)
		}
		a, b := NewResult(f.mx), NewResult(f.mx)
		states := 0
		for i := range n {
			T := 150 + 450*float64(i)/float64(n-1)
			for j := range n {
				P := 1e5 * math.Pow(300, float64(j)/float64(n-1))
				errA := hinted.PT(ctx, T, P, f.z, Options{}, nil, a)
				errB := plain.PT(ctx, T, P, f.z, Options{}, nil, b)
				if (errA == nil) != (errB == nil) {
					t.Fatalf("%s T=%g P=%g: hinted error %v, closed-form error %v", f.name, T, P, errA, errB)
				}
				if errA != nil {
					continue
				}
				states++
				if len(a.Phases) != len(b.Phases) {
					t.Fatalf("%s T=%g P=%g: %d phases hinted, %d closed-form", f.name, T, P, len(a.Phases), len(b.Phases))
				}
				for k := range a.Phases {
					pa, pb := &a.Phases[k], &b.Phases[k]
					if pa.Label != pb.Label || math.Abs(pa.Beta-pb.Beta) > 1e-9 {
						t.Fatalf("%s T=%g P=%g phase %d: %v β %.12g hinted, %v β %.12g closed-form", f.name, T, P, k, pa.Label, pa.Beta, pb.Label, pb.Beta)
					}
					for c := range pa.X {
						if math.Abs(pa.X[c]-pb.X[c]) > 1e-9 {
							t.Fatalf("%s T=%g P=%g phase %d x[%d]: %.12g hinted, %.12g closed-form", f.name, T, P, k, c, pa.X[c], pb.X[c])
						}
					}
				}
			}
		}
		if states < n*n/2 {
			t.Fatalf("%s: only %d of %d states converged", f.name, states, n*n)
		}
	}
}
