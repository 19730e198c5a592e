package server_test

import (
	"context"
	"flag"
	"math"
	"net"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/status"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/server"
)

// loopback is a fugad Host served on a loopback TCP port, with a client
// connection to it.
type loopback struct {
	srv    *server.Server
	reg    *prometheus.Registry
	api    fugadv1.FugadServiceClient
	health healthpb.HealthClient
}

func startLoopback(t *testing.T, cfg server.Config) *loopback {
	t.Helper()
	reg := prometheus.NewRegistry()
	srv, err := server.New(cfg, nil, reg)
	if err != nil {
		t.Fatal(err)
	}
	host, err := server.NewHost(srv, reg, server.HostOptions{DrainTimeout: 5 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	served := make(chan error, 1)
	go func() { served <- host.Serve(lis) }()
	conn, err := grpc.NewClient(lis.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		_ = conn.Close()
		host.Shutdown()
		if err := <-served; err != nil {
			t.Errorf("Serve: %v", err)
		}
	})
	return &loopback{srv: srv, reg: reg, api: fugadv1.NewFugadServiceClient(conn), health: healthpb.NewHealthClient(conn)}
}

// loadGas is a 24-component natural gas with its condensate, invented for
// these tests (a fictional plant's inlet). At 205–215 K and 4.5–5.5 MPa it
// splits into vapour and liquid, so every flash runs stability analysis
// and a two-phase split: about 0.1 ms of solving, more than the RPC
// around it costs.
var (
	loadGasIDs = []string{"methane", "ethane", "propane", "nitrogen", "carbon-dioxide", "isobutane", "n-butane", "isopentane",
		"n-pentane", "n-hexane", "n-heptane", "n-octane", "n-nonane", "n-decane", "n-undecane", "n-dodecane", "hydrogen-sulfide",
		"neopentane", "2-methylpentane", "3-methylpentane", "2,2-dimethylbutane", "2,3-dimethylbutane", "cyclopentane", "cyclohexane"}
	loadGasZ = []float64{0.750000, 0.039255, 0.060523, 0.044398, 0.018858, 0.019146, 0.015295, 0.018824,
		0.010641, 0.004867, 0.004689, 0.002227, 0.004076, 0.002097, 0.000818, 0.001217, 0.000881,
		0.000644, 0.000554, 0.000236, 0.000281, 0.000177, 0.000163, 0.000132}
)

// flashSource makes unary T–P Flash requests of distinct states, so that
// no two calls share a cache entry.
type flashSource struct {
	fluid  *fugadv1.Fluid
	bypass bool
	n      atomic.Uint64
}

func newFlashSource(bypass bool) *flashSource {
	fl := &fugadv1.Fluid{Model: fugadv1.Model_MODEL_PR78}
	for _, id := range loadGasIDs {
		fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: id}})
	}
	return &flashSource{fluid: fl, bypass: bypass}
}

func (f *flashSource) next() *fugadv1.FlashRequest {
	// A low-discrepancy sequence (golden-ratio steps) over the box.
	k := float64(f.n.Add(1))
	u, v := math.Mod(k*0.6180339887498949, 1), math.Mod(k*0.7548776662466927, 1)
	return &fugadv1.FlashRequest{Fluid: f.fluid, BypassCache: f.bypass, State: &fugadv1.FlashState{
		MoleFractions: loadGasZ,
		Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 205 + 10*u, PressurePa: 4.5e6 + 1e6*v}},
	}}
}

// callResult is the outcome of one call as the client saw it.
type callResult struct {
	code   codes.Code
	reason string // ErrorInfo reason of a failed call
	d      time.Duration
}

func (f *flashSource) call(ctx context.Context, api fugadv1.FugadServiceClient) callResult {
	req := f.next()
	ctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	t0 := time.Now()
	_, err := api.Flash(ctx, req)
	r := callResult{code: status.Code(err), d: time.Since(t0)}
	for _, d := range status.Convert(err).Details() {
		if ei, ok := d.(*errdetails.ErrorInfo); ok {
			r.reason = ei.GetReason()
		}
	}
	return r
}

// batchSource makes FlashBatch requests of distinct T–P states of
// loadGas, states per call.
type batchSource struct {
	flash  *flashSource
	states int
}

func (b *batchSource) call(ctx context.Context, api fugadv1.FugadServiceClient) callResult {
	req := &fugadv1.FlashBatchRequest{Fluid: b.flash.fluid, MoleFractions: loadGasZ, BypassCache: b.flash.bypass}
	for range b.states {
		st := b.flash.next().GetState()
		st.MoleFractions = nil
		req.States = append(req.States, st)
	}
	ctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	t0 := time.Now()
	resp, err := api.FlashBatch(ctx, req)
	r := callResult{code: status.Code(err), d: time.Since(t0)}
	for _, d := range status.Convert(err).Details() {
		if ei, ok := d.(*errdetails.ErrorInfo); ok {
			r.reason = ei.GetReason()
		}
	}
	if err == nil {
		for _, it := range resp.GetItems() {
			if c := codes.Code(it.GetStatus().GetCode()); c != codes.OK {
				r.code, r.reason = c, "batch item: "+it.GetStatus().GetMessage()
				break
			}
		}
		if len(resp.GetItems()) != len(req.GetStates()) {
			r.code, r.reason = codes.DataLoss, "batch items missing"
		}
	}
	return r
}

// source is a kind of call the load tests send.
type source interface {
	call(ctx context.Context, api fugadv1.FugadServiceClient) callResult
}

// sequential runs n calls one after another and returns their latencies,
// sorted; it fails the test on any error.
func sequential(t *testing.T, f source, api fugadv1.FugadServiceClient, n int) []time.Duration {
	t.Helper()
	ds := make([]time.Duration, 0, n)
	for range n {
		r := f.call(context.Background(), api)
		if r.code != codes.OK {
			t.Fatalf("unloaded call: %v %s", r.code, r.reason)
		}
		ds = append(ds, r.d)
	}
	slices.Sort(ds)
	return ds
}

// quantile returns the q-quantile of sorted durations (the value of rank
// ⌈q·n⌉); 0 when empty.
func quantile(sorted []time.Duration, q float64) time.Duration {
	if len(sorted) == 0 {
		return 0
	}
	i := int(math.Ceil(q*float64(len(sorted)))) - 1
	return sorted[min(max(i, 0), len(sorted)-1)]
}

// openLoop issues calls at rate per second for dur, each in its own
// goroutine, with at most maxInFlight outstanding: an arrival that finds
// them all busy is not sent and counts as dropped (so the offered rate is
// bounded by the client, not the goroutine count). It returns when every
// call has returned.
func openLoop(ctx context.Context, rate float64, dur time.Duration, maxInFlight int, issue func() callResult) (results []callResult, dropped int) {
	var (
		mu  sync.Mutex
		wg  sync.WaitGroup
		sem = make(chan struct{}, maxInFlight)
	)
	start := time.Now()
	interval := time.Duration(float64(time.Second) / rate)
	for k := 0; ; k++ {
		at := start.Add(time.Duration(k) * interval)
		if at.Sub(start) >= dur || ctx.Err() != nil {
			break
		}
		if w := time.Until(at); w > 0 {
			time.Sleep(w)
		}
		select {
		case sem <- struct{}{}:
		default:
			dropped++
			continue
		}
		wg.Go(func() {
			defer func() { <-sem }()
			r := issue()
			mu.Lock()
			results = append(results, r)
			mu.Unlock()
		})
	}
	wg.Wait()
	return results, dropped
}

// heapInuse returns runtime.MemStats.HeapInuse after two collections (the
// second frees what the first's finalizers and pool clearing released).
func heapInuse() uint64 {
	runtime.GC()
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	return ms.HeapInuse
}

// healthProbe checks the overall health every 100 ms until stop is
// closed and reports the statuses that were not SERVING and the slowest
// answer.
func healthProbe(h healthpb.HealthClient, stop <-chan struct{}) (bad func() []string, slowest func() time.Duration) {
	var (
		mu       sync.Mutex
		failures []string
		worst    time.Duration
		done     = make(chan struct{})
	)
	go func() {
		defer close(done)
		t := time.NewTicker(100 * time.Millisecond)
		defer t.Stop()
		for {
			select {
			case <-stop:
				return
			case <-t.C:
			}
			ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
			t0 := time.Now()
			r, err := h.Check(ctx, &healthpb.HealthCheckRequest{})
			d := time.Since(t0)
			cancel()
			mu.Lock()
			worst = max(worst, d)
			if err != nil {
				failures = append(failures, err.Error())
			} else if r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
				failures = append(failures, r.GetStatus().String())
			}
			mu.Unlock()
		}
	}()
	return func() []string {
			<-done
			return failures
		}, func() time.Duration {
			<-done
			return worst
		}
}

var overloadStrict = flag.Bool("overload.strict", false, "TestOverload: also require shed answers under 1 ms (for a quiet machine)")

// Bounds of the overload test and why.
const (
	// overloadFactor is the offered rate over the sustainable one.
	overloadFactor = 4
	// acceptedP99Factor bounds the p99 latency of accepted calls under
	// overload against the unloaded p99. A server that queued the excess
	// instead of shedding it would, at 4× its capacity for 3 s, build a
	// backlog of about 9 s of work and answer in seconds: more than a
	// thousand times an unloaded call. With shedding an accepted call
	// waits for no slot; it shares the two cores with the shed calls'
	// decoding and validation and with the load generator in the same
	// process. On a 2-core machine shared with other builds (load average
	// 12–16) that cost 11–23× in our runs; 50× keeps a factor of 20 from
	// queueing behaviour.
	acceptedP99Factor = 50
	// shedFastLimit: a shed answer is decided before any solve (one
	// non-blocking semaphore try after decoding and validation), so on an
	// idle loopback it arrives in well under a millisecond. On a busy
	// shared machine it waits for CPU like everything else (and, with
	// MaxConcurrentSolves = GOMAXPROCS, behind batch workers that keep
	// every P busy), so by default the test asserts that shed calls do no
	// solver work and that their median is within the accepted calls'
	// p99 of the same moment; with -overload.strict (for a quiet
	// machine) it also asserts that at most shedSlowFraction of them,
	// GC pauses and scheduling hiccups, take shedFastLimit or longer.
	shedFastLimit    = time.Millisecond
	shedSlowFraction = 0.10
	// The heap after the overload, once collected, is within 1.5× the
	// heap before plus 16 MiB: nothing grows with the number of shed or
	// accepted calls (the result cache is bypassed; in-flight calls are
	// bounded by overloadInFlight).
	heapFactor = 1.5
	heapSlack  = 16 << 20
	// overloadInFlight bounds the load generator's outstanding calls.
	overloadInFlight = 64
	// overloadStates is the batch size: a batch's solve (≈ 60 µs per
	// two-phase state of loadGas) then outweighs its RPC cost, so the
	// solver pool, not the RPC layer, is what saturates. With unary
	// flashes of this gas the RPC costs more CPU than the solve and the
	// pool never fills: overload then shows as CPU contention, which
	// shedding at the pool cannot relieve.
	overloadStates = 16
)

// solveCount reads the count of fugad_solve_duration_seconds from reg.
func solveCount(t *testing.T, reg prometheus.Gatherer) uint64 {
	t.Helper()
	fams, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	var n uint64
	for _, f := range fams {
		if f.GetName() == "fugad_solve_duration_seconds" {
			for _, m := range f.GetMetric() {
				n += m.GetHistogram().GetSampleCount()
			}
		}
	}
	return n
}

// meanSolveSeconds reads the mean of fugad_solve_duration_seconds (time
// inside the solver slot, without RPC, decoding or validation) from reg.
func meanSolveSeconds(t *testing.T, reg prometheus.Gatherer) float64 {
	t.Helper()
	fams, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	var sum float64
	var n uint64
	for _, f := range fams {
		if f.GetName() != "fugad_solve_duration_seconds" {
			continue
		}
		for _, m := range f.GetMetric() {
			sum += m.GetHistogram().GetSampleSum()
			n += m.GetHistogram().GetSampleCount()
		}
	}
	if n == 0 {
		t.Fatal("no solve recorded in fugad_solve_duration_seconds")
	}
	return sum / float64(n)
}

// TestOverload drives the server over loopback TCP at four times its
// sustainable rate and checks that it stays healthy, keeps serving the
// calls it accepts in bounded time, sheds the excess quickly with
// UNAVAILABLE/OVERLOADED and nothing else, and does not grow its heap.
//
// The sustainable rate is the pool size over the mean solve time (from
// fugad_solve_duration_seconds of the unloaded calls): the most solves
// the slots can complete per second. Decoding and the RPC itself take CPU
// too, so the real capacity is lower and the overload larger than 4×.
//
// The machine may be shared with other work, so the absolute figures are
// logged and the assertions compare quantities measured under the same
// conditions: the accepted p99 against the unloaded p99 (the larger of
// the runs just before and just after the overload), shed answers against
// accepted ones of the same moment.
func TestOverload(t *testing.T) {
	procs := runtime.GOMAXPROCS(0)
	pool := procs // as the fugad binary configures it
	lb := startLoopback(t, server.Config{MaxConcurrentSolves: pool})
	src := &batchSource{flash: newFlashSource(true), states: overloadStates}
	ctx := context.Background()

	sequential(t, src, lb.api, 10) // warm-up: connection, compiled fluid
	before := sequential(t, src, lb.api, 100)
	solve := meanSolveSeconds(t, lb.reg) * overloadStates
	slotsPerCall := min(pool, procs, overloadStates) // a batch takes up to GOMAXPROCS free slots
	sustainable := float64(pool) / float64(slotsPerCall) / (solve / float64(slotsPerCall))
	offered := overloadFactor * sustainable
	t.Logf("unloaded: call p50 %v, p99 %v per %d-state batch; solving %.2f ms per batch; sustainable ≈ %.0f calls/s (%d slots, %d per call); offering %.0f calls/s",
		quantile(before, 0.5), quantile(before, 0.99), overloadStates, solve*1e3, sustainable, pool, slotsPerCall, offered)

	heapBefore := heapInuse()
	stop := make(chan struct{})
	healthBad, healthSlowest := healthProbe(lb.health, stop)
	t0 := time.Now()
	results, dropped := openLoop(ctx, offered, 3*time.Second, overloadInFlight, func() callResult { return src.call(ctx, lb.api) })
	elapsed := time.Since(t0)
	close(stop)
	heapAfter := heapInuse()
	after := sequential(t, src, lb.api, 100)
	p99 := max(quantile(before, 0.99), quantile(after, 0.99))

	var accepted, shed []time.Duration
	other := map[string]int{}
	for _, r := range results {
		switch {
		case r.code == codes.OK:
			accepted = append(accepted, r.d)
		case r.code == codes.Unavailable && r.reason == server.ReasonOverloaded:
			shed = append(shed, r.d)
		default:
			other[r.code.String()+"/"+r.reason]++
		}
	}
	slices.Sort(accepted)
	slices.Sort(shed)
	slow := 0
	for _, d := range shed {
		if d >= shedFastLimit {
			slow++
		}
	}
	t.Logf("overload: %d calls in %v (%d arrivals not sent: %d in flight), %d accepted (%.0f/s, %.2f of sustainable), %d shed (%.0f/s)",
		len(results), elapsed.Round(time.Millisecond), dropped, overloadInFlight, len(accepted),
		float64(len(accepted))/elapsed.Seconds(), float64(len(accepted))/elapsed.Seconds()/sustainable, len(shed), float64(len(shed))/elapsed.Seconds())
	t.Logf("accepted latency p50 %v, p99 %v (%.1f× unloaded p99 %v); shed latency p50 %v, p99 %v, max %v; %d of %d shed answers ≥ %v",
		quantile(accepted, 0.5), quantile(accepted, 0.99), float64(quantile(accepted, 0.99))/float64(p99), p99,
		quantile(shed, 0.5), quantile(shed, 0.99), quantile(shed, 1), slow, len(shed), shedFastLimit)
	t.Logf("heap in use %.1f MiB before, %.1f MiB after; slowest health check %v", float64(heapBefore)/(1<<20), float64(heapAfter)/(1<<20), healthSlowest())

	if len(other) > 0 {
		t.Errorf("calls failed other than by shedding: %v", other)
	}
	if len(shed) == 0 {
		t.Errorf("nothing shed at %d× the sustainable rate", overloadFactor)
	}
	if len(accepted) == 0 {
		t.Fatal("nothing accepted under overload")
	}
	if got := quantile(accepted, 0.99); got > acceptedP99Factor*p99 {
		t.Errorf("accepted p99 %v > %d× unloaded p99 %v: accepted calls are queueing", got, acceptedP99Factor, p99)
	}
	if *overloadStrict && float64(slow) > shedSlowFraction*float64(len(shed)) {
		t.Errorf("%d of %d shed answers took ≥ %v (allowed %.0f %%)", slow, len(shed), shedFastLimit, 100*shedSlowFraction)
	}
	// A shed call that waited for a slot would queue behind the overload's
	// backlog and take longer than the slow tail of the accepted calls.
	if len(shed) > 0 && quantile(shed, 0.5) > quantile(accepted, 0.99) {
		t.Errorf("median shed answer %v slower than the accepted p99 %v: shed calls wait", quantile(shed, 0.5), quantile(accepted, 0.99))
	}
	// Shed calls did no solver work: the solves counted by the server are
	// those of the unloaded runs and of the accepted calls.
	wantSolves := uint64(overloadStates * (10 + 100 + 100 + len(accepted)))
	if got := solveCount(t, lb.reg); got != wantSolves {
		t.Errorf("%d solves recorded, want %d (unloaded and accepted states only)", got, wantSolves)
	}
	if bad := healthBad(); len(bad) > 0 {
		t.Errorf("health not SERVING under overload: %v", bad)
	}
	if float64(heapAfter) > heapFactor*float64(heapBefore)+heapSlack {
		t.Errorf("heap in use grew from %d to %d bytes", heapBefore, heapAfter)
	}
	r, err := lb.health.Check(ctx, &healthpb.HealthCheckRequest{})
	if err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health after overload: %v %v", r.GetStatus(), err)
	}
}
