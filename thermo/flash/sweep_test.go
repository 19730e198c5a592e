package flash

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// sweepFluid is one of our own test mixtures.
type sweepFluid struct {
	name string
	mx   *eos.Mixture
	z    []float64
}

func sweepFluids(t testing.TB) []sweepFluid {
	c7, err := component.PseudoFromMolarMass("c7plus", 0.140, 0.78)
	if err != nil {
		t.Fatal(err)
	}
	c7oil, err := component.PseudoFromBoilingPoint("c7plus-oil", 560, 0.84)
	if err != nil {
		t.Fatal(err)
	}
	return []sweepFluid{
		{"lean gas", fluid(t, eos.PR78, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane"),
			[]float64{0.01, 0.015, 0.90, 0.05, 0.015, 0.003, 0.004, 0.001, 0.001, 0.001}},
		{"gas condensate", fluidWith(t, eos.PR78, []component.Component{c7}, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane"),
			[]float64{0.005, 0.02, 0.70, 0.08, 0.05, 0.015, 0.02, 0.01, 0.01, 0.015, 0.075}},
		{"volatile oil", fluidWith(t, eos.PR78, []component.Component{c7oil}, "methane", "ethane", "propane", "n-butane", "n-pentane", "n-hexane"),
			[]float64{0.55, 0.08, 0.06, 0.05, 0.04, 0.04, 0.18}},
		{"CO2-rich", fluid(t, eos.PR78, "carbon-dioxide", "methane", "nitrogen", "hydrogen-sulfide", "ethane", "propane"),
			[]float64{0.85, 0.08, 0.02, 0.02, 0.02, 0.01}},
		{"wet gas", fluid(t, eos.SRK, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-pentane", "water"),
			[]float64{0.01, 0.02, 0.80, 0.06, 0.03, 0.02, 0.01, 0.05}},
	}
}

// TestSweep flashes five mixtures on a 60 × 60 grid over 150–600 K and
// 0.1–30 MPa (pressure log-spaced): every state converges or returns a
// typed error, nothing is NaN or Inf, every result passes checkResult
// (including its own stability test), and the same grid warm-started
// from the neighbouring state's result gives the same phase count and β
// (to 1e-6) as the cold flash.
func TestSweep(t *testing.T) {
	nT, nP := 60, 60
	if testing.Short() {
		nT, nP = 20, 20
	}
	ctx := context.Background()
	for _, f := range sweepFluids(t) {
		ws := NewWorkspace(f.mx)
		cold := make([]*Result, nT*nP)
		var counts [MaxPhases + 1]int
		var convErr, evals, mism, fallback int
		for a := range nT {
			T := 150 + 450*float64(a)/float64(nT-1)
			for b := range nP {
				P := 1e5 * math.Pow(300, float64(b)/float64(nP-1))
				r := NewResult(f.mx)
				err := ws.PT(ctx, T, P, f.z, Options{}, nil, r)
				evals += r.Report.LnPhiEvaluations
				if err != nil {
					var ce *ConvergenceError
					if !errors.As(err, &ce) || !errors.Is(err, ErrNotConverged) || math.IsNaN(ce.Residual) {
						t.Fatalf("%s T=%g P=%g: untyped error %v", f.name, T, P, err)
					}
					convErr++
					continue
				}
				checkResult(t, ws, r, f.z)
				counts[len(r.Phases)]++
				cold[a*nP+b] = r
			}
		}
		warm := NewResult(f.mx)
		for a := range nT {
			for b := range nP {
				c := cold[a*nP+b]
				var nb *Result
				if a > 0 {
					nb = cold[(a-1)*nP+b]
				} else if b > 0 {
					nb = cold[b-1]
				}
				if c == nil || nb == nil {
					continue
				}
				e := nb.Estimate()
				if err := ws.PT(ctx, c.T, c.P, f.z, Options{}, &e, warm); err != nil {
					t.Errorf("%s T=%g P=%g: warm start failed where cold converged: %v", f.name, c.T, c.P, err)
					continue
				}
				checkResult(t, ws, warm, f.z)
				if warm.Report.Path == PathWarmFallback {
					fallback++
				}
				if !sameSplit(c, warm) {
					mism++
					t.Errorf("%s T=%.2f P=%.4g: cold %d phases β0 %.9f, warm (%v) %d phases β0 %.9f", f.name, c.T, c.P, len(c.Phases), c.Phases[0].Beta, warm.Report.Path, len(warm.Phases), warm.Phases[0].Beta)
				}
			}
		}
		t.Logf("%-15s %d states: 1 phase %d, 2 phases %d, 3 phases %d, not converged %d; mean ln φ evaluations %.1f; warm fallbacks %d, warm≠cold %d",
			f.name, nT*nP, counts[1], counts[2], counts[3], convErr, float64(evals)/float64(nT*nP), fallback, mism)
	}
}

func sameSplit(a, b *Result) bool {
	if len(a.Phases) != len(b.Phases) {
		return false
	}
	for k := range a.Phases {
		if math.Abs(a.Phases[k].Beta-b.Phases[k].Beta) > 1e-6 {
			return false
		}
	}
	return true
}

// TestSweepFarEstimates warm-starts the five sweep mixtures on a 40 × 40
// grid (the same ranges as TestSweep) from two- and three-phase results
// 3 and 5 grid steps away in T, 3 in P and 2 in both: estimates that
// cross bubble and dew points and the edges of the three-phase region,
// as after a large step of a simulation. Every warm answer must be the
// cold one (phase count, β to 1e-6) and pass checkResult. Before the
// split rejected trivial solutions, a few such starts of the lean gas,
// the gas condensate and the CO2-rich stream returned two phases of one
// composition where the cold flash finds one phase.
func TestSweepFarEstimates(t *testing.T) {
	nT, nP := 40, 40
	if testing.Short() {
		nT, nP = 15, 15
	}
	ctx := context.Background()
	for _, f := range sweepFluids(t) {
		ws := NewWorkspace(f.mx)
		cold := make([]*Result, nT*nP)
		for a := range nT {
			T := 150 + 450*float64(a)/float64(nT-1)
			for b := range nP {
				P := 1e5 * math.Pow(300, float64(b)/float64(nP-1))
				r := NewResult(f.mx)
				if err := ws.PT(ctx, T, P, f.z, Options{}, nil, r); err == nil {
					cold[a*nP+b] = r
				}
			}
		}
		warm := NewResult(f.mx)
		starts, fallback := 0, 0
		for a := range nT {
			for b := range nP {
				c := cold[a*nP+b]
				if c == nil {
					continue
				}
				for _, d := range [][2]int{{-3, 0}, {3, 0}, {-5, 0}, {5, 0}, {0, -3}, {0, 3}, {-2, 2}, {2, -2}} {
					a2, b2 := a+d[0], b+d[1]
					if a2 < 0 || a2 >= nT || b2 < 0 || b2 >= nP {
						continue
					}
					nb := cold[a2*nP+b2]
					if nb == nil || len(nb.Phases) < 2 {
						continue
					}
					e := nb.Estimate()
					starts++
					if err := ws.PT(ctx, c.T, c.P, f.z, Options{}, &e, warm); err != nil {
						t.Errorf("%s T=%g P=%g from %v: warm start failed where cold converged: %v", f.name, c.T, c.P, d, err)
						continue
					}
					checkResult(t, ws, warm, f.z)
					if warm.Report.Path == PathWarmFallback {
						fallback++
					}
					if !sameSplit(c, warm) {
						t.Errorf("%s T=%.2f P=%.4g from %v: cold %d phases β0 %.9f, warm (%v) %d phases β0 %.9f", f.name, c.T, c.P, d, len(c.Phases), c.Phases[0].Beta, warm.Report.Path, len(warm.Phases), warm.Phases[0].Beta)
					}
				}
			}
		}
		t.Logf("%-15s %d far warm starts, %d fell back to the cold path", f.name, starts, fallback)
	}
}
