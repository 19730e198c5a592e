package stateflash

import (
	"context"
	"math"
	"testing"
	"time"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// benchGas is the 10-component natural gas of thermo/flash's benchmarks
// (our own stream): one phase at 350 K, 5 MPa; two at 250 K, 5 MPa.
func benchGas(t testing.TB) (*eos.Mixture, []float64) {
	return fluid(t, eos.PR78, nil, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "n-pentane", "n-hexane", "n-heptane"),
		[]float64{0.01, 0.02, 0.80, 0.07, 0.04, 0.015, 0.015, 0.01, 0.01, 0.01}
}

// benchmarkSpec times one state-function flash at the state (T, P) of
// benchGas, cold or warm-started from the result at a state 0.5 K and
// 0.5 % away (the previous timestep of a simulation); spec SpecUnspecified
// times the T–P flash itself for the ratio.
func benchmarkSpec(b *testing.B, spec Spec, T, P float64, warm bool) {
	ctx := context.Background()
	mx, z := benchGas(b)
	fws, fr := flash.NewWorkspace(mx), flash.NewResult(mx)
	if err := fws.PT(ctx, T, P, z, flash.Options{}, nil, fr); err != nil {
		b.Fatal(err)
	}
	o := fr.Overall
	ws, r, prev := NewWorkspace(mx), NewResult(mx), NewResult(mx)
	prevF := flash.NewResult(mx)
	if err := fws.PT(ctx, T-0.5, P*0.995, z, flash.Options{}, nil, prevF); err != nil {
		b.Fatal(err)
	}
	run := func(e *Estimate, res *Result) error {
		if spec == SpecUnspecified {
			return nil
		}
		return solveSpec(ctx, ws, spec, T, P, o, z, e, res)
	}
	var est *Estimate
	var fest *flash.Estimate
	if warm {
		if spec != SpecUnspecified {
			// The previous timestep's result, by the same specification.
			pf := prevF.Overall
			var err error
			switch spec {
			case SpecPH:
				err = ws.PH(ctx, P*0.995, pf.H, z, Options{}, nil, prev)
			case SpecPS:
				err = ws.PS(ctx, P*0.995, pf.S, z, Options{}, nil, prev)
			case SpecTV:
				err = ws.TV(ctx, T-0.5, pf.MolarVolume, z, Options{}, nil, prev)
			case SpecUV:
				err = ws.UV(ctx, pf.U, pf.MolarVolume, z, Options{}, nil, prev)
			}
			if err != nil {
				b.Fatal(err)
			}
			e := prev.Estimate()
			est = &e
		}
		fe := prevF.Estimate()
		fest = &fe
	}
	evals, flashes := 0, 0
	b.ReportAllocs()
	for b.Loop() {
		if spec == SpecUnspecified {
			if err := fws.PT(ctx, T, P, z, flash.Options{}, fest, fr); err != nil {
				b.Fatal(err)
			}
			evals += fr.Report.LnPhiEvaluations
			flashes++
			continue
		}
		if err := run(est, r); err != nil {
			b.Fatal(err)
		}
		evals += r.Report.LnPhiEvaluations
		flashes += r.Report.Flashes
	}
	b.ReportMetric(float64(evals)/float64(b.N), "lnphi/op")
	b.ReportMetric(float64(flashes)/float64(b.N), "flashes/op")
}

func BenchmarkTPSinglePhase(b *testing.B)     { benchmarkSpec(b, SpecUnspecified, 350, 5e6, false) }
func BenchmarkTPTwoPhase(b *testing.B)        { benchmarkSpec(b, SpecUnspecified, 250, 5e6, false) }
func BenchmarkTPWarmTwoPhase(b *testing.B)    { benchmarkSpec(b, SpecUnspecified, 250, 5e6, true) }
func BenchmarkPHSinglePhase(b *testing.B)     { benchmarkSpec(b, SpecPH, 350, 5e6, false) }
func BenchmarkPHTwoPhase(b *testing.B)        { benchmarkSpec(b, SpecPH, 250, 5e6, false) }
func BenchmarkPHWarmSinglePhase(b *testing.B) { benchmarkSpec(b, SpecPH, 350, 5e6, true) }
func BenchmarkPHWarmTwoPhase(b *testing.B)    { benchmarkSpec(b, SpecPH, 250, 5e6, true) }
func BenchmarkPSTwoPhase(b *testing.B)        { benchmarkSpec(b, SpecPS, 250, 5e6, false) }
func BenchmarkTVSinglePhase(b *testing.B)     { benchmarkSpec(b, SpecTV, 350, 5e6, false) }
func BenchmarkTVTwoPhase(b *testing.B)        { benchmarkSpec(b, SpecTV, 250, 5e6, false) }
func BenchmarkUVSinglePhase(b *testing.B)     { benchmarkSpec(b, SpecUV, 350, 5e6, false) }
func BenchmarkUVTwoPhase(b *testing.B)        { benchmarkSpec(b, SpecUV, 250, 5e6, false) }
func BenchmarkUVWarmTwoPhase(b *testing.B)    { benchmarkSpec(b, SpecUV, 250, 5e6, true) }

// benchmarkPHOverTP times the P–H flash and the T–P flash of benchGas at
// the same states (T_k, P_k), cold, interleaved in one loop (alternating
// which runs first) so that both see the same machine load, and reports
// each one's mean time per flash and their ratio, P–H over T–P.
func benchmarkPHOverTP(b *testing.B, T, P []float64) {
	ctx := context.Background()
	mx, z := benchGas(b)
	fws, fr := flash.NewWorkspace(mx), flash.NewResult(mx)
	H, nPhases := make([]float64, len(T)), make([]int, len(T))
	for k := range T {
		if err := fws.PT(ctx, T[k], P[k], z, flash.Options{}, nil, fr); err != nil {
			b.Fatal(err)
		}
		H[k], nPhases[k] = fr.Overall.H, len(fr.Phases)
	}
	ws, r := NewWorkspace(mx), NewResult(mx)
	var tTP, tPH time.Duration
	k := 0
	tp := func() {
		t0 := time.Now()
		err := fws.PT(ctx, T[k], P[k], z, flash.Options{}, nil, fr)
		tTP += time.Since(t0)
		if err != nil {
			b.Fatal(err)
		}
	}
	ph := func() {
		t0 := time.Now()
		err := ws.PH(ctx, P[k], H[k], z, Options{}, nil, r)
		tPH += time.Since(t0)
		if err != nil {
			b.Fatal(err)
		}
	}
	n, flashes := 0, 0
	b.ReportAllocs()
	for b.Loop() {
		k = n % len(T)
		if (n/len(T))%2 == 0 {
			tp()
			ph()
		} else {
			ph()
			tp()
		}
		if len(r.Phases) != nPhases[k] || len(fr.Phases) != nPhases[k] {
			b.Fatalf("at %g K, %g Pa P–H gave %d phases, T–P %d, want %d", T[k], P[k], len(r.Phases), len(fr.Phases), nPhases[k])
		}
		n++
		flashes += r.Report.Flashes
	}
	b.ReportMetric(float64(tTP.Nanoseconds())/float64(n), "tp-ns/flash")
	b.ReportMetric(float64(tPH.Nanoseconds())/float64(n), "ph-ns/flash")
	b.ReportMetric(float64(tPH)/float64(tTP), "ph/tp")
	b.ReportMetric(float64(flashes)/float64(n), "flashes/ph")
}

func BenchmarkPHOverTPSinglePhase(b *testing.B) {
	benchmarkPHOverTP(b, []float64{350}, []float64{5e6})
}

func BenchmarkPHOverTPTwoPhase(b *testing.B) {
	benchmarkPHOverTP(b, []float64{250}, []float64{5e6})
}

// BenchmarkPHOverTPGrid runs the states of a 6 × 4 grid, 200–400 K and
// 1–10 MPa (one and two phases), in turn.
func BenchmarkPHOverTPGrid(b *testing.B) {
	var T, P []float64
	for a := range 6 {
		for c := range 4 {
			T = append(T, 200+40*float64(a))
			P = append(P, 1e6*math.Pow(10, float64(c)/3))
		}
	}
	benchmarkPHOverTP(b, T, P)
}
