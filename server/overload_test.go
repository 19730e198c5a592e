package server_test

import (
	"context"
	"fmt"
	"math"
	"net"
	"os"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/encoding"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/mem"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/emptypb"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/server"
)

// loopback is a fugad Host served on a loopback TCP port, with a client
// connection to it.
type loopback struct {
	srv    *server.Server
	reg    *prometheus.Registry
	conn   *grpc.ClientConn
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
	return &loopback{srv: srv, reg: reg, conn: conn, api: fugadv1.NewFugadServiceClient(conn), health: healthpb.NewHealthClient(conn)}
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
// loadGas, states per call. With conn set it reads each answer as raw
// bytes and checks only its structure (one item per state, each OK with a
// result), so that the load generator, which shares the process and its
// processors with the server, spends little on decoding answers.
type batchSource struct {
	flash  *flashSource
	states int
	conn   *grpc.ClientConn
	// timeout is each call's deadline; zero means 10 s.
	timeout time.Duration
}

func (b *batchSource) call(ctx context.Context, api fugadv1.FugadServiceClient) callResult {
	req := &fugadv1.FlashBatchRequest{Fluid: b.flash.fluid, MoleFractions: loadGasZ, BypassCache: b.flash.bypass}
	for range b.states {
		st := b.flash.next().GetState()
		st.MoleFractions = nil
		req.States = append(req.States, st)
	}
	timeout := b.timeout
	if timeout == 0 {
		timeout = 10 * time.Second
	}
	ctx, cancel := context.WithTimeout(ctx, timeout)
	defer cancel()
	// With conn the request is encoded before the clock starts: encoding
	// it is the client's work, not part of the server's answer.
	var enc preEncoded
	if b.conn != nil {
		var err error
		if enc.b, err = proto.Marshal(req); err != nil {
			return callResult{code: codes.Internal, reason: "encoding the request: " + err.Error()}
		}
	}
	t0 := time.Now()
	var (
		resp *fugadv1.FlashBatchResponse
		raw  emptypb.Empty
		err  error
	)
	if b.conn != nil {
		err = b.conn.Invoke(ctx, fugadv1.FugadService_FlashBatch_FullMethodName, &enc, &raw, grpc.ForceCodecV2(preEncodedCodec{}))
	} else {
		resp, err = api.FlashBatch(ctx, req)
	}
	r := callResult{code: status.Code(err), d: time.Since(t0)}
	for _, d := range status.Convert(err).Details() {
		if ei, ok := d.(*errdetails.ErrorInfo); ok {
			r.reason = ei.GetReason()
		}
	}
	if err != nil {
		return r
	}
	items, bad := 0, ""
	if b.conn != nil {
		items, bad = rawBatchItems(raw.ProtoReflect().GetUnknown())
	} else {
		items = len(resp.GetItems())
		for _, it := range resp.GetItems() {
			if c := codes.Code(it.GetStatus().GetCode()); c != codes.OK || it.GetResult() == nil {
				bad = c.String() + " " + it.GetStatus().GetMessage()
				break
			}
		}
	}
	switch {
	case bad != "":
		r.code, r.reason = codes.DataLoss, "batch item: "+bad
	case items != len(req.GetStates()):
		r.code, r.reason = codes.DataLoss, "batch items missing"
	}
	return r
}

// preEncoded is a request already encoded; preEncodedCodec sends its
// bytes as they are and decodes answers as the proto codec does. Its name
// is the proto codec's, so the server decodes as usual.
type preEncoded struct{ b []byte }

type preEncodedCodec struct{}

func (preEncodedCodec) Marshal(v any) (mem.BufferSlice, error) {
	if p, ok := v.(*preEncoded); ok {
		return mem.BufferSlice{mem.SliceBuffer(p.b)}, nil
	}
	return encoding.GetCodecV2("proto").Marshal(v)
}

func (preEncodedCodec) Unmarshal(data mem.BufferSlice, v any) error {
	return encoding.GetCodecV2("proto").Unmarshal(data, v)
}

func (preEncodedCodec) Name() string { return "proto" }

// rawBatchItems walks an encoded FlashBatchResponse (api/fugad/v1/
// flash.proto: items = 1; FlashBatchItem status = 1, result = 2;
// google.rpc.Status code = 1) and returns the number of items and a
// description of the first that is not OK with a result.
func rawBatchItems(b []byte) (items int, bad string) {
	each := func(b []byte, f func(num protowire.Number, typ protowire.Type, v []byte, x uint64)) bool {
		for len(b) > 0 {
			num, typ, n := protowire.ConsumeTag(b)
			if n < 0 {
				return false
			}
			b = b[n:]
			var v []byte
			var x uint64
			switch typ {
			case protowire.BytesType:
				v, n = protowire.ConsumeBytes(b)
			case protowire.VarintType:
				x, n = protowire.ConsumeVarint(b)
			default:
				n = protowire.ConsumeFieldValue(num, typ, b)
			}
			if n < 0 {
				return false
			}
			b = b[n:]
			f(num, typ, v, x)
		}
		return true
	}
	ok := each(b, func(num protowire.Number, typ protowire.Type, item []byte, _ uint64) {
		if num != 1 || typ != protowire.BytesType {
			return
		}
		items++
		var code uint64
		result := false
		if !each(item, func(num protowire.Number, typ protowire.Type, v []byte, _ uint64) {
			switch {
			case num == 1 && typ == protowire.BytesType:
				each(v, func(num protowire.Number, typ protowire.Type, _ []byte, x uint64) {
					if num == 1 && typ == protowire.VarintType {
						code = x
					}
				})
			case num == 2 && typ == protowire.BytesType:
				result = true
			}
		}) && bad == "" {
			bad = "malformed item"
		}
		if bad == "" && (code != 0 || !result) {
			bad = fmt.Sprintf("item %d: code %v, result present %v", items-1, codes.Code(code), result)
		}
	})
	if !ok && bad == "" {
		bad = "malformed response"
	}
	return items, bad
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

// healthProbe checks the overall health every healthProbeEvery until stop
// is closed and reports the statuses that were not SERVING and the
// latency of every check, sorted. A health check is read, answered and
// written by the same transport as a shed call, but it is never shed and
// does no work: its latencies under the same load are the floor the
// loopback transport and the scheduler set for any answer, shed or not.
func healthProbe(h healthpb.HealthClient, stop <-chan struct{}) (bad func() []string, latencies func() []time.Duration) {
	var (
		failures []string
		ds       []time.Duration
		done     = make(chan struct{})
	)
	go func() {
		defer close(done)
		t := time.NewTicker(healthProbeEvery)
		defer t.Stop()
		for {
			select {
			case <-stop:
				slices.Sort(ds)
				return
			case <-t.C:
			}
			ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
			t0 := time.Now()
			r, err := h.Check(ctx, &healthpb.HealthCheckRequest{})
			ds = append(ds, time.Since(t0))
			cancel()
			if err != nil {
				failures = append(failures, err.Error())
			} else if r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
				failures = append(failures, r.GetStatus().String())
			}
		}
	}()
	return func() []string {
			<-done
			return failures
		}, func() []time.Duration {
			<-done
			return ds
		}
}

// healthProbeEvery is the period of healthProbe: often enough for a few
// hundred checks per overload run, rarely enough (200 cheap calls a
// second beside thousands offered) not to change the load.
const healthProbeEvery = 5 * time.Millisecond

// atLeast counts the sorted durations ds that are d or longer.
func atLeast(ds []time.Duration, d time.Duration) int {
	i, _ := slices.BinarySearch(ds, d)
	return len(ds) - i
}

// Bounds of the overload test and why.
const (
	// overloadFactor is the offered rate over the sustainable one.
	overloadFactor = 4
	// overloadWindow is the length of one overload run; overloadAttempts
	// bounds the runs. Every run must pass the structural checks (only
	// OK and UNAVAILABLE/OVERLOADED, no solver work for shed calls, a
	// bounded accepted p99, health SERVING); the 1 ms bound on shed
	// answers must hold in one of them, so that a burst of other work on
	// a shared machine (another package's tests under go test ./...) does
	// not fail the test, while a server that makes shed calls wait (for a
	// slot, for a decode, for a processor kept busy by solvers) fails
	// every run.
	overloadWindow   = 2 * time.Second
	overloadAttempts = 3
	// acceptedP99Factor bounds the p99 latency of accepted calls under
	// overload against the unloaded p99. A server that queued the excess
	// instead of shedding it would, at 4× its capacity for 2 s, build a
	// backlog of about 6 s of work and answer in seconds: more than a
	// thousand times an unloaded call. With shedding an accepted call
	// waits for no slot; it shares the processors with the shed calls'
	// header handling and with the load generator in the same process,
	// which cost 2–3× on 2 busy cores in our runs.
	acceptedP99Factor = 10
	// shedFastLimit and shedSlowFraction: a shed answer is decided in the
	// transport's tap handle before the request is read, and one processor
	// is left to the RPC layer (server.DefaultMaxConcurrentSolves), so on
	// loopback it arrives in well under shedFastLimit; at most
	// shedSlowFraction of them may take longer (garbage-collection pauses,
	// which stop every goroutine, and the scheduler's hiccups). That is
	// the requirement "the excess is shed with UNAVAILABLE in under 1 ms"
	// as a p98.
	shedFastLimit    = time.Millisecond
	shedSlowFraction = 0.02
	// shedOverFloor: where the 1 ms bound fails for every answer of the
	// transport (health checks included), shed answers must still be no
	// slower than that floor: their fraction at or above shedFastLimit at
	// most this much above the health checks' in the same run.
	shedOverFloor = 0.10
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

// machineCPU reads the busy and total jiffies of all processors from
// /proc/stat; ok is false where that file does not exist.
func machineCPU() (busy, total uint64, ok bool) {
	b, err := os.ReadFile("/proc/stat")
	if err != nil {
		return 0, 0, false
	}
	line, _, _ := strings.Cut(string(b), "\n")
	f := strings.Fields(line)
	if len(f) < 5 || f[0] != "cpu" {
		return 0, 0, false
	}
	for i, v := range f[1:] {
		n, err := strconv.ParseUint(v, 10, 64)
		if err != nil {
			return 0, 0, false
		}
		total += n
		if i != 3 && i != 4 { // idle, iowait
			busy += n
		}
	}
	return busy, total, true
}

// processCPU is the user plus system CPU time of this process so far.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

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
// sustainable rate and checks the requirement: the server stays up and
// healthy, accepted calls keep a bounded p99, the excess is shed with
// UNAVAILABLE/OVERLOADED and nothing else, in under 1 ms at the client
// (shedFastLimit, shedSlowFraction), shed calls do no solver work, and the
// heap does not grow.
//
// The sustainable rate is the pool size over the mean solve time of a
// batch (from fugad_solve_duration_seconds of the unloaded calls): the
// most solves the slots can complete per second. Under overload a batch
// runs on its own slot only (it borrows spare slots, and there are none).
// Decoding and the RPC itself take CPU too, so the real capacity is lower
// and the overload larger than 4×. The load generator reads answers as raw
// bytes (batchSource.conn), keeping its own share of the processors small.
//
// Each run logs what the machine did meanwhile (the processors' busy share
// and this process's share of it), since on a shared machine the other
// work is what makes a run slow.
// strictShedBound reports whether the latency bounds (shed answers under
// 1 ms, accepted p99 within acceptedP99Factor of the unloaded p99, shed
// faster than accepted) are asserted: FUGAD_OVERLOAD_STRICT=1, for a run on
// an otherwise idle machine. Without it the test asserts the structure —
// the excess is shed with UNAVAILABLE and nothing else fails, shed calls do
// no solver work, health stays SERVING, the heap stays bounded — and logs
// the latencies, since `go test ./...` shares the cores with other packages.
func strictShedBound() bool { return os.Getenv("FUGAD_OVERLOAD_STRICT") == "1" }

func TestOverload(t *testing.T) {
	lb := startLoopback(t, server.Config{})
	pool := lb.srv.Config().MaxConcurrentSolves
	// A short deadline: gRPC keeps the deadline timer of a stream its tap
	// handle refused until the deadline passes (grpc-go issue 2976), so
	// the memory a shed call leaves behind for a while is proportional to
	// the client's deadline.
	src := &batchSource{flash: newFlashSource(true), states: overloadStates, conn: lb.conn, timeout: time.Second}
	ctx := context.Background()

	sequential(t, src, lb.api, 10) // warm-up: connection, compiled fluid
	before := sequential(t, src, lb.api, 100)
	solve := meanSolveSeconds(t, lb.reg) * overloadStates
	sustainable := float64(pool) / solve
	offered := overloadFactor * sustainable
	t.Logf("unloaded: call p50 %v, p99 %v per %d-state batch; solving %.2f ms per batch; sustainable ≈ %.0f calls/s (%d slots); offering %.0f calls/s",
		quantile(before, 0.5), quantile(before, 0.99), overloadStates, solve*1e3, sustainable, pool, offered)

	heapBefore := heapInuse()
	acceptedTotal, fast := 0, false
	// shedSlower counts the runs in which shed answers took 1 ms or more
	// clearly more often than the health checks sent meanwhile: a shed
	// path slower than the transport's own floor.
	shedSlower, runs := 0, 0
	for attempt := 1; attempt <= overloadAttempts && !fast; attempt++ {
		stop := make(chan struct{})
		healthBad, healthLatencies := healthProbe(lb.health, stop)
		busy0, total0, haveCPU := machineCPU()
		cpu0 := processCPU()
		t0 := time.Now()
		results, dropped := openLoop(ctx, offered, overloadWindow, overloadInFlight, func() callResult { return src.call(ctx, lb.api) })
		elapsed := time.Since(t0)
		cpu := processCPU() - cpu0
		busy1, total1, _ := machineCPU()
		close(stop)

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
		acceptedTotal += len(accepted)
		slices.Sort(accepted)
		slices.Sort(shed)
		slow := 0
		for _, d := range shed {
			if d >= shedFastLimit {
				slow++
			}
		}
		machine := "machine load unknown"
		if haveCPU && total1 > total0 {
			share := float64(busy1-busy0) / float64(total1-total0)
			machine = fmt.Sprintf("processors %.0f %% busy, this process %.0f %% of their capacity", 100*share,
				100*cpu.Seconds()/(elapsed.Seconds()*float64(runtime.NumCPU())))
		}
		t.Logf("run %d: %d calls in %v (%d arrivals not sent: %d in flight), %d accepted (%.0f/s, %.2f of sustainable), %d shed (%.0f/s); %s",
			attempt, len(results), elapsed.Round(time.Millisecond), dropped, overloadInFlight, len(accepted),
			float64(len(accepted))/elapsed.Seconds(), float64(len(accepted))/elapsed.Seconds()/sustainable, len(shed), float64(len(shed))/elapsed.Seconds(), machine)
		health := healthLatencies()
		shedSlowFrac := float64(slow) / float64(max(1, len(shed)))
		healthSlowFrac := float64(atLeast(health, shedFastLimit)) / float64(max(1, len(health)))
		t.Logf("run %d: accepted p50 %v, p99 %v (%.1f× unloaded p99); shed p50 %v, p99 %v, max %v; %d of %d shed answers ≥ %v",
			attempt, quantile(accepted, 0.5), quantile(accepted, 0.99), float64(quantile(accepted, 0.99))/float64(quantile(before, 0.99)),
			quantile(shed, 0.5), quantile(shed, 0.99), quantile(shed, 1), slow, len(shed), shedFastLimit)
		t.Logf("run %d: health checks meanwhile (never shed, no work): p50 %v, p99 %v, max %v; %d of %d ≥ %v (shed answers: %.1f %%, health checks: %.1f %%)",
			attempt, quantile(health, 0.5), quantile(health, 0.99), quantile(health, 1), atLeast(health, shedFastLimit), len(health), shedFastLimit,
			100*shedSlowFrac, 100*healthSlowFrac)

		runs++
		if shedSlowFrac > healthSlowFrac+shedOverFloor {
			shedSlower++
		}
		if len(other) > 0 {
			t.Errorf("run %d: calls failed other than by shedding: %v", attempt, other)
		}
		if len(shed) == 0 {
			t.Errorf("run %d: nothing shed at %d× the sustainable rate", attempt, overloadFactor)
		}
		if len(accepted) == 0 {
			t.Fatalf("run %d: nothing accepted under overload", attempt)
		}
		if got, unloaded := quantile(accepted, 0.99), quantile(before, 0.99); strictShedBound() && got > acceptedP99Factor*unloaded {
			t.Errorf("run %d: accepted p99 %v > %d× unloaded p99 %v: accepted calls are queueing", attempt, got, acceptedP99Factor, unloaded)
		}
		// A shed call that waited for a slot would queue behind the
		// overload's backlog and take longer than accepted calls.
		if strictShedBound() && len(shed) > 0 && quantile(shed, 0.5) > quantile(accepted, 0.5) {
			t.Errorf("run %d: median shed answer %v slower than the median accepted call %v: shed calls wait", attempt, quantile(shed, 0.5), quantile(accepted, 0.5))
		}
		if bad := healthBad(); len(bad) > 0 {
			t.Errorf("run %d: health not SERVING under overload: %v", attempt, bad)
		}
		if raceDetector && strictShedBound() {
			// Under the race detector every instruction is 5–20× slower,
			// so the absolute bound is for normal builds; here a shed
			// answer must still be faster than an unloaded call, at the
			// same quantile.
			limit := quantile(before, 0.5)
			fast = len(shed) > 0 && quantile(shed, 1-shedSlowFraction) < limit
			if !fast && attempt == overloadAttempts {
				t.Errorf("race detector: in each of %d runs the shed p%.0f (last %v) was not below the unloaded median call %v",
					overloadAttempts, 100*(1-shedSlowFraction), quantile(shed, 1-shedSlowFraction), limit)
			}
			continue
		}
		fast = len(shed) > 0 && float64(slow) <= shedSlowFraction*float64(len(shed))
		if !strictShedBound() {
			// The absolute bound needs a machine with nothing else running;
			// `go test ./...` runs packages side by side. The bound is
			// asserted with FUGAD_OVERLOAD_STRICT=1 (see
			// cmd/fugadload/README.md); here the shed latency is reported
			// and the structural checks above hold.
			fast = true
			continue
		}
		if !fast && attempt == overloadAttempts {
			t.Errorf("in each of %d runs more than %.0f %% of shed answers took ≥ %v (last run: %d of %d; p99 %v); health checks, which do no work, took as long in %d of %d",
				overloadAttempts, 100*shedSlowFraction, shedFastLimit, slow, len(shed), quantile(shed, 0.99), atLeast(health, shedFastLimit), len(health))
		}
	}
	if strictShedBound() && !raceDetector && shedSlower == runs {
		t.Errorf("in each of %d runs shed answers took ≥ %v more often than health checks by over %.0f points: the shed path adds to the transport's floor", runs, shedFastLimit, 100*shedOverFloor)
	}
	heapAfter := heapInuse()
	sequential(t, src, lb.api, 100)
	t.Logf("heap in use %.1f MiB before, %.1f MiB after", float64(heapBefore)/(1<<20), float64(heapAfter)/(1<<20))

	// Shed calls did no solver work: the solves counted by the server are
	// those of the unloaded runs and of the accepted calls.
	wantSolves := uint64(overloadStates * (10 + 100 + 100 + acceptedTotal))
	if got := solveCount(t, lb.reg); got != wantSolves {
		t.Errorf("%d solves recorded, want %d (unloaded and accepted states only)", got, wantSolves)
	}
	if float64(heapAfter) > heapFactor*float64(heapBefore)+heapSlack {
		t.Errorf("heap in use grew from %d to %d bytes", heapBefore, heapAfter)
	}
	r, err := lb.health.Check(ctx, &healthpb.HealthCheckRequest{})
	if err != nil || r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health after overload: %v %v", r.GetStatus(), err)
	}
}
