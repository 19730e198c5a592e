package flash

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
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
		var counts [MaxPhases + 1]int
		var convErr, evals, mism, fallback int
		cold := sweepGrid(ws, f, nT, nP, func(T, P float64, r *Result, err error) {
			evals += r.Report.LnPhiEvaluations
			if err != nil {
				var ce *ConvergenceError
				if !errors.As(err, &ce) || !errors.Is(err, ErrNotConverged) || math.IsNaN(ce.Residual) {
					t.Fatalf("%s T=%g P=%g: untyped error %v", f.name, T, P, err)
				}
				convErr++
				return
			}
			checkResult(t, ws, r, f.z)
			counts[len(r.Phases)]++
		})
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

// sweepGrid flashes f cold with ws on an nT × nP grid over 150–600 K and
// 0.1–30 MPa (pressure log-spaced), calls visit (when not nil) with each
// state, its result and error, and returns the results by a·nP + b (nil
// where the flash failed).
func sweepGrid(ws *Workspace, f sweepFluid, nT, nP int, visit func(T, P float64, r *Result, err error)) []*Result {
	cold := make([]*Result, nT*nP)
	for a := range nT {
		T := 150 + 450*float64(a)/float64(nT-1)
		for b := range nP {
			P := 1e5 * math.Pow(300, float64(b)/float64(nP-1))
			r := NewResult(f.mx)
			err := ws.PT(context.Background(), T, P, f.z, Options{}, nil, r)
			if visit != nil {
				visit(T, P, r, err)
			}
			if err == nil {
				cold[a*nP+b] = r
			}
		}
	}
	return cold
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
		cold := sweepGrid(ws, f, nT, nP, nil)
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

// TestStabilityRandomStarts is a check of the stability analysis that
// shares none of its trial choices: at random states of each sweep stream
// (fixed seed), the modified tangent-plane distance
//
//	tm(W) = 1 + Σ_i W_i (ln W_i + ln φ_i(w) − d_i − 1),  w = W/ΣW,
//
// is minimised by plain successive substitution, ln W_i ← d_i − ln φ_i(w)
// (Michelsen 1982a), from every pure-component start and 20 random
// compositions, with the same model evaluation as the flash. Against the
// feed of every state the flash splits, some start must reach tm < 0 (the
// search can find an instability); against the first phase of every
// result none may reach tm < −1e-6 (no missed phase).
func TestStabilityRandomStarts(t *testing.T) {
	nStates := 120
	if testing.Short() {
		nStates = 30
	}
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(3, 5))
	for _, fl := range sweepFluids(t) {
		ws, r := NewWorkspace(fl.mx), NewResult(fl.mx)
		n := len(fl.z)
		f := fl.mx.NewFugacity()
		W, w, d := make([]float64, n), make([]float64, n), make([]float64, n)
		// minTM runs every start against d at the workspace's state.
		minTM := func() float64 {
			best := math.Inf(1)
			for s := range n + 20 {
				if s < n && fl.z[s] == 0 {
					continue
				}
				for i := range n {
					switch {
					case fl.z[i] == 0:
						W[i] = 0
					case s < n && i == s:
						W[i] = 0.999
					case s < n:
						W[i] = 1e-3 * fl.z[i]
					default:
						W[i] = -math.Log(1 - rng.Float64())
					}
				}
				tm := math.Inf(1)
				for range 300 {
					sw := 0.0
					for _, v := range W {
						sw += v
					}
					for i := range n {
						w[i] = W[i] / sw
					}
					if err := ws.eval(w, 0, f); err != nil {
						t.Fatal(err)
					}
					tm = 1
					for i := range n {
						if W[i] > 0 {
							tm += W[i] * (math.Log(W[i]) + f.LnPhi[i] - d[i] - 1)
							W[i] = math.Exp(d[i] - f.LnPhi[i])
						}
					}
					if tm < -1e-6 {
						break
					}
				}
				best = math.Min(best, tm)
			}
			return best
		}
		split := 0
		for range nStates {
			T := 150 + 450*rng.Float64()
			P := 1e5 * math.Pow(300, rng.Float64())
			if err := ws.PT(ctx, T, P, fl.z, Options{}, nil, r); err != nil {
				t.Fatalf("%s T=%g P=%g: %v", fl.name, T, P, err)
			}
			if len(r.Phases) >= 2 {
				split++
				if err := ws.eval(fl.z, 0, f); err != nil {
					t.Fatal(err)
				}
				for i := range n {
					if fl.z[i] > 0 {
						d[i] = math.Log(fl.z[i]) + f.LnPhi[i]
					}
				}
				if tm := minTM(); !(tm < 0) {
					t.Errorf("%s T=%.3f P=%.5g: the feed splits into %d phases, but no start found tm < 0 (min %g)", fl.name, T, P, len(r.Phases), tm)
				}
			}
			p := r.Phases[0]
			for i := range n {
				if p.X[i] > 0 {
					d[i] = math.Log(p.X[i]) + p.LnPhi[i]
				}
			}
			if tm := minTM(); tm < -1e-6 {
				t.Errorf("%s T=%.3f P=%.5g: %d phases, but a start reached tm = %g against them", fl.name, T, P, len(r.Phases), tm)
			}
		}
		t.Logf("%-15s %d states, %d split", fl.name, nStates, split)
	}
}
