package server

import (
	"context"
	"fmt"
	"strings"
	"sync"
	"testing"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Each limit of Config is checked at its value (accepted: the call gets
// past validation) and one beyond it (refused with the code, reason and
// field documented at Limits). The limits are configured small so that
// the requests stay small.

// wantLimit fails t unless err is INVALID_ARGUMENT with reason
// LIMIT_EXCEEDED and a violation on field.
func wantLimit(t *testing.T, what string, err error, field string) {
	t.Helper()
	wantViolation(t, err, codes.InvalidArgument, field)
	if _, ei, _ := details(t, err); ei.GetReason() != ReasonLimitExceeded {
		t.Errorf("%s: reason %q, want %q", what, ei.GetReason(), ReasonLimitExceeded)
	}
}

// wantAccepted fails t when err shows the request was refused by
// validation or a limit: any status other than INVALID_ARGUMENT and
// RESOURCE_EXHAUSTED (UNIMPLEMENTED for the endpoints without a solver
// counts as accepted).
func wantAccepted(t *testing.T, what string, err error) {
	t.Helper()
	if c := status.Code(err); c == codes.InvalidArgument || c == codes.ResourceExhausted || c == codes.Internal || c == codes.Unavailable {
		t.Errorf("%s: %v, want it accepted", what, err)
	}
}

// limitFluid is a fluid of n library components (n ≤ 12).
func limitFluid(n int) *fugadv1.Fluid {
	ids := []string{"methane", "ethane", "propane", "n-butane", "n-pentane", "n-hexane", "nitrogen", "carbon-dioxide",
		"isobutane", "isopentane", "n-heptane", "n-octane"}
	return fluidOf(fugadv1.Model_MODEL_PR78, ids[:n]...)
}

// endpointsFor calls every endpoint that takes a Fluid with fl and an even
// composition, and returns each call's error by name. FlashStream reports
// the status of its one message.
func endpointsFor(t *testing.T, e *testEnv, fl *fugadv1.Fluid) map[string]error {
	t.Helper()
	ctx := testCtx(t)
	n := len(fl.GetComponents())
	x := fractions(n)
	st := tpStateX(x, 300, 2e6)
	out := map[string]error{}
	_, out["FugacityCoefficients"] = e.client.FugacityCoefficients(ctx, &fugadv1.FugacityCoefficientsRequest{
		Fluid: fl, TemperatureK: 300, PressurePa: 2e6, MoleFractions: x, Root: fugadv1.RootChoice_ROOT_CHOICE_MINIMUM_GIBBS})
	_, out["Flash"] = e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: fl, State: st})
	_, out["FlashBatch"] = e.client.FlashBatch(ctx, &fugadv1.FlashBatchRequest{Fluid: fl, States: []*fugadv1.FlashState{st}})
	_, out["SaturationPoint"] = e.client.SaturationPoint(ctx, &fugadv1.SaturationPointRequest{Fluid: fl, MoleFractions: x,
		Type: fugadv1.SaturationType_SATURATION_TYPE_DEW, Specified: &fugadv1.SaturationPointRequest_PressurePa{PressurePa: 2e6}})
	_, out["PhaseEnvelope"] = e.client.PhaseEnvelope(ctx, &fugadv1.PhaseEnvelopeRequest{Fluid: fl, MoleFractions: x})
	stream, err := e.client.FlashStream(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if err := stream.Send(&fugadv1.FlashStreamRequest{Sequence: 1, Fluid: fl, State: st}); err != nil {
		t.Fatal(err)
	}
	r, err := stream.Recv()
	if err != nil {
		t.Fatal(err)
	}
	out["FlashStream"] = statusErr(r.GetStatus())
	if err := stream.CloseSend(); err != nil {
		t.Fatal(err)
	}
	return out
}

// TestLimitMaxComponents: a fluid of MaxComponents components is accepted
// by every endpoint; one more is INVALID_ARGUMENT/LIMIT_EXCEEDED on
// fluid.components everywhere.
func TestLimitMaxComponents(t *testing.T) {
	const limit = 4
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxComponents: limit}}})
	for name, err := range endpointsFor(t, e, limitFluid(limit)) {
		wantAccepted(t, fmt.Sprintf("%s with %d components", name, limit), err)
	}
	for name, err := range endpointsFor(t, e, limitFluid(limit+1)) {
		wantLimit(t, name, err, "fluid.components")
	}
}

// TestLimitMaxInteractionParameters: with the default bound, one override
// per pair of MaxComponents components is accepted, one more entry is
// INVALID_ARGUMENT/LIMIT_EXCEEDED on fluid.interaction_parameters.
func TestLimitMaxInteractionParameters(t *testing.T) {
	const n = 4
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxComponents: n}}})
	if got, want := e.srv.Config().MaxInteractionParameters, n*(n-1)/2; got != want {
		t.Fatalf("default MaxInteractionParameters = %d, want %d (one per pair)", got, want)
	}
	fl := limitFluid(n)
	for i := range n {
		for j := i + 1; j < n; j++ {
			fl.InteractionParameters = append(fl.InteractionParameters, &fugadv1.InteractionParameter{I: uint32(i), J: uint32(j), K0: 0.01})
		}
	}
	req := &fugadv1.FugacityCoefficientsRequest{Fluid: fl, TemperatureK: 300, PressurePa: 2e6, MoleFractions: fractions(n), Root: fugadv1.RootChoice_ROOT_CHOICE_VAPOUR}
	if _, err := e.client.FugacityCoefficients(testCtx(t), req); err != nil {
		t.Errorf("%d overrides: %v", len(fl.InteractionParameters), err)
	}
	fl.InteractionParameters = append(fl.InteractionParameters, &fugadv1.InteractionParameter{I: 0, J: 1, K0: 0.02})
	_, err := e.client.FugacityCoefficients(testCtx(t), req)
	wantLimit(t, "one override too many", err, "fluid.interaction_parameters")

	// An explicit bound below the number of pairs.
	e2 := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxComponents: n, MaxInteractionParameters: 2}}})
	fl.InteractionParameters = fl.InteractionParameters[:2]
	if _, err := e2.client.FugacityCoefficients(testCtx(t), req); err != nil {
		t.Errorf("2 overrides with the bound 2: %v", err)
	}
	fl.InteractionParameters = append(fl.InteractionParameters, &fugadv1.InteractionParameter{I: 2, J: 3, K0: 0.02})
	_, err = e2.client.FugacityCoefficients(testCtx(t), req)
	wantLimit(t, "3 overrides with the bound 2", err, "fluid.interaction_parameters")
}

// TestLimitMaxBatchStates: MaxBatchStates states give one item each; one
// more is INVALID_ARGUMENT/LIMIT_EXCEEDED on states.
func TestLimitMaxBatchStates(t *testing.T) {
	const limit = 3
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxBatchStates: limit}}})
	req := &fugadv1.FlashBatchRequest{Fluid: gasFluid(), MoleFractions: gasX}
	for i := range limit {
		req.States = append(req.States, tpStateX(nil, 220+10*float64(i), 4e6))
	}
	resp, err := e.client.FlashBatch(testCtx(t), req)
	if err != nil {
		t.Fatalf("%d states: %v", limit, err)
	}
	if len(resp.GetItems()) != limit {
		t.Fatalf("%d items for %d states", len(resp.GetItems()), limit)
	}
	for i, it := range resp.GetItems() {
		wantAccepted(t, fmt.Sprintf("item %d", i), statusErr(it.GetStatus()))
	}
	req.States = append(req.States, tpStateX(nil, 260, 4e6))
	_, err = e.client.FlashBatch(testCtx(t), req)
	wantLimit(t, "one state too many", err, "states")
}

// TestLimitMaxEnvelopePoints: max_points equal to MaxEnvelopePoints, and
// zero (meaning the limit), are accepted; one more is
// INVALID_ARGUMENT/LIMIT_EXCEEDED on max_points.
func TestLimitMaxEnvelopePoints(t *testing.T) {
	const limit = 50
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxEnvelopePoints: limit}}})
	for _, mp := range []uint32{0, 3, limit} {
		req := envReq()
		req.MaxPoints = mp
		resp, err := e.client.PhaseEnvelope(testCtx(t), req)
		wantAccepted(t, fmt.Sprintf("max_points %d", mp), err)
		if err == nil && len(resp.GetPoints()) > limit {
			t.Errorf("max_points %d: %d points, over the limit %d", mp, len(resp.GetPoints()), limit)
		}
	}
	req := envReq()
	req.MaxPoints = limit + 1
	_, err := e.client.PhaseEnvelope(testCtx(t), req)
	wantLimit(t, "max_points over the limit", err, "max_points")
}

// padTo returns a copy of req whose encoding is exactly size bytes, made
// up with an unknown field (number 1000), which the server decodes and
// ignores.
func padTo[M proto.Message](t *testing.T, req M, size int) M {
	t.Helper()
	out := proto.Clone(req).(M)
	base := proto.Size(out)
	for p := 0; p <= size; p++ {
		raw := protowire.AppendTag(nil, 1000, protowire.BytesType)
		raw = protowire.AppendBytes(raw, make([]byte, p))
		if base+len(raw) == size {
			out.ProtoReflect().SetUnknown(protoreflect.RawFields(raw))
			if got := proto.Size(out); got != size {
				t.Fatalf("padded to %d bytes, want %d", got, size)
			}
			return out
		}
	}
	t.Fatalf("cannot pad a %d-byte message to %d bytes", base, size)
	return out
}

// TestLimitMaxMessageBytes: a request of exactly MaxMessageBytes is
// answered and one byte more is refused by gRPC with RESOURCE_EXHAUSTED;
// likewise a response of exactly MaxMessageBytes is sent and a limit one
// byte smaller makes the server refuse to send it.
func TestLimitMaxMessageBytes(t *testing.T) {
	const limit = 4096
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxMessageBytes: limit}}})
	req := fugacityReq()
	req.BypassCache = true
	if _, err := e.client.FugacityCoefficients(testCtx(t), padTo(t, req, limit)); err != nil {
		t.Errorf("request of %d bytes: %v", limit, err)
	}
	_, err := e.client.FugacityCoefficients(testCtx(t), padTo(t, req, limit+1))
	if status.Code(err) != codes.ResourceExhausted {
		t.Errorf("request of %d bytes: %v, want RESOURCE_EXHAUSTED", limit+1, err)
	}

	// The response side: twelve components with every derivative make a
	// response much larger than its request. Its exact size comes from an
	// unlimited server (bypassing the cache, whose hits are 4 bytes longer).
	big := &fugadv1.FugacityCoefficientsRequest{Fluid: limitFluid(12), TemperatureK: 300, PressurePa: 2e6, MoleFractions: fractions(12),
		Root: fugadv1.RootChoice_ROOT_CHOICE_MINIMUM_GIBBS, TemperatureDerivatives: true, PressureDerivatives: true, CompositionDerivatives: true,
		BypassCache: true}
	ref, err := newEnv(t, envOptions{}).client.FugacityCoefficients(testCtx(t), big)
	if err != nil {
		t.Fatal(err)
	}
	size := proto.Size(ref)
	if proto.Size(big) >= size-1 {
		t.Fatalf("request %d bytes, response %d: the test needs a larger response", proto.Size(big), size)
	}
	at := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxMessageBytes: size}}})
	if _, err := at.client.FugacityCoefficients(testCtx(t), big); err != nil {
		t.Errorf("response of %d bytes with the limit %d: %v", size, size, err)
	}
	below := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxMessageBytes: size - 1}}})
	if _, err := below.client.FugacityCoefficients(testCtx(t), big); status.Code(err) != codes.ResourceExhausted {
		t.Errorf("response of %d bytes with the limit %d: %v, want RESOURCE_EXHAUSTED", size, size-1, err)
	}
}

// deadlineHook records the deadline each solve of method sees.
type deadlineHook struct {
	mu   sync.Mutex
	seen []time.Time
	none int
}

func (d *deadlineHook) hook(method string) func(ctx context.Context, m string) {
	return func(ctx context.Context, m string) {
		if m != method {
			return
		}
		d.mu.Lock()
		defer d.mu.Unlock()
		if dl, ok := ctx.Deadline(); ok {
			d.seen = append(d.seen, dl)
		} else {
			d.none++
		}
	}
}

func (d *deadlineHook) last(t *testing.T) time.Time {
	t.Helper()
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.none > 0 || len(d.seen) == 0 {
		t.Fatalf("solves without a deadline: %d; with one: %d", d.none, len(d.seen))
	}
	return d.seen[len(d.seen)-1]
}

// TestLimitMaxDeadline: a unary call whose deadline is within MaxDeadline
// keeps it; a longer deadline, or none, is cut to MaxDeadline; each
// FlashStream message gets at most MaxDeadline; and work still running at
// the capped deadline ends with DEADLINE_EXCEEDED, reason
// DEADLINE_EXCEEDED, and is stopped. The deadlines compared are those the
// solve sees, on calls that bypass the result cache: a cached solve runs
// under a context detached from its callers' deadlines (it may serve
// several), which is cancelled when the last caller waiting for it has
// gone — checked at the end.
func TestLimitMaxDeadline(t *testing.T) {
	const capD = 10 * time.Minute
	const slack = 30 * time.Second // transmission and scheduling, generously
	var dh deadlineHook
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxDeadline: capD}}, hook: dh.hook("FugacityCoefficients")})
	call := func(ctx context.Context) {
		t.Helper()
		r := fugacityReq()
		r.BypassCache = true
		if _, err := e.client.FugacityCoefficients(ctx, r); err != nil {
			t.Fatal(err)
		}
	}
	start := time.Now()
	short, cancel := context.WithTimeout(context.Background(), capD/2)
	defer cancel()
	call(short)
	if d := dh.last(t).Sub(start); d < capD/2-slack || d > capD/2+slack {
		t.Errorf("deadline %v within the cap: the solve saw %v", capD/2, d)
	}
	start = time.Now()
	long, cancel2 := context.WithTimeout(context.Background(), 6*capD)
	defer cancel2()
	call(long)
	if d := dh.last(t).Sub(start); d < capD-slack || d > capD+slack {
		t.Errorf("deadline %v beyond the cap %v: the solve saw %v", 6*capD, capD, d)
	}
	start = time.Now()
	call(context.Background())
	if d := dh.last(t).Sub(start); d < capD-slack || d > capD+slack {
		t.Errorf("no deadline, cap %v: the solve saw %v", capD, d)
	}

	// Stream messages.
	var sh deadlineHook
	es := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxDeadline: capD}}, hook: sh.hook("FlashStream")})
	stream, err := es.client.FlashStream(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	start = time.Now()
	if err := stream.Send(&fugadv1.FlashStreamRequest{Sequence: 1, Fluid: gasFluid(), State: tpState(220, 4e6), BypassCache: true}); err != nil {
		t.Fatal(err)
	}
	if _, err := stream.Recv(); err != nil {
		t.Fatal(err)
	}
	if d := sh.last(t).Sub(start); d > capD+slack {
		t.Errorf("stream message: the solve saw a deadline %v away, over the cap %v", d, capD)
	}
	if err := stream.CloseSend(); err != nil {
		t.Fatal(err)
	}

	// Beyond the cap: a solve held until its context ends is stopped by
	// the capped deadline, directly or through the cache.
	stopped := make(chan struct{}, 2)
	ec := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxDeadline: 200 * time.Millisecond}}, hook: func(ctx context.Context, m string) {
		if m != "FugacityCoefficients" {
			return
		}
		select {
		case <-ctx.Done():
			stopped <- struct{}{}
		case <-time.After(time.Minute):
		}
	}})
	for _, bypass := range []bool{true, false} {
		r := fugacityReq()
		r.BypassCache = bypass
		_, err := ec.client.FugacityCoefficients(long, r)
		_, ei, _ := details(t, err)
		if status.Code(err) != codes.DeadlineExceeded || ei.GetReason() != ReasonDeadline {
			t.Errorf("bypass %v, held past the capped deadline: %v (reason %q), want DEADLINE_EXCEEDED/%s", bypass, err, ei.GetReason(), ReasonDeadline)
		}
		select {
		case <-stopped:
		case <-time.After(30 * time.Second):
			t.Errorf("bypass %v: the held solve was not stopped after the deadline", bypass)
		}
	}
}

// TestLimitStreamIdleTimeout: a stream whose messages come closer together
// than StreamIdleTimeout stays open for longer than the timeout in total;
// once no message comes for the timeout it is ended with
// DEADLINE_EXCEEDED, reason STREAM_IDLE.
func TestLimitStreamIdleTimeout(t *testing.T) {
	const idle = time.Second
	const gap = idle / 4
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{StreamIdleTimeout: idle}}})
	stream, err := e.client.FlashStream(testCtx(t))
	if err != nil {
		t.Fatal(err)
	}
	start := time.Now()
	var lastSend time.Time
	for i := range 6 {
		m := &fugadv1.FlashStreamRequest{Sequence: uint64(i), State: tpStateX(nil, 220+float64(i), 4e6)}
		if i == 0 {
			m.Fluid, m.MoleFractions = gasFluid(), gasX
		}
		lastSend = time.Now()
		if err := stream.Send(m); err != nil {
			t.Fatal(err)
		}
		r, err := stream.Recv()
		if err != nil {
			t.Fatalf("message %d, %v after the start: %v", i, time.Since(start), err)
		}
		wantAccepted(t, fmt.Sprintf("message %d", i), statusErr(r.GetStatus()))
		time.Sleep(gap)
	}
	if open := time.Since(start); open <= idle {
		t.Fatalf("the stream was open for only %v; the test must outlast the idle timeout %v", open, idle)
	}
	_, err = stream.Recv()
	_, ei, _ := details(t, err)
	if status.Code(err) != codes.DeadlineExceeded || ei.GetReason() != ReasonStreamIdle {
		t.Fatalf("idle stream: %v (reason %q), want DEADLINE_EXCEEDED/%s", err, ei.GetReason(), ReasonStreamIdle)
	}
	// The server restarts its idle timer when a message arrives, which is
	// after the client sent it.
	if waited := time.Since(lastSend); waited < idle {
		t.Errorf("ended %v after the last message was sent, before the idle timeout %v", waited, idle)
	}
}

// TestLimitMaxConcurrentSolves: MaxConcurrentSolves calls solve at once;
// the next is shed at once with UNAVAILABLE, reason OVERLOADED, and a
// RetryInfo; once the slots are free a call is answered again.
func TestLimitMaxConcurrentSolves(t *testing.T) {
	const limit = 3
	hook, entered, release := holdHook("FugacityCoefficients")
	e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: limit}, hook: hook})
	ctx := testCtx(t)
	req := fugacityReq()
	req.BypassCache = true // no collapsing of the identical held calls
	var wg sync.WaitGroup
	errs := make(chan error, limit)
	for range limit {
		wg.Go(func() {
			_, err := e.client.FugacityCoefficients(ctx, req)
			errs <- err
		})
	}
	for range limit {
		<-entered
	}
	_, err := e.client.FugacityCoefficients(ctx, req)
	st, ei, _ := details(t, err)
	if st.Code() != codes.Unavailable || ei.GetReason() != ReasonOverloaded {
		t.Errorf("call over the limit: %v (reason %q), want UNAVAILABLE/%s", err, ei.GetReason(), ReasonOverloaded)
	}
	retry := false
	for _, d := range st.Details() {
		if _, ok := d.(*errdetails.RetryInfo); ok {
			retry = true
		}
	}
	if !retry {
		t.Errorf("shed call without RetryInfo: %v", st.Proto())
	}
	close(release)
	wg.Wait()
	close(errs)
	for err := range errs {
		if err != nil {
			t.Errorf("held call: %v", err)
		}
	}
	if _, err := e.client.FugacityCoefficients(ctx, req); err != nil {
		t.Errorf("after the slots were freed: %v", err)
	}
}

// TestLimitConfigRejectsNegative: a negative limit is a configuration
// error naming the field, not a silent default.
func TestLimitConfigRejectsNegative(t *testing.T) {
	cases := map[string]Config{
		"MaxComponents":            {Limits: Limits{MaxComponents: -1}},
		"MaxBatchStates":           {Limits: Limits{MaxBatchStates: -1}},
		"MaxEnvelopePoints":        {Limits: Limits{MaxEnvelopePoints: -1}},
		"MaxInteractionParameters": {Limits: Limits{MaxInteractionParameters: -1}},
		"MaxMessageBytes":          {Limits: Limits{MaxMessageBytes: -1}},
		"MaxDeadline":              {Limits: Limits{MaxDeadline: -time.Second}},
		"StreamIdleTimeout":        {Limits: Limits{StreamIdleTimeout: -time.Second}},
		"MaxConcurrentSolves":      {MaxConcurrentSolves: -1},
	}
	for field, cfg := range cases {
		_, err := New(cfg, nil, nil)
		if err == nil || !strings.Contains(err.Error(), field) {
			t.Errorf("%s negative: %v, want an error naming it", field, err)
		}
	}
}
