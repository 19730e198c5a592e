// Package server implements the fugad gRPC service: it validates requests,
// translates them between the wire contract (api/fugad/v1) and the thermo
// packages, bounds concurrent solves, and reports what the solvers did as
// metrics and logs.
//
// # Errors
//
// Handlers return only gRPC status errors, each with a
// google.rpc.ErrorInfo (domain "fugad", an UPPER_SNAKE reason) and the
// detail that helps: google.rpc.BadRequest field violations naming the
// field path and the reason for INVALID_ARGUMENT, a NotConvergedDetail with
// the best estimate for ABORTED/NOT_CONVERGED. See the service comment in
// api/fugad/v1/fugad_service.proto for the full table.
//
// # Validation
//
// Every field is checked before any solver runs: numbers must be finite and
// within generous physical ranges (temperatures 1–10⁴ K, pressures
// 10⁻³–10¹⁰ Pa), compositions must have one non-negative entry per
// component and sum to 1 within 1e-6 relative (such sums are normalised to
// exactly 1; others are rejected), enums must be specified, and sizes must
// be within the configured Limits.
//
// # Load
//
// A fixed number of solver slots (Config.MaxConcurrentSolves) bounds the
// CPU work in progress. A call that finds every slot busy is answered at
// once with UNAVAILABLE (reason OVERLOADED) and counted in
// fugad_shed_total, so that a client's retry policy sends it to another
// replica instead of queueing here. Under a Host the decision is taken in
// the transport's tap handle, before the request is decoded; see
// admission.go.
package server

import (
	"context"
	"errors"
	"runtime"
	"sync/atomic"
	"unicode/utf8"

	"github.com/prometheus/client_golang/prometheus"
	"go.uber.org/zap"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/cache"
	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/flash"
)

// Server implements fugadv1.FugadServiceServer.
type Server struct {
	fugadv1.UnimplementedFugadServiceServer

	cfg     Config
	log     *zap.Logger
	metrics *metrics
	pool    *solverPool
	// gates are the admission controls of the methods admit sheds, by
	// full method name; shedGates those of every method that can be shed,
	// by short name.
	gates, shedGates map[string]*gate

	// fluids and results are the caches; nil means no caching.
	fluids  fluidStore
	results resultStore
	// memo holds the fluids the wire codec decoded (see codec.go).
	memo *fluidMemo
	// cacheVersion (data and model version) starts every cache key.
	cacheVersion string
	// directEncoding selects appendFlashResult for T–P answers: the
	// version strings it writes are valid UTF-8, so its bytes are those
	// of marshalAnswer (which would refuse invalid ones).
	directEncoding bool

	// solveHook, when set, runs inside every solver slot before the solve.
	// Tests use it to hold slots and to inject panics.
	solveHook func(ctx context.Context, method string)
	// flashOptionsHook, when set, adjusts the options of every T–P flash.
	// Tests use it to force outcomes the wire options cannot (for example
	// a phase cap below the phase count, which the flash reports as not
	// converged).
	flashOptionsHook func(*flash.Options)
}

var _ fugadv1.FugadServiceServer = (*Server)(nil)

// New returns a Server with the given configuration, logging to log and
// registering its metrics with reg. log may be nil (no logging).
func New(cfg Config, log *zap.Logger, reg prometheus.Registerer) (*Server, error) {
	cfg, err := cfg.withDefaults()
	if err != nil {
		return nil, err
	}
	if log == nil {
		log = zap.NewNop()
	}
	m, err := newMetrics(reg)
	if err != nil {
		return nil, err
	}
	s := &Server{
		cfg:     cfg,
		log:     log,
		metrics: m,
		pool:    newSolverPool(cfg.MaxConcurrentSolves),
		memo:    newFluidMemo(),
	}
	s.newGates()
	s.cacheVersion = cfg.DataVersion + "/" + cfg.ModelVersion
	s.directEncoding = utf8.ValidString(cfg.DataVersion) && utf8.ValidString(cfg.ModelVersion)
	if !cfg.Cache.Disabled {
		c, err := newCaches(cfg.Cache, s.cacheVersion, func(p any) error { return s.panicked("cache", nil, p) })
		if err != nil {
			return nil, err
		}
		if err := registerCacheMetrics(reg, c); err != nil {
			return nil, err
		}
		s.fluids, s.results = c, c
	}
	return s, nil
}

// Config returns the server's configuration with defaults filled in.
func (s *Server) Config() Config { return s.cfg }

// componentDataVersion is the version of the component data bank.
func componentDataVersion() string { return component.DataVersion }

// fluidStore caches compiled fluids under the deterministic encoding of
// their definition.
type fluidStore interface {
	get(def []byte) (*compiledFluid, bool)
	compiled(def []byte, build func() (*compiledFluid, error)) (*compiledFluid, error)
}

// resultStore caches serialised answers under a canonical key (built with
// beginKey). solve returns the answer's bytes and whether they may be
// stored.
type resultStore interface {
	do(ctx context.Context, key cache.Key, solve func(ctx context.Context) ([]byte, bool, error)) (value []byte, hit bool, err error)
}

// callInfo accumulates what one call did, for its log line.
type callInfo struct {
	states    atomic.Int64
	cacheHits atomic.Int64
}

type callInfoKey struct{}

// info returns the call's callInfo; a throwaway one outside the logging
// interceptor.
func info(ctx context.Context) *callInfo {
	if ci, ok := ctx.Value(callInfoKey{}).(*callInfo); ok {
		return ci
	}
	return new(callInfo)
}

// slot takes one solver slot for a call of method, or sheds the call at
// once. A call admitted by the tap handle (or a stream message whose
// caller took the slot) already holds one and takes nothing. The returned
// function releases what was taken.
func (s *Server) slot(ctx context.Context, method string) (func(), error) {
	if holdsSlot(ctx) {
		return noRelease, nil
	}
	if !s.pool.TryAcquire(1) {
		return nil, s.shedAnswer(method)
	}
	return s.releaseOne, nil
}

func noRelease() {}

func (s *Server) releaseOne() { s.pool.Release(1) }

// ctxErr converts a context's end into a status error.
func ctxErr(err error) error {
	switch {
	case err == nil:
		return nil
	case errors.Is(err, context.DeadlineExceeded):
		return withDetails(codes.DeadlineExceeded, "deadline exceeded before the solve finished", ReasonDeadline, nil)
	case errors.Is(err, context.Canceled):
		return withDetails(codes.Canceled, "call cancelled", ReasonCancelled, nil)
	}
	if _, ok := status.FromError(err); ok {
		return err
	}
	return errInternal("unexpected context error")
}

// inSlot runs solve while holding one solver slot: it sheds the call when
// no slot is free, stops before starting when ctx has ended, and runs the
// test hook. A panic in solve is recovered here, logged with req and
// answered INTERNAL, also when solve runs on a cache goroutine.
func (s *Server) inSlot(ctx context.Context, method string, req proto.Message, solve func() error) (err error) {
	release, err := s.slot(ctx, method)
	if err != nil {
		return err
	}
	defer release()
	defer func() {
		if p := recover(); p != nil {
			err = s.panicked("/"+fugadv1.FugadService_ServiceDesc.ServiceName+"/"+method, req, p)
		}
	}()
	if err := ctx.Err(); err != nil {
		return ctxErr(err)
	}
	if s.solveHook != nil {
		s.solveHook(ctx, method)
		if err := ctx.Err(); err != nil {
			return ctxErr(err)
		}
	}
	return solve()
}

// report returns a SolverReport with the versions filled in.
func (s *Server) report() *fugadv1.SolverReport {
	return &fugadv1.SolverReport{DataVersion: s.cfg.DataVersion, ModelVersion: s.cfg.ModelVersion}
}

// batchWorkers bounds the goroutines one FlashBatch call uses: one per
// state, at most GOMAXPROCS. All but the first run on borrowed slots.
func batchWorkers(states int) int { return max(1, min(states, runtime.GOMAXPROCS(0))) }
