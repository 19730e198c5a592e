package server

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"runtime"
	"runtime/pprof"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/emptypb"
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
//
// Methodology. The server's cost is what the server process spends:
// transport, decoding, validation, the solve, encoding and its garbage
// collection. The client's decoding of the answer is the client's cost and
// is not charged to the server. So the unary and throughput benchmarks run
// the server in a child process (this test binary re-executed with
// benchChildEnv set, see TestMain) and read the child's own CPU time, as
// getrusage(RUSAGE_SELF) reports it, through a test-only RPC; the
// in-process baseline runs in the benchmark process. The unary benchmark
// keeps the server in-process (see there) and instead makes the client's
// work the same for the Flash and the Echo call: it sends pre-encoded
// request bytes and keeps the answer's bytes undecoded (rawCodec), so
// that the difference is the server's.

// benchChildEnv, when set in the environment, makes the test binary serve
// fugad and the bench service on loopback TCP instead of running tests
// (see runBenchChild); its value is Config.MaxConcurrentSolves.
const benchChildEnv = "FUGAD_BENCH_CHILD_SOLVES"

// benchChildProfileEnv, when set, names the file the server process
// writes its CPU profile to (go test -cpuprofile profiles the client).
const benchChildProfileEnv = "FUGAD_BENCH_CHILD_CPUPROFILE"

func TestMain(m *testing.M) {
	if v := os.Getenv(benchChildEnv); v != "" {
		os.Exit(runBenchChild(v))
	}
	os.Exit(m.Run())
}

// benchService is a test-only gRPC service beside fugad: Echo answers a
// BytesValue with a BytesValue of a configured size (SetReplySize), so
// that an Echo call moves the same bytes as a Flash call and passes the
// same interceptors but does no work; CPU returns the serving process's
// CPU time in nanoseconds.
type benchService struct {
	reply atomic.Pointer[wrapperspb.BytesValue]
}

const (
	benchServiceName = "fugad.test.Bench"
	echoMethod       = "/" + benchServiceName + "/Echo"
	replySizeMethod  = "/" + benchServiceName + "/SetReplySize"
	cpuMethod        = "/" + benchServiceName + "/CPU"
)

func newBenchService() *benchService {
	e := new(benchService)
	e.reply.Store(&wrapperspb.BytesValue{})
	return e
}

func (e *benchService) desc() *grpc.ServiceDesc {
	method := func(name string, newReq func() proto.Message, h func(req proto.Message) (any, error)) grpc.MethodDesc {
		full := "/" + benchServiceName + "/" + name
		return grpc.MethodDesc{MethodName: name, Handler: func(srv any, ctx context.Context, dec func(any) error, in grpc.UnaryServerInterceptor) (any, error) {
			req := newReq()
			if err := dec(req); err != nil {
				return nil, err
			}
			hh := func(ctx context.Context, req any) (any, error) { return h(req.(proto.Message)) }
			if in == nil {
				return hh(ctx, req)
			}
			return in(ctx, req, &grpc.UnaryServerInfo{Server: srv, FullMethod: full}, hh)
		}}
	}
	return &grpc.ServiceDesc{
		ServiceName: benchServiceName,
		HandlerType: (*any)(nil),
		Methods: []grpc.MethodDesc{
			method("Echo", func() proto.Message { return new(wrapperspb.BytesValue) }, func(proto.Message) (any, error) { return e.reply.Load(), nil }),
			method("SetReplySize", func() proto.Message { return new(wrapperspb.Int64Value) }, func(req proto.Message) (any, error) {
				e.reply.Store(bytesOfSize(int(req.(*wrapperspb.Int64Value).GetValue())))
				return new(emptypb.Empty), nil
			}),
			method("CPU", func() proto.Message { return new(emptypb.Empty) }, func(proto.Message) (any, error) {
				return wrapperspb.Int64(int64(cpuTime())), nil
			}),
		},
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

// newBenchHost builds a Host for srv with the bench service beside fugad.
func newBenchHost(srv *Server, reg *prometheus.Registry) (*Host, *benchService, error) {
	host, err := NewHost(srv, reg, HostOptions{})
	if err != nil {
		return nil, nil, err
	}
	echo := newBenchService()
	host.GRPC().RegisterService(echo.desc(), echo)
	return host, echo, nil
}

// runBenchChild is the server process of the benchmarks: it serves on a
// loopback port, writes the address as one line to stdout and stops when
// stdin closes (the benchmark ended or died).
func runBenchChild(solves string) int {
	n, err := strconv.Atoi(solves)
	if err != nil {
		fmt.Fprintln(os.Stderr, "bench child:", err)
		return 2
	}
	reg := prometheus.NewRegistry()
	srv, err := New(Config{MaxConcurrentSolves: n}, nil, reg)
	if err != nil {
		fmt.Fprintln(os.Stderr, "bench child:", err)
		return 1
	}
	host, _, err := newBenchHost(srv, reg)
	if err != nil {
		fmt.Fprintln(os.Stderr, "bench child:", err)
		return 1
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		fmt.Fprintln(os.Stderr, "bench child:", err)
		return 1
	}
	if path := os.Getenv(benchChildProfileEnv); path != "" {
		f, err := os.Create(path)
		if err != nil {
			fmt.Fprintln(os.Stderr, "bench child:", err)
			return 1
		}
		defer f.Close()
		if err := pprof.StartCPUProfile(f); err != nil {
			fmt.Fprintln(os.Stderr, "bench child:", err)
			return 1
		}
		defer pprof.StopCPUProfile()
	}
	go func() { _ = host.Serve(lis) }()
	fmt.Println(lis.Addr().String())
	_, _ = io.Copy(io.Discard, os.Stdin)
	host.Shutdown()
	return 0
}

// benchServer is a client connection to a fugad Host with the bench
// service, in-process (startBenchServer) or in a child process
// (startBenchChild).
type benchServer struct {
	conn   *grpc.ClientConn
	client fugadv1.FugadServiceClient
}

// startBenchServer serves in the benchmark's own process, on loopback TCP.
func startBenchServer(b *testing.B, cfg Config) *benchServer {
	b.Helper()
	reg := prometheus.NewRegistry()
	srv, err := New(cfg, nil, reg)
	if err != nil {
		b.Fatal(err)
	}
	host, _, err := newBenchHost(srv, reg)
	if err != nil {
		b.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	go func() { _ = host.Serve(lis) }()
	bs := dialBench(b, lis.Addr().String())
	b.Cleanup(func() { host.Shutdown() })
	return bs
}

// startBenchChild serves in a child process with the given solver slots.
func startBenchChild(b *testing.B, solves int) *benchServer {
	b.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), benchChildEnv+"="+strconv.Itoa(solves))
	cmd.Stderr = os.Stderr
	stdin, err := cmd.StdinPipe()
	if err != nil {
		b.Fatal(err)
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		b.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() {
		_ = stdin.Close()
		done := make(chan struct{})
		go func() { _ = cmd.Wait(); close(done) }()
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			_ = cmd.Process.Kill()
			<-done
		}
	})
	addr, err := bufio.NewReader(stdout).ReadString('\n')
	if err != nil {
		b.Fatalf("bench child: %v", err)
	}
	return dialBench(b, strings.TrimSpace(addr))
}

func dialBench(b *testing.B, addr string) *benchServer {
	b.Helper()
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { _ = conn.Close() })
	return &benchServer{conn: conn, client: fugadv1.NewFugadServiceClient(conn)}
}

// serverCPU returns the serving process's CPU time.
func (bs *benchServer) serverCPU(b *testing.B) time.Duration {
	out := new(wrapperspb.Int64Value)
	if err := bs.conn.Invoke(context.Background(), cpuMethod, new(emptypb.Empty), out); err != nil {
		b.Fatal(err)
	}
	return time.Duration(out.GetValue())
}

func (bs *benchServer) setReplySize(b *testing.B, n int) {
	if err := bs.conn.Invoke(context.Background(), replySizeMethod, wrapperspb.Int64(int64(n)), new(emptypb.Empty)); err != nil {
		b.Fatal(err)
	}
}

// rawCodec moves messages as bytes already encoded: a client using it
// (grpc.ForceCodecV2) sends a *rawMessage's bytes and receives the
// answer's bytes without decoding them. Its name is the proto codec's, so
// the server decodes and encodes as usual.
type rawCodec struct{}

type rawMessage struct{ b []byte }

func (rawCodec) Marshal(v any) (mem.BufferSlice, error) {
	return mem.BufferSlice{mem.SliceBuffer(v.(*rawMessage).b)}, nil
}

func (rawCodec) Unmarshal(data mem.BufferSlice, v any) error {
	m := v.(*rawMessage)
	m.b = m.b[:0]
	for _, d := range data {
		m.b = append(m.b, d.ReadOnlyData()...)
	}
	return nil
}

func (rawCodec) Name() string { return "proto" }

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
// in-process. The client sends pre-encoded request bytes and keeps the
// answers' bytes undecoded (rawCodec) for both calls, so that its work is
// the same on both sides of the subtraction. It reports each in ns and the
// server's own cost, (Flash − Echo − in-process)/in-process, as
// server-cost-fraction (target ≤ 0.30), and the same fraction from the
// process's CPU time as server-cpu-fraction.
//
// The server runs in the benchmark's process here, not in a child: a
// unary call on an otherwise idle server is a ping-pong, and across two
// processes each call would wake the other process's scheduler, whose
// idle spinning then dominates both the time and the CPU of a call.
func BenchmarkUnaryFlashServerCost(b *testing.B) {
	bs := startBenchServer(b, Config{})
	ctx := context.Background()
	req := benchFlashReq(true)
	resp, err := bs.client.Flash(ctx, req)
	if err != nil {
		b.Fatal(err)
	}
	bs.setReplySize(b, proto.Size(resp))
	reqRaw, err := proto.Marshal(req)
	if err != nil {
		b.Fatal(err)
	}
	echoRaw, err := proto.Marshal(bytesOfSize(len(reqRaw)))
	if err != nil {
		b.Fatal(err)
	}
	raw := grpc.ForceCodecV2(rawCodec{})
	flashReq, echoReq := &rawMessage{b: reqRaw}, &rawMessage{b: echoRaw}
	flashResp, echoResp := new(rawMessage), new(rawMessage)
	callFlash := func() {
		if err := bs.conn.Invoke(ctx, fugadv1.FugadService_Flash_FullMethodName, flashReq, flashResp, raw); err != nil {
			b.Fatal(err)
		}
	}
	callEcho := func() {
		if err := bs.conn.Invoke(ctx, echoMethod, echoReq, echoResp, raw); err != nil {
			b.Fatal(err)
		}
	}
	callFlash()
	callEcho()
	if len(flashResp.b) != len(echoResp.b) {
		b.Fatalf("echo answers %d bytes, flash %d", len(echoResp.b), len(flashResp.b))
	}
	ip := newInProcess(b)
	ip.flash(b)
	var tRPC, tEcho, tLocal, cRPC, cEcho, cLocal time.Duration
	b.ReportAllocs()
	for b.Loop() {
		t0, c0 := time.Now(), cpuTime()
		callFlash()
		t1, c1 := time.Now(), cpuTime()
		callEcho()
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
	b.ReportMetric(float64(len(reqRaw)), "req-bytes")
	b.ReportMetric(float64(len(flashResp.b)), "resp-bytes")
	b.ReportMetric(float64(tRPC-tEcho-tLocal)/float64(tLocal), "server-cost-fraction")
	// The same fraction from the process's CPU time (client and server;
	// the client's share is the same for both calls), which the
	// scheduling delays of a shared machine do not inflate.
	b.ReportMetric(float64(cRPC-cEcho-cLocal)/float64(cLocal), "server-cpu-fraction")
}

// BenchmarkFlashServerOwnCost is the server's own work for the request of
// BenchmarkUnaryFlashServerCost without the transport: the wire codec
// decodes the request's bytes (through the fluid memo, as a Host does),
// the Flash handler validates, looks the compiled fluid up, solves and
// encodes the result, and the codec encodes the answer; interleaved in one
// loop with the same flash in-process. It reports both and
// own-cost-fraction, (handler − in-process)/in-process: the numerator of
// server-cost-fraction without the loopback round trips, whose run-to-run
// spread on a shared machine is larger than the whole difference. What it
// leaves out runs for the empty RPC too: the interceptors (admission,
// metrics, logging, panic recovery, the deadline cap) and gRPC's framing.
func BenchmarkFlashServerOwnCost(b *testing.B) {
	s, err := New(Config{}, nil, prometheus.NewRegistry())
	if err != nil {
		b.Fatal(err)
	}
	codec := newWireCodec(s.memo)
	ctx := context.Background()
	reqRaw, err := proto.Marshal(benchFlashReq(true))
	if err != nil {
		b.Fatal(err)
	}
	data := mem.BufferSlice{mem.SliceBuffer(reqRaw)}
	handle := func() {
		req := new(fugadv1.FlashRequest)
		if err := codec.Unmarshal(data, req); err != nil {
			b.Fatal(err)
		}
		resp, err := s.Flash(ctx, req)
		if err != nil {
			b.Fatal(err)
		}
		out, err := codec.Marshal(resp)
		if err != nil {
			b.Fatal(err)
		}
		out.Free()
	}
	handle()
	ip := newInProcess(b)
	ip.flash(b)
	var tHandler, tLocal time.Duration
	b.ReportAllocs()
	for b.Loop() {
		t0 := time.Now()
		handle()
		t1 := time.Now()
		ip.flash(b)
		tHandler += t1.Sub(t0)
		tLocal += time.Since(t1)
	}
	n := float64(b.N)
	b.ReportMetric(float64(tHandler.Nanoseconds())/n, "handler-ns")
	b.ReportMetric(float64(tLocal.Nanoseconds())/n, "inprocess-ns")
	b.ReportMetric(float64(tHandler-tLocal)/float64(tLocal), "own-cost-fraction")
}

// cpuTime is the user plus system CPU time of the process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// throughput measures states per CPU-second of the server process (a
// child, see the methodology above: transport, decoding, solving,
// encoding and garbage collection count; the client's work does not) for
// run, and of the in-process flash on the same number of goroutines as
// the server's workers, by this process's CPU time, alternating in rounds
// so that both see the same machine, and reports both and their ratio
// (target ≥ 0.70). The server's CPU is read before and after each round
// by an RPC, whose own cost (a few tens of µs per round of 100 states)
// is charged to the server.
func throughput(b *testing.B, bs *benchServer, statesPerOp, workers int, run func()) {
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
		s0 := bs.serverCPU(b)
		run()
		s1 := bs.serverCPU(b)
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
		cpuSrv += s1 - s0
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
// (cache bypassed) over loopback TCP to a server in a child process.
func BenchmarkFlashBatchThroughput(b *testing.B) {
	bs := startBenchChild(b, runtime.GOMAXPROCS(0))
	states := make([]*fugadv1.FlashState, 100)
	for i := range states {
		states[i] = tpStateX(nil, 250, 5e6)
	}
	req := &fugadv1.FlashBatchRequest{Fluid: gas10Fluid(), MoleFractions: gas10X, States: states, BypassCache: true}
	ctx := context.Background()
	throughput(b, bs, len(states), batchWorkers(len(states)), func() {
		resp, err := bs.client.FlashBatch(ctx, req)
		if err != nil || resp.GetItems()[99].GetStatus().GetCode() != 0 {
			b.Fatalf("batch: %v", err)
		}
	})
}

// BenchmarkFlashStreamThroughput pipelines 100 messages per op on one
// stream to a server in a child process (cache bypassed, no implicit warm
// start, so that each message is the same cold flash as the baseline).
// A stream is sequential, so the baseline runs on one goroutine.
func BenchmarkFlashStreamThroughput(b *testing.B) {
	bs := startBenchChild(b, runtime.GOMAXPROCS(0))
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
	throughput(b, bs, perOp, 1, func() {
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
	res, err := s.answerFlash(ctx, "Flash", req, job, true, nil)
	if err != nil || len(res.ProtoReflect().GetUnknown()) == 0 {
		b.Fatalf("not a hit: %v", err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := s.answerFlash(ctx, "Flash", req, job, true, nil); err != nil {
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
