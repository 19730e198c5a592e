package server

import (
	"context"
	"errors"
	"io"
	"math"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	reflectionpb "google.golang.org/grpc/reflection/grpc_reflection_v1"
	"google.golang.org/grpc/status"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

func healthStatus(t *testing.T, conn *grpc.ClientConn, service string) healthpb.HealthCheckResponse_ServingStatus {
	t.Helper()
	r, err := healthpb.NewHealthClient(conn).Check(testCtx(t), &healthpb.HealthCheckRequest{Service: service})
	if err != nil {
		t.Fatalf("health %q: %v", service, err)
	}
	return r.GetStatus()
}

// TestHealth checks the overall, service, readiness and liveness statuses.
func TestHealth(t *testing.T) {
	e := newEnv(t, envOptions{})
	for _, s := range []string{"", "fugad.v1.FugadService", HealthReadiness, HealthLiveness} {
		if got := healthStatus(t, e.conn, s); got != healthpb.HealthCheckResponse_SERVING {
			t.Errorf("%q: %v, want SERVING", s, got)
		}
	}
	_, err := healthpb.NewHealthClient(e.conn).Check(testCtx(t), &healthpb.HealthCheckRequest{Service: "nonexistent"})
	if status.Code(err) != codes.NotFound {
		t.Errorf("unknown service: %v, want NOT_FOUND", err)
	}
	for _, en := range e.logs.All() {
		if m, _ := en.ContextMap()["method"].(string); strings.Contains(m, "Health") {
			t.Errorf("health check logged: %v", en)
		}
	}
}

// TestReflection checks that reflection lists the service when on, and is
// absent when off.
func TestReflection(t *testing.T) {
	list := func(conn *grpc.ClientConn) ([]string, error) {
		st, err := reflectionpb.NewServerReflectionClient(conn).ServerReflectionInfo(testCtx(t))
		if err != nil {
			return nil, err
		}
		// Send reports io.EOF when the server has already ended the stream
		// (reflection off); the status then comes from Recv.
		if err := st.Send(&reflectionpb.ServerReflectionRequest{MessageRequest: &reflectionpb.ServerReflectionRequest_ListServices{}}); err != nil && err != io.EOF {
			return nil, err
		}
		r, err := st.Recv()
		if err != nil {
			return nil, err
		}
		var names []string
		for _, s := range r.GetListServicesResponse().GetService() {
			names = append(names, s.GetName())
		}
		return names, nil
	}
	on := newEnv(t, envOptions{host: HostOptions{Reflection: true}})
	names, err := list(on.conn)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(strings.Join(names, " "), "fugad.v1.FugadService") {
		t.Errorf("reflection lists %v, want fugad.v1.FugadService", names)
	}
	off := newEnv(t, envOptions{})
	if _, err := list(off.conn); status.Code(err) != codes.Unimplemented {
		t.Errorf("reflection off: %v, want UNIMPLEMENTED", err)
	}
}

// holdHook returns a solve hook that signals entered and blocks until
// release is closed, for the method given.
func holdHook(method string) (hook func(context.Context, string), entered chan struct{}, release chan struct{}) {
	entered, release = make(chan struct{}, 16), make(chan struct{})
	return func(ctx context.Context, m string) {
		if m != method {
			return
		}
		entered <- struct{}{}
		select {
		case <-release:
		case <-ctx.Done():
		}
	}, entered, release
}

// TestOverloadSheds fills the solver pool and checks that a further call
// is refused at once with UNAVAILABLE/OVERLOADED and counted.
func TestOverloadSheds(t *testing.T) {
	hook, entered, release := holdHook("FugacityCoefficients")
	e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: 1}, hook: hook})
	ctx := testCtx(t)
	done := make(chan error, 1)
	go func() { _, err := e.client.FugacityCoefficients(ctx, fugacityReq()); done <- err }()
	<-entered
	// The deadline is far away: a shed call must not wait for a slot. (An
	// identical request would join the held solve through the cache, so
	// this one differs.)
	other := fugacityReq()
	other.TemperatureK = 260
	_, err := e.client.FugacityCoefficients(ctx, other)
	st, ei, _ := details(t, err)
	if st.Code() != codes.Unavailable || ei.GetReason() != ReasonOverloaded {
		t.Fatalf("got %v, want UNAVAILABLE/OVERLOADED", err)
	}
	// A batch is shed the same way.
	if _, err := e.client.FlashBatch(ctx, batchReq()); status.Code(err) != codes.Unavailable {
		t.Errorf("batch under overload: %v", err)
	}
	close(release)
	if err := <-done; err != nil {
		t.Fatalf("held call: %v", err)
	}
	if got := testutil.ToFloat64(e.srv.metrics.shed.WithLabelValues("FugacityCoefficients")); got != 1 {
		t.Errorf("fugad_shed_total{FugacityCoefficients} = %v, want 1", got)
	}
	// The slot is free again.
	if _, err := e.client.FugacityCoefficients(ctx, fugacityReq()); err != nil {
		t.Errorf("after release: %v", err)
	}
}

// TestPanicRecovered checks that a panic in a handler becomes INTERNAL, is
// counted and logged with the request, and that the server keeps serving.
func TestPanicRecovered(t *testing.T) {
	hook := func(ctx context.Context, m string) {
		if m == "FugacityCoefficients" || m == "FlashBatch" {
			panic("injected defect")
		}
	}
	e := newEnv(t, envOptions{hook: hook})
	ctx := testCtx(t)
	_, err := e.client.FugacityCoefficients(ctx, fugacityReq())
	if status.Code(err) != codes.Internal {
		t.Fatalf("got %v, want INTERNAL", err)
	}
	// A panic inside a batch worker fails only its item.
	resp, err := e.client.FlashBatch(ctx, batchReq())
	if err != nil {
		t.Fatal(err)
	}
	for i, it := range resp.GetItems() {
		if codes.Code(it.GetStatus().GetCode()) != codes.Internal {
			t.Errorf("item %d: %v, want INTERNAL", i, it.GetStatus())
		}
	}
	if got := testutil.ToFloat64(e.srv.metrics.panics); got != 3 {
		t.Errorf("fugad_panics_total = %v, want 3", got)
	}
	logged := false
	for _, en := range e.logs.FilterMessage("panic recovered").All() {
		if req, ok := en.ContextMap()["request"].(string); ok && strings.Contains(req, "methane") {
			logged = true
		}
	}
	if !logged {
		t.Error("panic not logged with its request")
	}
	if _, err := e.client.ListModels(ctx, &fugadv1.ListModelsRequest{}); err != nil {
		t.Errorf("server not serving after panic: %v", err)
	}
}

// TestMetrics checks the exposition after some calls: the fugad_ and gRPC
// metrics are present and the exposition passes promlint.
func TestMetrics(t *testing.T) {
	e := newEnv(t, envOptions{})
	e.reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	ctx := testCtx(t)
	if _, err := e.client.FugacityCoefficients(ctx, fugacityReq()); err != nil {
		t.Fatal(err)
	}
	// A two-phase and a single-phase flash (the test gas at 220 K, 4 MPa
	// and at 300 K, 5 MPa).
	for _, st := range []*fugadv1.FlashState{tpState(220, 4e6), tpState(300, 5e6)} {
		if _, err := e.client.Flash(ctx, &fugadv1.FlashRequest{Fluid: gasFluid(), State: st}); err != nil {
			t.Fatal(err)
		}
	}
	e.srv.metrics.shed.WithLabelValues("Flash").Inc()

	srv := httptest.NewServer(MetricsHandler(e.reg))
	defer srv.Close()
	res, err := http.Get(srv.URL)
	if err != nil {
		t.Fatal(err)
	}
	body, _ := io.ReadAll(res.Body)
	_ = res.Body.Close()
	text := string(body)
	for _, name := range []string{
		"fugad_solver_iterations_bucket{stage=\"stability\"",
		"fugad_solver_iterations_bucket{stage=\"newton\"",
		"fugad_solver_iterations_bucket{stage=\"successive_substitution\"",
		"fugad_solver_iterations_bucket{stage=\"rachford_rice\"",
		"fugad_solver_lnphi_evaluations_count 3",
		"fugad_solve_duration_seconds_bucket{spec=\"fugacity\"",
		"fugad_solve_duration_seconds_count{spec=\"tp\"} 2",
		"fugad_phases_total{phases=\"1\"} 1",
		"fugad_phases_total{phases=\"2\"} 1",
		"fugad_shed_total{method=\"Flash\"} 1",
		"fugad_panics_total 0",
		"grpc_server_handled_total{grpc_code=\"OK\",grpc_method=\"FugacityCoefficients\"",
		"grpc_server_handled_total{grpc_code=\"OK\",grpc_method=\"Flash\"",
		"grpc_server_handling_seconds_bucket",
		"go_goroutines", "process_cpu_seconds_total",
	} {
		if !strings.Contains(text, name) {
			t.Errorf("exposition lacks %s", name)
		}
	}
	problems, err := testutil.GatherAndLint(e.reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
}

// TestCallLog checks the one log line per finished call.
func TestCallLog(t *testing.T) {
	e := newEnv(t, envOptions{})
	if _, err := e.client.FlashBatch(testCtx(t), batchReq()); err != nil {
		t.Fatal(err)
	}
	lines := e.logs.FilterMessage("call").All()
	if len(lines) != 1 {
		t.Fatalf("%d call lines, want 1", len(lines))
	}
	m := lines[0].ContextMap()
	if m["method"] != fugadv1.FugadService_FlashBatch_FullMethodName || m["code"] != "OK" || m["states"] != int64(2) {
		t.Errorf("log fields %v", m)
	}
	if _, ok := m["duration"]; !ok {
		t.Errorf("no duration in %v", m)
	}
}

// TestGracefulDrain runs over loopback TCP: during a shutdown health turns
// NOT_SERVING, the call in flight completes, and new calls are refused.
func TestGracefulDrain(t *testing.T) {
	hook, entered, release := holdHook("FugacityCoefficients")
	e := newEnv(t, envOptions{tcp: true, hook: hook, host: HostOptions{DrainDelay: 300 * time.Millisecond, DrainTimeout: 10 * time.Second}})
	ctx := testCtx(t)
	inflight := make(chan error, 1)
	go func() { _, err := e.client.FugacityCoefficients(ctx, fugacityReq()); inflight <- err }()
	<-entered

	stopped := make(chan bool, 1)
	go func() { stopped <- e.host.Shutdown() }()

	// Health flips during the drain delay.
	deadline := time.Now().Add(5 * time.Second)
	for healthStatus(t, e.conn, "") != healthpb.HealthCheckResponse_NOT_SERVING {
		if time.Now().After(deadline) {
			t.Fatal("health never turned NOT_SERVING")
		}
		time.Sleep(10 * time.Millisecond)
	}
	if got := healthStatus(t, e.conn, HealthReadiness); got != healthpb.HealthCheckResponse_NOT_SERVING {
		t.Errorf("readiness %v during drain", got)
	}
	if got := healthStatus(t, e.conn, HealthLiveness); got != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("liveness %v during drain, want SERVING", got)
	}

	// Once the graceful stop has begun, new connections are refused.
	refused := false
	for i := 0; i < 100 && !refused; i++ {
		conn, err := grpc.NewClient(e.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			t.Fatal(err)
		}
		cctx, cancel := context.WithTimeout(ctx, 200*time.Millisecond)
		_, err = fugadv1.NewFugadServiceClient(conn).ListModels(cctx, &fugadv1.ListModelsRequest{})
		cancel()
		_ = conn.Close()
		if c := status.Code(err); c == codes.Unavailable || c == codes.DeadlineExceeded {
			refused = true
		}
		time.Sleep(20 * time.Millisecond)
	}
	if !refused {
		t.Error("new calls still accepted during the drain")
	}
	select {
	case <-stopped:
		t.Fatal("shutdown finished while a call was in flight")
	default:
	}
	close(release)
	if err := <-inflight; err != nil {
		t.Errorf("in-flight call failed: %v", err)
	}
	if graceful := <-stopped; !graceful {
		t.Error("drain was not graceful")
	}
}

// TestDrainTimeoutStopsHard checks the safety net: a call that outlives the
// drain timeout is cut off and Shutdown still returns.
func TestDrainTimeoutStopsHard(t *testing.T) {
	hook, entered, release := holdHook("FugacityCoefficients")
	defer close(release)
	e := newEnv(t, envOptions{tcp: true, hook: hook, host: HostOptions{DrainTimeout: 200 * time.Millisecond}})
	inflight := make(chan error, 1)
	go func() { _, err := e.client.FugacityCoefficients(testCtx(t), fugacityReq()); inflight <- err }()
	<-entered
	if e.host.Shutdown() {
		t.Error("Shutdown reported a graceful drain")
	}
	if err := <-inflight; status.Code(err) != codes.Unavailable && status.Code(err) != codes.Canceled {
		t.Errorf("cut-off call: %v, want UNAVAILABLE or CANCELLED", err)
	}
}

// TestDeadlineHonoured checks that a call whose deadline passes while it
// waits to solve ends with DEADLINE_EXCEEDED.
func TestDeadlineHonoured(t *testing.T) {
	hook, entered, release := holdHook("FugacityCoefficients")
	defer close(release)
	e := newEnv(t, envOptions{hook: hook, cfg: Config{Limits: Limits{MaxDeadline: 100 * time.Millisecond}}})
	errc := make(chan error, 1)
	go func() { _, err := e.client.FugacityCoefficients(context.Background(), fugacityReq()); errc <- err }()
	<-entered
	if err := <-errc; status.Code(err) != codes.DeadlineExceeded {
		t.Errorf("got %v, want DEADLINE_EXCEEDED from the server's deadline cap", err)
	}
}

// TestFlashStream checks the stream protocol: the first message must carry
// the fluid, each message gets its own status in order, a bad message does
// not end the stream.
func TestFlashStream(t *testing.T) {
	e := newEnv(t, envOptions{})
	st, err := e.client.FlashStream(testCtx(t))
	if err != nil {
		t.Fatal(err)
	}
	bad := tpState(math.Inf(1), 1e6)
	msgs := []*fugadv1.FlashStreamRequest{
		{Sequence: 1, State: tpState(220, 4e6)},                                         // no fluid yet
		{Sequence: 2, Fluid: gasFluid(), MoleFractions: gasX, State: tpState(220, 4e6)}, // valid
		{Sequence: 3, State: &fugadv1.FlashState{Specification: bad.Specification}},     // bad temperature, default composition
		{Sequence: 4, State: &fugadv1.FlashState{Specification: tpState(230, 4e6).Specification}},
	}
	want := []struct {
		code  codes.Code
		field string
	}{{codes.InvalidArgument, "fluid"}, {codes.OK, ""}, {codes.InvalidArgument, "state.tp.temperature_k"}, {codes.OK, ""}}
	for i, m := range msgs {
		if err := st.Send(m); err != nil {
			t.Fatal(err)
		}
		r, err := st.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if r.GetSequence() != m.GetSequence() {
			t.Errorf("message %d: sequence %d", i, r.GetSequence())
		}
		if codes.Code(r.GetStatus().GetCode()) != want[i].code {
			t.Errorf("message %d: %v, want %v", i, r.GetStatus(), want[i].code)
		}
		if want[i].field != "" {
			wantViolation(t, statusErr(r.GetStatus()), want[i].code, want[i].field)
		}
	}
	if err := st.CloseSend(); err != nil {
		t.Fatal(err)
	}
	if _, err := st.Recv(); !errors.Is(err, io.EOF) {
		t.Errorf("after CloseSend: %v, want EOF", err)
	}
}

// TestFlashStreamIdle checks that an idle stream is ended with
// DEADLINE_EXCEEDED/STREAM_IDLE.
func TestFlashStreamIdle(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{StreamIdleTimeout: 100 * time.Millisecond}}})
	st, err := e.client.FlashStream(testCtx(t))
	if err != nil {
		t.Fatal(err)
	}
	_, err = st.Recv()
	_, ei, _ := details(t, err)
	if status.Code(err) != codes.DeadlineExceeded || ei.GetReason() != ReasonStreamIdle {
		t.Errorf("idle stream: %v, want DEADLINE_EXCEEDED/%s", err, ReasonStreamIdle)
	}
}

// TestConcurrentMixedCalls exercises every endpoint from many goroutines
// (run with -race).
func TestConcurrentMixedCalls(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{MaxConcurrentSolves: 256}})
	ctx := testCtx(t)
	var wg sync.WaitGroup
	errs := make(chan error, 64)
	for g := range 8 {
		wg.Go(func() {
			for range 10 {
				var err error
				switch g % 4 {
				case 0:
					_, err = e.client.FugacityCoefficients(ctx, fugacityReq())
				case 1:
					_, err = e.client.FlashBatch(ctx, batchReq())
				case 2:
					_, err = e.client.ListComponents(ctx, &fugadv1.ListComponentsRequest{Filter: "butane"})
				case 3:
					_, err = e.client.Flash(ctx, flashReq())
				}
				if err != nil {
					errs <- err
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
