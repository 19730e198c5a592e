package server

import (
	"context"
	"math"
	"strconv"
	"testing"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	dto "github.com/prometheus/client_model/go"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/envelope"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
	"github.com/fugad/fugad/thermo/stateflash"
)

func phStateX(x []float64, p, h float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: x, Specification: &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: p, MolarEnthalpyJPerMol: h}}}
}

func psState(x []float64, p, s float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: x, Specification: &fugadv1.FlashState_Ps{Ps: &fugadv1.PressureEntropy{PressurePa: p, MolarEntropyJPerMolK: s}}}
}

func tvState(x []float64, t, v float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: x, Specification: &fugadv1.FlashState_Tv{Tv: &fugadv1.TemperatureVolume{TemperatureK: t, MolarVolumeM3PerMol: v}}}
}

func uvState(x []float64, u, v float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: x, Specification: &fugadv1.FlashState_Uv{Uv: &fugadv1.InternalEnergyVolume{MolarInternalEnergyJPerMol: u, MolarVolumeM3PerMol: v}}}
}

func pbState(x []float64, p, beta float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: x, Specification: &fugadv1.FlashState_PVapourFraction{PVapourFraction: &fugadv1.PressureVapourFraction{PressurePa: p, VapourFraction: beta}}}
}

func tbState(x []float64, t, beta float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: x, Specification: &fugadv1.FlashState_TVapourFraction{TVapourFraction: &fugadv1.TemperatureVapourFraction{TemperatureK: t, VapourFraction: beta}}}
}

// asFlashResult views a state-function result as a flash.Result with the
// report the server derives from it (the fugacity residual replaced by the
// larger of it and the specification residual), for checkFlashResult.
func asFlashResult(r *stateflash.Result) *flash.Result {
	rp := &r.Report
	return &flash.Result{T: r.T, P: r.P, Z: r.Z, Phases: r.Phases, Overall: r.Overall, LnK: r.LnK, Report: flash.Report{
		Converged: rp.Converged, Phases: rp.Phases, StabilityTrials: rp.StabilityTrials, StabilityIterations: rp.StabilityIterations,
		SSIterations: rp.SSIterations, NewtonIterations: rp.NewtonIterations, RRIterations: rp.RRIterations,
		LnPhiEvaluations: rp.LnPhiEvaluations, Residual: math.Max(rp.Residual, rp.SpecResidual), MinTPD: rp.MinTPD,
	}}
}

// checkStateResult compares an RPC result of a state-function flash with
// a direct stateflash result, bit for bit.
func checkStateResult(t *testing.T, what string, got *fugadv1.FlashResult, want *stateflash.Result, warm bool) {
	t.Helper()
	fr := asFlashResult(want)
	if warm {
		fr.Report.Path = flash.PathWarm // the initial estimate checkFlashResult expects
	}
	checkFlashResult(t, what, got, fr)
	st := got.GetReport().GetStages()
	if len(st) == 0 || st[0].GetStage() != fugadv1.SolverStage_SOLVER_STAGE_STATE_FUNCTION || st[0].GetIterations() != uint32(want.Report.OuterIterations) {
		t.Errorf("%s: first stage %v, want STATE_FUNCTION with %d iterations", what, st, want.Report.OuterIterations)
	}
	ws := got.GetWarmStart()
	if ws.TemperatureK == nil || ws.PressurePa == nil || !sameBit(ws.GetTemperatureK(), want.T) || !sameBit(ws.GetPressurePa(), want.P) {
		t.Errorf("%s: warm start T, P = %v, %v; want %v, %v", what, ws.TemperatureK, ws.PressurePa, want.T, want.P)
	}
}

// checkStateWarm compares the molar enthalpy, entropy and state
// derivatives of a state-function result's warm start with the library's
// Estimate, bit for bit: present exactly when the library has them.
func checkStateWarm(t *testing.T, what string, ws *fugadv1.WarmStart, est *stateflash.Estimate) {
	t.Helper()
	if ws.MolarEnthalpyJPerMol == nil || !sameBit(ws.GetMolarEnthalpyJPerMol(), est.H) ||
		ws.MolarEntropyJPerMolK == nil || !sameBit(ws.GetMolarEntropyJPerMolK(), est.S) {
		t.Errorf("%s: warm start H, S = %v, %v; want %v, %v", what, ws.MolarEnthalpyJPerMol, ws.MolarEntropyJPerMolK, est.H, est.S)
	}
	d := ws.GetStateDerivatives()
	if (d != nil) != est.HasDeriv {
		t.Errorf("%s: warm start state_derivatives %v, library has them: %v", what, d, est.HasDeriv)
		return
	}
	if d == nil {
		return
	}
	got := stateDerivativeValues(d)
	want := [4]float64{est.Deriv.HT, est.Deriv.HP, est.Deriv.VT, est.Deriv.VP}
	for i := range got {
		if !sameBit(got[i], want[i]) {
			t.Errorf("%s: warm start %s = %v, want %v", what, stateDerivativeFields[i].name, got[i], want[i])
		}
	}
}

// TestStateFlashMatchesThermo checks P–H, P–S, T–V and U–V flashes over a
// real connection against direct stateflash calls (same normalised feed),
// bit for bit, cold and warm-started from a neighbouring result (whose
// wire warm start must be the library's full Estimate, enthalpy, entropy
// and state derivatives included), on one
// and two phases of the test gas and on the three-phase wet gas. The
// specified values are those of T–P flashes of the library, so each
// state-function flash must land on that T–P state (a consistency check
// of the round trip, to the solver's tolerance).
func TestStateFlashMatchesThermo(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	ctx := testCtx(t)
	cases := []struct {
		name  string
		fluid *fugadv1.Fluid
		ids   []string
		x     []float64
		T, P  float64
	}{
		{"gas single phase", gas10Fluid(), gas10IDs, gas10X, 350, 5e6},
		{"gas two phase", gas10Fluid(), gas10IDs, gas10X, 250, 5e6},
		{"wet gas three phase", wetFluid(), wetIDs, wetX, 310, 7e6},
	}
	withDeriv := 0 // P–H and P–S warm starts with state derivatives
	for _, tc := range cases {
		mx := mixtureOf(t, eos.PR78, tc.ids...)
		z := normalised(tc.x)
		pt := flash.NewResult(mx)
		if err := flash.NewWorkspace(mx).PT(context.Background(), tc.T, tc.P, z, flash.Options{}, nil, pt); err != nil {
			t.Fatal(err)
		}
		o := pt.Overall
		if len(pt.Phases) == 1 {
			p := pt.Phases[0].Props
			o.H, o.S, o.U, o.MolarVolume = p.H, p.S, p.U, p.MolarVolume
		}
		ws := stateflash.NewWorkspace(mx)
		specs := []struct {
			name  string
			state func(x []float64, scale float64) *fugadv1.FlashState
			lib   func(scale float64, warm *stateflash.Estimate, res *stateflash.Result) error
		}{
			{"P–H", func(x []float64, k float64) *fugadv1.FlashState { return phStateX(x, tc.P, o.H*k) },
				func(k float64, w *stateflash.Estimate, r *stateflash.Result) error {
					return ws.PH(context.Background(), tc.P, o.H*k, z, stateflash.Options{}, w, r)
				}},
			{"P–S", func(x []float64, k float64) *fugadv1.FlashState { return psState(x, tc.P, o.S*k) },
				func(k float64, w *stateflash.Estimate, r *stateflash.Result) error {
					return ws.PS(context.Background(), tc.P, o.S*k, z, stateflash.Options{}, w, r)
				}},
			{"T–V", func(x []float64, k float64) *fugadv1.FlashState { return tvState(x, tc.T, o.MolarVolume*k) },
				func(k float64, w *stateflash.Estimate, r *stateflash.Result) error {
					return ws.TV(context.Background(), tc.T, o.MolarVolume*k, z, stateflash.Options{}, w, r)
				}},
			{"U–V", func(x []float64, k float64) *fugadv1.FlashState { return uvState(x, o.U*k, o.MolarVolume) },
				func(k float64, w *stateflash.Estimate, r *stateflash.Result) error {
					return ws.UV(context.Background(), o.U*k, o.MolarVolume, z, stateflash.Options{}, w, r)
				}},
		}
		for _, sp := range specs {
			what := tc.name + " " + sp.name
			want := stateflash.NewResult(mx)
			if err := sp.lib(1, nil, want); err != nil {
				t.Fatalf("%s: library: %v", what, err)
			}
			if math.Abs(want.T-tc.T) > 1e-6*tc.T || math.Abs(want.P-tc.P) > 1e-6*tc.P || len(want.Phases) != len(pt.Phases) {
				t.Errorf("%s: the round trip lands at %v K, %v Pa, %d phases; the T–P flash was at %v K, %v Pa, %d phases",
					what, want.T, want.P, len(want.Phases), tc.T, tc.P, len(pt.Phases))
			}
			got, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: sp.state(tc.x, 1)})
			if err != nil {
				t.Fatalf("%s: %v", what, err)
			}
			checkStateResult(t, what, got.GetResult(), want, false)

			// Warm start from a neighbouring state (1 % away in the
			// specification), as from the previous timestep.
			prevLib := stateflash.NewResult(mx)
			if err := sp.lib(1.01, nil, prevLib); err != nil {
				t.Fatalf("%s: library, neighbour: %v", what, err)
			}
			prev, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: sp.state(tc.x, 1.01)})
			if err != nil {
				t.Fatal(err)
			}
			est := prevLib.Estimate()
			checkStateWarm(t, what+" (neighbour)", prev.GetResult().GetWarmStart(), &est)
			if est.HasDeriv && (sp.name == "P–H" || sp.name == "P–S") {
				withDeriv++
			}
			if err := sp.lib(1, &est, want); err != nil {
				t.Fatalf("%s: library, warm: %v", what, err)
			}
			st := sp.state(tc.x, 1)
			st.WarmStart = prev.GetResult().GetWarmStart()
			warm, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: st})
			if err != nil {
				t.Fatal(err)
			}
			checkStateResult(t, what+" (warm)", warm.GetResult(), want, true)
		}
	}
	if withDeriv == 0 {
		t.Error("no P–H or P–S warm start carried state derivatives: the first-order start was not exercised")
	}
}

// qualityPoint solves a vapour-fraction point directly, as solveQuality
// does without a warm start.
func qualityPoint(t *testing.T, mx *eos.Mixture, fixT bool, v, beta float64, z []float64) *envelope.Point {
	t.Helper()
	sv, err := envelope.NewSolver(mx, envelope.Options{})
	if err != nil {
		t.Fatal(err)
	}
	pt := envelope.NewPoint(mx)
	ctx, h := context.Background(), envelope.Hint{}
	switch {
	case !fixT && beta == 0:
		err = sv.BubbleTemperature(ctx, v, z, h, pt)
	case !fixT && beta == 1:
		err = sv.DewTemperature(ctx, v, z, h, pt)
	case !fixT:
		err = sv.QualityTemperature(ctx, v, beta, z, h, pt)
	case beta == 0:
		err = sv.BubblePressure(ctx, v, z, h, pt)
	case beta == 1:
		err = sv.DewPressure(ctx, v, z, h, pt)
	default:
		err = sv.QualityPressure(ctx, v, beta, z, h, pt)
	}
	if err != nil {
		t.Fatal(err)
	}
	return pt
}

// TestVapourFractionFlashMatchesThermo checks P–β and T–β flashes against
// direct calls of the envelope package's solvers (bit for bit: the solved
// temperature or pressure, the phase compositions, the K-values and each
// phase's ln φ and properties on its own root), at β = 0, 0.3 and 1; and
// that a T–P flash at the solved point of β = 0.3 finds the same split
// (within its tolerance), the consistency of the two formulations.
func TestVapourFractionFlashMatchesThermo(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	ctx := testCtx(t)
	mx := mixtureOf(t, eos.PR78, gas10IDs...)
	z := normalised(gas10X)
	ews, fug := mx.NewWorkspace(), mx.NewFugacity()
	for _, tc := range []struct {
		fixT bool
		v    float64
	}{{false, 5e6}, {true, 240}} {
		for _, beta := range []float64{0, 0.3, 1} {
			var st *fugadv1.FlashState
			if tc.fixT {
				st = tbState(gas10X, tc.v, beta)
			} else {
				st = pbState(gas10X, tc.v, beta)
			}
			what := string(map[bool]specKind{false: specPVF, true: specTVF}[tc.fixT]) + " β=" + ftoa(beta)
			got, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st})
			if err != nil {
				t.Fatalf("%s: %v", what, err)
			}
			r := got.GetResult()
			pt := qualityPoint(t, mx, tc.fixT, tc.v, beta, z)
			if !sameBit(r.GetTemperatureK(), pt.T) || !sameBit(r.GetPressurePa(), pt.P) || !sameBit(r.GetVapourFraction(), beta) {
				t.Errorf("%s: T, P, β = %v, %v, %v; want %v, %v, %v", what, r.GetTemperatureK(), r.GetPressurePa(), r.GetVapourFraction(), pt.T, pt.P, beta)
			}
			if len(r.GetPhases()) != 2 {
				t.Fatalf("%s: %d phases", what, len(r.GetPhases()))
			}
			for k, want := range []struct {
				label fugadv1.PhaseLabel
				x     []float64
				amt   float64
				root  eos.RootChoice
			}{
				{fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR, pt.Vapour, beta, eos.RootVapour},
				{fugadv1.PhaseLabel_PHASE_LABEL_LIQUID, pt.Liquid, 1 - beta, eos.RootLiquid},
			} {
				p := r.GetPhases()[k]
				if err := mx.Fugacity(ews, pt.T, pt.P, want.x, want.root, 0, fug); err != nil {
					t.Fatal(err)
				}
				props, err := mx.Properties(ews, pt.T, pt.P, want.x, want.root)
				if err != nil {
					t.Fatal(err)
				}
				if p.GetLabel() != want.label || !sameBit(p.GetAmount(), want.amt) || !sameBits(p.GetMoleFractions(), want.x) || !sameBits(p.GetLnFugacityCoefficients(), fug.LnPhi) ||
					!sameBit(p.GetProperties().GetMolarEnthalpyJPerMol(), props.H) || !sameBit(p.GetProperties().GetMassDensityKgPerM3(), props.MassDensity) {
					t.Errorf("%s: phase %d = %v, want %v %v %v", what, k, p, want.label, want.amt, want.x)
				}
			}
			if !sameBits(r.GetKValues(), expAll(pt.LnK)) || !sameBits(r.GetWarmStart().GetKValues(), expAll(pt.LnK)) {
				t.Errorf("%s: K-values %v, want exp of %v", what, r.GetKValues(), pt.LnK)
			}
			rep := r.GetReport()
			if rep.GetLnPhiEvaluations() != uint64(pt.Report.LnPhiEvaluations) || !sameBit(rep.GetFinalResidual(), pt.Report.Residual) || !rep.GetConverged() ||
				rep.GetInitialEstimate() != fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION {
				t.Errorf("%s: report %v, solver %+v", what, rep, pt.Report)
			}
			if beta == 0.3 {
				ptRes := flash.NewResult(mx)
				if err := flash.NewWorkspace(mx).PT(context.Background(), pt.T, pt.P, z, flash.Options{}, nil, ptRes); err != nil {
					t.Fatal(err)
				}
				if len(ptRes.Phases) != 2 || math.Abs(ptRes.Phases[0].Beta-beta) > 1e-7 {
					t.Errorf("%s: the T–P flash at the solved point finds %d phases, β = %v", what, len(ptRes.Phases), ptRes.Phases[0].Beta)
				}
			}
			// The result's warm start steers the next solve to the same
			// point.
			st.WarmStart = r.GetWarmStart()
			again, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st})
			if err != nil {
				t.Fatalf("%s warm: %v", what, err)
			}
			if ar := again.GetResult(); ar.GetReport().GetInitialEstimate() != fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START ||
				math.Abs(ar.GetTemperatureK()-pt.T) > 1e-7*pt.T || math.Abs(ar.GetPressurePa()-pt.P) > 1e-7*pt.P {
				t.Errorf("%s warm: %v K %v Pa (%v), want %v K %v Pa", what, ar.GetTemperatureK(), ar.GetPressurePa(), ar.GetReport().GetInitialEstimate(), pt.T, pt.P)
			}
		}
	}
}

func ftoa(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// histogramCount returns the sample count of one series of a histogram
// vector.
func histogramCount(t *testing.T, vec *prometheus.HistogramVec, label string) uint64 {
	t.Helper()
	o, err := vec.GetMetricWithLabelValues(label)
	if err != nil {
		t.Fatal(err)
	}
	m := &dto.Metric{}
	if err := o.(prometheus.Metric).Write(m); err != nil {
		t.Fatal(err)
	}
	return m.GetHistogram().GetSampleCount()
}

// TestFlashSpecErrors checks the error mapping of the new specifications:
// an enthalpy no state up to 3000 K reaches is INVALID_ARGUMENT (reason
// SPECIFICATION_UNREACHABLE) on the enthalpy field; a dew point asked
// above the cricondentherm is FAILED_PRECONDITION/NO_SATURATION_POINT with
// a NoSaturationDetail; an inner flash forced to fail (a phase cap of two
// on the three-phase wet gas) is ABORTED/NOT_CONVERGED with the best
// estimate's temperature and pressure.
func TestFlashSpecErrors(t *testing.T) {
	e := newEnv(t, envOptions{flashOpts: func(o *flash.Options) { o.MaxPhases = 2 }})
	ctx := testCtx(t)

	_, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: phStateX(gas10X, 5e6, 5e6)})
	wantViolation(t, err, codes.InvalidArgument, "state.ph.molar_enthalpy_j_per_mol")
	if _, ei, _ := details(t, err); ei.GetReason() != ReasonUnreachable {
		t.Errorf("reason %q, want %q", ei.GetReason(), ReasonUnreachable)
	}

	_, err = e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tbState(gas10X, 400, 1)})
	st, ei, _ := details(t, err)
	if st.Code() != codes.FailedPrecondition || ei.GetReason() != ReasonNoSaturation {
		t.Fatalf("dew point above the cricondentherm: %v (reason %q), want FAILED_PRECONDITION/%s", err, ei.GetReason(), ReasonNoSaturation)
	}
	var nd *fugadv1.NoSaturationDetail
	for _, d := range st.Details() {
		if x, ok := d.(*fugadv1.NoSaturationDetail); ok {
			nd = x
		}
	}
	if nd == nil || nd.GetType() != fugadv1.SaturationType_SATURATION_TYPE_DEW || nd.GetValue() != 400 || nd.GetField() != "state.t_vapour_fraction.temperature_k" {
		t.Errorf("NoSaturationDetail %v", nd)
	}

	// P–H at the enthalpy of the three-phase state: the inner flashes
	// cannot split three phases under the cap.
	mx := mixtureOf(t, eos.PR78, wetIDs...)
	pt := flash.NewResult(mx)
	if err := flash.NewWorkspace(mx).PT(context.Background(), 310, 7e6, normalised(wetX), flash.Options{}, nil, pt); err != nil {
		t.Fatal(err)
	}
	_, err = e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: wetFluid(), State: phStateX(wetX, 7e6, pt.Overall.H)})
	st, ei, _ = details(t, err)
	if st.Code() != codes.Aborted || ei.GetReason() != ReasonNotConverged {
		t.Fatalf("capped P–H: %v (reason %q), want ABORTED/NOT_CONVERGED", err, ei.GetReason())
	}
	var d *fugadv1.NotConvergedDetail
	for _, x := range st.Details() {
		if nd, ok := x.(*fugadv1.NotConvergedDetail); ok {
			d = nd
		}
	}
	if d == nil || d.GetReport().GetConverged() || !(d.GetFlash().GetTemperatureK() > 0) || !(d.GetFlash().GetPressurePa() > 0) || d.GetReport().GetLnPhiEvaluations() == 0 {
		t.Errorf("NotConvergedDetail %v", d)
	}
	if got := testutil.ToFloat64(e.srv.metrics.nonConverged.WithLabelValues(ReasonNotConverged, "stability")); got != 1 {
		t.Errorf("fugad_solver_nonconverged_total{NOT_CONVERGED,stability} = %v, want 1", got)
	}
}

// TestFlashBatchMixedSpecs sends one batch with every specification and one
// bad state: each good item is the unary Flash's answer byte for byte, the
// bad one fails alone naming its field.
func TestFlashBatchMixedSpecs(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: 4}})
	ctx := testCtx(t)
	states := []*fugadv1.FlashState{
		tpStateX(nil, 250, 5e6),
		phStateX(nil, 5e6, -9.0e4),
		psState(nil, 5e6, -40),
		phStateX(nil, 5e6, math.Inf(1)), // bad
		tvState(nil, 250, 3e-4),
		uvState(nil, -9.2e4, 3e-4),
		pbState(nil, 5e6, 0.5),
		tbState(nil, 240, 0),
	}
	resp, err := e.client.FlashBatch(ctx, &fugadv1.FlashBatchRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, States: states, BypassCache: true})
	if err != nil {
		t.Fatal(err)
	}
	for i, it := range resp.GetItems() {
		if i == 3 {
			wantViolation(t, statusErr(it.GetStatus()), codes.InvalidArgument, "states[3].ph.molar_enthalpy_j_per_mol")
			continue
		}
		if it.GetStatus().GetCode() != int32(codes.OK) {
			t.Errorf("item %d: %v", i, it.GetStatus())
			continue
		}
		st := proto.Clone(states[i]).(*fugadv1.FlashState)
		st.MoleFractions = gas10X
		one, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st, BypassCache: true})
		if err != nil {
			t.Fatalf("item %d as unary: %v", i, err)
		}
		if string(clearedBytes(t, one.GetResult())) != string(clearedBytes(t, it.GetResult())) {
			t.Errorf("item %d differs from the unary answer", i)
		}
	}
	// Solve time by specification, iterations of the outer stage.
	for _, spec := range []specKind{specPH, specPS, specTV, specUV, specPVF, specTVF} {
		if n := histogramCount(t, e.srv.metrics.solveSeconds, string(spec)); n < 2 {
			t.Errorf("fugad_solve_duration_seconds{spec=%q} has %d samples, want ≥ 2 (batch item and unary)", spec, n)
		}
	}
	if n := histogramCount(t, e.srv.metrics.iterations, "state_function"); n < 8 {
		t.Errorf("fugad_solver_iterations{stage=\"state_function\"} has %d samples, want ≥ 8", n)
	}
	if n := histogramCount(t, e.srv.metrics.iterations, "saturation"); n < 4 {
		t.Errorf("fugad_solver_iterations{stage=\"saturation\"} has %d samples, want ≥ 4", n)
	}
}
