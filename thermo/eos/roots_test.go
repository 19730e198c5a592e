package eos

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestCubicRootsFromMatchesClosedForm solves random cubics of all three
// models (A and B over the ranges of gases, liquids and dense
// supercritical states) by the closed form and by Newton's method with
// deflation from starts near each root, near the other roots and far
// from all of them: where the Newton route answers, it finds the same
// number of roots above B and the same roots to round-off (1e-12 of Z);
// where it declines (0) the closed form is the answer. From a start near
// a root (0.1 % off, as a solver's previous evaluation of a phase is) it
// declines rarely (below 0.1 %: near double roots); from far starts it
// may take more than its eight steps and decline.
func TestCubicRootsFromMatchesClosedForm(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	declined, total := 0, 0 // of the starts near a root
	for _, m := range []Model{PR76, PR78, SRK} {
		p := modelParams[m]
		for range 20000 {
			B := math.Exp(rng.Float64()*12 - 11) // 1.7e-5 … 2.7
			A := B * math.Exp(rng.Float64()*6-1) // A/B 0.37 … 150
			var want [3]float64
			nw := cubicRoots(A, B, p.d1, p.d2, &want)
			starts := []float64{1, B * 1.01, 10 * (1 + B), want[0] * (1 + 1e-3*rng.NormFloat64())}
			if nw == 3 {
				starts = append(starts, want[1]*(1+1e-3*rng.NormFloat64()), want[2]*(1+1e-3*rng.NormFloat64()))
			}
			for k, z0 := range starts {
				near := k >= 3
				var got [3]float64
				ng := cubicRootsFrom(A, B, p.d1, p.d2, z0, &got)
				if near {
					total++
				}
				if ng == 0 {
					if near {
						declined++
					}
					continue
				}
				if ng != nw {
					t.Fatalf("%v A=%g B=%g from %g: %d roots %v, closed form %d %v", m, A, B, z0, ng, got[:ng], nw, want[:nw])
				}
				for k := range ng {
					if math.Abs(got[k]-want[k]) > 1e-12*math.Max(1, want[k]) {
						t.Fatalf("%v A=%g B=%g from %g: root %d %.17g, closed form %.17g", m, A, B, z0, k, got[k], want[k])
					}
				}
			}
		}
	}
	t.Logf("%d of %d searches from near a root declined to the closed form", declined, total)
	if declined > total/1000 {
		t.Errorf("Newton route declined %d of %d searches", declined, total)
	}
	var r [3]float64
	for _, z0 := range []float64{math.NaN(), math.Inf(1), -1, 0} {
		if n := cubicRootsFrom(0.2, 0.05, modelParams[PR78].d1, modelParams[PR78].d2, z0, &r); n != 0 {
			t.Errorf("from %g: %d roots, want a decline", z0, n)
		}
	}
}
