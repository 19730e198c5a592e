package server

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/testutil"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/envelope"
	"github.com/fugad/fugad/thermo/eos"
)

// satRequest asks for a bubble or dew point of the 10-component test gas.
func satRequest(typ fugadv1.SaturationType, fixT bool, v float64) *fugadv1.SaturationPointRequest {
	r := &fugadv1.SaturationPointRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, Type: typ}
	if fixT {
		r.Specified = &fugadv1.SaturationPointRequest_TemperatureK{TemperatureK: v}
	} else {
		r.Specified = &fugadv1.SaturationPointRequest_PressurePa{PressurePa: v}
	}
	return r
}

// TestSaturationPointMatchesThermo checks SaturationPoint against direct
// calls of the envelope package's solvers, bit for bit: a bubble pressure,
// a dew temperature, and both dew pressures at a temperature in the
// retrograde range (between the critical temperature and the
// cricondentherm) chosen with branch LOWER and UPPER, and followed from a
// warm start.
func TestSaturationPointMatchesThermo(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	ctx := testCtx(t)
	mx := mixtureOf(t, eos.PR78, gas10IDs...)
	z := normalised(gas10X)
	sv, err := envelope.NewSolver(mx, envelope.Options{})
	if err != nil {
		t.Fatal(err)
	}
	// The retrograde range of the test gas, from its envelope.
	env, err := sv.Envelope(context.Background(), z, envelope.EnvelopeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(env.Critical) != 1 || !env.Cricondentherm.Found {
		t.Fatalf("test gas envelope: %d critical points, cricondentherm %+v", len(env.Critical), env.Cricondentherm)
	}
	tRetro := 0.5 * (env.Critical[0].T + env.Cricondentherm.T)
	if !(tRetro > env.Critical[0].T) {
		t.Fatalf("no retrograde range: Tc %v, cricondentherm %v", env.Critical[0].T, env.Cricondentherm.T)
	}
	B, D := fugadv1.SaturationType_SATURATION_TYPE_BUBBLE, fugadv1.SaturationType_SATURATION_TYPE_DEW
	cases := []struct {
		name   string
		req    *fugadv1.SaturationPointRequest
		branch envelope.BranchChoice
		lib    func(h envelope.Hint, pt *envelope.Point) error
	}{
		{"bubble pressure at 200 K", satRequest(B, true, 200), envelope.BranchAuto,
			func(h envelope.Hint, pt *envelope.Point) error {
				return sv.BubblePressure(context.Background(), 200, z, h, pt)
			}},
		{"dew temperature at 3 MPa", satRequest(D, false, 3e6), envelope.BranchAuto,
			func(h envelope.Hint, pt *envelope.Point) error {
				return sv.DewTemperature(context.Background(), 3e6, z, h, pt)
			}},
		{"lower dew pressure", satRequest(D, true, tRetro), envelope.BranchLower,
			func(h envelope.Hint, pt *envelope.Point) error {
				return sv.DewPressure(context.Background(), tRetro, z, h, pt)
			}},
		{"upper dew pressure", satRequest(D, true, tRetro), envelope.BranchUpper,
			func(h envelope.Hint, pt *envelope.Point) error {
				return sv.DewPressure(context.Background(), tRetro, z, h, pt)
			}},
	}
	var lower, upper float64
	for _, tc := range cases {
		tc.req.Branch = map[envelope.BranchChoice]fugadv1.SaturationBranch{
			envelope.BranchAuto: fugadv1.SaturationBranch_SATURATION_BRANCH_UNSPECIFIED, envelope.BranchLower: fugadv1.SaturationBranch_SATURATION_BRANCH_LOWER, envelope.BranchUpper: fugadv1.SaturationBranch_SATURATION_BRANCH_UPPER,
		}[tc.branch]
		got, err := e.client.SaturationPoint(ctx, tc.req)
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		pt := envelope.NewPoint(mx)
		if err := tc.lib(envelope.Hint{Branch: tc.branch}, pt); err != nil {
			t.Fatalf("%s: library: %v", tc.name, err)
		}
		checkSaturation(t, tc.name, got, pt, tc.req.GetType() == B, false)
		switch tc.branch {
		case envelope.BranchLower:
			lower = pt.P
		case envelope.BranchUpper:
			upper = pt.P
		}
		// Warm start: the response's own, one kelvin (or 1 %) away; the
		// library gets the same hint.
		next := proto.Clone(tc.req).(*fugadv1.SaturationPointRequest)
		next.WarmStart = got.GetWarmStart()
		// The wire carries K-values, so the server starts from ln(exp(ln K)).
		lnK := make([]float64, len(pt.LnK))
		for i, v := range pt.LnK {
			lnK[i] = math.Log(math.Exp(v))
		}
		h := envelope.Hint{Branch: tc.branch, LnK: lnK}
		var lib func() error
		if st, ok := next.GetSpecified().(*fugadv1.SaturationPointRequest_TemperatureK); ok {
			st.TemperatureK -= 1
			h.Start = pt.P
			T := st.TemperatureK
			if tc.req.GetType() == B {
				lib = func() error { return sv.BubblePressure(context.Background(), T, z, h, pt) }
			} else {
				lib = func() error { return sv.DewPressure(context.Background(), T, z, h, pt) }
			}
		} else {
			p := next.GetPressurePa() * 0.99
			next.Specified = &fugadv1.SaturationPointRequest_PressurePa{PressurePa: p}
			h.Start = pt.T
			lib = func() error { return sv.DewTemperature(context.Background(), p, z, h, pt) }
		}
		warm, err := e.client.SaturationPoint(ctx, next)
		if err != nil {
			t.Fatalf("%s (warm): %v", tc.name, err)
		}
		if err := lib(); err != nil {
			t.Fatal(err)
		}
		checkSaturation(t, tc.name+" (warm)", warm, pt, tc.req.GetType() == B, true)
	}
	if !(upper > 1.05*lower) {
		t.Errorf("retrograde dew pressures at %.2f K: lower %v Pa, upper %v Pa; want two distinct points", tRetro, lower, upper)
	}
}

func checkSaturation(t *testing.T, what string, got *fugadv1.SaturationPointResponse, pt *envelope.Point, bubble, warm bool) {
	t.Helper()
	label := fugadv1.PhaseLabel_PHASE_LABEL_LIQUID
	if bubble {
		label = fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR
	}
	if !sameBit(got.GetTemperatureK(), pt.T) || !sameBit(got.GetPressurePa(), pt.P) || got.GetIncipientPhase() != label ||
		!sameBits(got.GetIncipientMoleFractions(), pt.Incipient()) || !sameBits(got.GetKValues(), expAll(pt.LnK)) ||
		!sameBit(got.GetLiquidMolarVolumeM3PerMol(), pt.VLiquid) || !sameBit(got.GetVapourMolarVolumeM3PerMol(), pt.VVapour) {
		t.Errorf("%s: got %v K %v Pa %v, want %v K %v Pa", what, got.GetTemperatureK(), got.GetPressurePa(), got.GetIncipientPhase(), pt.T, pt.P)
	}
	r := got.GetReport()
	ie := fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION
	if warm {
		ie = fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START
	}
	iters := map[fugadv1.SolverStage]uint32{}
	for _, s := range r.GetStages() {
		iters[s.GetStage()] = s.GetIterations()
	}
	if r.GetLnPhiEvaluations() != uint64(pt.Report.LnPhiEvaluations) || !sameBit(r.GetFinalResidual(), pt.Report.Residual) || !r.GetConverged() || r.GetInitialEstimate() != ie ||
		iters[fugadv1.SolverStage_SOLVER_STAGE_SATURATION] != uint32(pt.Report.NewtonIterations) || iters[fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE] != uint32(pt.Report.EnvelopePoints) {
		t.Errorf("%s: report %v, solver %+v", what, r, pt.Report)
	}
}

// TestSaturationNoPoint checks NO_SATURATION_POINT: a dew pressure asked
// above the cricondentherm is FAILED_PRECONDITION with the numbers of the
// envelope in a NoSaturationDetail, which match the traced envelope.
func TestSaturationNoPoint(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	_, err := e.client.SaturationPoint(ctx, satRequest(fugadv1.SaturationType_SATURATION_TYPE_DEW, true, 400))
	st, ei, _ := details(t, err)
	if st.Code() != codes.FailedPrecondition || ei.GetReason() != ReasonNoSaturation || ei.GetDomain() != ErrorDomain {
		t.Fatalf("got %v (reason %q), want FAILED_PRECONDITION/%s", err, ei.GetReason(), ReasonNoSaturation)
	}
	var d *fugadv1.NoSaturationDetail
	for _, x := range st.Details() {
		if nd, ok := x.(*fugadv1.NoSaturationDetail); ok {
			d = nd
		}
	}
	if d == nil || d.GetField() != "temperature_k" || d.GetValue() != 400 || d.GetType() != fugadv1.SaturationType_SATURATION_TYPE_DEW || d.GetReason() == "" {
		t.Fatalf("NoSaturationDetail %v", d)
	}
	env, err := e.client.PhaseEnvelope(ctx, &fugadv1.PhaseEnvelopeRequest{Fluid: gas10Fluid(), MoleFractions: gas10X})
	if err != nil {
		t.Fatal(err)
	}
	if d.CricondenthermTemperatureK != nil {
		if ct := env.GetCricondentherm().GetTemperatureK(); math.Abs(d.GetCricondenthermTemperatureK()-ct) > 1e-6*ct || !(d.GetCricondenthermTemperatureK() < 400) {
			t.Errorf("detail cricondentherm %v K, envelope %v K", d.GetCricondenthermTemperatureK(), ct)
		}
	}
	if _, err := e.client.SaturationPoint(ctx, &fugadv1.SaturationPointRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, Type: fugadv1.SaturationType_SATURATION_TYPE_BUBBLE,
		Specified: &fugadv1.SaturationPointRequest_TemperatureK{TemperatureK: 200}, Branch: 7}); status.Code(err) != codes.InvalidArgument {
		t.Errorf("unknown branch: %v", err)
	}
}

// checkEnvelope compares a PhaseEnvelope response with a directly traced
// envelope, bit for bit.
func checkEnvelope(t *testing.T, got *fugadv1.PhaseEnvelopeResponse, want *envelope.Envelope, mx *eos.Mixture) {
	t.Helper()
	if len(got.GetPoints()) != len(want.Points) {
		t.Fatalf("%d points, want %d", len(got.GetPoints()), len(want.Points))
	}
	comparePoints := func(what string, g []*fugadv1.EnvelopePoint, w []envelope.EnvelopePoint) {
		for i, p := range g {
			q := &w[i]
			if !sameBit(p.GetTemperatureK(), q.T) || !sameBit(p.GetPressurePa(), q.P) || p.GetBranch() != wireBranch(q.Kind) || !sameBits(p.GetKValues(), expAll(q.LnK)) ||
				p.GetIterations() != uint32(q.Iterations) || p.GetMetastable() != q.Metastable || (p.ThirdPhaseTangentPlaneDistance != nil) != q.Checked {
				t.Errorf("%s point %d: %v, want %+v", what, i, p, *q)
				return
			}
		}
	}
	comparePoints("envelope", got.GetPoints(), want.Points)
	if len(got.GetCriticalPoints()) != len(want.Critical) {
		t.Fatalf("%d critical points, want %d", len(got.GetCriticalPoints()), len(want.Critical))
	}
	ews, fug := mx.NewWorkspace(), mx.NewFugacity()
	for i, c := range got.GetCriticalPoints() {
		w := want.Critical[i]
		if err := mx.Fugacity(ews, w.T, w.P, want.Z, eos.RootMinGibbs, 0, fug); err != nil {
			t.Fatal(err)
		}
		if !sameBit(c.GetTemperatureK(), w.T) || !sameBit(c.GetPressurePa(), w.P) || c.GetPointIndex() != uint32(w.Index) || !sameBit(c.GetMolarVolumeM3PerMol(), fug.V) ||
			got.GetPoints()[w.Index].GetBranch() != fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_CRITICAL {
			t.Errorf("critical point %d: %v, want %+v", i, c, w)
		}
	}
	for _, x := range []struct {
		g *fugadv1.EnvelopePoint
		w envelope.Extremum
	}{{got.GetCricondenbar(), want.Cricondenbar}, {got.GetCricondentherm(), want.Cricondentherm}} {
		if (x.g != nil) != x.w.Found || x.w.Found && (!sameBit(x.g.GetTemperatureK(), x.w.T) || !sameBit(x.g.GetPressurePa(), x.w.P) || x.g.GetBranch() != wireBranch(x.w.Kind)) {
			t.Errorf("extremum %v, want %+v", x.g, x.w)
		}
	}
	tr, r := got.GetTrace(), &want.Report
	if tr.GetPoints() != uint32(r.Points) || tr.GetNewtonIterations() != uint64(r.NewtonIterations) || tr.GetStepCuts() != uint32(r.StepCuts) || tr.GetFailures() != uint32(r.Failures) ||
		tr.GetStop() != wireStop(r.Stop) || tr.GetMaxIterationsPerPoint() != uint32(r.MaxIterations) || tr.GetMetastablePoints() != uint32(r.Metastable) || got.GetComplete() != want.Closed() {
		t.Errorf("trace %v, want %+v", tr, *r)
	}
	if len(got.GetQualityLines()) != len(want.Quality) {
		t.Fatalf("%d quality lines, want %d", len(got.GetQualityLines()), len(want.Quality))
	}
	newton, evals := r.NewtonIterations, r.LnPhiEvaluations
	for i, q := range got.GetQualityLines() {
		w := &want.Quality[i]
		if !sameBit(q.GetVapourFraction(), w.Beta) || len(q.GetPoints()) != len(w.Points) || q.GetTrace().GetStop() != wireStop(w.Report.Stop) {
			t.Errorf("quality line %d: β %v, %d points, stop %v; want %v, %d, %v", i, q.GetVapourFraction(), len(q.GetPoints()), q.GetTrace().GetStop(), w.Beta, len(w.Points), w.Report.Stop)
			continue
		}
		comparePoints("quality line", q.GetPoints(), w.Points)
		newton += w.Report.NewtonIterations
		evals += w.Report.LnPhiEvaluations
	}
	rep := got.GetReport()
	if len(rep.GetStages()) != 1 || rep.GetStages()[0].GetStage() != fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE || rep.GetStages()[0].GetIterations() != uint32(newton) ||
		rep.GetLnPhiEvaluations() != uint64(evals) || !rep.GetConverged() {
		t.Errorf("report %v, want %d Newton iterations, %d evaluations", rep, newton, evals)
	}
}

// TestPhaseEnvelopeMatchesThermo checks PhaseEnvelope against a direct
// envelope.Solver.Envelope call with the same options, bit for bit, with
// two quality lines; and physical sense of the answer: a single critical
// point between the cricondenbar and the cricondentherm, as for a lean
// natural gas (Michelsen & Mollerup 2007, ch. 12, the shape of a natural-
// gas envelope; common practice).
func TestPhaseEnvelopeMatchesThermo(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Cache: CacheConfig{Disabled: true}}})
	ctx := testCtx(t)
	mx := mixtureOf(t, eos.PR78, gas10IDs...)
	sv, err := envelope.NewSolver(mx, envelope.Options{})
	if err != nil {
		t.Fatal(err)
	}
	qs := []float64{0.2, 0.8}
	want, err := sv.Envelope(context.Background(), normalised(gas10X), envelope.EnvelopeOptions{StartPressure: 1e5, MaxPressure: 1e8, MaxPoints: DefaultMaxEnvelopePoints, Qualities: qs})
	if err != nil {
		t.Fatal(err)
	}
	got, err := e.client.PhaseEnvelope(ctx, &fugadv1.PhaseEnvelopeRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, QualityVapourFractions: qs})
	if err != nil {
		t.Fatal(err)
	}
	checkEnvelope(t, got, want, mx)
	if !got.GetComplete() || got.GetTrace().GetStop() != fugadv1.EnvelopeStop_ENVELOPE_STOP_LOW_PRESSURE || len(got.GetCriticalPoints()) != 1 {
		t.Fatalf("complete %v, stop %v, %d critical points", got.GetComplete(), got.GetTrace().GetStop(), len(got.GetCriticalPoints()))
	}
	c, bar, therm := got.GetCriticalPoints()[0], got.GetCricondenbar(), got.GetCricondentherm()
	if !(c.GetPressurePa() <= bar.GetPressurePa() && c.GetTemperatureK() <= therm.GetTemperatureK() && bar.GetTemperatureK() <= therm.GetTemperatureK()) {
		t.Errorf("critical %v, cricondenbar %v, cricondentherm %v out of the natural-gas order", c, bar, therm)
	}
	// Points before the critical one are dew points, after it bubble points.
	ci := int(c.GetPointIndex())
	for i, p := range got.GetPoints() {
		want := fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_DEW
		switch {
		case i == ci:
			want = fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_CRITICAL
		case i > ci:
			want = fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_BUBBLE
		}
		if p.GetBranch() != want {
			t.Errorf("point %d of %d (critical at %d): branch %v", i, len(got.GetPoints()), ci, p.GetBranch())
			break
		}
	}
	// Invalid quality lines name their field.
	_, err = e.client.PhaseEnvelope(ctx, &fugadv1.PhaseEnvelopeRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, QualityVapourFractions: []float64{0.5, 1}})
	wantViolation(t, err, codes.InvalidArgument, "quality_vapour_fractions[1]")
}

// TestPhaseEnvelopePointLimit checks the envelope-points limit: a request
// over the configured limit is INVALID_ARGUMENT/LIMIT_EXCEEDED on
// max_points; a trace capped by max_points is an answer with that many
// points, complete = false and stop MAXIMUM_POINTS; with max_points zero
// the configured limit caps the trace.
func TestPhaseEnvelopePointLimit(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxEnvelopePoints: 12}}})
	ctx := testCtx(t)
	_, err := e.client.PhaseEnvelope(ctx, &fugadv1.PhaseEnvelopeRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, MaxPoints: 13})
	wantViolation(t, err, codes.InvalidArgument, "max_points")
	if _, ei, _ := details(t, err); ei.GetReason() != ReasonLimitExceeded {
		t.Errorf("reason %q, want %q", ei.GetReason(), ReasonLimitExceeded)
	}
	for _, mp := range []uint32{8, 0} {
		got, err := e.client.PhaseEnvelope(ctx, &fugadv1.PhaseEnvelopeRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, MaxPoints: mp})
		if err != nil {
			t.Fatal(err)
		}
		want := int(mp)
		if mp == 0 {
			want = 12
		}
		if len(got.GetPoints()) != want || got.GetComplete() || got.GetTrace().GetStop() != fugadv1.EnvelopeStop_ENVELOPE_STOP_MAXIMUM_POINTS {
			t.Errorf("max_points %d: %d points, complete %v, stop %v", mp, len(got.GetPoints()), got.GetComplete(), got.GetTrace().GetStop())
		}
	}
}

// TestPhaseEnvelopeDeadline checks that the deadline reaches inside the
// trace: the solver slot is held by the test hook until 1 ms before the
// server's deadline, so the trace (with nine quality lines, tens of
// milliseconds of work) starts and is stopped inside its iterations
// (DEADLINE_EXCEEDED, counted as stopped work, not a partial answer).
func TestPhaseEnvelopeDeadline(t *testing.T) {
	const deadline = 300 * time.Millisecond
	// The hook spends the deadline but for a margin, so the trace starts
	// with that much time left and must be stopped inside its iterations.
	// How long the trace takes depends on the machine, so a few margins are
	// tried: the check holds when one of them leaves the solver running at
	// the deadline.
	var report []string
	for _, margin := range []time.Duration{time.Millisecond, 3 * time.Millisecond, 10 * time.Millisecond, 30 * time.Millisecond} {
		hook := func(ctx context.Context, method string) {
			if method != "PhaseEnvelope" {
				return
			}
			if d, ok := ctx.Deadline(); ok {
				time.Sleep(time.Until(d) - margin)
			}
		}
		e := newEnv(t, envOptions{hook: hook, cfg: Config{Limits: Limits{MaxDeadline: deadline}}})
		req := &fugadv1.PhaseEnvelopeRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, BypassCache: true,
			QualityVapourFractions: []float64{0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9}}
		_, err := e.client.PhaseEnvelope(testCtx(t), req)
		waitIdle(t, e)
		stopped := testutil.ToFloat64(e.srv.metrics.stopped.WithLabelValues("deadline_exceeded"))
		if status.Code(err) == codes.DeadlineExceeded && stopped == 1 {
			return
		}
		if c := status.Code(err); c != codes.DeadlineExceeded && c != codes.OK {
			t.Fatalf("margin %v: %v, want DEADLINE_EXCEEDED", margin, err)
		}
		report = append(report, fmt.Sprintf("margin %v: %v, fugad_solver_stopped_total{deadline_exceeded} = %v", margin, status.Code(err), stopped))
	}
	t.Errorf("no margin gave DEADLINE_EXCEEDED with the trace stopped inside its iterations: %v", report)
}

// TestEnvelopeCacheReplay checks the result cache of SaturationPoint,
// PhaseEnvelope and the new flash specifications: a hit replays the miss
// byte for byte apart from from_cache; a different specification value
// (or kind) is a different entry; bypass_cache neither reads nor writes.
func TestEnvelopeCacheReplay(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	cleared := func(m proto.Message) string {
		c := proto.Clone(m)
		switch v := c.(type) {
		case *fugadv1.SaturationPointResponse:
			v.Report.FromCache = false
		case *fugadv1.PhaseEnvelopeResponse:
			v.Report.FromCache = false
		case *fugadv1.FlashResponse:
			v.Result.Report.FromCache = false
		}
		b, err := proto.MarshalOptions{Deterministic: true}.Marshal(c)
		if err != nil {
			t.Fatal(err)
		}
		return string(b)
	}
	type call func(bypass bool) (proto.Message, bool, error)
	sat := func(req *fugadv1.SaturationPointRequest) call {
		return func(bypass bool) (proto.Message, bool, error) {
			r := proto.Clone(req).(*fugadv1.SaturationPointRequest)
			r.BypassCache = bypass
			m, err := e.client.SaturationPoint(ctx, r)
			return m, m.GetReport().GetFromCache(), err
		}
	}
	flashCall := func(st *fugadv1.FlashState) call {
		return func(bypass bool) (proto.Message, bool, error) {
			m, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st, BypassCache: bypass})
			return m, m.GetResult().GetReport().GetFromCache(), err
		}
	}
	calls := map[string]call{
		"bubble pressure": sat(satRequest(fugadv1.SaturationType_SATURATION_TYPE_BUBBLE, true, 200)),
		"dew pressure":    sat(satRequest(fugadv1.SaturationType_SATURATION_TYPE_DEW, true, 200)),
		"envelope": func(bypass bool) (proto.Message, bool, error) {
			m, err := e.client.PhaseEnvelope(ctx, &fugadv1.PhaseEnvelopeRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, QualityVapourFractions: []float64{0.5}, BypassCache: bypass})
			return m, m.GetReport().GetFromCache(), err
		},
		"P–H":   flashCall(phStateX(gas10X, 5e6, -9e4)),
		"P–S":   flashCall(psState(gas10X, 5e6, -40)),
		"T–V":   flashCall(tvState(gas10X, 250, 3e-4)),
		"U–V":   flashCall(uvState(gas10X, -9.2e4, 3e-4)),
		"P–β":   flashCall(pbState(gas10X, 5e6, 0.5)),
		"T–β":   flashCall(tbState(gas10X, 240, 0.5)),
		"T–β 0": flashCall(tbState(gas10X, 240, 0)),
	}
	seen := map[string]string{}
	for name, c := range calls {
		byp, fromCache, err := c(true)
		if err != nil || fromCache {
			t.Fatalf("%s bypass: %v, from_cache %v", name, err, fromCache)
		}
		miss, fromCache, err := c(false)
		if err != nil || fromCache {
			t.Fatalf("%s miss: %v, from_cache %v (bypass must not fill the cache)", name, err, fromCache)
		}
		hit, fromCache, err := c(false)
		if err != nil || !fromCache {
			t.Fatalf("%s hit: %v, from_cache %v", name, err, fromCache)
		}
		if cleared(hit) != cleared(miss) || cleared(miss) != cleared(byp) {
			t.Errorf("%s: the hit, the miss and the bypassed answer differ", name)
		}
		if other, dup := seen[cleared(miss)]; dup {
			t.Errorf("%s and %s share an answer: the cache key misses the specification", name, other)
		}
		seen[cleared(miss)] = name
	}
}

// TestFlashStreamStateFunctions runs a stream of P–H states (a throttled
// stream whose enthalpy falls step by step): each answer is that of a
// unary Flash carrying the previous answer's warm_start (temperature,
// pressure and phases), reported as WARM_START after the first, and agrees
// with the cold answer within the solver tolerance; a T–β message in the
// same stream is answered as well.
func TestFlashStreamStateFunctions(t *testing.T) {
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
		return r
	}
	var prev *fugadv1.FlashResult
	for step := range 6 {
		H := -9.0e4 - 300*float64(step)
		m := &fugadv1.FlashStreamRequest{Sequence: uint64(step), State: phStateX(nil, 5e6, H)}
		if step == 0 {
			m.Fluid, m.MoleFractions = gas10Fluid(), gas10X
		}
		r := send(m)
		if r.GetStatus().GetCode() != int32(codes.OK) {
			t.Fatalf("step %d: %v", step, r.GetStatus())
		}
		res := r.GetResult()
		st := phStateX(gas10X, 5e6, H)
		want := fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION
		if step > 0 {
			st.WarmStart = prev.GetWarmStart()
			want = fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START
		}
		if ie := res.GetReport().GetInitialEstimate(); ie != want {
			t.Errorf("step %d: initial estimate %v, want %v", step, ie, want)
		}
		unary, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: st, BypassCache: true})
		if err != nil {
			t.Fatal(err)
		}
		if string(clearedBytes(t, unary.GetResult())) != string(clearedBytes(t, res)) {
			t.Errorf("step %d: the stream's answer differs from the unary Flash with the previous warm_start", step)
		}
		cold, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: phStateX(gas10X, 5e6, H), BypassCache: true})
		if err != nil {
			t.Fatal(err)
		}
		if a, b := res.GetTemperatureK(), cold.GetResult().GetTemperatureK(); math.Abs(a-b) > 1e-6 {
			t.Errorf("step %d: T %v warm, %v cold", step, a, b)
		}
		if len(res.GetPhases()) != 2 {
			t.Errorf("step %d: %d phases, want the two-phase region", step, len(res.GetPhases()))
		}
		prev = res
	}
	// The same state as T–β: the implicit warm start (the last P–H
	// answer's pressure and phases) leads the solve to that pressure.
	r := send(&fugadv1.FlashStreamRequest{Sequence: 99, State: tbState(nil, prev.GetTemperatureK(), prev.GetVapourFraction())})
	if r.GetStatus().GetCode() != int32(codes.OK) || math.Abs(r.GetResult().GetPressurePa()-5e6) > 1e-6*5e6 {
		t.Errorf("T–β in the stream: %v, P %v Pa, want 5 MPa", r.GetStatus(), r.GetResult().GetPressurePa())
	}
	if err := stream.CloseSend(); err != nil {
		t.Fatal(err)
	}
	if _, err := stream.Recv(); !errors.Is(err, io.EOF) {
		t.Errorf("after CloseSend: %v", err)
	}
}
