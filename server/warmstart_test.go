package server

import (
	"context"
	"math"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
	"github.com/fugad/fugad/thermo/stateflash"
)

// newtonIterations is the NEWTON stage's iteration count of a report.
func newtonIterations(r *fugadv1.SolverReport) uint32 {
	for _, st := range r.GetStages() {
		if st.GetStage() == fugadv1.SolverStage_SOLVER_STAGE_NEWTON {
			return st.GetIterations()
		}
	}
	return 0
}

// withoutSensitivities is a copy of w without its ln K sensitivities.
func withoutSensitivities(w *fugadv1.WarmStart) *fugadv1.WarmStart {
	c := proto.Clone(w).(*fugadv1.WarmStart)
	c.LnKTemperatureSensitivityPerK, c.LnKPressureSensitivityPerPa = nil, nil
	return c
}

// sameAnswer reports whether two flash results describe the same
// equilibrium within the solver tolerance: the same phase count and
// labels, amounts and mole fractions within 1e-8 and molar enthalpies
// within 1e-9 relative. A split converged to max|Δln f| ≤ 1e-10 fixes the
// compositions to about that (Michelsen & Mollerup 2007, ch. 10); the
// bounds leave two orders of magnitude for the conditioning of the test
// gas.
func sameAnswer(t *testing.T, what string, got, want *fugadv1.FlashResult) {
	t.Helper()
	if len(got.GetPhases()) != len(want.GetPhases()) {
		t.Fatalf("%s: %d phases, want %d", what, len(got.GetPhases()), len(want.GetPhases()))
	}
	for k, p := range got.GetPhases() {
		w := want.GetPhases()[k]
		if p.GetLabel() != w.GetLabel() || math.Abs(p.GetAmount()-w.GetAmount()) > 1e-8 {
			t.Errorf("%s: phase %d is %v with amount %v, want %v with %v", what, k, p.GetLabel(), p.GetAmount(), w.GetLabel(), w.GetAmount())
		}
		for i, x := range p.GetMoleFractions() {
			if math.Abs(x-w.GetMoleFractions()[i]) > 1e-8 {
				t.Errorf("%s: phase %d x[%d] = %v, want %v", what, k, i, x, w.GetMoleFractions()[i])
			}
		}
	}
	a, b := got.GetOverall().GetMolarEnthalpyJPerMol(), want.GetOverall().GetMolarEnthalpyJPerMol()
	if math.Abs(a-b) > 1e-9*math.Abs(b) {
		t.Errorf("%s: H = %v J/mol, want %v", what, a, b)
	}
}

// TestWarmStartCarriesSensitivities checks that a result's warm_start is
// the library's Result.Estimate, bit for bit: the state (T, P) always, and
// the ln K sensitivities for a two-phase T–P result and a two-phase P–H
// result (the inner split's), not for one or three phases.
func TestWarmStartCarriesSensitivities(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	ctx := testCtx(t)
	for _, tc := range []struct {
		name  string
		fluid *fugadv1.Fluid
		ids   []string
		x     []float64
		T, P  float64
		sens  bool
	}{
		{"gas two phase", gas10Fluid(), gas10IDs, gas10X, 250, 5e6, true},
		{"gas single phase", gas10Fluid(), gas10IDs, gas10X, 350, 5e6, false},
		{"wet gas three phase", wetFluid(), wetIDs, wetX, 310, 7e6, false},
	} {
		mx := mixtureOf(t, eos.PR78, tc.ids...)
		z := normalised(tc.x)
		lib := flash.NewResult(mx)
		if err := flash.NewWorkspace(mx).PT(context.Background(), tc.T, tc.P, z, flash.Options{}, nil, lib); err != nil {
			t.Fatal(err)
		}
		got, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: tpStateX(tc.x, tc.T, tc.P)})
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		est := lib.Estimate()
		if (est.DLnKDT != nil) != tc.sens {
			t.Fatalf("%s: the library's estimate has sensitivities %v, the case expects %v", tc.name, est.DLnKDT != nil, tc.sens)
		}
		checkWarmStart(t, tc.name+" T–P", got.GetResult().GetWarmStart(), est)

		// P–H at the enthalpy of that state: the warm start carries the
		// inner split's estimate.
		H := lib.Overall.H
		if len(lib.Phases) == 1 {
			H = lib.Phases[0].Props.H
		}
		sr := stateflash.NewResult(mx)
		if err := stateflash.NewWorkspace(mx).PH(context.Background(), tc.P, H, z, stateflash.Options{}, nil, sr); err != nil {
			t.Fatal(err)
		}
		ph, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: phStateX(tc.x, tc.P, H)})
		if err != nil {
			t.Fatalf("%s P–H: %v", tc.name, err)
		}
		se := sr.Estimate()
		if (se.Flash.DLnKDT != nil) != tc.sens {
			t.Errorf("%s P–H: the library's estimate has sensitivities %v, the case expects %v", tc.name, se.Flash.DLnKDT != nil, tc.sens)
		}
		checkWarmStart(t, tc.name+" P–H", ph.GetResult().GetWarmStart(), se.Flash)
	}
}

// checkWarmStart compares a wire warm start with a library estimate: its
// temperature, pressure and ln K sensitivities bit for bit and its phases.
func checkWarmStart(t *testing.T, what string, w *fugadv1.WarmStart, est flash.Estimate) {
	t.Helper()
	if w.TemperatureK == nil || w.PressurePa == nil || !sameBit(w.GetTemperatureK(), est.T) || !sameBit(w.GetPressurePa(), est.P) {
		t.Errorf("%s: warm start at %v K, %v Pa; the estimate's state is %v K, %v Pa", what, w.TemperatureK, w.PressurePa, est.T, est.P)
	}
	if !sameBits(w.GetLnKTemperatureSensitivityPerK(), est.DLnKDT) || !sameBits(w.GetLnKPressureSensitivityPerPa(), est.DLnKDP) {
		t.Errorf("%s: sensitivities\n wire %v %v\n lib  %v %v", what, w.GetLnKTemperatureSensitivityPerK(), w.GetLnKPressureSensitivityPerPa(), est.DLnKDT, est.DLnKDP)
	}
	if len(w.GetPhases()) != est.Phases {
		t.Fatalf("%s: %d phases, the estimate %d", what, len(w.GetPhases()), est.Phases)
	}
	for k, p := range w.GetPhases() {
		if !sameBit(p.GetAmount(), est.Beta[k]) || !sameBits(p.GetMoleFractions(), est.X[k]) {
			t.Errorf("%s: phase %d %v %v, the estimate %v %v", what, k, p.GetAmount(), p.GetMoleFractions(), est.Beta[k], est.X[k])
		}
	}
}

// TestWarmStartSensitivitiesSaveNewtonIterations follows the test gas
// through a sequence of small steps in T and P inside its two-phase
// region, as a digital twin does between timesteps, each state
// warm-started over the wire from the previous answer's warm_start: once
// whole, once with the sensitivities removed. The whole warm start (the
// first-order shift of ln K to the new state) must take fewer Newton
// iterations in total, and never more in one step; both answers must be
// the cold answer within the tolerance.
func TestWarmStartSensitivitiesSaveNewtonIterations(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	ctx := testCtx(t)
	flashAt := func(T, P float64, w *fugadv1.WarmStart) *fugadv1.FlashResult {
		t.Helper()
		st := tpStateX(gas10X, T, P)
		st.WarmStart = w
		r, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st})
		if err != nil {
			t.Fatalf("%v K, %v Pa: %v", T, P, err)
		}
		return r.GetResult()
	}
	T, P := 250.0, 5e6
	prev := flashAt(T, P, nil)
	var with, without uint32
	for step := range 8 {
		T, P = T+0.5, P*1.01
		w := prev.GetWarmStart()
		if len(w.GetLnKTemperatureSensitivityPerK()) != len(gas10IDs) || len(w.GetLnKPressureSensitivityPerPa()) != len(gas10IDs) {
			t.Fatalf("step %d: warm start without sensitivities: %v", step, w)
		}
		full := flashAt(T, P, w)
		bare := flashAt(T, P, withoutSensitivities(w))
		cold := flashAt(T, P, nil)
		for _, r := range []*fugadv1.FlashResult{full, bare} {
			if ie := r.GetReport().GetInitialEstimate(); ie != fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START {
				t.Fatalf("step %d: initial estimate %v, want WARM_START", step, ie)
			}
		}
		sameAnswer(t, "with sensitivities", full, cold)
		sameAnswer(t, "without sensitivities", bare, cold)
		a, b := newtonIterations(full.GetReport()), newtonIterations(bare.GetReport())
		t.Logf("step %d (%v K, %.4g Pa): Newton iterations %d with sensitivities, %d without", step, T, P, a, b)
		if a > b {
			t.Errorf("step %d: %d Newton iterations with sensitivities, %d without", step, a, b)
		}
		with, without = with+a, without+b
		prev = full
	}
	if with >= without {
		t.Errorf("%d Newton iterations with sensitivities, %d without: no saving", with, without)
	}
}

// TestWarmStartBadSensitivity checks that malformed sensitivities are
// rejected with INVALID_ARGUMENT naming the field (and the element), in a
// unary flash and as one batch item's own status.
func TestWarmStartBadSensitivity(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	two, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	good := two.GetResult().GetWarmStart()
	const dT, dP = "state.warm_start.ln_k_temperature_sensitivity_per_k", "state.warm_start.ln_k_pressure_sensitivity_per_pa"
	for _, tc := range []struct {
		name  string
		mut   func(w *fugadv1.WarmStart)
		field string
	}{
		{"NaN", func(w *fugadv1.WarmStart) { w.LnKTemperatureSensitivityPerK[3] = math.NaN() }, dT + "[3]"},
		{"+Inf", func(w *fugadv1.WarmStart) { w.LnKPressureSensitivityPerPa[0] = math.Inf(1) }, dP + "[0]"},
		{"too short", func(w *fugadv1.WarmStart) { w.LnKPressureSensitivityPerPa = w.LnKPressureSensitivityPerPa[:4] }, dP},
		{"too long", func(w *fugadv1.WarmStart) {
			w.LnKTemperatureSensitivityPerK = append(w.LnKTemperatureSensitivityPerK, 0.01)
		}, dT},
		{"too large", func(w *fugadv1.WarmStart) { w.LnKTemperatureSensitivityPerK[9] = -2 * maxLnKTemperatureSensitivity }, dT + "[9]"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			w := proto.Clone(good).(*fugadv1.WarmStart)
			tc.mut(w)
			st := tpStateX(gas10X, 251, 5.05e6)
			st.WarmStart = w
			wantRejectedWarmStart(t, e, tpStateX(gas10X, 251, 5.05e6), st, tc.field)
		})
	}
}

// TestWarmStartWrongSensitivityKeepsTheAnswer sends valid but wrong
// sensitivities (sign reversed and scaled, at the bound, and those of
// another state) with an otherwise good warm start and checks that the
// answer is the cold one within the tolerance and that each is a request
// of its own in the result cache.
func TestWarmStartWrongSensitivityKeepsTheAnswer(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	T, P := 252.0, 5.1e6
	cold, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, T, P), BypassCache: true})
	if err != nil {
		t.Fatal(err)
	}
	prev, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	other, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 220, 2e6)})
	if err != nil {
		t.Fatal(err)
	}
	good := prev.GetResult().GetWarmStart()
	if len(other.GetResult().GetWarmStart().GetLnKTemperatureSensitivityPerK()) == 0 {
		t.Fatal("the other state's warm start has no sensitivities")
	}
	scale := func(xs []float64, k float64) []float64 {
		out := make([]float64, len(xs))
		for i, x := range xs {
			out[i] = k * x
		}
		return out
	}
	fill := func(v float64) []float64 {
		out := make([]float64, len(gas10IDs))
		for i := range out {
			out[i] = v * float64(1-2*(i%2))
		}
		return out
	}
	for _, tc := range []struct {
		name   string
		dT, dP []float64
	}{
		{"reversed ×30", scale(good.GetLnKTemperatureSensitivityPerK(), -30), scale(good.GetLnKPressureSensitivityPerPa(), -30)},
		{"at the bounds", fill(maxLnKTemperatureSensitivity), fill(-maxLnKPressureSensitivity)},
		{"of another state", other.GetResult().GetWarmStart().GetLnKTemperatureSensitivityPerK(), other.GetResult().GetWarmStart().GetLnKPressureSensitivityPerPa()},
	} {
		w := proto.Clone(good).(*fugadv1.WarmStart)
		w.LnKTemperatureSensitivityPerK, w.LnKPressureSensitivityPerPa = tc.dT, tc.dP
		st := tpStateX(gas10X, T, P)
		st.WarmStart = w
		for i := range 2 {
			got, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st})
			if err != nil {
				t.Fatalf("%s: %v", tc.name, err)
			}
			sameAnswer(t, tc.name, got.GetResult(), cold.GetResult())
			if fc := got.GetResult().GetReport().GetFromCache(); fc != (i == 1) {
				t.Errorf("%s: request %d from_cache = %v, want %v (the sensitivities are part of the key)", tc.name, i, fc, i == 1)
			}
		}
	}
}

// phTwoPhase returns the P–H specification of the two-phase test gas at
// 250 K and 5 MPa, scaled by k, and the result of a flash there.
func phTwoPhase(t *testing.T, e *testEnv, k float64) (*fugadv1.FlashState, *fugadv1.FlashResult) {
	t.Helper()
	pt, err := e.client.Flash(testCtx(t), &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	st := phStateX(gas10X, 5e6, pt.GetResult().GetOverall().GetMolarEnthalpyJPerMol()*k)
	got, err := e.client.Flash(testCtx(t), &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st})
	if err != nil {
		t.Fatal(err)
	}
	if len(got.GetResult().GetPhases()) != 2 || got.GetResult().GetWarmStart().GetStateDerivatives() == nil {
		t.Fatalf("the P–H result has %d phases and state derivatives %v, want two phases with derivatives",
			len(got.GetResult().GetPhases()), got.GetResult().GetWarmStart().GetStateDerivatives())
	}
	return st, got.GetResult()
}

// TestWarmStartBadStateDerivatives checks that malformed molar enthalpy,
// entropy and state derivatives in a warm start are rejected with
// INVALID_ARGUMENT naming the field, in a unary flash and as one batch
// item's own status.
func TestWarmStartBadStateDerivatives(t *testing.T) {
	e := newEnv(t, envOptions{})
	st0, prev := phTwoPhase(t, e, 1.01)
	good := prev.GetWarmStart()
	const w, d = "state.warm_start.", "state.warm_start.state_derivatives."
	for _, tc := range []struct {
		name  string
		mut   func(w *fugadv1.WarmStart)
		field string
	}{
		{"H NaN", func(w *fugadv1.WarmStart) { w.MolarEnthalpyJPerMol = proto.Float64(math.NaN()) }, w + "molar_enthalpy_j_per_mol"},
		{"S too large", func(w *fugadv1.WarmStart) { w.MolarEntropyJPerMolK = proto.Float64(-2 * maxAbsMolarCal) }, w + "molar_entropy_j_per_mol_k"},
		{"Cp zero", func(w *fugadv1.WarmStart) { w.StateDerivatives.EnthalpyTemperatureDerivativeJPerMolK = 0 }, d + "enthalpy_temperature_derivative_j_per_mol_k"},
		{"Cp negative", func(w *fugadv1.WarmStart) { w.StateDerivatives.EnthalpyTemperatureDerivativeJPerMolK = -80 }, d + "enthalpy_temperature_derivative_j_per_mol_k"},
		{"Cp too large", func(w *fugadv1.WarmStart) {
			w.StateDerivatives.EnthalpyTemperatureDerivativeJPerMolK = 2 * maxHeatCapacity
		}, d + "enthalpy_temperature_derivative_j_per_mol_k"},
		{"dH/dP +Inf", func(w *fugadv1.WarmStart) { w.StateDerivatives.EnthalpyPressureDerivativeJPerMolPa = math.Inf(1) }, d + "enthalpy_pressure_derivative_j_per_mol_pa"},
		{"dV/dT NaN", func(w *fugadv1.WarmStart) { w.StateDerivatives.VolumeTemperatureDerivativeM3PerMolK = math.NaN() }, d + "volume_temperature_derivative_m3_per_mol_k"},
		{"dV/dP too large", func(w *fugadv1.WarmStart) {
			w.StateDerivatives.VolumePressureDerivativeM3PerMolPa = -2 * maxStateDerivative
		}, d + "volume_pressure_derivative_m3_per_mol_pa"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			w := proto.Clone(good).(*fugadv1.WarmStart)
			tc.mut(w)
			st := proto.Clone(st0).(*fugadv1.FlashState)
			st.GetPh().MolarEnthalpyJPerMol /= 1.01
			st.WarmStart = w
			wantRejectedWarmStart(t, e, st0, st, tc.field)
		})
	}
}

// TestWarmStartWrongStateDerivativesKeepTheAnswer sends valid but wrong
// state derivatives and caloric values (a heat capacity a hundred times
// too small, which throws the first step to its limit of a tenth of T;
// the signs of the pressure derivatives reversed; an enthalpy far off)
// with an otherwise good P–H warm start and checks that the answer is the
// cold one within the tolerance, and that each is a request of its own in
// the result cache.
func TestWarmStartWrongStateDerivativesKeepTheAnswer(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	_, prev := phTwoPhase(t, e, 1.01)
	st0, _ := phTwoPhase(t, e, 1)
	coldReq := &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: proto.Clone(st0).(*fugadv1.FlashState), BypassCache: true}
	cold, err := e.client.Flash(ctx, coldReq)
	if err != nil {
		t.Fatal(err)
	}
	good := prev.GetWarmStart()
	for _, tc := range []struct {
		name string
		mut  func(w *fugadv1.WarmStart)
	}{
		{"heat capacity /100", func(w *fugadv1.WarmStart) { w.StateDerivatives.EnthalpyTemperatureDerivativeJPerMolK /= 100 }},
		{"pressure derivatives reversed", func(w *fugadv1.WarmStart) {
			w.StateDerivatives.EnthalpyPressureDerivativeJPerMolPa *= -1e3
			w.StateDerivatives.VolumePressureDerivativeM3PerMolPa *= -1e3
		}},
		{"enthalpy far off", func(w *fugadv1.WarmStart) { w.MolarEnthalpyJPerMol = proto.Float64(w.GetMolarEnthalpyJPerMol() + 5e4) }},
		{"without derivatives", func(w *fugadv1.WarmStart) { w.StateDerivatives = nil }},
	} {
		w := proto.Clone(good).(*fugadv1.WarmStart)
		tc.mut(w)
		st := proto.Clone(st0).(*fugadv1.FlashState)
		st.WarmStart = w
		for i := range 2 {
			got, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st})
			if err != nil {
				t.Fatalf("%s: %v", tc.name, err)
			}
			sameAnswer(t, tc.name, got.GetResult(), cold.GetResult())
			if fc := got.GetResult().GetReport().GetFromCache(); fc != (i == 1) {
				t.Errorf("%s: request %d from_cache = %v, want %v (the state derivatives are part of the key)", tc.name, i, fc, i == 1)
			}
		}
	}
}

// TestSetStateWarmWithinBounds checks that the caloric values and state
// derivatives of a result go into its warm start only within the bounds of
// the validation, so that the warm start always passes it.
func TestSetStateWarmWithinBounds(t *testing.T) {
	good := flash.StateDerivatives{HT: 86.7, HP: -4.8e-4, VT: 3.0e-6, VP: -7.2e-11}
	for _, tc := range []struct {
		name       string
		e          stateflash.Estimate
		h, s, deri bool
	}{
		{"all good", stateflash.Estimate{H: -8e4, S: -90, Deriv: good, HasDeriv: true}, true, true, true},
		{"no derivatives", stateflash.Estimate{H: -8e4, S: -90, Deriv: good}, true, true, false},
		{"H too large", stateflash.Estimate{H: 2 * maxAbsMolarCal, S: -90, Deriv: good, HasDeriv: true}, false, true, false},
		{"S NaN", stateflash.Estimate{H: -8e4, S: math.NaN(), Deriv: good, HasDeriv: true}, true, false, false},
		{"Cp negative", stateflash.Estimate{H: -8e4, S: -90, Deriv: flash.StateDerivatives{HT: -1, HP: good.HP, VT: good.VT, VP: good.VP}, HasDeriv: true}, true, true, false},
		{"dV/dP Inf", stateflash.Estimate{H: -8e4, S: -90, Deriv: flash.StateDerivatives{HT: good.HT, HP: good.HP, VT: good.VT, VP: math.Inf(-1)}, HasDeriv: true}, true, true, false},
		{"dH/dP too large", stateflash.Estimate{H: -8e4, S: -90, Deriv: flash.StateDerivatives{HT: good.HT, HP: 2 * maxStateDerivative, VT: good.VT, VP: good.VP}, HasDeriv: true}, true, true, false},
	} {
		ws := &fugadv1.WarmStart{}
		setStateWarm(ws, &tc.e)
		if (ws.MolarEnthalpyJPerMol != nil) != tc.h || (ws.MolarEntropyJPerMolK != nil) != tc.s || (ws.StateDerivatives != nil) != tc.deri {
			t.Errorf("%s: warm start %v; want H %v, S %v, derivatives %v", tc.name, ws, tc.h, tc.s, tc.deri)
		}
		var v violations
		warmStart(&v, "warm_start", ws, 1)
		if err := v.err(); err != nil {
			t.Errorf("%s: the warm start %v is rejected: %v", tc.name, ws, err)
		}
	}
}

// wantRejectedWarmStart sends bad, a state whose warm start has a bad
// field (field, named as in a unary Flash), as a unary Flash and as the
// second item of a FlashBatch after good: the unary call is answered
// INVALID_ARGUMENT with a violation naming field, the batch item with its
// own such status (field under states[1]), and the good item is solved.
func wantRejectedWarmStart(t *testing.T, e *testEnv, good, bad *fugadv1.FlashState, field string) {
	t.Helper()
	ctx := testCtx(t)
	_, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: bad})
	wantViolation(t, err, codes.InvalidArgument, field)

	resp, err := e.client.FlashBatch(ctx, &fugadv1.FlashBatchRequest{Fluid: gas10Fluid(), States: []*fugadv1.FlashState{good, bad}})
	if err != nil {
		t.Fatal(err)
	}
	items := resp.GetItems()
	if items[0].GetStatus().GetCode() != int32(codes.OK) {
		t.Errorf("the good neighbour failed: %v", items[0].GetStatus())
	}
	wantViolation(t, statusErr(items[1].GetStatus()), codes.InvalidArgument, "states[1]"+field[len("state"):])
}
