package server

import (
	"context"
	"crypto/tls"
	"fmt"
	"net"
	"net/http"
	"runtime/debug"
	"strings"
	"sync"
	"time"

	grpcprom "github.com/grpc-ecosystem/go-grpc-middleware/providers/prometheus"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"go.uber.org/zap"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/keepalive"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/reflection"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Keepalive settings, after grpc-go's examples/features/keepalive.
var (
	// KeepaliveEnforcement tolerates client pings every 10 s or slower, also
	// on connections without active calls (the settings documented for
	// fugad clients); faster pings get the connection closed.
	KeepaliveEnforcement = keepalive.EnforcementPolicy{MinTime: 10 * time.Second, PermitWithoutStream: true}
	// KeepaliveParams ages connections out after 5 min, then gives their
	// calls 30 s to finish, so that long-lived HTTP/2 connections rebalance
	// across replicas after a scale-up. A FlashStream therefore lasts at most
	// about 5.5 min; clients reopen it.
	KeepaliveParams = keepalive.ServerParameters{MaxConnectionAge: 5 * time.Minute, MaxConnectionAgeGrace: 30 * time.Second}
)

// Health service names besides the overall status "" and the service's
// full name.
const (
	// HealthReadiness is SERVING while the server accepts calls and
	// NOT_SERVING from the start of a shutdown.
	HealthReadiness = "readiness"
	// HealthLiveness is SERVING for as long as the process runs: a busy or
	// draining server is alive.
	HealthLiveness = "liveness"
)

// DefaultDrainTimeout bounds a graceful stop before it becomes a hard stop.
const DefaultDrainTimeout = 20 * time.Second

// HostOptions configure a Host. The zero value serves plaintext without
// reflection and drains for DefaultDrainTimeout.
type HostOptions struct {
	// Reflection registers the gRPC server reflection service.
	Reflection bool
	// TLS, when set, serves TLS with this configuration (set ClientAuth and
	// ClientCAs for mutual TLS).
	TLS *tls.Config
	// DrainDelay is the time between health turning NOT_SERVING and the
	// start of the graceful stop, so that load balancers probing health
	// stop sending new calls first. Default 0.
	DrainDelay time.Duration
	// DrainTimeout bounds the graceful stop; calls still running then are
	// cut off by a hard stop. Default DefaultDrainTimeout.
	DrainTimeout time.Duration
}

// Host is a gRPC server carrying the fugad service, health, optional
// reflection, interceptors (metrics, logging, panic recovery, deadline cap)
// and the keepalive policy.
type Host struct {
	srv    *Server
	grpc   *grpc.Server
	health *health.Server
	opts   HostOptions

	shutdownOnce sync.Once
}

// NewHost builds the gRPC server for srv. The gRPC server metrics (with
// the handling-time histogram) are registered with reg, which should be the
// registry srv was built with.
func NewHost(srv *Server, reg prometheus.Registerer, opts HostOptions) (*Host, error) {
	if opts.DrainTimeout <= 0 {
		opts.DrainTimeout = DefaultDrainTimeout
	}
	gm := grpcprom.NewServerMetrics(grpcprom.WithServerHandlingTimeHistogram(
		grpcprom.WithHistogramBuckets([]float64{1e-5, 3e-5, 1e-4, 3e-4, 1e-3, 3e-3, 0.01, 0.03, 0.1, 0.3, 1, 3, 10, 30}),
	))
	if err := reg.Register(gm); err != nil {
		return nil, fmt.Errorf("server: registering gRPC metrics: %w", err)
	}
	so := []grpc.ServerOption{
		grpc.KeepaliveEnforcementPolicy(KeepaliveEnforcement),
		grpc.KeepaliveParams(KeepaliveParams),
		grpc.MaxRecvMsgSize(srv.cfg.MaxMessageBytes),
		grpc.MaxSendMsgSize(srv.cfg.MaxMessageBytes),
		// Admission before anything is read: see admission.go. Shed calls
		// never reach the interceptors, so they appear in
		// fugad_shed_total, not in the grpc_server_* metrics or the log.
		grpc.InTapHandle(srv.admit),
		// The proto encoding, with recurring fluids decoded once: see
		// codec.go.
		grpc.ForceServerCodecV2(newWireCodec(srv.memo)),
		grpc.ChainUnaryInterceptor(srv.admittedUnary, gm.UnaryServerInterceptor(), srv.logUnary, srv.recoverUnary, srv.deadlineUnary),
		grpc.ChainStreamInterceptor(gm.StreamServerInterceptor(), srv.logStream, srv.recoverStream),
	}
	if opts.TLS != nil {
		so = append(so, grpc.Creds(credentials.NewTLS(opts.TLS)))
	}
	g := grpc.NewServer(so...)
	fugadv1.RegisterFugadServiceServer(g, srv)
	hs := health.NewServer()
	for _, name := range []string{"", fugadv1.FugadService_ServiceDesc.ServiceName, HealthReadiness, HealthLiveness} {
		hs.SetServingStatus(name, healthpb.HealthCheckResponse_SERVING)
	}
	healthpb.RegisterHealthServer(g, hs)
	if opts.Reflection {
		reflection.Register(g)
	}
	gm.InitializeMetrics(g)
	return &Host{srv: srv, grpc: g, health: hs, opts: opts}, nil
}

// GRPC returns the underlying gRPC server.
func (h *Host) GRPC() *grpc.Server { return h.grpc }

// Serve accepts connections on lis until Shutdown; it returns nil after a
// shutdown.
func (h *Host) Serve(lis net.Listener) error {
	err := h.grpc.Serve(lis)
	if err == grpc.ErrServerStopped {
		return nil
	}
	return err
}

// Shutdown drains the server: health turns NOT_SERVING (overall, the
// service and readiness; liveness stays SERVING), then after DrainDelay a
// graceful stop refuses new calls and waits for running ones, for at most
// DrainTimeout, after which a hard stop cancels whatever still runs. It
// returns when the server has stopped and reports whether the drain
// completed gracefully. Only the first call does anything.
func (h *Host) Shutdown() (graceful bool) {
	graceful = true
	h.shutdownOnce.Do(func() {
		for _, name := range []string{"", fugadv1.FugadService_ServiceDesc.ServiceName, HealthReadiness} {
			h.health.SetServingStatus(name, healthpb.HealthCheckResponse_NOT_SERVING)
		}
		h.srv.log.Info("draining", zap.Duration("drain_delay", h.opts.DrainDelay), zap.Duration("drain_timeout", h.opts.DrainTimeout))
		if h.opts.DrainDelay > 0 {
			time.Sleep(h.opts.DrainDelay)
		}
		done := make(chan struct{})
		go func() {
			h.grpc.GracefulStop()
			close(done)
		}()
		t := time.NewTimer(h.opts.DrainTimeout)
		defer t.Stop()
		select {
		case <-done:
		case <-t.C:
			graceful = false
			h.srv.log.Warn("drain timeout: stopping hard", zap.Duration("drain_timeout", h.opts.DrainTimeout))
			h.grpc.Stop()
			<-done
		}
	})
	return graceful
}

// MetricsHandler serves the metrics of g in the Prometheus exposition
// format.
func MetricsHandler(g prometheus.Gatherer) http.Handler {
	return promhttp.HandlerFor(g, promhttp.HandlerOpts{})
}

// isHealthMethod reports whether method belongs to the health service,
// whose calls are not logged.
func isHealthMethod(method string) bool {
	return strings.HasPrefix(method, "/grpc.health.v1.Health/")
}

// logCall writes the one line of a finished call.
func (s *Server) logCall(ctx context.Context, method string, start time.Time, ci *callInfo, err error) {
	code := status.Code(err)
	fields := []zap.Field{
		zap.String("method", method),
		zap.String("code", code.String()),
		zap.Duration("duration", time.Since(start)),
		zap.Int64("states", ci.states.Load()),
		zap.Int64("cache_hits", ci.cacheHits.Load()),
	}
	if p, ok := peer.FromContext(ctx); ok && p.Addr != nil {
		fields = append(fields, zap.String("peer", p.Addr.String()))
	}
	switch code {
	case codes.OK, codes.InvalidArgument, codes.Canceled, codes.NotFound, codes.Unimplemented, codes.Aborted:
		s.log.Info("call", fields...)
	case codes.Internal, codes.Unknown, codes.DataLoss:
		s.log.Error("call", append(fields, zap.String("error", status.Convert(err).Message()))...)
	default:
		s.log.Warn("call", append(fields, zap.String("error", status.Convert(err).Message()))...)
	}
}

func (s *Server) logUnary(ctx context.Context, req any, in *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	if isHealthMethod(in.FullMethod) {
		return handler(ctx, req)
	}
	ci := new(callInfo)
	start := time.Now()
	resp, err := handler(context.WithValue(ctx, callInfoKey{}, ci), req)
	s.logCall(ctx, in.FullMethod, start, ci, err)
	return resp, err
}

// wrappedStream replaces a stream's context.
type wrappedStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (w *wrappedStream) Context() context.Context { return w.ctx }

func (s *Server) logStream(srv any, ss grpc.ServerStream, in *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	if isHealthMethod(in.FullMethod) {
		return handler(srv, ss)
	}
	ci := new(callInfo)
	start := time.Now()
	err := handler(srv, &wrappedStream{ServerStream: ss, ctx: context.WithValue(ss.Context(), callInfoKey{}, ci)})
	s.logCall(ss.Context(), in.FullMethod, start, ci, err)
	return err
}

// maxLoggedRequest bounds the request text logged with a panic.
const maxLoggedRequest = 4096

// panicked logs and counts a recovered panic and returns the INTERNAL
// status for it.
func (s *Server) panicked(method string, req any, p any) error {
	s.metrics.panics.Inc()
	fields := []zap.Field{zap.String("method", method), zap.Any("panic", p), zap.ByteString("stack", debug.Stack())}
	if m, ok := req.(proto.Message); ok {
		b, err := protojson.Marshal(m)
		if err == nil {
			if len(b) > maxLoggedRequest {
				b = append(b[:maxLoggedRequest], "…"...)
			}
			fields = append(fields, zap.ByteString("request", b))
		}
	}
	s.log.Error("panic recovered", fields...)
	return errInternal("the server hit a defect while handling this call")
}

func (s *Server) recoverUnary(ctx context.Context, req any, in *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (resp any, err error) {
	defer func() {
		if p := recover(); p != nil {
			resp, err = nil, s.panicked(in.FullMethod, req, p)
		}
	}()
	return handler(ctx, req)
}

func (s *Server) recoverStream(srv any, ss grpc.ServerStream, in *grpc.StreamServerInfo, handler grpc.StreamHandler) (err error) {
	defer func() {
		if p := recover(); p != nil {
			err = s.panicked(in.FullMethod, nil, p)
		}
	}()
	return handler(srv, ss)
}

// deadlineUnary caps the deadline of a unary call at Config.MaxDeadline
// and gives one to calls that have none.
func (s *Server) deadlineUnary(ctx context.Context, req any, in *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	if d, ok := ctx.Deadline(); !ok || time.Until(d) > s.cfg.MaxDeadline {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, s.cfg.MaxDeadline)
		defer cancel()
	}
	return handler(ctx, req)
}
