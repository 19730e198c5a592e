package stateflash

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// vapourBeta returns the vapour fraction of a result (0 without vapour).
func vapourBeta(r *Result) float64 {
	for _, p := range r.Phases {
		if p.Label == flash.LabelVapour {
			return p.Beta
		}
	}
	return 0
}

// TestPureTwoPhase checks the lever rule inside a pure component's
// two-phase region (exact model facts: by the phase rule one component
// in two phases has one degree of freedom, so at P = Psat(T) the
// temperature is T for every H between the saturated liquid and vapour,
// and H, S, V, U are linear in the vapour fraction). Saturated values come
// from eos.VapourPressure and eos.Properties on the two roots.
func TestPureTwoPhase(t *testing.T) {
	ctx := context.Background()
	for _, c := range []struct {
		id string
		T  float64
	}{{"propane", 300}, {"methane", 150}, {"water", 420}} {
		mx := fluid(t, eos.PR78, nil, c.id, "n-butane")
		z := []float64{1, 0}
		ews := mx.NewWorkspace()
		sat, err := mx.VapourPressure(ews, 0, c.T)
		if err != nil {
			t.Fatal(err)
		}
		pl, err := mx.Properties(ews, c.T, sat.P, z, eos.RootLiquid)
		if err != nil {
			t.Fatal(err)
		}
		pv, err := mx.Properties(ews, c.T, sat.P, z, eos.RootVapour)
		if err != nil {
			t.Fatal(err)
		}
		ws, r := NewWorkspace(mx), NewResult(mx)
		check := func(what string, err error, beta, wantT, wantP float64) {
			t.Helper()
			if err != nil {
				t.Fatalf("%s %s: %v", c.id, what, err)
			}
			if math.Abs(r.T-wantT) > 1e-6 || math.Abs(r.P-wantP) > 1e-6*wantP {
				t.Errorf("%s %s: T = %.9f P = %.9g, want %.9f, %.9g", c.id, what, r.T, r.P, wantT, wantP)
			}
			if len(r.Phases) != 2 || math.Abs(vapourBeta(r)-beta) > 1e-6 || r.Report.Route != RouteSaturation {
				t.Errorf("%s %s: %d phases, vapour β = %.9f (want %.3f), route %v", c.id, what, len(r.Phases), vapourBeta(r), beta, r.Report.Route)
			}
		}
		b := 0.3
		check("P–H", ws.PH(ctx, sat.P, pl.H+b*(pv.H-pl.H), z, Options{}, nil, r), b, c.T, sat.P)
		b = 0.6
		check("P–S", ws.PS(ctx, sat.P, pl.S+b*(pv.S-pl.S), z, Options{}, nil, r), b, c.T, sat.P)
		b = 0.4
		check("T–V", ws.TV(ctx, c.T, pl.MolarVolume+b*(pv.MolarVolume-pl.MolarVolume), z, Options{}, nil, r), b, c.T, sat.P)
		b = 0.5
		check("U–V", ws.UV(ctx, pl.U+b*(pv.U-pl.U), pl.MolarVolume+b*(pv.MolarVolume-pl.MolarVolume), z, Options{}, nil, r), b, c.T, sat.P)
		// Outside the dome: subcooled liquid below Tsat, superheated vapour above.
		if err := ws.PH(ctx, sat.P, pl.H-500, z, Options{}, nil, r); err != nil || !(r.T < c.T) || len(r.Phases) != 1 || math.Abs(r.Overall.H-(pl.H-500)) > 1e-6 {
			t.Errorf("%s subcooled: T = %g, %d phases, H = %g, err %v", c.id, r.T, len(r.Phases), r.Overall.H, err)
		}
		if err := ws.PH(ctx, sat.P, pv.H+500, z, Options{}, nil, r); err != nil || !(r.T > c.T) || len(r.Phases) != 1 || math.Abs(r.Overall.H-(pv.H+500)) > 1e-6 {
			t.Errorf("%s superheated: T = %g, %d phases, H = %g, err %v", c.id, r.T, len(r.Phases), r.Overall.H, err)
		}
	}
}

// TestNarrowBoiling sweeps H at 1 MPa across the two-phase region of
// propane with 1 % n-butane, whose bubble and dew points are a few kelvin
// apart: T must rise monotonically and the vapour fraction go from 0 to 1
// without a jump (thermal stability: (∂H/∂T)_P > 0; an exact fact of any
// stable model), and each state must round-trip through the T–P flash to
// 1e-6 K.
func TestNarrowBoiling(t *testing.T) {
	ctx := context.Background()
	mx := fluid(t, eos.PR78, nil, "propane", "n-butane")
	z := []float64{0.99, 0.01}
	ws, r, rt := NewWorkspace(mx), NewResult(mx), NewResult(mx)
	fws, fr := flash.NewWorkspace(mx), flash.NewResult(mx)
	P := 1e6
	if err := fws.PT(ctx, 250, P, z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	h0 := fr.Overall.H
	if err := fws.PT(ctx, 320, P, z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	h1 := fr.Overall.H
	prevT, prevB := 0.0, -1.0
	var est Estimate
	warm := (*Estimate)(nil)
	twoPhase := 0
	for k := 0; k <= 200; k++ {
		H := h0 + (h1-h0)*float64(k)/200
		if err := ws.PH(ctx, P, H, z, Options{}, warm, r); err != nil {
			t.Fatalf("H = %g: %v", H, err)
		}
		b := vapourBeta(r)
		if len(r.Phases) == 1 && r.Phases[0].Label != flash.LabelVapour {
			b = 0
		}
		if len(r.Phases) == 2 {
			twoPhase++
		}
		if r.T < prevT-1e-9 || b < prevB-1e-9 || (prevB >= 0 && b-prevB > 0.02) {
			t.Errorf("H = %g: T %.6f (prev %.6f), β %.6f (prev %.6f)", H, r.T, prevT, b, prevB)
		}
		prevT, prevB = r.T, b
		// Round trip from the T–P side: T → H → P–H → T.
		T := r.T
		if err := fws.PT(ctx, T, P, z, flash.Options{}, nil, fr); err != nil {
			t.Fatal(err)
		}
		if err := ws.PH(ctx, P, fr.Overall.H, z, Options{}, nil, rt); err != nil {
			t.Fatal(err)
		}
		if math.Abs(rt.T-T) > 1e-6 {
			t.Errorf("H = %g: T–P flash at T = %.9f, P–H back gives %.9f", H, T, rt.T)
		}
		est = r.Estimate()
		warm = &est
	}
	if twoPhase < 50 {
		t.Errorf("only %d of 201 states two-phase", twoPhase)
	}
	t.Logf("two-phase states %d of 201; last report %+v", twoPhase, r.Report)
}

// rk4 integrates dT/dP = f(T, P) from (T, P0) to P1 in n steps.
func rk4(f func(T, P float64) float64, T, P0, P1 float64, n int) float64 {
	h := (P1 - P0) / float64(n)
	P := P0
	for range n {
		k1 := f(T, P)
		k2 := f(T+0.5*h*k1, P+0.5*h)
		k3 := f(T+0.5*h*k2, P+0.5*h)
		k4 := f(T+h*k3, P+h)
		T += h / 6 * (k1 + 2*k2 + 2*k3 + k4)
		P += h
	}
	return T
}

// TestThrottling: isenthalpic expansion of a natural gas from 10 MPa to
// 2 MPa at 300 K cools it (a fact of the trade: Joule–Thomson cooling of
// natural gas at a valve, of the order of 0.5 K per bar near ambient —
// common practice), and the temperature drop equals the integral of the
// model's Joule–Thomson coefficient μ = (∂T/∂P)_H along the isenthalp
// (RK4, 400 steps) within 2 % (in practice far closer: both are the same
// model).
func TestThrottling(t *testing.T) {
	ctx := context.Background()
	f := sweepFluids(t)[0]
	fws, fr := flash.NewWorkspace(f.mx), flash.NewResult(f.mx)
	if err := fws.PT(ctx, 300, 10e6, f.z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	ws, r := NewWorkspace(f.mx), NewResult(f.mx)
	if err := ws.PH(ctx, 2e6, fr.Overall.H, f.z, Options{}, nil, r); err != nil {
		t.Fatal(err)
	}
	if len(r.Phases) != 1 {
		t.Fatalf("%d phases after the valve; the check assumes one", len(r.Phases))
	}
	ews := f.mx.NewWorkspace()
	mu := func(T, P float64) float64 {
		pr, err := f.mx.Properties(ews, T, P, f.z, eos.RootMinGibbs)
		if err != nil {
			t.Fatal(err)
		}
		return pr.JouleThomson
	}
	tJT := rk4(mu, 300, 10e6, 2e6, 400)
	drop, dropJT := 300-r.T, 300-tJT
	t.Logf("P–H: T2 = %.4f K (drop %.4f K, %.3f K/bar); ∫μ_JT dP: %.4f K (drop %.4f K)", r.T, drop, drop/80, tJT, dropJT)
	if !(drop > 0) {
		t.Fatalf("expansion did not cool: T2 = %g K", r.T)
	}
	if math.Abs(drop-dropJT) > 0.02*dropJT {
		t.Errorf("drop %.4f K vs Joule–Thomson integral %.4f K", drop, dropJT)
	}
	if drop/80 < 0.2 || drop/80 > 0.8 {
		t.Errorf("drop %.3f K/bar outside the usual 0.2–0.8 K/bar", drop/80)
	}
}

// TestIsentropicCompression: methane from 1 MPa, 300 K to 3 MPa at
// constant entropy. References: (1) the ideal-gas estimate with the
// model's own Cp°, ∫Cp°/T dT = R ln(P2/P1) (exact for an ideal gas);
// (2) the model's isentrope integrated with the Maxwell relation
// (∂T/∂P)_S = T(∂v/∂T)_P/Cp by RK4 — an exact model fact, to 0.01 K.
// Real-gas correction: (∂T/∂P)_S = T(∂v/∂T)_P/Cp. Against the ideal gas
// (RT/P·1/Cp°) the real gas has T(∂v/∂T)_P = v + Cp·μ_JT, larger than RT/P
// by about Cp·μ_JT − (1 − Z)RT/P (≈ +3 % at 2 MPa), and Cp larger than
// Cp° by a few per cent (≈ +5 %); the two nearly cancel, so the real-gas
// outlet temperature lies within a few per cent of the ideal-gas
// temperature rise, asserted as |ΔT| ≤ 5 % of the rise (no published
// table was consulted).
func TestIsentropicCompression(t *testing.T) {
	ctx := context.Background()
	mx := fluid(t, eos.PR78, nil, "methane")
	z := []float64{1}
	fws, fr := flash.NewWorkspace(mx), flash.NewResult(mx)
	if err := fws.PT(ctx, 300, 1e6, z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	ws, r := NewWorkspace(mx), NewResult(mx)
	if err := ws.PS(ctx, 3e6, fr.Overall.S, z, Options{}, nil, r); err != nil {
		t.Fatal(err)
	}
	c := mx.Component(0)
	target := c.SIG(300) + eos.R*math.Log(3)
	lo, hi := 300.0, 600.0
	for range 100 {
		m := 0.5 * (lo + hi)
		if c.SIG(m) < target {
			lo = m
		} else {
			hi = m
		}
	}
	tIG := 0.5 * (lo + hi)
	ews := mx.NewWorkspace()
	dTdP := func(T, P float64) float64 {
		pr, err := mx.Properties(ews, T, P, z, eos.RootMinGibbs)
		if err != nil {
			t.Fatal(err)
		}
		return T * (-pr.DPDT / pr.DPDV) / pr.Cp
	}
	tRK := rk4(dTdP, 300, 1e6, 3e6, 400)
	t.Logf("P–S: T2 = %.4f K; isentrope RK4 %.4f K; ideal gas %.4f K (real − ideal %.3f K)", r.T, tRK, tIG, r.T-tIG)
	if math.Abs(r.T-tRK) > 0.01 {
		t.Errorf("T2 = %.4f K, RK4 isentrope %.4f K", r.T, tRK)
	}
	if math.Abs(r.T-tIG) > 0.05*(tIG-300) {
		t.Errorf("real-gas T2 %.4f K differs from the ideal-gas %.4f K by more than 5 %% of the rise", r.T, tIG)
	}
	if !(r.T > 300) {
		t.Errorf("compression did not heat: %g K", r.T)
	}
}

// TestWarmStart: a run of P–H flashes along a slowly changing state (as
// successive timesteps of a simulation) started from the previous result
// gives the cold answers (to 1e-8 K) with fewer ln φ evaluations in total.
func TestWarmStart(t *testing.T) {
	ctx := context.Background()
	f := sweepFluids(t)[1]
	fws, fr := flash.NewWorkspace(f.mx), flash.NewResult(f.mx)
	ws, cold, warm := NewWorkspace(f.mx), NewResult(f.mx), NewResult(f.mx)
	var ec, ew int
	var est Estimate
	for k := range 40 {
		T, P := 250+0.5*float64(k), 5e6-2e4*float64(k)
		if err := fws.PT(ctx, T, P, f.z, flash.Options{}, nil, fr); err != nil {
			t.Fatal(err)
		}
		if err := ws.PH(ctx, P, fr.Overall.H, f.z, Options{}, nil, cold); err != nil {
			t.Fatal(err)
		}
		var e *Estimate
		if k > 0 {
			e = &est
		}
		if err := ws.PH(ctx, P, fr.Overall.H, f.z, Options{}, e, warm); err != nil {
			t.Fatal(err)
		}
		if math.Abs(cold.T-warm.T) > 1e-8 || len(cold.Phases) != len(warm.Phases) {
			t.Errorf("step %d: cold T %.10f (%d phases), warm %.10f (%d phases)", k, cold.T, len(cold.Phases), warm.T, len(warm.Phases))
		}
		ec += cold.Report.LnPhiEvaluations
		ew += warm.Report.LnPhiEvaluations
		est = warm.Estimate()
	}
	t.Logf("ln φ evaluations over 40 steps: cold %d, warm %d", ec, ew)
	if ew >= ec {
		t.Errorf("warm start saved nothing: %d vs %d", ew, ec)
	}
}

// TestErrors: bad input names the field; an unreachable enthalpy is a
// *RangeError; a cancelled context stops the solve; every error is typed.
func TestErrors(t *testing.T) {
	ctx := context.Background()
	f := sweepFluids(t)[0]
	ws, r := NewWorkspace(f.mx), NewResult(f.mx)
	var ie *InputError
	for _, c := range []struct {
		field string
		err   error
	}{
		{"P", ws.PH(ctx, math.NaN(), -7e4, f.z, Options{}, nil, r)},
		{"H", ws.PH(ctx, 1e6, math.Inf(1), f.z, Options{}, nil, r)},
		{"V", ws.TV(ctx, 300, -1, f.z, Options{}, nil, r)},
		{"V", ws.TV(ctx, 300, 1e-6, f.z, Options{}, nil, r)},
		{"T", ws.TV(ctx, 0, 1e-3, f.z, Options{}, nil, r)},
		{"U", ws.UV(ctx, math.NaN(), 1e-3, f.z, Options{}, nil, r)},
		{"z[1]", ws.PS(ctx, 1e6, 0, []float64{1, -1, 0, 0, 0, 0, 0, 0, 0, 0}, Options{}, nil, r)},
		{"z", ws.PS(ctx, 1e6, 0, []float64{1}, Options{}, nil, r)},
		{"opts.Tolerance", ws.PH(ctx, 1e6, 0, f.z, Options{Tolerance: 1}, nil, r)},
		{"opts.Tmax", ws.PH(ctx, 1e6, 0, f.z, Options{Tmin: 500, Tmax: 400}, nil, r)},
		{"warm.T", ws.PH(ctx, 1e6, 0, f.z, Options{}, &Estimate{T: math.NaN()}, r)},
	} {
		if !errors.As(c.err, &ie) || ie.Field != c.field {
			t.Errorf("want InputError on %s, got %v", c.field, c.err)
		}
	}
	// Enthalpy far above the gas at Tmax.
	err := ws.PH(ctx, 1e6, 1e7, f.z, Options{}, nil, r)
	var re *RangeError
	if !errors.As(err, &re) || !errors.Is(err, ErrOutOfRange) || re.Variable != "T" || !(re.Got < re.Want) {
		t.Errorf("want RangeError, got %v", err)
	}
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if err := ws.PH(cctx, 5e6, -8e4, f.z, Options{}, nil, r); !errors.Is(err, context.Canceled) {
		t.Errorf("want context.Canceled, got %v", err)
	}
	// Too few iterations for a two-phase U–V: a typed convergence error.
	fws, fr := flash.NewWorkspace(f.mx), flash.NewResult(f.mx)
	if err := fws.PT(ctx, 200, 2e6, f.z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	err = ws.TV(ctx, 200, fr.Overall.MolarVolume*1.3, f.z, Options{MaxIterations: 5, Tolerance: 1e-13}, &Estimate{P: 1e7}, r)
	var ce *ConvergenceError
	if err != nil && (!errors.As(err, &ce) || !errors.Is(err, ErrNotConverged) || ce.Iterations == 0) {
		t.Errorf("want ConvergenceError, got %v", err)
	}
}

// TestDeterministic: the same call twice gives bit-identical results.
func TestDeterministic(t *testing.T) {
	ctx := context.Background()
	f := sweepFluids(t)[4]
	ws, a, b := NewWorkspace(f.mx), NewResult(f.mx), NewResult(f.mx)
	fws, fr := flash.NewWorkspace(f.mx), flash.NewResult(f.mx)
	if err := fws.PT(ctx, 260, 4e6, f.z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	for _, r := range []*Result{a, b} {
		if err := ws.UV(ctx, fr.Overall.U, fr.Overall.MolarVolume, f.z, Options{}, nil, r); err != nil {
			t.Fatal(err)
		}
	}
	if a.T != b.T || a.P != b.P || len(a.Phases) != len(b.Phases) || a.Overall != b.Overall || a.Report != b.Report {
		t.Errorf("results differ: %+v vs %+v", a.Report, b.Report)
	}
}

// TestZeroAllocs: with a reused workspace and result the flashes allocate
// nothing.
func TestZeroAllocs(t *testing.T) {
	ctx := context.Background()
	mx, z := benchGas(t)
	fws, fr := flash.NewWorkspace(mx), flash.NewResult(mx)
	if err := fws.PT(ctx, 250, 5e6, z, flash.Options{}, nil, fr); err != nil {
		t.Fatal(err)
	}
	H, S, V, U := fr.Overall.H, fr.Overall.S, fr.Overall.MolarVolume, fr.Overall.U
	ws, r := NewWorkspace(mx), NewResult(mx)
	for name, run := range map[string]func() error{
		"PH": func() error { return ws.PH(ctx, 5e6, H, z, Options{}, nil, r) },
		"PS": func() error { return ws.PS(ctx, 5e6, S, z, Options{}, nil, r) },
		"TV": func() error { return ws.TV(ctx, 250, V, z, Options{}, nil, r) },
		"UV": func() error { return ws.UV(ctx, U, V, z, Options{}, nil, r) },
	} {
		if err := run(); err != nil {
			t.Fatal(err)
		}
		if n := testing.AllocsPerRun(20, func() { _ = run() }); n != 0 {
			t.Errorf("%s: %.1f allocations per flash", name, n)
		}
	}
}
