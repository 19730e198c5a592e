package main

import (
	"bytes"
	"context"
	"io"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"
	"google.golang.org/grpc/test/bufconn"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/protoadapt"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/server"
)

// result is what one fugactl run produced.
type result struct {
	code           int
	stdout, stderr string
}

// runCLI runs fugactl with args; dial, when set, connects it to an
// in-memory server.
func runCLI(t *testing.T, dial func(context.Context, string) (net.Conn, error), stdin string, args ...string) result {
	t.Helper()
	var out, errb bytes.Buffer
	a := &app{
		stdin: strings.NewReader(stdin), stdout: &out, stderr: &errb,
		getenv: func(string) string { return "" },
		dialer: dial,
	}
	code := a.run(args)
	return result{code, out.String(), errb.String()}
}

// bufServe serves register's services on an in-memory listener and
// returns its dialer.
func bufServe(t *testing.T, register func(*grpc.Server)) func(context.Context, string) (net.Conn, error) {
	t.Helper()
	lis := bufconn.Listen(1 << 20)
	g := grpc.NewServer()
	register(g)
	go func() { _ = g.Serve(lis) }()
	t.Cleanup(g.Stop)
	return func(ctx context.Context, _ string) (net.Conn, error) { return lis.DialContext(ctx) }
}

// realServer starts the fugad server (package server, default
// configuration) behind a gRPC host on an in-memory listener.
func realServer(t *testing.T) func(context.Context, string) (net.Conn, error) {
	t.Helper()
	reg := prometheus.NewRegistry()
	srv, err := server.New(server.Config{}, nil, reg)
	if err != nil {
		t.Fatal(err)
	}
	host, err := server.NewHost(srv, reg, server.HostOptions{})
	if err != nil {
		t.Fatal(err)
	}
	lis := bufconn.Listen(1 << 20)
	done := make(chan error, 1)
	go func() { done <- host.Serve(lis) }()
	t.Cleanup(func() {
		host.Shutdown()
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			t.Error("server did not stop")
		}
	})
	return func(ctx context.Context, _ string) (net.Conn, error) { return lis.DialContext(ctx) }
}

// directClient is a plain gRPC client on the same in-memory server, to
// compare fugactl's output with the service's own answer.
func directClient(t *testing.T, dial func(context.Context, string) (net.Conn, error)) fugadv1.FugadServiceClient {
	t.Helper()
	conn, err := grpc.NewClient("passthrough:///bufnet", grpc.WithContextDialer(dial), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = conn.Close() })
	return fugadv1.NewFugadServiceClient(conn)
}

// recorder is a fake fugad service that records every request it gets and
// answers with canned responses or errors. It stands in for endpoints
// whose solvers the real server does not have yet, so that the tests can
// check what fugactl sends and how it prints answers and errors.
type recorder struct {
	fugadv1.UnimplementedFugadServiceServer

	mu         sync.Mutex
	flash      []*fugadv1.FlashRequest
	batch      []*fugadv1.FlashBatchRequest
	stream     []*fugadv1.FlashStreamRequest
	envelope   []*fugadv1.PhaseEnvelopeRequest
	saturation []*fugadv1.SaturationPointRequest

	err           error // returned by every unary call when set
	flashResult   *fugadv1.FlashResult
	batchResp     *fugadv1.FlashBatchResponse
	envelopeResp  *fugadv1.PhaseEnvelopeResponse
	saturationRsp *fugadv1.SaturationPointResponse
	// streamAnswer builds the answer to one stream message.
	streamAnswer func(*fugadv1.FlashStreamRequest) *fugadv1.FlashStreamResponse
}

var _ fugadv1.FugadServiceServer = (*recorder)(nil)

func (r *recorder) Flash(_ context.Context, req *fugadv1.FlashRequest) (*fugadv1.FlashResponse, error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.flash = append(r.flash, proto.Clone(req).(*fugadv1.FlashRequest))
	if r.err != nil {
		return nil, r.err
	}
	return &fugadv1.FlashResponse{Result: r.flashResult}, nil
}

func (r *recorder) FlashBatch(_ context.Context, req *fugadv1.FlashBatchRequest) (*fugadv1.FlashBatchResponse, error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.batch = append(r.batch, proto.Clone(req).(*fugadv1.FlashBatchRequest))
	if r.err != nil {
		return nil, r.err
	}
	return r.batchResp, nil
}

func (r *recorder) FlashStream(st fugadv1.FugadService_FlashStreamServer) error {
	for {
		req, err := st.Recv()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
		r.mu.Lock()
		r.stream = append(r.stream, proto.Clone(req).(*fugadv1.FlashStreamRequest))
		r.mu.Unlock()
		if err := st.Send(r.streamAnswer(req)); err != nil {
			return err
		}
	}
}

func (r *recorder) PhaseEnvelope(_ context.Context, req *fugadv1.PhaseEnvelopeRequest) (*fugadv1.PhaseEnvelopeResponse, error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.envelope = append(r.envelope, proto.Clone(req).(*fugadv1.PhaseEnvelopeRequest))
	if r.err != nil {
		return nil, r.err
	}
	return r.envelopeResp, nil
}

func (r *recorder) SaturationPoint(_ context.Context, req *fugadv1.SaturationPointRequest) (*fugadv1.SaturationPointResponse, error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.saturation = append(r.saturation, proto.Clone(req).(*fugadv1.SaturationPointRequest))
	if r.err != nil {
		return nil, r.err
	}
	return r.saturationRsp, nil
}

// serveRecorder serves r in memory.
func serveRecorder(t *testing.T, r *recorder) func(context.Context, string) (net.Conn, error) {
	return bufServe(t, func(g *grpc.Server) { fugadv1.RegisterFugadServiceServer(g, r) })
}

// statusWith builds a status error with an ErrorInfo and extra details, as
// the fugad server does (AIP-193).
func statusWith(t *testing.T, code codes.Code, msg, reason string, details ...proto.Message) error {
	t.Helper()
	st := status.New(code, msg)
	all := []protoadapt.MessageV1{&errdetails.ErrorInfo{Reason: reason, Domain: "fugad", Metadata: map[string]string{"endpoint": "Flash"}}}
	for _, d := range details {
		all = append(all, protoadapt.MessageV1Of(d))
	}
	ds, err := st.WithDetails(all...)
	if err != nil {
		t.Fatal(err)
	}
	return ds.Err()
}

// unimplemented is the status the server answers for an endpoint without a
// solver.
func unimplemented(t *testing.T) error {
	return statusWith(t, codes.Unimplemented, "Flash: the request is valid, but this server has no solver for it yet", "NOT_IMPLEMENTED")
}

// kestrelFeed is a fictional inlet gas of the Kestrel Ridge plant,
// invented for these tests; amounts in mol %, summing to 100.
const kestrelFeed = "nitrogen=1.2, carbon-dioxide=1.8, methane=87, ethane=5.2, propane=2.4, isobutane=0.7, n-butane=0.8, n-pentane=0.5, n-hexane=0.4"

var kestrelIDs = []string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "n-pentane", "n-hexane"}
var kestrelX = []float64{0.012, 0.018, 0.87, 0.052, 0.024, 0.007, 0.008, 0.005, 0.004}

// sameFractions compares compositions to rounding.
func sameFractions(got, want []float64) bool {
	if len(got) != len(want) {
		return false
	}
	for i := range got {
		if !closeTo(got[i], want[i], 1e-13) {
			return false
		}
	}
	return true
}
