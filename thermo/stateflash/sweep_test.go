package stateflash

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/flash"
)

// TestRoundTrip is an exact consistency check of the model (a state
// function flash must invert the T–P flash): on a 20 × 20 grid over
// 150–600 K and 0.1–30 MPa (pressure log-spaced) of each sweep stream, a
// cold T–P flash gives H, S, V and U; then P–H and P–S must return T
// within 1e-6 K, T–V must return P within 1e-6 relative (or, for a dense
// phase, within what the volume tolerance fixes, 10·tol/(κ_T·P)), and U–V
// must return both. Every call either passes or returns a typed error;
// untyped errors and wrong answers fail the test, and at least 99 % of
// the calls of each stream must pass. Counts are logged.
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
				o := fr.Overall
				// Smallest phase compressibility bounds how well V fixes P.
				kappa := math.Inf(1)
				for _, p := range fr.Phases {
					kappa = math.Min(kappa, p.Props.Compressivity)
				}
				ptol := math.Max(1e-6, 10*1e-10/(kappa*P))
				for s := SpecPH; s <= SpecUV; s++ {
					var err error
					switch s {
					case SpecPH:
						err = ws.PH(ctx, P, o.H, f.z, Options{}, nil, r)
					case SpecPS:
						err = ws.PS(ctx, P, o.S, f.z, Options{}, nil, r)
					case SpecTV:
						err = ws.TV(ctx, T, o.MolarVolume, f.z, Options{}, nil, r)
					case SpecUV:
						err = ws.UV(ctx, o.U, o.MolarVolume, f.z, Options{}, nil, r)
					}
					calls[s]++
					if err != nil {
						var ce *ConvergenceError
						var re *RangeError
						if !errors.As(err, &ce) && !errors.As(err, &re) {
							t.Fatalf("%s %v at T=%g P=%g: untyped error %v", f.name, s, T, P, err)
						}
						typed[s]++
						t.Logf("%s %v at T=%.2f P=%.4g (%d phases): %v", f.name, s, T, P, len(fr.Phases), err)
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
			if float64(pass[s]) < 0.99*float64(calls[s]) {
				t.Errorf("%s %v: only %d of %d calls passed", f.name, s, pass[s], calls[s])
			}
		}
	}
}
