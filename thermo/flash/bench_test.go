package flash

import (
	"context"
	"testing"
	"time"

	"github.com/fugad/fugad/thermo/eos"
)

// lnPhiNanos times one ln φ evaluation of the 10-component gas (the unit
// of the lnphi-units/op metric): the fastest of 20 batches of 500, so the
// figure and the flash it divides come from the same run and load.
func lnPhiNanos(b *testing.B) float64 {
	b.Helper()
	mx, z := benchGas(b)
	ws, f := mx.NewWorkspace(), mx.NewFugacity()
	best := time.Duration(1 << 62)
	for range 20 {
		t0 := time.Now()
		for range 500 {
			if err := mx.Fugacity(ws, 250, 5e6, z, eos.RootMinGibbs, 0, f); err != nil {
				b.Fatal(err)
			}
		}
		best = min(best, time.Since(t0))
	}
	return float64(best.Nanoseconds()) / 500
}

// benchGas is a 10-component natural gas of our own; benchGasWater the
// same size with a heavier end and free water (vapour, hydrocarbon liquid
// and aqueous phase at 310 K, 7 MPa).
func benchGas(b testing.TB) (*eos.Mixture, []float64) {
	return fluid(b, eos.PR78, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "n-pentane", "n-hexane", "n-heptane"),
		[]float64{0.01, 0.02, 0.80, 0.07, 0.04, 0.015, 0.015, 0.01, 0.01, 0.01}
}

func benchGasWater(b testing.TB) (*eos.Mixture, []float64) {
	return fluid(b, eos.PR78, "nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-pentane", "n-hexane", "n-decane", "water"),
		[]float64{0.005, 0.01, 0.50, 0.06, 0.05, 0.04, 0.03, 0.04, 0.10, 0.165}
}

// benchmarkFlash times a T–P flash with a reused workspace and result and
// reports ln φ evaluations per flash and the flash time in units of one
// ln φ evaluation timed in the same run (lnphi-units/op); phases is the
// expected phase count.
func benchmarkFlash(b *testing.B, mx *eos.Mixture, z []float64, T, P float64, phases int, warm bool) {
	ws, res := NewWorkspace(mx), NewResult(mx)
	ctx := context.Background()
	if err := ws.PT(ctx, T, P, z, Options{}, nil, res); err != nil {
		b.Fatal(err)
	}
	if len(res.Phases) != phases {
		b.Fatalf("%d phases at %g K, %g Pa, want %d", len(res.Phases), T, P, phases)
	}
	// The warm start comes from a state 0.5 K and 0.5 % away, as from the
	// previous timestep of a simulation.
	prev := NewResult(mx)
	if err := ws.PT(ctx, T-0.5, P*0.995, z, Options{}, nil, prev); err != nil {
		b.Fatal(err)
	}
	est := prev.Estimate()
	var e *Estimate
	if warm {
		e = &est
	}
	unit := lnPhiNanos(b)
	evals := 0
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if err := ws.PT(ctx, T, P, z, Options{}, e, res); err != nil {
			b.Fatal(err)
		}
		evals += res.Report.LnPhiEvaluations
	}
	if warm && res.Report.Path != PathWarm {
		b.Fatalf("warm start took path %v", res.Report.Path)
	}
	b.ReportMetric(float64(evals)/float64(b.N), "lnphi/op")
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/unit, "lnphi-units/op")
}

func BenchmarkFlashSinglePhase(b *testing.B) {
	mx, z := benchGas(b)
	benchmarkFlash(b, mx, z, 350, 5e6, 1, false)
}

func BenchmarkFlashTwoPhase(b *testing.B) {
	mx, z := benchGas(b)
	benchmarkFlash(b, mx, z, 250, 5e6, 2, false)
}

func BenchmarkFlashNearCritical(b *testing.B) {
	mx, z := benchGas(b)
	benchmarkFlash(b, mx, z, 230, 8.5e6, 2, false)
}

func BenchmarkFlashWarmTwoPhase(b *testing.B) {
	mx, z := benchGas(b)
	benchmarkFlash(b, mx, z, 250, 5e6, 2, true)
}

// BenchmarkFlashWarmTwoPhaseNewT alternates between two states 0.5 K and
// 0.5 % apart, each warm-started from a state 0.5 K and 0.5 % before it,
// so that every flash meets a new temperature, as in a simulation whose
// every timestep moves the stream: the attraction parameters a_ij(T) are
// rebuilt in every call, which BenchmarkFlashWarmTwoPhase (one state
// repeated) leaves out.
func BenchmarkFlashWarmTwoPhaseNewT(b *testing.B) {
	mx, z := benchGas(b)
	ws, res := NewWorkspace(mx), NewResult(mx)
	ctx := context.Background()
	var states [2]struct {
		T, P float64
		est  Estimate
	}
	for k := range states {
		T, P := 250+0.5*float64(k), 5e6*(1+0.005*float64(k))
		prev := NewResult(mx)
		if err := ws.PT(ctx, T-0.5, P*0.995, z, Options{}, nil, prev); err != nil {
			b.Fatal(err)
		}
		states[k].T, states[k].P, states[k].est = T, P, prev.Estimate()
	}
	evals, k := 0, 0
	b.ReportAllocs()
	for b.Loop() {
		s := &states[k]
		if err := ws.PT(ctx, s.T, s.P, z, Options{}, &s.est, res); err != nil {
			b.Fatal(err)
		}
		if res.Report.Path != PathWarm {
			b.Fatalf("warm start took path %v", res.Report.Path)
		}
		evals += res.Report.LnPhiEvaluations
		k ^= 1
	}
	b.ReportMetric(float64(evals)/float64(b.N), "lnphi/op")
}

func BenchmarkFlashThreePhaseWater(b *testing.B) {
	mx, z := benchGasWater(b)
	benchmarkFlash(b, mx, z, 310, 7e6, 3, false)
}

func BenchmarkFlashWarmThreePhaseWater(b *testing.B) {
	mx, z := benchGasWater(b)
	benchmarkFlash(b, mx, z, 310, 7e6, 3, true)
}

func BenchmarkFlashTwoPhaseNoProperties(b *testing.B) {
	mx, z := benchGas(b)
	ws, res := NewWorkspace(mx), NewResult(mx)
	b.ReportAllocs()
	for b.Loop() {
		if err := ws.PT(context.Background(), 250, 5e6, z, Options{NoProperties: true}, nil, res); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkLnPhiReference is one ln φ evaluation of the 10-component gas,
// the unit the flash figures are compared with.
func BenchmarkLnPhiReference(b *testing.B) {
	mx, z := benchGas(b)
	ws, f := mx.NewWorkspace(), mx.NewFugacity()
	b.ReportAllocs()
	for b.Loop() {
		if err := mx.Fugacity(ws, 250, 5e6, z, eos.RootMinGibbs, 0, f); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkFlashWarmTwoPhaseEvaluationsOnly replays the ln φ evaluations
// of one BenchmarkFlashWarmTwoPhase flash (the same compositions and
// derivative requests, in the same order) and nothing else: the part of
// the warm flash no bookkeeping, linear algebra or property work can
// remove at its evaluation count. of-warm-flash is the replay's time over
// the warm flash's, both timed in the same run (fastest of 20 batches).
func BenchmarkFlashWarmTwoPhaseEvaluationsOnly(b *testing.B) {
	mx, z := benchGas(b)
	ws, res := NewWorkspace(mx), NewResult(mx)
	ctx := context.Background()
	prev := NewResult(mx)
	if err := ws.PT(ctx, 249.5, 5e6*0.995, z, Options{}, nil, prev); err != nil {
		b.Fatal(err)
	}
	est := prev.Estimate()
	type call struct {
		x    []float64
		want eos.Want
	}
	var calls []call
	ws.evalHook = func(x []float64, want eos.Want) {
		calls = append(calls, call{append([]float64(nil), x...), want})
	}
	if err := ws.PT(ctx, 250, 5e6, z, Options{}, &est, res); err != nil {
		b.Fatal(err)
	}
	ws.evalHook = nil
	if res.Report.Path != PathWarm || len(calls) != res.Report.LnPhiEvaluations {
		b.Fatalf("path %v, %d calls recorded for %d evaluations", res.Report.Path, len(calls), res.Report.LnPhiEvaluations)
	}
	ews, f := mx.NewWorkspace(), mx.NewFugacity()
	replay := func() {
		for _, c := range calls {
			mx.FugacityTrusted(ews, 250, 5e6, c.x, eos.RootMinGibbs, c.want, f)
		}
	}
	bestOf := func(run func()) float64 {
		best := time.Duration(1 << 62)
		for range 20 {
			t0 := time.Now()
			for range 200 {
				run()
			}
			best = min(best, time.Since(t0))
		}
		return float64(best.Nanoseconds()) / 200
	}
	flashNs := bestOf(func() {
		if err := ws.PT(ctx, 250, 5e6, z, Options{}, &est, res); err != nil {
			b.Fatal(err)
		}
	})
	replayNs := bestOf(replay)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		replay()
	}
	b.ReportMetric(float64(len(calls)), "lnphi/op")
	b.ReportMetric(replayNs/flashNs, "of-warm-flash")
}
