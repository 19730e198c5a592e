package flash

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/optimize"

	"github.com/fugad/fugad/thermo/eos"
)

// gibbsMin minimises the total Gibbs energy of two phases,
//
//	G/RT = Σ_i v_i ln f_i(y) + Σ_i (z_i − v_i) ln f_i(x),
//
// over the vapour mole numbers v_i = z_i·σ(u_i) (logistic transform, so
// every v_i stays in (0, z_i)) with gonum's BFGS, on the same model but
// independently of the flash code. It returns the v_i of the minimum.
func gibbsMin(t *testing.T, mx *eos.Mixture, T, P float64, z, v0 []float64) []float64 {
	n := len(z)
	ews := mx.NewWorkspace()
	fv, fl := mx.NewFugacity(), mx.NewFugacity()
	v, l := make([]float64, n), make([]float64, n)
	eval := func(u []float64) (float64, bool) {
		sv, sl := 0.0, 0.0
		for i := range n {
			s := 1 / (1 + math.Exp(-u[i]))
			v[i] = z[i] * s
			l[i] = z[i] - v[i]
			sv += v[i]
			sl += l[i]
		}
		if !(sv > 0 && sl > 0) {
			return math.Inf(1), false
		}
		if mx.Fugacity(ews, T, P, v, eos.RootMinGibbs, 0, fv) != nil || mx.Fugacity(ews, T, P, l, eos.RootMinGibbs, 0, fl) != nil {
			return math.Inf(1), false
		}
		g := 0.0
		for i := range n {
			g += v[i]*(math.Log(v[i]/sv)+fv.LnPhi[i]) + l[i]*(math.Log(l[i]/sl)+fl.LnPhi[i])
		}
		return g, true
	}
	p := optimize.Problem{
		Func: func(u []float64) float64 { g, _ := eval(u); return g },
		Grad: func(grad, u []float64) {
			if _, ok := eval(u); !ok {
				for i := range grad {
					grad[i] = math.NaN()
				}
				return
			}
			sv, sl := 0.0, 0.0
			for i := range n {
				sv += v[i]
				sl += l[i]
			}
			for i := range n {
				d := math.Log(v[i]/sv) + fv.LnPhi[i] - math.Log(l[i]/sl) - fl.LnPhi[i]
				grad[i] = d * v[i] * l[i] / z[i]
			}
		},
	}
	u0 := make([]float64, n)
	for i := range n {
		s := math.Min(math.Max(v0[i]/z[i], 1e-6), 1-1e-6)
		u0[i] = math.Log(s / (1 - s))
	}
	r, err := optimize.Minimize(p, u0, &optimize.Settings{GradientThreshold: 1e-13, Converger: &optimize.FunctionConverge{Absolute: 1e-16, Iterations: 200}, MajorIterations: 5000}, &optimize.BFGS{})
	if err != nil && r == nil {
		t.Fatal(err)
	}
	out := make([]float64, n)
	for i := range n {
		out[i] = z[i] / (1 + math.Exp(-r.X[i]))
	}
	return out
}

// TestGibbsMinimum: for 24 two-phase states of four fluids the flash split
// agrees to 1e-6 (mole numbers per mole of feed) with an independent
// minimisation of the total Gibbs energy, started from Wilson's K-values.
func TestGibbsMinimum(t *testing.T) {
	type state struct{ T, P float64 }
	cases := []struct {
		ids    []string
		z      []float64
		states []state
	}{
		{[]string{"methane", "n-butane"}, []float64{0.5, 0.5}, []state{{310.93, 3.4e6}, {310.93, 6.9e6}, {344.26, 5e6}, {280, 2e6}, {330, 9e6}, {300, 8e6}}},
		{[]string{"carbon-dioxide", "propane"}, []float64{0.4, 0.6}, []state{{310.93, 2.8e6}, {310.93, 4.1e6}, {290, 2.5e6}, {270, 1.5e6}, {300, 3e6}, {320, 4.5e6}}},
		{[]string{"nitrogen", "methane", "ethane"}, []float64{0.2, 0.7, 0.1}, []state{{150, 2e6}, {140, 1.5e6}, {160, 3e6}, {130, 1e6}, {170, 3.5e6}, {120, 0.8e6}}},
		{[]string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-pentane", "n-hexane", "n-heptane", "n-decane"},
			[]float64{0.01, 0.02, 0.6, 0.08, 0.06, 0.05, 0.04, 0.04, 0.05, 0.05}, []state{{300, 5e6}, {350, 10e6}, {250, 3e6}, {400, 8e6}, {320, 15e6}, {280, 1e6}}},
	}
	count := 0
	for _, c := range cases {
		mx := fluid(t, eos.PR78, c.ids...)
		ws, res := NewWorkspace(mx), NewResult(mx)
		n := mx.N()
		for _, s := range c.states {
			if err := ws.PT(context.Background(), s.T, s.P, c.z, Options{}, nil, res); err != nil {
				t.Fatal(err)
			}
			if len(res.Phases) != 2 {
				t.Fatalf("%v at %v: %d phases, want a two-phase state", c.ids, s, len(res.Phases))
			}
			// Independent start: Wilson K with a plain bisection of Rachford–Rice.
			K := make([]float64, n)
			mx.WilsonK(s.T, s.P, K)
			lo, hi := 0.0, 1.0
			for range 200 {
				b := 0.5 * (lo + hi)
				f := 0.0
				for i := range n {
					f += c.z[i] * (K[i] - 1) / (1 + b*(K[i]-1))
				}
				if f > 0 {
					lo = b
				} else {
					hi = b
				}
			}
			b := math.Min(math.Max(0.5*(lo+hi), 0.05), 0.95)
			v0 := make([]float64, n)
			for i := range n {
				v0[i] = c.z[i] * b * K[i] / (1 + b*(K[i]-1))
			}
			v := gibbsMin(t, mx, s.T, s.P, c.z, v0)
			// The flash's vapour-like phase is Phases[0].
			maxd := 0.0
			for i := range n {
				maxd = math.Max(maxd, math.Abs(v[i]-res.Phases[0].Beta*res.Phases[0].X[i]))
			}
			if maxd > 1e-6 {
				t.Errorf("%v at %v: flash and Gibbs minimum differ by %g in mole numbers", c.ids, s, maxd)
			}
			count++
		}
	}
	if count < 20 {
		t.Fatalf("only %d states", count)
	}
}
