package stateflash

import (
	"context"
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// fluid builds a mixture of library components and extra components.
func fluid(t testing.TB, model eos.Model, extra []component.Component, ids ...string) *eos.Mixture {
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
	mx, err := eos.NewMixture(model, comps, eos.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return mx
}

// testFluid is one of our own fictional streams.
type testFluid struct {
	name string
	mx   *eos.Mixture
	z    []float64
}

// sweepFluids are the robustness-sweep streams of thermo/flash's tests
// (same components and amounts), rebuilt here: a lean natural gas, a rich
// gas condensate with a C7+ pseudo-component, a volatile oil, a CO2-rich
// stream and a wet gas with water.
func sweepFluids(t testing.TB) []testFluid {
	c7, err := component.PseudoFromMolarMass("c7plus", 0.140, 0.78)
	if err != nil {
		t.Fatal(err)
	}
	c7oil, err := component.PseudoFromBoilingPoint("c7plus-oil", 560, 0.84)
	if err != nil {
		t.Fatal(err)
	}
	return []testFluid{
		{"lean gas", fluid(t, eos.PR78, nil, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane"),
			[]float64{0.01, 0.015, 0.90, 0.05, 0.015, 0.003, 0.004, 0.001, 0.001, 0.001}},
		{"gas condensate", fluid(t, eos.PR78, []component.Component{c7}, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane"),
			[]float64{0.005, 0.02, 0.70, 0.08, 0.05, 0.015, 0.02, 0.01, 0.01, 0.015, 0.075}},
		{"volatile oil", fluid(t, eos.PR78, []component.Component{c7oil}, "methane", "ethane", "propane", "n-butane", "n-pentane", "n-hexane"),
			[]float64{0.55, 0.08, 0.06, 0.05, 0.04, 0.04, 0.18}},
		{"CO2-rich", fluid(t, eos.PR78, nil, "carbon-dioxide", "methane", "nitrogen", "hydrogen-sulfide", "ethane", "propane"),
			[]float64{0.85, 0.08, 0.02, 0.02, 0.02, 0.01}},
		{"wet gas", fluid(t, eos.SRK, nil, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-pentane", "water"),
			[]float64{0.01, 0.02, 0.80, 0.06, 0.03, 0.02, 0.01, 0.05}},
	}
}

// pressureTol is the relative tolerance to which a molar volume fixes P
// at the T–P result fr: 1e-6, or for a dense phase what the volume
// tolerance (1e-10) allows, 10·tol/(κ_T·P) with the smallest phase
// compressibility κ_T.
func pressureTol(fr *flash.Result, P float64) float64 {
	kappa := math.Inf(1)
	for _, p := range fr.Phases {
		kappa = math.Min(kappa, p.Props.Compressivity)
	}
	return math.Max(1e-6, 10*1e-10/(kappa*P))
}

// solveSpec runs the state-function flash s whose specification is taken
// from the T–P state (T, P) with overall properties o, from estimate e.
func solveSpec(ctx context.Context, ws *Workspace, s Spec, T, P float64, o flash.Overall, z []float64, e *Estimate, r *Result) error {
	switch s {
	case SpecPH:
		return ws.PH(ctx, P, o.H, z, Options{}, e, r)
	case SpecPS:
		return ws.PS(ctx, P, o.S, z, Options{}, e, r)
	case SpecTV:
		return ws.TV(ctx, T, o.MolarVolume, z, Options{}, e, r)
	}
	return ws.UV(ctx, o.U, o.MolarVolume, z, Options{}, e, r)
}
