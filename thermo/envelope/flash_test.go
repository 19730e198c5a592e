package envelope

import (
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/flash"
)

// TestFlashConsistency checks each traced envelope against the
// independent T–P flash of thermo/flash (Michelsen's stability test and
// phase split): at every envelope point away from the critical point, a
// state displaced by 0.2 % normal to the envelope in (ln T, ln P) on one
// side flashes to two phases and on the other side to one phase, and on
// the two-phase side the incipient phase (composition z_i/K_i) is a
// small fraction of the feed: β ≈ 0 just inside a bubble point, β ≈ 1
// just inside a dew point (definition of bubble and dew points). Points
// where the flash finds two liquids are counted and reported, not
// checked: there the vapour–liquid boundary this package traces is
// metastable (the CO2-rich stream below about 160 K).
func TestFlashConsistency(t *testing.T) {
	for _, f := range streams(t) {
		_, env := traceEnvelope(t, f, EnvelopeOptions{})
		ws := flash.NewWorkspace(f.mx)
		res := flash.NewResult(f.mx)
		n := f.mx.N()
		inc := make([]float64, n)
		crit := env.Critical[0]
		checked, threePhase, llPoints := 0, 0, 0
		pts := env.Points
		for k := 1; k+1 < len(pts); k++ {
			p := pts[k]
			if p.Kind == Critical {
				continue
			}
			maxK := 0.0
			for _, v := range p.LnK {
				maxK = math.Max(maxK, math.Abs(v))
			}
			if maxK < 0.3 || (math.Abs(p.T-crit.T) < 0.02*crit.T && math.Abs(p.P-crit.P) < 0.05*crit.P) {
				continue // next to the critical point both sides are close to the boundary
			}
			dT := math.Log(pts[k+1].T / pts[k-1].T)
			dP := math.Log(pts[k+1].P / pts[k-1].P)
			h := math.Hypot(dT, dP)
			nT, nP := -dP/h, dT/h
			const d = 2e-4
			var two, one, ll int
			for _, sg := range []float64{1, -1} {
				T, P := p.T*math.Exp(sg*d*nT), p.P*math.Exp(sg*d*nP)
				if err := ws.PT(bg, T, P, f.z, flash.Options{}, nil, res); err != nil {
					t.Fatalf("%s: flash at %g K %g Pa: %v", f.name, T, P, err)
				}
				switch len(res.Phases) {
				case 1:
					one++
				case 2:
					two++
					if res.Phases[0].Label == flash.LabelLiquid && res.Phases[1].Label == flash.LabelLiquid {
						ll++
					}
					s := 0.0
					for i := range n {
						inc[i] = f.z[i] / math.Exp(p.LnK[i])
						s += inc[i]
					}
					// Fraction of the phase nearest the incipient composition.
					best, frac := math.Inf(1), 0.0
					for _, ph := range res.Phases {
						dist := 0.0
						for i := range n {
							dist += math.Abs(ph.X[i] - inc[i]/s)
						}
						if dist < best {
							best, frac = dist, ph.Beta
						}
					}
					if frac > 0.05 && ll == 0 {
						t.Errorf("%s: %v point (%g K, %g Pa): incipient phase fraction %.3g just inside", f.name, p.Kind, p.T, p.P, frac)
					}
				default:
					threePhase++
					two++
				}
			}
			if two == 2 && ll > 0 {
				// The flash splits the feed into two liquids here: the
				// traced vapour–liquid boundary lies inside a liquid–liquid
				// region and is metastable (see the package's weak points).
				llPoints++
				continue
			}
			if two != 1 || one != 1 {
				t.Errorf("%s: %v point (%.3f K, %.6g Pa): %d one-phase and %d two-phase states across it", f.name, p.Kind, p.T, p.P, one, two)
			}
			checked++
		}
		if checked < 50 {
			t.Errorf("%s: only %d points checked", f.name, checked)
		}
		t.Logf("%-15s %d envelope points checked against the flash (%d three-phase states; %d points inside a liquid–liquid split)", f.name, checked, threePhase, llPoints)
	}
}
