package server

import (
	"context"
	"net"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"go.uber.org/zap"
	"go.uber.org/zap/zaptest/observer"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	spb "google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"
	"google.golang.org/grpc/test/bufconn"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/flash"
)

// testEnv is a Server behind a real gRPC connection.
type testEnv struct {
	srv    *Server
	host   *Host
	reg    *prometheus.Registry
	conn   *grpc.ClientConn
	client fugadv1.FugadServiceClient
	logs   *observer.ObservedLogs
	addr   string // set for TCP environments
}

type envOptions struct {
	cfg  Config
	host HostOptions
	tcp  bool // loopback TCP instead of bufconn
	hook func(ctx context.Context, method string)
	// flashOpts adjusts the options of every T–P flash (Server.flashOptionsHook).
	flashOpts func(*flash.Options)
}

func newEnv(t *testing.T, o envOptions) *testEnv {
	t.Helper()
	core, logs := observer.New(zap.DebugLevel)
	reg := prometheus.NewRegistry()
	srv, err := New(o.cfg, zap.New(core), reg)
	if err != nil {
		t.Fatal(err)
	}
	srv.solveHook = o.hook
	srv.flashOptionsHook = o.flashOpts
	host, err := NewHost(srv, reg, o.host)
	if err != nil {
		t.Fatal(err)
	}
	e := &testEnv{srv: srv, host: host, reg: reg, logs: logs}
	var lis net.Listener
	var dial []grpc.DialOption
	target := "passthrough:///bufnet"
	if o.tcp {
		lis, err = net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		e.addr = lis.Addr().String()
		target = e.addr
	} else {
		bl := bufconn.Listen(1 << 20)
		lis = bl
		dial = append(dial, grpc.WithContextDialer(func(ctx context.Context, _ string) (net.Conn, error) { return bl.DialContext(ctx) }))
	}
	served := make(chan error, 1)
	go func() { served <- host.Serve(lis) }()
	dial = append(dial, grpc.WithTransportCredentials(insecure.NewCredentials()))
	conn, err := grpc.NewClient(target, dial...)
	if err != nil {
		t.Fatal(err)
	}
	e.conn = conn
	e.client = fugadv1.NewFugadServiceClient(conn)
	t.Cleanup(func() {
		_ = conn.Close()
		host.Shutdown()
		select {
		case err := <-served:
			if err != nil {
				t.Errorf("Serve: %v", err)
			}
		case <-time.After(10 * time.Second):
			t.Error("Serve did not return after Shutdown")
		}
	})
	return e
}

func testCtx(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// Fluids used by the tests: real library components.
func fluidOf(model fugadv1.Model, ids ...string) *fugadv1.Fluid {
	fl := &fugadv1.Fluid{Model: model}
	for _, id := range ids {
		fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: id}})
	}
	return fl
}

func gasFluid() *fugadv1.Fluid {
	return fluidOf(fugadv1.Model_MODEL_PR78, "methane", "ethane", "propane")
}

// gasX is a lean natural-gas-like composition of a fictional pipeline
// stream (invented for the tests).
var gasX = []float64{0.85, 0.10, 0.05}

// errorInfo returns the ErrorInfo and BadRequest details of err.
func details(t *testing.T, err error) (*status.Status, *errdetails.ErrorInfo, *errdetails.BadRequest) {
	t.Helper()
	st, ok := status.FromError(err)
	if !ok {
		t.Fatalf("not a status error: %v", err)
	}
	var ei *errdetails.ErrorInfo
	var br *errdetails.BadRequest
	for _, d := range st.Details() {
		switch d := d.(type) {
		case *errdetails.ErrorInfo:
			ei = d
		case *errdetails.BadRequest:
			br = d
		}
	}
	return st, ei, br
}

// wantViolation checks that err is code with a field violation on field.
func wantViolation(t *testing.T, err error, code codes.Code, field string) {
	t.Helper()
	if err == nil {
		t.Fatalf("got no error, want %v on %s", code, field)
	}
	st, ei, br := details(t, err)
	if st.Code() != code {
		t.Fatalf("code = %v (%s), want %v", st.Code(), st.Message(), code)
	}
	if ei == nil || ei.GetDomain() != ErrorDomain || ei.GetReason() == "" {
		t.Fatalf("ErrorInfo = %v, want domain %q and a reason", ei, ErrorDomain)
	}
	if br == nil {
		t.Fatalf("no BadRequest detail in %v", st.Proto())
	}
	var got []string
	for _, fv := range br.GetFieldViolations() {
		if fv.GetField() == field {
			if fv.GetDescription() == "" {
				t.Fatalf("violation on %s has no description", field)
			}
			return
		}
		got = append(got, fv.GetField()+": "+fv.GetDescription())
	}
	t.Fatalf("no violation on %q; got %q", field, got)
}

func codesOf(err error) codes.Code { return status.Code(err) }

// statusErr turns an item's google.rpc.Status back into an error.
func statusErr(s *spb.Status) error { return status.FromProto(s).Err() }
