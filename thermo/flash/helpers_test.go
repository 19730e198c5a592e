package flash

import (
	"context"
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// fluid builds a mixture of library components (and extra pseudo-components).
func fluid(t testing.TB, model eos.Model, ids ...string) *eos.Mixture {
	t.Helper()
	return fluidWith(t, model, nil, ids...)
}

func fluidWith(t testing.TB, model eos.Model, extra []component.Component, ids ...string) *eos.Mixture {
	t.Helper()
	return fluidFull(t, model, eos.Options{}, extra, ids...)
}

// fluidOpts builds a mixture of library components with mixture options.
func fluidOpts(t testing.TB, model eos.Model, opts eos.Options, ids ...string) *eos.Mixture {
	t.Helper()
	return fluidFull(t, model, opts, nil, ids...)
}

func fluidFull(t testing.TB, model eos.Model, opts eos.Options, extra []component.Component, ids ...string) *eos.Mixture {
	t.Helper()
	comps := make([]component.Component, 0, len(ids)+len(extra))
	for _, id := range ids {
		c, err := component.Lookup(id)
		if err != nil {
			t.Fatal(err)
		}
		comps = append(comps, c)
	}
	comps = append(comps, extra...)
	mx, err := eos.NewMixture(model, comps, opts)
	if err != nil {
		t.Fatal(err)
	}
	return mx
}

// checkResult verifies the invariants every returned result must satisfy:
// finite numbers, amounts summing to one, material balance, fugacity
// equality to the tolerance, and stability of every phase by an
// independent call of Stability (min TPD ≥ −1e-8 over all trials).
func checkResult(t testing.TB, ws *Workspace, res *Result, z []float64) {
	t.Helper()
	n := len(z)
	sz := 0.0
	for _, v := range z {
		sz += v
	}
	sb := 0.0
	for k, p := range res.Phases {
		if !(p.Beta > 0 && p.Beta <= 1) || !finite(p.Z) {
			t.Fatalf("T=%g P=%g: phase %d beta %g Z %g", res.T, res.P, k, p.Beta, p.Z)
		}
		sb += p.Beta
		for i := range n {
			if !finite(p.X[i]) || !finite(p.LnPhi[i]) || p.X[i] < 0 {
				t.Fatalf("T=%g P=%g: phase %d x[%d]=%g lnphi %g", res.T, res.P, k, i, p.X[i], p.LnPhi[i])
			}
		}
	}
	if math.Abs(sb-1) > 1e-12 {
		t.Fatalf("T=%g P=%g: Σβ = %.15g", res.T, res.P, sb)
	}
	for i := range n {
		s := 0.0
		for _, p := range res.Phases {
			s += p.Beta * p.X[i]
		}
		if math.Abs(s-z[i]/sz) > 1e-10 {
			t.Fatalf("T=%g P=%g: material balance of %d: %.15g vs %.15g", res.T, res.P, i, s, z[i]/sz)
		}
	}
	// No two phases of one composition (a trivial solution).
	for k := range res.Phases {
		for l := k + 1; l < len(res.Phases); l++ {
			d := 0.0
			for i := range n {
				if a, b := res.Phases[k].X[i], res.Phases[l].X[i]; a > 0 && b > 0 {
					e := math.Log(a / b)
					d += e * e
				}
			}
			if d < 1e-10 {
				t.Fatalf("T=%g P=%g: phases %d and %d coincide: %v, %v", res.T, res.P, k, l, res.Phases[k].X, res.Phases[l].X)
			}
		}
	}
	if len(res.Phases) > 1 && !(res.Report.Residual <= 1e-10) {
		t.Fatalf("T=%g P=%g: residual %g", res.T, res.P, res.Report.Residual)
	}
	st := NewStabilityResult(ws.Mixture())
	for k, p := range res.Phases {
		x := append([]float64(nil), p.X...)
		if err := ws.Stability(context.Background(), res.T, res.P, x, Options{}, st); err != nil {
			t.Fatal(err)
		}
		if st.MinTPD < -1e-8 {
			t.Fatalf("T=%g P=%g: phase %d (%v of %d) unstable, tpd %g at w = %.4g", res.T, res.P, k, p.Label, len(res.Phases), st.MinTPD, st.W)
		}
	}
}
