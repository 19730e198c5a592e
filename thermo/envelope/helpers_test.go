package envelope

import (
	"testing"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// testFluid is one of our own test mixtures (fictional streams).
type testFluid struct {
	name string
	mx   *eos.Mixture
	z    []float64
}

func lookup(t testing.TB, ids ...string) []component.Component {
	t.Helper()
	cs := make([]component.Component, len(ids))
	for i, id := range ids {
		c, err := component.Lookup(id)
		if err != nil {
			t.Fatal(err)
		}
		cs[i] = c
	}
	return cs
}

func mixture(t testing.TB, model eos.Model, cs []component.Component, opts eos.Options) *eos.Mixture {
	t.Helper()
	mx, err := eos.NewMixture(model, cs, opts)
	if err != nil {
		t.Fatal(err)
	}
	return mx
}

// streams returns the fictional streams of thermo/flash's sweep tests
// (same compositions): a lean natural gas, a gas condensate with a C7+
// pseudo-component and a CO2-rich stream.
func streams(t testing.TB) []testFluid {
	c7, err := component.PseudoFromMolarMass("c7plus", 0.140, 0.78)
	if err != nil {
		t.Fatal(err)
	}
	base := []string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane"}
	return []testFluid{
		{"lean gas", mixture(t, eos.PR78, lookup(t, base...), eos.Options{}),
			[]float64{0.01, 0.015, 0.90, 0.05, 0.015, 0.003, 0.004, 0.001, 0.001, 0.001}},
		{"gas condensate", mixture(t, eos.PR78, append(lookup(t, base...), c7), eos.Options{}),
			[]float64{0.005, 0.02, 0.70, 0.08, 0.05, 0.015, 0.02, 0.01, 0.01, 0.015, 0.075}},
		{"CO2-rich", mixture(t, eos.PR78, lookup(t, "carbon-dioxide", "methane", "nitrogen", "hydrogen-sulfide", "ethane", "propane"), eos.Options{}),
			[]float64{0.85, 0.08, 0.02, 0.02, 0.02, 0.01}},
	}
}

func newSolver(t testing.TB, mx *eos.Mixture) *Solver {
	t.Helper()
	s, err := NewSolver(mx, Options{})
	if err != nil {
		t.Fatal(err)
	}
	return s
}
