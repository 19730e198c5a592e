package stateflash

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/fugad/fugad/thermo/flash"
)

// TestRoundTrip is an exact consistency check of the model (a state
// function flash must invert the T–P flash): on a 20 × 20 grid over
// 150–600 K and 0.1–30 MPa (pressure log-spaced) of each sweep stream, a
// cold T–P flash gives H, S, V and U; then P–H and P–S must return T
// within 1e-6 K, T–V must return P within 1e-6 relative (or, for a dense
// phase, within what the volume tolerance fixes, 10·tol/(κ_T·P)), and U–V
// must return both. Every call must pass: an untyped error, a typed one
// (a ConvergenceError or RangeError) and a wrong answer all fail the
// test. Counts are logged.
func TestRoundTrip(t *testing.T) {
	nT, nP := 20, 20
	ctx := context.Background()
	for _, f := range sweepFluids(t) {
		fws, fr := flash.NewWorkspace(f.mx), flash.NewResult(f.mx)
		ws, r := NewWorkspace(f.mx), NewResult(f.mx)
		var pass, typed, tpFail, calls, flashes [5]int
		for a := range nT {
			T := 150 + 450*float64(a)/float64(nT-1)
			for b := range nP {
				P := 1e5 * math.Pow(300, float64(b)/float64(nP-1))
				if err := fws.PT(ctx, T, P, f.z, flash.Options{}, nil, fr); err != nil {
					tpFail[0]++
					continue
				}
				ptol := pressureTol(fr, P)
				for s := SpecPH; s <= SpecUV; s++ {
					err := solveSpec(ctx, ws, s, T, P, fr.Overall, f.z, nil, r)
					calls[s]++
					if err != nil {
						var ce *ConvergenceError
						var re *RangeError
						if !errors.As(err, &ce) && !errors.As(err, &re) {
							t.Fatalf("%s %v at T=%g P=%g: untyped error %v", f.name, s, T, P, err)
						}
						typed[s]++
						t.Errorf("%s %v at T=%.2f P=%.4g (%d phases): %v", f.name, s, T, P, len(fr.Phases), err)
						continue
					}
					flashes[s] += r.Report.Flashes
					okT := math.Abs(r.T-T) <= 1e-6
					okP := math.Abs(r.P-P) <= ptol*P
					good := (s == SpecTV || okT) && (s == SpecPH || s == SpecPS || okP)
					if !good || len(r.Phases) != len(fr.Phases) || !r.Report.Converged {
						t.Errorf("%s %v at T=%.4f P=%.6g (%d phases): got T=%.9f P=%.9g with %d phases (route %v)",
							f.name, s, T, P, len(fr.Phases), r.T, r.P, len(r.Phases), r.Report.Route)
						continue
					}
					pass[s]++
				}
			}
		}
		for s := SpecPH; s <= SpecUV; s++ {
			t.Logf("%-15s %v: %d calls, pass %d, typed error %d (T–P flash failed at %d states); mean inner flashes %.2f",
				f.name, s, calls[s], pass[s], typed[s], tpFail[0], float64(flashes[s])/float64(max(pass[s], 1)))
			if pass[s] != calls[s] {
				t.Errorf("%s %v: %d of %d calls passed", f.name, s, pass[s], calls[s])
			}
		}
	}
}

// TestRandomStates solves P–H, P–S, T–V and U–V at random states of each
// sweep stream (T uniform over 150–600 K, P log-uniform over 0.1–30 MPa,
// a fixed seed), cold and warm-started from the P–H result of a random
// two-phase or three-phase state of the same stream, as a simulation
// warm-starts from a stream whose state has moved far. Every call must
// converge, the cold answer must be the T–P state it was built from
// (phase count; T to 1e-6 relative for P–H, P–S and U–V; P to 1e-6
// relative, or what the volume tolerance fixes, for T–V and U–V), and
// the warm answer the cold one. Before the outer iteration's rules for
// jumps, alternating steps and failed inner flashes (solve1D), a few
// hundred of the wet gas's and a few tens of the CO2-rich stream's calls
// failed, mostly in the three-phase region.
func TestRandomStates(t *testing.T) {
	n := 600
	if testing.Short() {
		n = 100
	}
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(7, 9))
	state := func() (float64, float64) {
		return 150 + 450*rng.Float64(), 1e5 * math.Pow(300, rng.Float64())
	}
	for _, f := range sweepFluids(t) {
		fws, fr := flash.NewWorkspace(f.mx), flash.NewResult(f.mx)
		ws, cold, warm, src := NewWorkspace(f.mx), NewResult(f.mx), NewResult(f.mx), NewResult(f.mx)
		var ests []Estimate
		for len(ests) < 40 {
			T, P := state()
			if err := fws.PT(ctx, T, P, f.z, flash.Options{}, nil, fr); err != nil || len(fr.Phases) < 2 {
				continue
			}
			if err := ws.PH(ctx, P, fr.Overall.H, f.z, Options{}, nil, src); err != nil {
				t.Fatalf("%s P–H at T=%g P=%g: %v", f.name, T, P, err)
			}
			ests = append(ests, src.Estimate())
		}
		calls := 0
		for range n {
			T, P := state()
			if err := fws.PT(ctx, T, P, f.z, flash.Options{}, nil, fr); err != nil {
				t.Fatalf("%s T–P at T=%g P=%g: %v", f.name, T, P, err)
			}
			ptol := pressureTol(fr, P)
			for s := SpecPH; s <= SpecUV; s++ {
				calls++
				if err := solveSpec(ctx, ws, s, T, P, fr.Overall, f.z, nil, cold); err != nil {
					t.Errorf("%s %v cold at T=%.4f P=%.6g (%d phases): %v", f.name, s, T, P, len(fr.Phases), err)
					continue
				}
				okT := s == SpecTV || math.Abs(cold.T-T) <= 1e-6*T
				okP := s == SpecPH || s == SpecPS || math.Abs(cold.P-P) <= ptol*P
				if !okT || !okP || len(cold.Phases) != len(fr.Phases) {
					t.Errorf("%s %v cold at T=%.4f P=%.6g (%d phases): T=%.9f P=%.9g with %d phases", f.name, s, T, P, len(fr.Phases), cold.T, cold.P, len(cold.Phases))
					continue
				}
				e := ests[rng.IntN(len(ests))]
				if err := solveSpec(ctx, ws, s, T, P, fr.Overall, f.z, &e, warm); err != nil {
					t.Errorf("%s %v warm at T=%.4f P=%.6g (%d phases) from T=%.4f P=%.6g: %v", f.name, s, T, P, len(fr.Phases), e.T, e.P, err)
					continue
				}
				if len(warm.Phases) != len(cold.Phases) || math.Abs(warm.T-cold.T) > 1e-6*cold.T || math.Abs(warm.P-cold.P) > ptol*cold.P {
					t.Errorf("%s %v at T=%.4f P=%.6g from T=%.4f P=%.6g: cold T=%.9f P=%.9g %d phases, warm T=%.9f P=%.9g %d phases",
						f.name, s, T, P, e.T, e.P, cold.T, cold.P, len(cold.Phases), warm.T, warm.P, len(warm.Phases))
				}
			}
		}
		t.Logf("%-15s %d calls cold and warm", f.name, calls)
	}
}
