package server

import (
	"context"
	"errors"
	"io"
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	dto "github.com/prometheus/client_model/go"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/cache"
	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// The 10-component test fluids: a natural gas and a wet gas with free
// water, with compositions of fictional plant streams invented for the
// tests (the same as the flash package's benchmark fluids). The gas is two
// phase at 250 K, 5 MPa and single phase at 350 K, 5 MPa; the wet gas
// splits into vapour, hydrocarbon liquid and water at 310 K, 7 MPa.
var (
	gas10IDs = []string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "n-pentane", "n-hexane", "n-heptane"}
	gas10X   = []float64{0.01, 0.02, 0.80, 0.07, 0.04, 0.015, 0.015, 0.01, 0.01, 0.01}
	wetIDs   = []string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "n-butane", "n-pentane", "n-hexane", "n-decane", "water"}
	wetX     = []float64{0.005, 0.01, 0.50, 0.06, 0.05, 0.04, 0.03, 0.04, 0.10, 0.165}
)

func gas10Fluid() *fugadv1.Fluid { return fluidOf(fugadv1.Model_MODEL_PR78, gas10IDs...) }

// normalised is x divided by its sum, as the server normalises every feed
// (which can change the last bit of a composition whose decimal sum is 1).
func normalised(x []float64) []float64 {
	s := 0.0
	for _, v := range x {
		s += v
	}
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = v / s
	}
	return out
}
func wetFluid() *fugadv1.Fluid { return fluidOf(fugadv1.Model_MODEL_PR78, wetIDs...) }

func tpStateX(x []float64, t, p float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: x, Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: t, PressurePa: p}}}
}

// mixtureOf compiles library components as the server does for a Fluid
// without overrides.
func mixtureOf(t testing.TB, model eos.Model, ids ...string) *eos.Mixture {
	t.Helper()
	comps := make([]component.Component, len(ids))
	for i, id := range ids {
		c, err := component.Lookup(id)
		if err != nil {
			t.Fatal(err)
		}
		comps[i] = c
	}
	mx, err := eos.NewMixture(model, comps, eos.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return mx
}

// sameBit reports whether a and b are the same float64 bit for bit.
func sameBit(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) }

// checkFlashResult compares an RPC result with a direct flash result
// number by number, bit for bit, and the report with the flash's report.
func checkFlashResult(t *testing.T, what string, got *fugadv1.FlashResult, want *flash.Result) {
	t.Helper()
	if !sameBit(got.GetTemperatureK(), want.T) || !sameBit(got.GetPressurePa(), want.P) {
		t.Errorf("%s: T, P = %v, %v; want %v, %v", what, got.GetTemperatureK(), got.GetPressurePa(), want.T, want.P)
	}
	if len(got.GetPhases()) != len(want.Phases) {
		t.Fatalf("%s: %d phases, want %d", what, len(got.GetPhases()), len(want.Phases))
	}
	vf := 0.0
	for k, p := range got.GetPhases() {
		w := &want.Phases[k]
		if p.GetLabel() != wireLabel(w.Label) || !sameBit(p.GetAmount(), w.Beta) || !sameBits(p.GetMoleFractions(), w.X) || !sameBits(p.GetLnFugacityCoefficients(), w.LnPhi) {
			t.Errorf("%s: phase %d differs:\n rpc %v %v %v\n lib %v %v %v", what, k, p.GetLabel(), p.GetAmount(), p.GetMoleFractions(), w.Label, w.Beta, w.X)
		}
		pr := p.GetProperties()
		if !sameBits([]float64{pr.GetCompressibilityFactor(), pr.GetMolarVolumeM3PerMol(), pr.GetMassDensityKgPerM3(), pr.GetMolarEnthalpyJPerMol(), pr.GetMolarEntropyJPerMolK(), pr.GetMolarIsobaricHeatCapacityJPerMolK(), pr.GetSpeedOfSoundMPerS()},
			[]float64{w.Props.Z, w.Props.MolarVolume, w.Props.MassDensity, w.Props.H, w.Props.S, w.Props.Cp, w.Props.SpeedOfSound}) {
			t.Errorf("%s: phase %d properties differ: %v vs %+v", what, k, pr, w.Props)
		}
		if w.Label == flash.LabelVapour {
			vf = w.Beta
		}
	}
	if !sameBit(got.GetVapourFraction(), vf) {
		t.Errorf("%s: vapour fraction %v, want %v", what, got.GetVapourFraction(), vf)
	}
	if len(want.Phases) >= 2 {
		if !sameBit(got.GetOverall().GetMolarEnthalpyJPerMol(), want.Overall.H) || !sameBit(got.GetOverall().GetMassDensityKgPerM3(), want.Overall.MassDensity) ||
			got.GetOverall().MolarIsobaricHeatCapacityJPerMolK != nil {
			t.Errorf("%s: overall %v, want %+v without Cp", what, got.GetOverall(), want.Overall)
		}
		k := make([]float64, len(want.LnK))
		for i, l := range want.LnK {
			k[i] = math.Exp(l)
		}
		if !sameBits(got.GetKValues(), k) {
			t.Errorf("%s: K-values %v, want %v", what, got.GetKValues(), k)
		}
	} else if len(got.GetKValues()) != 0 || !sameBit(got.GetOverall().GetMolarEnthalpyJPerMol(), want.Phases[0].Props.H) {
		t.Errorf("%s: single phase with K-values %v or overall H %v ≠ %v", what, got.GetKValues(), got.GetOverall().GetMolarEnthalpyJPerMol(), want.Phases[0].Props.H)
	}
	r, wr := got.GetReport(), &want.Report
	iters := map[fugadv1.SolverStage]uint32{}
	for _, st := range r.GetStages() {
		iters[st.GetStage()] = st.GetIterations()
		if !st.GetConverged() {
			t.Errorf("%s: stage %v not converged in a converged result", what, st.GetStage())
		}
	}
	if iters[fugadv1.SolverStage_SOLVER_STAGE_STABILITY] != uint32(wr.StabilityIterations) || iters[fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION] != uint32(wr.SSIterations) ||
		iters[fugadv1.SolverStage_SOLVER_STAGE_NEWTON] != uint32(wr.NewtonIterations) || iters[fugadv1.SolverStage_SOLVER_STAGE_RACHFORD_RICE] != uint32(wr.RRIterations) {
		t.Errorf("%s: stage iterations %v, flash report %+v", what, iters, *wr)
	}
	if r.GetLnPhiEvaluations() != uint64(wr.LnPhiEvaluations) || !sameBit(r.GetFinalResidual(), wr.Residual) || !r.GetConverged() ||
		r.GetInitialEstimate() != wireInitialEstimate(wr.Path) || r.GetDataVersion() != component.DataVersion || r.GetModelVersion() != ModelVersion {
		t.Errorf("%s: report %v, flash report %+v", what, r, *wr)
	}
	if r.MinimumTangentPlaneDistance == nil || !sameBit(r.GetMinimumTangentPlaneDistance(), wr.MinTPD) || r.GetStabilityPhaseCount() != uint32(wr.Phases) {
		t.Errorf("%s: stability %v/%d, flash %v/%d", what, r.MinimumTangentPlaneDistance, r.GetStabilityPhaseCount(), wr.MinTPD, wr.Phases)
	}
	if ws := got.GetWarmStart(); len(ws.GetPhases()) != len(want.Phases) {
		t.Errorf("%s: warm start has %d phases, want %d", what, len(ws.GetPhases()), len(want.Phases))
	}
}

// TestFlashMatchesThermo checks that a T–P Flash over a real connection
// returns exactly the numbers of a direct flash.Workspace.PT call (bit for
// bit), cold and warm-started from a previous result's warm_start, for
// one, two and three phases.
func TestFlashMatchesThermo(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	ctx := testCtx(t)
	cases := []struct {
		name   string
		fluid  *fugadv1.Fluid
		ids    []string
		x      []float64
		T, P   float64
		phases int
	}{
		{"gas single phase", gas10Fluid(), gas10IDs, gas10X, 350, 5e6, 1},
		{"gas two phase", gas10Fluid(), gas10IDs, gas10X, 250, 5e6, 2},
		{"gas near the critical point", gas10Fluid(), gas10IDs, gas10X, 230, 8.5e6, 2},
		{"wet gas three phase", wetFluid(), wetIDs, wetX, 310, 7e6, 3},
	}
	for _, tc := range cases {
		mx := mixtureOf(t, eos.PR78, tc.ids...)
		ws, want := flash.NewWorkspace(mx), flash.NewResult(mx)
		z := normalised(tc.x)
		if err := ws.PT(context.Background(), tc.T, tc.P, z, flash.Options{}, nil, want); err != nil {
			t.Fatal(err)
		}
		if len(want.Phases) != tc.phases {
			t.Fatalf("%s: the flash finds %d phases, the case expects %d", tc.name, len(want.Phases), tc.phases)
		}
		got, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: tpStateX(tc.x, tc.T, tc.P)})
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		checkFlashResult(t, tc.name, got.GetResult(), want)

		// Warm start from the result 1 K and 1 % away, as from the previous
		// timestep: the RPC carries it as warm_start, the library as an
		// Estimate.
		prev, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: tpStateX(tc.x, tc.T-1, tc.P*0.99)})
		if err != nil {
			t.Fatal(err)
		}
		prevLib := flash.NewResult(mx)
		if err := ws.PT(context.Background(), tc.T-1, tc.P*0.99, z, flash.Options{}, nil, prevLib); err != nil {
			t.Fatal(err)
		}
		est := prevLib.Estimate()
		if err := ws.PT(context.Background(), tc.T, tc.P, z, flash.Options{}, &est, want); err != nil {
			t.Fatal(err)
		}
		st := tpStateX(tc.x, tc.T, tc.P)
		st.WarmStart = prev.GetResult().GetWarmStart()
		warm, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: st})
		if err != nil {
			t.Fatal(err)
		}
		checkFlashResult(t, tc.name+" (warm)", warm.GetResult(), want)
		if tc.phases >= 2 && warm.GetResult().GetReport().GetInitialEstimate() != fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START {
			t.Errorf("%s: warm start not used: %v", tc.name, warm.GetResult().GetReport().GetInitialEstimate())
		}
		// K-values alone are a two-phase estimate.
		if tc.phases == 2 {
			st.WarmStart = &fugadv1.WarmStart{KValues: prev.GetResult().GetKValues()}
			kw, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: tc.fluid, State: st})
			if err != nil {
				t.Fatal(err)
			}
			lnK := make([]float64, len(tc.x))
			for i, k := range prev.GetResult().GetKValues() {
				lnK[i] = math.Log(k)
			}
			if err := ws.PT(context.Background(), tc.T, tc.P, z, flash.Options{}, &flash.Estimate{Phases: 2, LnK: lnK}, want); err != nil {
				t.Fatal(err)
			}
			checkFlashResult(t, tc.name+" (K-values)", kw.GetResult(), want)
		}
	}
}

// TestFlashWarmStartNeverChangesTheAnswer sends a misleading estimate (the
// gas's two-phase split to a single-phase state, and swapped phases) and
// checks that the answer agrees with the cold one within the tolerance.
func TestFlashWarmStartNeverChangesTheAnswer(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	two, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	cold, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 350, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	st := tpStateX(gas10X, 350, 5e6)
	st.WarmStart = two.GetResult().GetWarmStart()
	got, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st})
	if err != nil {
		t.Fatal(err)
	}
	if n := len(got.GetResult().GetPhases()); n != 1 {
		t.Fatalf("misleading estimate gave %d phases, want 1", n)
	}
	if ie := got.GetResult().GetReport().GetInitialEstimate(); ie != fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START_REJECTED {
		t.Errorf("initial estimate %v, want WARM_START_REJECTED", ie)
	}
	a, b := got.GetResult().GetOverall().GetMolarEnthalpyJPerMol(), cold.GetResult().GetOverall().GetMolarEnthalpyJPerMol()
	if math.Abs(a-b) > 1e-9*math.Abs(b) {
		t.Errorf("H with a misleading estimate %v, cold %v", a, b)
	}
}

// TestFlashNotConverged forces a flash to fail (a phase cap of two on the
// three-phase wet gas: the two-phase result stays unstable, which the
// flash reports as not converged) and checks the mapping: ABORTED with
// ErrorInfo NOT_CONVERGED, a NotConvergedDetail with the best estimate and
// its residual, the counter by reason and stage — never INTERNAL and never
// a result.
func TestFlashNotConverged(t *testing.T) {
	e := newEnv(t, envOptions{flashOpts: func(o *flash.Options) { o.MaxPhases = 2 }})
	ctx := testCtx(t)
	_, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: wetFluid(), State: tpStateX(wetX, 310, 7e6)})
	st, ei, _ := details(t, err)
	if st.Code() != codes.Aborted || ei.GetReason() != ReasonNotConverged || ei.GetDomain() != ErrorDomain {
		t.Fatalf("got %v (reason %q), want ABORTED/NOT_CONVERGED", err, ei.GetReason())
	}
	var d *fugadv1.NotConvergedDetail
	for _, x := range st.Details() {
		if nd, ok := x.(*fugadv1.NotConvergedDetail); ok {
			d = nd
		}
	}
	if d == nil {
		t.Fatalf("no NotConvergedDetail in %v", st.Proto())
	}
	best := d.GetFlash()
	if best == nil || len(best.GetPhases()) != 2 || d.GetReport().GetConverged() || best.GetReport().GetConverged() {
		t.Fatalf("best estimate %v, report %v: want two phases, not converged", best, d.GetReport())
	}
	if !(d.GetResidual() >= 0) || d.GetResidual() > math.MaxFloat64 || d.GetTolerance() != defaultFlashTolerance || d.GetReport().GetLnPhiEvaluations() == 0 {
		t.Errorf("detail residual %v tolerance %v report %v", d.GetResidual(), d.GetTolerance(), d.GetReport())
	}
	for _, p := range best.GetPhases() {
		if p.GetProperties() != nil || len(p.GetMoleFractions()) != len(wetIDs) {
			t.Errorf("best-estimate phase %v", p)
		}
	}
	if got := testutil.ToFloat64(e.srv.metrics.nonConverged.WithLabelValues(ReasonNotConverged, "stability")); got != 1 {
		t.Errorf("fugad_solver_nonconverged_total{NOT_CONVERGED,stability} = %v, want 1", got)
	}
	// The two-phase gas converges under the same cap: only the failing
	// state fails, and errors are not cached (a retry fails again).
	if _, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)}); err != nil {
		t.Errorf("two-phase gas under a cap of two: %v", err)
	}
	if _, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: wetFluid(), State: tpStateX(wetX, 310, 7e6)}); status.Code(err) != codes.Aborted {
		t.Errorf("retry: %v, want ABORTED again", err)
	}
	problems, err := testutil.GatherAndLint(e.reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
}

// clearedBytes is the deterministic encoding of m with every
// report.from_cache cleared.
func clearedBytes(t *testing.T, m proto.Message) []byte {
	t.Helper()
	c := proto.Clone(m)
	var clear func(m proto.Message)
	clear = func(m proto.Message) {
		switch v := m.(type) {
		case *fugadv1.FlashResponse:
			clear(v.GetResult())
		case *fugadv1.FlashResult:
			if v.GetReport() != nil {
				v.Report.FromCache = false
			}
		case *fugadv1.FlashBatchResponse:
			for _, it := range v.GetItems() {
				clear(it.GetResult())
			}
		case *fugadv1.FugacityCoefficientsResponse:
			if v.GetReport() != nil {
				v.Report.FromCache = false
			}
		}
	}
	clear(c)
	b, err := proto.MarshalOptions{Deterministic: true}.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestFlashBatchIsolatesItems sends a batch with good states, a bad state
// and a state that does not converge (forced as in TestFlashNotConverged):
// every other item is answered, each exactly as the unary Flash answers
// it, and each failure carries its own status and details.
func TestFlashBatchIsolatesItems(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: 4}, flashOpts: func(o *flash.Options) { o.MaxPhases = 2 }})
	ctx := testCtx(t)
	states := []*fugadv1.FlashState{
		tpStateX(nil, 600, 1e6),        // vapour
		tpStateX(nil, math.NaN(), 3e6), // bad
		tpStateX(nil, 310, 7e6),        // three phases: fails under the cap
		tpStateX(nil, 650, 1e5),        // vapour
		tpStateX(wetX[:3], 300, 2e6),   // wrong composition length
		tpStateX(nil, 700, 2e6),        // vapour
	}
	resp, err := e.client.FlashBatch(ctx, &fugadv1.FlashBatchRequest{Fluid: wetFluid(), MoleFractions: wetX, States: states, BypassCache: true})
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.GetItems()) != len(states) {
		t.Fatalf("%d items, want %d", len(resp.GetItems()), len(states))
	}
	want := []codes.Code{codes.OK, codes.InvalidArgument, codes.Aborted, codes.OK, codes.InvalidArgument, codes.OK}
	for i, it := range resp.GetItems() {
		if c := codes.Code(it.GetStatus().GetCode()); c != want[i] {
			t.Errorf("item %d: %v, want %v", i, it.GetStatus(), want[i])
			continue
		}
		switch want[i] {
		case codes.OK:
			st := proto.Clone(states[i]).(*fugadv1.FlashState)
			st.MoleFractions = wetX
			one, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: wetFluid(), State: st, BypassCache: true})
			if err != nil {
				t.Fatalf("item %d as unary: %v", i, err)
			}
			if string(clearedBytes(t, one.GetResult())) != string(clearedBytes(t, it.GetResult())) {
				t.Errorf("item %d differs from the unary answer", i)
			}
		case codes.InvalidArgument:
			field := "states[1].tp.temperature_k"
			if i == 4 {
				field = "states[4].mole_fractions"
			}
			wantViolation(t, statusErr(it.GetStatus()), codes.InvalidArgument, field)
		case codes.Aborted:
			_, ei, _ := details(t, statusErr(it.GetStatus()))
			if ei.GetReason() != ReasonNotConverged || it.GetResult() != nil {
				t.Errorf("item %d: reason %q result %v", i, ei.GetReason(), it.GetResult())
			}
		}
	}
}

// distinctStates returns n two-phase states of the test gas along a
// cooling path, all different.
func distinctStates(n int) []*fugadv1.FlashState {
	out := make([]*fugadv1.FlashState, n)
	for i := range out {
		out[i] = tpStateX(nil, 240+20*float64(i)/float64(n), 5e6)
	}
	return out
}

// solvedTP returns the number of T–P flashes the server has completed.
func solvedTP(t *testing.T, e *testEnv) int {
	t.Helper()
	h, err := e.srv.metrics.solveSeconds.GetMetricWithLabelValues(string(specTP))
	if err != nil {
		t.Fatal(err)
	}
	m := &dto.Metric{}
	if err := h.(prometheus.Metric).Write(m); err != nil {
		t.Fatal(err)
	}
	return int(m.GetHistogram().GetSampleCount())
}

// slowFlash makes every outer iteration of a T–P flash take at least
// 5 ms (through the flash's own cancellation poll, which then declines):
// a cold flash of the test gas polls about 17 times, so it takes at least
// 85 ms and a 20 ms deadline always falls inside its iterations.
func slowFlash(o *flash.Options) {
	o.Cancel = func() bool { time.Sleep(5 * time.Millisecond); return false }
}

// TestFlashDeadlineStopsSolver checks that the deadline and the client's
// cancellation reach inside the flash: a flash slowed to milliseconds per
// iteration ends with DEADLINE_EXCEEDED (or CANCELLED) and is counted as
// stopped work, with the cache bypassed and through it (where the solve
// runs on the cache's goroutine).
func TestFlashDeadlineStopsSolver(t *testing.T) {
	for _, bypass := range []bool{true, false} {
		// The deadline is the server's cap, so that the server's own timer
		// (not the client's cancellation on its deadline) ends the call.
		e := newEnv(t, envOptions{flashOpts: slowFlash, cfg: Config{Limits: Limits{MaxDeadline: 20 * time.Millisecond}}})
		req := &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6), BypassCache: bypass}
		_, err := e.client.Flash(testCtx(t), req)
		if status.Code(err) != codes.DeadlineExceeded {
			t.Fatalf("bypass %v: %v, want DEADLINE_EXCEEDED", bypass, err)
		}
		stopped := func(reason string) float64 { return testutil.ToFloat64(e.srv.metrics.stopped.WithLabelValues(reason)) }
		// A cached solve notices its waiter's departure on its own
		// goroutine: wait for it (bounded).
		for i := 0; i < 2000 && stopped("deadline_exceeded")+stopped("cancelled") == 0; i++ {
			time.Sleep(time.Millisecond)
		}
		if bypass && stopped("deadline_exceeded") != 1 {
			t.Errorf("fugad_solver_stopped_total{deadline_exceeded} = %v, want 1", stopped("deadline_exceeded"))
		}
		if !bypass && stopped("deadline_exceeded")+stopped("cancelled") != 1 {
			// The shared solve's context is cancelled when its last waiter
			// leaves, whatever that waiter's reason.
			t.Errorf("cached: stopped = %v + %v, want 1", stopped("deadline_exceeded"), stopped("cancelled"))
		}
		if solvedTP(t, e) != 0 {
			t.Errorf("bypass %v: a slowed flash completed", bypass)
		}

		ctx, cancel := context.WithCancel(context.Background())
		time.AfterFunc(10*time.Millisecond, cancel)
		req.State = tpStateX(gas10X, 251, 5e6)
		if _, err := e.client.Flash(ctx, req); status.Code(err) != codes.Canceled {
			t.Fatalf("bypass %v: %v, want CANCELLED", bypass, err)
		}
		for i := 0; i < 2000 && stopped("deadline_exceeded")+stopped("cancelled") < 2; i++ {
			time.Sleep(time.Millisecond)
		}
		if stopped("deadline_exceeded")+stopped("cancelled") != 2 {
			t.Errorf("bypass %v: cancellation did not stop the flash", bypass)
		}
	}
}

// waitIdle waits (bounded) until no solver slot is held: the client sees
// the end of a call before the server's handler has returned.
func waitIdle(t *testing.T, e *testEnv) {
	t.Helper()
	n := int64(e.srv.cfg.MaxConcurrentSolves)
	for range 5000 {
		if e.srv.pool.TryAcquire(n) {
			e.srv.pool.Release(n)
			return
		}
		time.Sleep(time.Millisecond)
	}
	t.Fatal("solver slots still held 5 s after the call ended")
}

// TestFlashBatchDeadlineStopsWork sends a batch far too large for its
// deadline: the call ends with DEADLINE_EXCEEDED and the server completed
// only a fraction of the states (FlashBatch returns only after its
// workers, so no solve of it runs afterwards). Likewise for a client's
// cancellation once solving has begun.
func TestFlashBatchDeadlineStopsWork(t *testing.T) {
	const n = 20000
	for _, bypass := range []bool{true, false} {
		e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: 2, Limits: Limits{MaxBatchStates: 2 * n}}})
		req := &fugadv1.FlashBatchRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, States: distinctStates(n), BypassCache: bypass}
		ctx, cancel := context.WithTimeout(context.Background(), 50*time.Millisecond)
		_, err := e.client.FlashBatch(ctx, req)
		cancel()
		if status.Code(err) != codes.DeadlineExceeded {
			t.Fatalf("bypass %v: %v, want DEADLINE_EXCEEDED", bypass, err)
		}
		waitIdle(t, e)
		done := solvedTP(t, e)
		if done >= n/2 {
			t.Errorf("bypass %v: %d of %d states solved after a 50 ms deadline: work did not stop", bypass, done, n)
		}

		ctx, cancel = context.WithCancel(context.Background())
		errc := make(chan error, 1)
		req.States = distinctStates(n + 1) // new states, not in the cache
		go func() { _, err := e.client.FlashBatch(ctx, req); errc <- err }()
		for i := 0; i < 5000 && solvedTP(t, e) == done; i++ {
			time.Sleep(time.Millisecond)
		}
		cancel()
		if err := <-errc; status.Code(err) != codes.Canceled {
			t.Fatalf("bypass %v: %v, want CANCELLED", bypass, err)
		}
		waitIdle(t, e)
		if got := solvedTP(t, e) - done; got >= n/2 {
			t.Errorf("bypass %v: %d states solved after cancellation", bypass, got)
		}
	}
}

// TestFlashStreamSession checks a per-timestep session: answers in order
// with their own status; the implicit warm start from the previous answer
// (reported as WARM_START) gives exactly the answer of a unary Flash that
// carries the previous warm_start, and agrees with the cold answer within
// the tolerance; no_implicit_warm_start gives the unary cold answer byte
// for byte; a new fluid drops the stream's estimate.
func TestFlashStreamSession(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	stream, err := e.client.FlashStream(ctx)
	if err != nil {
		t.Fatal(err)
	}
	send := func(m *fugadv1.FlashStreamRequest) *fugadv1.FlashStreamResponse {
		t.Helper()
		if err := stream.Send(m); err != nil {
			t.Fatal(err)
		}
		r, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if r.GetSequence() != m.GetSequence() {
			t.Fatalf("sequence %d, want %d", r.GetSequence(), m.GetSequence())
		}
		return r
	}
	var prev *fugadv1.FlashResult
	for step := range 8 {
		T := 250 - 0.5*float64(step) // a slowly cooling separator
		m := &fugadv1.FlashStreamRequest{Sequence: uint64(100 + step), State: tpStateX(nil, T, 5e6)}
		if step == 0 {
			m.Fluid, m.MoleFractions = gas10Fluid(), gas10X
		}
		r := send(m)
		if r.GetStatus().GetCode() != int32(codes.OK) {
			t.Fatalf("step %d: %v", step, r.GetStatus())
		}
		res := r.GetResult()
		ie := res.GetReport().GetInitialEstimate()
		st := tpStateX(gas10X, T, 5e6)
		if step == 0 {
			if ie != fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION {
				t.Errorf("first message: initial estimate %v", ie)
			}
		} else {
			if ie != fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START {
				t.Errorf("step %d: initial estimate %v, want WARM_START", step, ie)
			}
			st.WarmStart = prev.GetWarmStart()
		}
		unary, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st, BypassCache: true})
		if err != nil {
			t.Fatal(err)
		}
		if string(clearedBytes(t, unary.GetResult())) != string(clearedBytes(t, res)) {
			t.Errorf("step %d: the stream's answer differs from the unary Flash with the previous warm_start", step)
		}
		cold, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, T, 5e6), BypassCache: true})
		if err != nil {
			t.Fatal(err)
		}
		if a, b := res.GetVapourFraction(), cold.GetResult().GetVapourFraction(); math.Abs(a-b) > 1e-8 {
			t.Errorf("step %d: vapour fraction %v warm, %v cold", step, a, b)
		}
		prev = res
	}
	// Opting out: the unary cold answer, byte for byte.
	r := send(&fugadv1.FlashStreamRequest{Sequence: 1, State: tpStateX(nil, 246, 5e6), NoImplicitWarmStart: true})
	cold, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 246, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	if r.GetResult().GetReport().GetInitialEstimate() != fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION ||
		string(clearedBytes(t, cold.GetResult())) != string(clearedBytes(t, r.GetResult())) {
		t.Errorf("no_implicit_warm_start: %v, not the cold unary answer", r.GetResult().GetReport())
	}
	// A bad message gets its own status; the next one is answered.
	if r := send(&fugadv1.FlashStreamRequest{Sequence: 2, State: tpStateX(nil, -1, 5e6)}); r.GetStatus().GetCode() != int32(codes.InvalidArgument) {
		t.Errorf("bad message: %v", r.GetStatus())
	}
	// A new fluid: no estimate carries over.
	r = send(&fugadv1.FlashStreamRequest{Sequence: 3, Fluid: gasFluid(), MoleFractions: gasX, State: tpStateX(nil, 220, 4e6)})
	if r.GetStatus().GetCode() != int32(codes.OK) || r.GetResult().GetReport().GetInitialEstimate() != fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION {
		t.Errorf("after a new fluid: %v %v", r.GetStatus(), r.GetResult().GetReport())
	}
	if err := stream.CloseSend(); err != nil {
		t.Fatal(err)
	}
	if _, err := stream.Recv(); !errors.Is(err, io.EOF) {
		t.Errorf("after CloseSend: %v", err)
	}
}

// TestFlashCacheReplay checks the result cache on every cached endpoint:
// a hit is the miss it replays, byte for byte, apart from from_cache; a
// batch item and a stream message hit the entry of the equal unary state;
// bypass_cache neither reads nor writes the cache.
func TestFlashCacheReplay(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	req := &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)}
	bypass := proto.Clone(req).(*fugadv1.FlashRequest)
	bypass.BypassCache = true
	b0, err := e.client.Flash(ctx, bypass)
	if err != nil {
		t.Fatal(err)
	}
	miss, err := e.client.Flash(ctx, req)
	if err != nil {
		t.Fatal(err)
	}
	hit, err := e.client.Flash(ctx, req)
	if err != nil {
		t.Fatal(err)
	}
	b1, err := e.client.Flash(ctx, bypass)
	if err != nil {
		t.Fatal(err)
	}
	if miss.GetResult().GetReport().GetFromCache() || !hit.GetResult().GetReport().GetFromCache() ||
		b0.GetResult().GetReport().GetFromCache() || b1.GetResult().GetReport().GetFromCache() {
		t.Fatalf("from_cache: miss %v hit %v bypass %v %v", miss.GetResult().GetReport().GetFromCache(), hit.GetResult().GetReport().GetFromCache(),
			b0.GetResult().GetReport().GetFromCache(), b1.GetResult().GetReport().GetFromCache())
	}
	mb := clearedBytes(t, miss)
	for name, r := range map[string]*fugadv1.FlashResponse{"hit": hit, "bypass before": b0, "bypass after": b1} {
		if string(clearedBytes(t, r)) != string(mb) {
			t.Errorf("%s differs from the miss", name)
		}
	}
	// The hit's encoding: the miss's with from_cache set and nothing else.
	hb, err := proto.MarshalOptions{Deterministic: true}.Marshal(hit)
	if err != nil {
		t.Fatal(err)
	}
	mset := proto.Clone(miss).(*fugadv1.FlashResponse)
	mset.Result.Report.FromCache = true
	if msb, _ := (proto.MarshalOptions{Deterministic: true}).Marshal(mset); string(msb) != string(hb) {
		t.Error("hit ≠ miss with from_cache set")
	}
	rs := e.srv.results.(*caches).results.Stats()
	if rs.Hits != 1 || rs.Entries != 1 {
		t.Errorf("cache stats %+v, want 1 hit, 1 entry (bypass stores nothing)", rs)
	}

	// A batch state equal to the unary request hits its entry; the other
	// state is a miss and is stored.
	br, err := e.client.FlashBatch(ctx, &fugadv1.FlashBatchRequest{Fluid: gas10Fluid(), MoleFractions: gas10X,
		States: []*fugadv1.FlashState{tpStateX(nil, 250, 5e6), tpStateX(nil, 251, 5e6)}})
	if err != nil {
		t.Fatal(err)
	}
	if it := br.GetItems(); !it[0].GetResult().GetReport().GetFromCache() || it[1].GetResult().GetReport().GetFromCache() ||
		string(clearedBytes(t, it[0].GetResult())) != string(clearedBytes(t, miss.GetResult())) {
		t.Errorf("batch from_cache %v %v, or item 0 differs from the unary miss", it[0].GetResult().GetReport().GetFromCache(), it[1].GetResult().GetReport().GetFromCache())
	}
	// A stream's first message (no implicit estimate yet) hits it too.
	stream, err := e.client.FlashStream(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := stream.Send(&fugadv1.FlashStreamRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 251, 5e6)}); err != nil {
		t.Fatal(err)
	}
	sr, err := stream.Recv()
	if err != nil {
		t.Fatal(err)
	}
	if !sr.GetResult().GetReport().GetFromCache() || string(clearedBytes(t, sr.GetResult())) != string(clearedBytes(t, br.GetItems()[1].GetResult())) {
		t.Errorf("stream message: from_cache %v or differs from the batch item", sr.GetResult().GetReport().GetFromCache())
	}
	_ = stream.CloseSend()

	// FugacityCoefficients: the same replay rule.
	fm, err := e.client.FugacityCoefficients(ctx, fugacityReq())
	if err != nil {
		t.Fatal(err)
	}
	fh, err := e.client.FugacityCoefficients(ctx, fugacityReq())
	if err != nil {
		t.Fatal(err)
	}
	if fm.GetReport().GetFromCache() || !fh.GetReport().GetFromCache() || string(clearedBytes(t, fm)) != string(clearedBytes(t, fh)) {
		t.Error("fugacity hit differs from its miss")
	}
}

// TestFlashQuantization checks the optional key quantisation: nearly equal
// states share one result, which is the exact flash of the quantised
// inputs, and the report says so; off by default.
func TestFlashQuantization(t *testing.T) {
	const q = 1e-6
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Quantization: q}}})
	ctx := testCtx(t)
	a, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	b, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250*(1+1e-9), 5e6*(1-1e-9))})
	if err != nil {
		t.Fatal(err)
	}
	if !b.GetResult().GetReport().GetFromCache() || a.GetResult().GetReport().GetInputQuantizationRelativeTolerance() != q {
		t.Errorf("nearby state: from_cache %v, reported tolerance %v", b.GetResult().GetReport().GetFromCache(), a.GetResult().GetReport().GetInputQuantizationRelativeTolerance())
	}
	mx := mixtureOf(t, eos.PR78, gas10IDs...)
	qx := make([]float64, len(gas10X))
	for i, x := range normalised(gas10X) {
		qx[i] = cache.Quantize(x, q)
	}
	T, P := cache.Quantize(250, q), cache.Quantize(5e6, q)
	want := flash.NewResult(mx)
	if err := flash.NewWorkspace(mx).PT(context.Background(), T, P, qx, flash.Options{}, nil, want); err != nil {
		t.Fatal(err)
	}
	if math.Abs(T-250) > 250*q || T == 250 {
		t.Logf("quantised T = %v", T)
	}
	checkFlashResult(t, "quantised", a.GetResult(), want)
	// Bypassing the cache solves the same quantised state.
	c, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250*(1+1e-9), 5e6*(1-1e-9)), BypassCache: true})
	if err != nil {
		t.Fatal(err)
	}
	if string(clearedBytes(t, c)) != string(clearedBytes(t, a)) {
		t.Error("bypass under quantisation differs from the cached answer")
	}

	off := newEnv(t, envOptions{})
	r, err := off.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250*(1+1e-9), 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	if r.GetResult().GetReport().GetInputQuantizationRelativeTolerance() != 0 || r.GetResult().GetTemperatureK() != 250*(1+1e-9) {
		t.Errorf("quantisation off: tolerance %v, T %v", r.GetResult().GetReport().GetInputQuantizationRelativeTolerance(), r.GetResult().GetTemperatureK())
	}
	if _, err := New(Config{Cache: CacheConfig{Quantization: 0.01}}, nil, prometheus.NewRegistry()); err == nil || !strings.Contains(err.Error(), "Quantization") {
		t.Errorf("a coarse quantisation was accepted: %v", err)
	}
}

// TestFlashConcurrent runs unary, batch and stream flashes of different
// states and fluids from many goroutines (run with -race) through the
// pooled workspaces and the cache, and demands the bytes of a sequential
// reference for every answer.
func TestFlashConcurrent(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: 256}})
	ctx := testCtx(t)
	type job struct {
		fluid *fugadv1.Fluid
		x     []float64
		T, P  float64
	}
	jobs := []job{{gas10Fluid(), gas10X, 250, 5e6}, {gas10Fluid(), gas10X, 350, 5e6}, {wetFluid(), wetX, 310, 7e6}, {gasFluid(), gasX, 220, 4e6}}
	ref := make([][]byte, len(jobs))
	for i, j := range jobs {
		r, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: j.fluid, State: tpStateX(j.x, j.T, j.P), BypassCache: true})
		if err != nil {
			t.Fatal(err)
		}
		ref[i] = clearedBytes(t, r.GetResult())
	}
	var wg sync.WaitGroup
	errs := make(chan string, 64)
	for g := range 12 {
		wg.Go(func() {
			for k := range 6 {
				i := (g + k) % len(jobs)
				j := jobs[i]
				var got *fugadv1.FlashResult
				switch g % 3 {
				case 0:
					r, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: j.fluid, State: tpStateX(j.x, j.T, j.P), BypassCache: k%2 == 0})
					if err != nil {
						errs <- err.Error()
						return
					}
					got = r.GetResult()
				case 1:
					r, err := e.client.FlashBatch(ctx, &fugadv1.FlashBatchRequest{Fluid: j.fluid, MoleFractions: j.x,
						States: []*fugadv1.FlashState{tpStateX(nil, j.T, j.P), tpStateX(nil, j.T, j.P)}, BypassCache: k%2 == 1})
					if err != nil {
						errs <- err.Error()
						return
					}
					if string(clearedBytes(t, r.GetItems()[1].GetResult())) != string(ref[i]) {
						errs <- "batch item 1 differs"
					}
					got = r.GetItems()[0].GetResult()
				case 2:
					s, err := e.client.FlashStream(ctx)
					if err != nil {
						errs <- err.Error()
						return
					}
					if err := s.Send(&fugadv1.FlashStreamRequest{Fluid: j.fluid, State: tpStateX(j.x, j.T, j.P)}); err != nil {
						errs <- err.Error()
						return
					}
					r, err := s.Recv()
					if err != nil {
						errs <- err.Error()
						return
					}
					_ = s.CloseSend()
					got = r.GetResult()
				}
				if string(clearedBytes(t, got)) != string(ref[i]) {
					errs <- "answer differs from the sequential reference"
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
}
