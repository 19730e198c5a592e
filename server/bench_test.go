package server

import (
	"context"
	"fmt"
	"net"
	"runtime"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/wrapperspb"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// The benchmarks measure what the server adds to the flash it wraps. Each
// one measures its baseline in the same run (interleaved where it can) and
// reports the ratio with b.ReportMetric, because the machines are shared
// and absolute figures are noisy. The state is the two-phase
// 10-component test gas at 250 K and 5 MPa (see flash_test.go).

// echoService is a test-only gRPC service on the same server as fugad: it
// answers a BytesValue with a BytesValue of a configured size, so that an
// Echo call moves the same bytes as a Flash call and passes the same
// interceptors, but does no work.
type echoService struct{ reply *wrapperspb.BytesValue }

const echoMethod = "/fugad.test.Echo/Echo"

func (e *echoService) desc() *grpc.ServiceDesc {
	return &grpc.ServiceDesc{
		ServiceName: "fugad.test.Echo",
		HandlerType: (*any)(nil),
		Methods: []grpc.MethodDesc{{MethodName: "Echo", Handler: func(srv any, ctx context.Context, dec func(any) error, in grpc.UnaryServerInterceptor) (any, error) {
			req := new(wrapperspb.BytesValue)
			if err := dec(req); err != nil {
				return nil, err
			}
			h := func(ctx context.Context, req any) (any, error) { return e.reply, nil }
			if in == nil {
				return h(ctx, req)
			}
			return in(ctx, req, &grpc.UnaryServerInfo{Server: srv, FullMethod: echoMethod}, h)
		}}},
	}
}

// bytesOfSize returns a BytesValue whose encoding is exactly n bytes (for
// n ≥ 3).
func bytesOfSize(n int) *wrapperspb.BytesValue {
	for p := n - 2; p >= 0; p-- {
		if 1+protowire.SizeVarint(uint64(p))+p == n {
			return &wrapperspb.BytesValue{Value: make([]byte, p)}
		}
	}
	panic(fmt.Sprintf("no BytesValue of %d bytes", n))
}

// benchServer is a Host on loopback TCP with the echo service beside
// fugad, and a client connection.
type benchServer struct {
	srv    *Server
	conn   *grpc.ClientConn
	client fugadv1.FugadServiceClient
	echo   *echoService
}

func startBenchServer(b *testing.B, cfg Config) *benchServer {
	b.Helper()
	reg := prometheus.NewRegistry()
	srv, err := New(cfg, nil, reg)
	if err != nil {
		b.Fatal(err)
	}
	host, err := NewHost(srv, reg, HostOptions{})
	if err != nil {
		b.Fatal(err)
	}
	echo := &echoService{reply: &wrapperspb.BytesValue{}}
	host.GRPC().RegisterService(echo.desc(), echo)
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	go func() { _ = host.Serve(lis) }()
	conn, err := grpc.NewClient(lis.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { _ = conn.Close(); host.Shutdown() })
	return &benchServer{srv: srv, conn: conn, client: fugadv1.NewFugadServiceClient(conn), echo: echo}
}

// inProcess is the same flash computed in-process with a reused
// workspace: the baseline of every ratio.
type inProcess struct {
	ws  *flash.Workspace
	res *flash.Result
	z   []float64
}

func newInProcess(b *testing.B) *inProcess {
	mx := mixtureOf(b, eos.PR78, gas10IDs...)
	return &inProcess{ws: flash.NewWorkspace(mx), res: flash.NewResult(mx), z: normalised(gas10X)}
}

func (p *inProcess) flash(b *testing.B) {
	if err := p.ws.PT(context.Background(), 250, 5e6, p.z, flash.Options{}, nil, p.res); err != nil || len(p.res.Phases) != 2 {
		b.Fatalf("in-process flash: %v, %d phases", err, len(p.res.Phases))
	}
}

func benchFlashReq(bypass bool) *fugadv1.FlashRequest {
	return &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6), BypassCache: bypass}
}

// BenchmarkUnaryFlashServerCost times, interleaved in one loop, a unary
// Flash over loopback TCP with the cache bypassed, an Echo call of the
// same request and response sizes on the same server, and the same flash
// in-process. It reports each in ns and the server's own cost,
// (Flash − Echo − in-process)/in-process, as server-cost-fraction
// (target ≤ 0.30).
func BenchmarkUnaryFlashServerCost(b *testing.B) {
	bs := startBenchServer(b, Config{})
	ctx := context.Background()
	req := benchFlashReq(true)
	resp, err := bs.client.Flash(ctx, req)
	if err != nil {
		b.Fatal(err)
	}
	bs.echo.reply = bytesOfSize(proto.Size(resp))
	echoReq := bytesOfSize(proto.Size(req))
	echoResp := new(wrapperspb.BytesValue)
	if err := bs.conn.Invoke(ctx, echoMethod, echoReq, echoResp); err != nil {
		b.Fatal(err)
	}
	ip := newInProcess(b)
	ip.flash(b)
	var tRPC, tEcho, tLocal, cRPC, cEcho, cLocal time.Duration
	b.ReportAllocs()
	for b.Loop() {
		t0, c0 := time.Now(), cpuTime()
		if _, err := bs.client.Flash(ctx, req); err != nil {
			b.Fatal(err)
		}
		t1, c1 := time.Now(), cpuTime()
		if err := bs.conn.Invoke(ctx, echoMethod, echoReq, echoResp); err != nil {
			b.Fatal(err)
		}
		t2, c2 := time.Now(), cpuTime()
		ip.flash(b)
		t3, c3 := time.Now(), cpuTime()
		tRPC += t1.Sub(t0)
		tEcho += t2.Sub(t1)
		tLocal += t3.Sub(t2)
		cRPC += c1 - c0
		cEcho += c2 - c1
		cLocal += c3 - c2
	}
	n := float64(b.N)
	b.ReportMetric(float64(tRPC.Nanoseconds())/n, "flash-rpc-ns")
	b.ReportMetric(float64(tEcho.Nanoseconds())/n, "echo-rpc-ns")
	b.ReportMetric(float64(tLocal.Nanoseconds())/n, "inprocess-ns")
	b.ReportMetric(float64(proto.Size(req)), "req-bytes")
	b.ReportMetric(float64(proto.Size(resp)), "resp-bytes")
	b.ReportMetric(float64(tRPC-tEcho-tLocal)/float64(tLocal), "server-cost-fraction")
	// The same fraction from the process's CPU time (client and server),
	// which the scheduling delays of a shared machine do not inflate.
	b.ReportMetric(float64(cRPC-cEcho-cLocal)/float64(cLocal), "server-cpu-fraction")
}

// cpuTime is the user plus system CPU time of the process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// throughput measures states per CPU-second of the whole process (client
// and server: a conservative figure, since the client's decoding counts
// against the server) for run, and of the in-process flash on the same
// number of goroutines as the server's workers, alternating in rounds so
// that both see the same machine, and reports both and their ratio
// (target ≥ 0.70).
func throughput(b *testing.B, statesPerOp, workers int, run func()) {
	ips := make([]*inProcess, workers)
	for w := range ips {
		ips[w] = newInProcess(b)
		ips[w].flash(b)
	}
	run() // warm up: connection, compiled fluid, pools
	var cpuSrv, cpuLocal time.Duration
	served, local := 0, 0
	b.ReportAllocs()
	for b.Loop() {
		c0 := cpuTime()
		run()
		c1 := cpuTime()
		var wg sync.WaitGroup
		for w, ip := range ips {
			wg.Go(func() {
				for i := w; i < statesPerOp; i += workers {
					ip.flash(b)
				}
			})
		}
		wg.Wait()
		c2 := cpuTime()
		cpuSrv += c1 - c0
		cpuLocal += c2 - c1
		served += statesPerOp
		local += statesPerOp
	}
	srvRate := float64(served) / cpuSrv.Seconds()
	localRate := float64(local) / cpuLocal.Seconds()
	b.ReportMetric(srvRate, "states/cpu-s")
	b.ReportMetric(localRate, "inprocess-states/cpu-s")
	b.ReportMetric(srvRate/localRate, "rate-ratio")
}

// BenchmarkFlashBatchThroughput sends batches of 100 two-phase states
// (cache bypassed) over loopback TCP.
func BenchmarkFlashBatchThroughput(b *testing.B) {
	bs := startBenchServer(b, Config{MaxConcurrentSolves: runtime.GOMAXPROCS(0)})
	states := make([]*fugadv1.FlashState, 100)
	for i := range states {
		states[i] = tpStateX(nil, 250, 5e6)
	}
	req := &fugadv1.FlashBatchRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, States: states, BypassCache: true}
	ctx := context.Background()
	throughput(b, len(states), batchWorkers(len(states)), func() {
		resp, err := bs.client.FlashBatch(ctx, req)
		if err != nil || resp.GetItems()[99].GetStatus().GetCode() != 0 {
			b.Fatalf("batch: %v", err)
		}
	})
}

// BenchmarkFlashStreamThroughput pipelines 100 messages per op on one
// stream (cache bypassed, no implicit warm start, so that each message is
// the same cold flash as the baseline).
func BenchmarkFlashStreamThroughput(b *testing.B) {
	bs := startBenchServer(b, Config{})
	ctx := context.Background()
	stream, err := bs.client.FlashStream(ctx)
	if err != nil {
		b.Fatal(err)
	}
	defer func() { _ = stream.CloseSend() }()
	first := &fugadv1.FlashStreamRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, State: tpStateX(nil, 250, 5e6), BypassCache: true, NoImplicitWarmStart: true}
	next := &fugadv1.FlashStreamRequest{State: tpStateX(nil, 250, 5e6), BypassCache: true, NoImplicitWarmStart: true}
	if err := stream.Send(first); err != nil {
		b.Fatal(err)
	}
	if _, err := stream.Recv(); err != nil {
		b.Fatal(err)
	}
	const perOp = 100
	throughput(b, perOp, 1, func() {
		errc := make(chan error, 1)
		go func() {
			for range perOp {
				if err := stream.Send(next); err != nil {
					errc <- err
					return
				}
			}
			errc <- nil
		}()
		for range perOp {
			r, err := stream.Recv()
			if err != nil || r.GetStatus().GetCode() != 0 {
				b.Fatalf("stream: %v %v", err, r.GetStatus())
			}
		}
		if err := <-errc; err != nil {
			b.Fatal(err)
		}
	})
}

// BenchmarkCacheHitServerSide times the server's hit path for a flash
// already in the cache: key build, lookup and the stored bytes with the
// from_cache fragment (answerFlash), and, as hit-handler-ns, the whole
// Flash handler in-process (validation and the compiled-fluid lookup
// included). Target for the hit path: ≤ 2 µs.
func BenchmarkCacheHitServerSide(b *testing.B) {
	s, err := New(Config{}, nil, prometheus.NewRegistry())
	if err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	req := benchFlashReq(false)
	if _, err := s.Flash(ctx, req); err != nil {
		b.Fatal(err)
	}
	var v violations
	cf, err := s.compiled("fluid", s.checkFluid(&v, "fluid", req.GetFluid()))
	if err != nil {
		b.Fatal(err)
	}
	st := checkFlashState(&v, "state", req.GetState(), cf.n(), nil)
	job := s.newFlashJob(cf, "state", st, nil, nil, false)
	res, err := s.answerFlash(ctx, "Flash", req, job, true)
	if err != nil || len(res.ProtoReflect().GetUnknown()) == 0 {
		b.Fatalf("not a hit: %v", err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := s.answerFlash(ctx, "Flash", req, job, true); err != nil {
			b.Fatal(err)
		}
	}
	perHit := float64(b.Elapsed().Nanoseconds()) / float64(b.N)
	const handlerRuns = 2000
	t0 := time.Now()
	for range handlerRuns {
		if _, err := s.Flash(ctx, req); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(perHit, "hit-path-ns")
	b.ReportMetric(float64(time.Since(t0).Nanoseconds())/handlerRuns, "hit-handler-ns")
	if st := s.results.(*caches).results.Stats(); st.Misses != 1 {
		b.Fatalf("cache stats %+v: expected one miss", st)
	}
}

// BenchmarkUnaryHitVersusMiss times unary Flash calls over loopback TCP
// answered from the cache and, interleaved, the same state with the cache
// bypassed (a miss's work), and reports their ratio.
func BenchmarkUnaryHitVersusMiss(b *testing.B) {
	bs := startBenchServer(b, Config{})
	ctx := context.Background()
	hitReq, missReq := benchFlashReq(false), benchFlashReq(true)
	if _, err := bs.client.Flash(ctx, hitReq); err != nil {
		b.Fatal(err)
	}
	var tHit, tMiss time.Duration
	for b.Loop() {
		t0 := time.Now()
		r, err := bs.client.Flash(ctx, hitReq)
		if err != nil || !r.GetResult().GetReport().GetFromCache() {
			b.Fatalf("hit: %v", err)
		}
		t1 := time.Now()
		if _, err := bs.client.Flash(ctx, missReq); err != nil {
			b.Fatal(err)
		}
		tHit += t1.Sub(t0)
		tMiss += time.Since(t1)
	}
	b.ReportMetric(float64(tHit.Nanoseconds())/float64(b.N), "hit-ns")
	b.ReportMetric(float64(tMiss.Nanoseconds())/float64(b.N), "miss-ns")
	b.ReportMetric(float64(tHit)/float64(tMiss), "hit/miss")
}

// BenchmarkCachedEntryMemory fills the result cache with distinct
// two-phase 10-component results and reports the live heap per entry
// (measured) and the cache's accounted bytes per entry.
func BenchmarkCachedEntryMemory(b *testing.B) {
	const entries = 2000
	for b.Loop() {
		s, err := New(Config{}, nil, prometheus.NewRegistry())
		if err != nil {
			b.Fatal(err)
		}
		ctx := context.Background()
		req := benchFlashReq(false)
		if _, err := s.Flash(ctx, req); err != nil { // compiled fluid and pools
			b.Fatal(err)
		}
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		for i := range entries {
			req.State = tpStateX(gas10X, 240.001+10*float64(i)/entries, 5e6)
			if _, err := s.Flash(ctx, req); err != nil {
				b.Fatal(err)
			}
		}
		runtime.GC()
		runtime.ReadMemStats(&after)
		st := s.results.(*caches).results.Stats()
		if st.Entries < entries {
			b.Fatalf("%d entries", st.Entries)
		}
		b.ReportMetric(float64(after.HeapAlloc-before.HeapAlloc)/entries, "heap-bytes/entry")
		b.ReportMetric(float64(st.Bytes)/float64(st.Entries), "accounted-bytes/entry")
		b.ReportMetric(float64(proto.Size(benchFlashReq(false))), "flash-req-bytes")
		runtime.KeepAlive(s)
	}
}
