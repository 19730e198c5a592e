package main

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/fugad/fugad/thermo/component"
)

// slate is the order in which library components join a fluid as it
// grows: a natural gas first (methane to n-dodecane with N2 and CO2), then
// H2S, the branched, cyclic and aromatic C5–C8 of a condensate. Beyond the
// library's share, petroleum pseudo-components are added.
var slate = []string{
	"methane", "ethane", "propane", "nitrogen", "carbon-dioxide", "isobutane", "n-butane",
	"isopentane", "n-pentane", "n-hexane", "n-heptane", "n-octane", "n-nonane", "n-decane",
	"n-undecane", "n-dodecane",
	"hydrogen-sulfide", "neopentane", "2-methylpentane", "3-methylpentane", "2,2-dimethylbutane",
	"2,3-dimethylbutane", "cyclopentane", "cyclohexane", "methylcyclohexane", "benzene",
	"toluene", "ethylbenzene", "o-xylene", "m-xylene", "p-xylene",
}

// scaleFluid returns a natural-gas-like fluid of n components and its
// feed: the first n of the slate, then pseudo-components with molar masses
// spread over 0.17–0.60 kg/mol (C12–C43 equivalents) and specific
// gravities rising from 0.80 to 0.92 (a paraffinic trend, Watson K about
// 12), characterised by Riazi–Daubert and Kesler–Lee through
// component.PseudoFromMolarMass. The feed is 75 % methane (all of it for
// n = 1), the rest decaying by e^(−0.3) per slate position with a seeded
// ±50 % scatter, so heavier components are scarcer. The fluid is invented
// for this measurement.
func scaleFluid(n int, seed uint64) ([]component.Component, []float64, error) {
	if n < 1 {
		return nil, nil, fmt.Errorf("fugadscale: %d components", n)
	}
	r := rand.New(rand.NewPCG(seed, uint64(n)))
	comps := make([]component.Component, 0, n)
	for _, id := range slate[:min(n, len(slate))] {
		c, err := component.Lookup(id)
		if err != nil {
			return nil, nil, err
		}
		comps = append(comps, c)
	}
	pseudos := n - len(comps)
	for k := range pseudos {
		f := 0.0
		if pseudos > 1 {
			f = float64(k) / float64(pseudos-1)
		}
		c, err := component.PseudoFromMolarMass(fmt.Sprintf("pseudo-%d", k+1), 0.17+0.43*f, 0.80+0.12*f)
		if err != nil {
			return nil, nil, fmt.Errorf("fugadscale: pseudo-component %d: %w", k+1, err)
		}
		comps = append(comps, c)
	}
	z := make([]float64, n)
	z[0] = 1
	if n > 1 {
		rest := 0.0
		for i := 1; i < n; i++ {
			z[i] = math.Exp(-0.3*float64(i)) * (0.5 + r.Float64())
			rest += z[i]
		}
		z[0] = 0.75
		for i := 1; i < n; i++ {
			z[i] *= 0.25 / rest
		}
	}
	return comps, z, nil
}
