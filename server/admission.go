package server

import (
	"context"
	"sync/atomic"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/grpc/tap"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Admission.
//
// The solver pool has Config.MaxConcurrentSolves slots. Every call that
// solves holds one from admission to answer: a unary solving call (Flash,
// FlashBatch, FugacityCoefficients, SaturationPoint, PhaseEnvelope) takes
// it in the transport's tap handle (admit), when the request's headers
// arrive and before its message is read, decoded or validated; a
// FlashStream message takes it as soon as it is received. There is no
// queue: a call that finds every slot held is answered UNAVAILABLE (reason
// OVERLOADED, with a RetryInfo) from the tap handle, at the cost of one
// atomic operation and the header write, and counted in
// fugad_shed_total{method}. Because the decision comes before any work, a
// shed answer costs a few microseconds of CPU however loaded the solvers
// are, and accepted calls never wait behind a backlog. A cache hit holds a
// slot too: whether a call is a hit is known only after decoding, which is
// the work admission exists to avoid.
//
// A FlashBatch owns its one slot and may borrow spare ones to solve its
// states in parallel, but only spare ones: a borrowed slot does not count
// against admission, and the borrowing worker gives it back after the
// state it is solving as soon as admissions fill the pool (see
// solverPool). A batch therefore speeds up on an idle server and shrinks
// to one worker as other calls arrive; it never causes a call to be shed.
//
// The health service, reflection and the discovery calls (ListModels,
// ListComponents) are never shed.

// solverPool counts the solver slots in use: admitted (one per admitted
// call or stream message) and borrowed (by batch workers beyond a batch's
// first). Both live in one word, so that every decision sees a consistent
// pair. A call is admitted while admitted < size; a slot is borrowed while
// admitted + borrowed < size; a borrower must give its slot back once
// admitted + borrowed > size (an admission has landed on top of it).
type solverPool struct {
	size  int64
	state atomic.Int64 // admitted<<32 | borrowed
}

const (
	admittedUnit = 1 << 32
	borrowedMask = admittedUnit - 1
)

func newSolverPool(size int) *solverPool { return &solverPool{size: int64(size)} }

// TryAcquire admits n calls if n admission slots are free, without
// waiting, and reports whether it did.
func (p *solverPool) TryAcquire(n int64) bool {
	for {
		s := p.state.Load()
		if s>>32+n > p.size {
			return false
		}
		if p.state.CompareAndSwap(s, s+n*admittedUnit) {
			return true
		}
	}
}

// Release frees n admission slots.
func (p *solverPool) Release(n int64) { p.state.Add(-n * admittedUnit) }

// tryBorrow takes a spare slot for a batch worker if one is free.
func (p *solverPool) tryBorrow() bool {
	for {
		s := p.state.Load()
		if s>>32+s&borrowedMask >= p.size {
			return false
		}
		if p.state.CompareAndSwap(s, s+1) {
			return true
		}
	}
}

// spare reports whether a slot could be borrowed now.
func (p *solverPool) spare() bool {
	s := p.state.Load()
	return s>>32+s&borrowedMask < p.size
}

// oversubscribed reports whether admissions have taken slots that batch
// workers borrowed, so that a borrower must give its slot back.
func (p *solverPool) oversubscribed() bool {
	s := p.state.Load()
	return s>>32+s&borrowedMask > p.size
}

// giveBack returns a borrowed slot.
func (p *solverPool) giveBack() { p.state.Add(-1) }

// admission is the solver slot of one admitted call, carried in its
// context. It is released exactly once: by the admission interceptor when
// the handler returns, or, for a call whose handler never runs (a message
// that fails to arrive or decode), when the call's context ends.
type admission struct {
	pool *solverPool
	stop func() bool // of the context.AfterFunc that releases on the context's end
}

type admissionKey struct{}

// heldByCaller marks a context whose caller already holds a solver slot
// for the solve (a FlashStream message).
var heldByCaller = &admission{}

func (a *admission) release() { a.pool.Release(1) }

// done releases the slot at the end of the handler, unless the context's
// end has released it already.
func (a *admission) done() {
	if a.stop() {
		a.release()
	}
}

// holdsSlot reports whether ctx belongs to a call that holds a solver
// slot already.
func holdsSlot(ctx context.Context) bool {
	_, ok := ctx.Value(admissionKey{}).(*admission)
	return ok
}

// gate is the admission control of one method.
type gate struct {
	shed       prometheus.Counter
	overloaded error // the shed answer, built once
}

// newGates builds the gates of the solving methods, keyed by full method
// name, and the shed answer of every method that can be shed.
func (s *Server) newGates() {
	s.gates = make(map[string]*gate)
	s.shedGates = make(map[string]*gate)
	for _, m := range []struct {
		full, short string
		tap         bool
	}{
		{fugadv1.FugadService_Flash_FullMethodName, "Flash", true},
		{fugadv1.FugadService_FlashBatch_FullMethodName, "FlashBatch", true},
		{fugadv1.FugadService_FugacityCoefficients_FullMethodName, "FugacityCoefficients", true},
		{fugadv1.FugadService_SaturationPoint_FullMethodName, "SaturationPoint", true},
		{fugadv1.FugadService_PhaseEnvelope_FullMethodName, "PhaseEnvelope", true},
		{fugadv1.FugadService_FlashStream_FullMethodName, "FlashStream", false},
	} {
		g := &gate{shed: s.metrics.shed.WithLabelValues(m.short), overloaded: errOverloaded(m.short)}
		s.shedGates[m.short] = g
		if m.tap {
			s.gates[m.full] = g
		}
	}
}

// shedAnswer counts a shed call of method (a short name) and returns its
// status.
func (s *Server) shedAnswer(method string) error {
	if g, ok := s.shedGates[method]; ok {
		g.shed.Inc()
		return g.overloaded
	}
	s.metrics.shed.WithLabelValues(method).Inc()
	return errOverloaded(method)
}

// admit is the transport's tap handle (grpc.InTapHandle): it admits a
// solving call into a solver slot or sheds it, before the call's message is
// read. It runs on the connection's reader goroutine, so it does only
// constant work. The error it returns is a status error, which gRPC sends
// as it is (code, message and details).
func (s *Server) admit(ctx context.Context, info *tap.Info) (context.Context, error) {
	g, ok := s.gates[info.FullMethodName]
	if !ok {
		return ctx, nil
	}
	if !s.pool.TryAcquire(1) {
		g.shed.Inc()
		return ctx, g.overloaded
	}
	a := &admission{pool: s.pool}
	a.stop = context.AfterFunc(ctx, a.release)
	return context.WithValue(ctx, admissionKey{}, a), nil
}

// admittedUnary is the outermost unary interceptor: it releases the slot
// admit took once the handler has returned.
func (s *Server) admittedUnary(ctx context.Context, req any, in *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	if a, ok := ctx.Value(admissionKey{}).(*admission); ok && a != heldByCaller {
		defer a.done()
	}
	return handler(ctx, req)
}
