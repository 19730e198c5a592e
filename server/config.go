package server

import (
	"fmt"
	"runtime"
	"time"
)

// Limits bound what one request may ask for. Each field's comment gives its
// default (used when the field is zero) and the status code a request over
// the limit receives.
type Limits struct {
	// MaxComponents bounds the components of one fluid. Default 100.
	// Over it: INVALID_ARGUMENT, reason LIMIT_EXCEEDED, with a field
	// violation on fluid.components.
	MaxComponents int
	// MaxBatchStates bounds the states of one FlashBatch call. Default
	// 10000. Over it: INVALID_ARGUMENT, reason LIMIT_EXCEEDED, field states.
	MaxBatchStates int
	// MaxEnvelopePoints bounds PhaseEnvelopeRequest.max_points and is the
	// value used when it is zero. Default 2000. Over it: INVALID_ARGUMENT,
	// reason LIMIT_EXCEEDED, field max_points.
	MaxEnvelopePoints int
	// MaxInteractionParameters bounds Fluid.interaction_parameters.
	// Default MaxComponents·(MaxComponents−1)/2, one per pair. Over it:
	// INVALID_ARGUMENT, reason LIMIT_EXCEEDED.
	MaxInteractionParameters int
	// MaxMessageBytes bounds received and sent messages. Default 16 MiB.
	// Over it gRPC itself answers RESOURCE_EXHAUSTED.
	MaxMessageBytes int
	// MaxDeadline caps the deadline of a unary call and of each message of a
	// stream; a call without a deadline gets this one. Default 30 s. Work
	// still running at the deadline stops with DEADLINE_EXCEEDED.
	MaxDeadline time.Duration
	// StreamIdleTimeout ends a FlashStream that receives no message for
	// this long, with DEADLINE_EXCEEDED, reason STREAM_IDLE. Default 5 min.
	StreamIdleTimeout time.Duration
}

// Config configures a Server. The zero value is valid: every zero field
// takes the default stated beside it.
type Config struct {
	Limits
	// MaxConcurrentSolves is the number of solver slots: the calls (and
	// stream messages) being answered at once. Each holds one slot from
	// admission to answer; a FlashBatch may borrow spare slots for its
	// states and gives them back as soon as other calls need them. There is
	// no queue: a call that finds every slot held is shed at once, before
	// its message is decoded, with UNAVAILABLE, reason OVERLOADED, so that
	// a client's retry policy moves it to another replica (see
	// admission.go). Default DefaultMaxConcurrentSolves().
	MaxConcurrentSolves int
	// Cache sizes the result and compiled-fluid caches.
	Cache CacheConfig
	// DataVersion and ModelVersion are reported in every SolverReport and
	// by the discovery calls. Defaults: the component data bank's version
	// and ModelVersion.
	DataVersion, ModelVersion string
}

// Default limits (see Limits for what each bounds).
const (
	DefaultMaxComponents     = 100
	DefaultMaxBatchStates    = 10000
	DefaultMaxEnvelopePoints = 2000
	DefaultMaxMessageBytes   = 16 << 20
	DefaultMaxDeadline       = 30 * time.Second
	DefaultStreamIdleTimeout = 5 * time.Minute
)

// DefaultMaxConcurrentSolves is the default size of the solver pool:
// GOMAXPROCS − 1, at least 1. One processor's worth of CPU is left to the
// RPC layer, which works outside the slots: reading and decoding requests,
// shedding the excess, encoding answers. With a slot per processor the
// solvers alone can keep every processor busy, and Go's scheduler polls
// the network only when a processor runs out of work (or every 10 ms), so
// under overload a call would wait for a solve to finish before it could
// even be shed, and the answers of accepted calls would wait to be sent.
// Measured on 2 shared processors at 4× the sustainable rate of 16-state
// batches (TestOverload logs its figures): with 2 slots shed answers took
// 7 ms at the median and the server completed 5 % of its capacity; with 1,
// 0.3–1.4 ms and 40–60 %.
func DefaultMaxConcurrentSolves() int { return max(1, runtime.GOMAXPROCS(0)-1) }

// ModelVersion identifies the models and solvers compiled into this
// server; it changes whenever a change can alter a result's bytes.
const ModelVersion = "fugad-models-6"

// withDefaults returns c with every zero field replaced by its default, or
// an error naming a negative field.
func (c Config) withDefaults() (Config, error) {
	ints := []struct {
		name string
		v    *int
		def  int
	}{
		{"MaxComponents", &c.MaxComponents, DefaultMaxComponents},
		{"MaxBatchStates", &c.MaxBatchStates, DefaultMaxBatchStates},
		{"MaxEnvelopePoints", &c.MaxEnvelopePoints, DefaultMaxEnvelopePoints},
		{"MaxMessageBytes", &c.MaxMessageBytes, DefaultMaxMessageBytes},
		{"MaxConcurrentSolves", &c.MaxConcurrentSolves, DefaultMaxConcurrentSolves()},
		{"MaxInteractionParameters", &c.MaxInteractionParameters, 0},
	}
	for _, f := range ints {
		if *f.v < 0 {
			return c, fmt.Errorf("server: config %s = %d: must not be negative", f.name, *f.v)
		}
		if *f.v == 0 {
			*f.v = f.def
		}
	}
	if c.MaxInteractionParameters == 0 {
		c.MaxInteractionParameters = c.MaxComponents * (c.MaxComponents - 1) / 2
		if c.MaxInteractionParameters < 1 {
			c.MaxInteractionParameters = 1
		}
	}
	durs := []struct {
		name string
		v    *time.Duration
		def  time.Duration
	}{
		{"MaxDeadline", &c.MaxDeadline, DefaultMaxDeadline},
		{"StreamIdleTimeout", &c.StreamIdleTimeout, DefaultStreamIdleTimeout},
	}
	for _, f := range durs {
		if *f.v < 0 {
			return c, fmt.Errorf("server: config %s = %v: must not be negative", f.name, *f.v)
		}
		if *f.v == 0 {
			*f.v = f.def
		}
	}
	if q := c.Cache.Quantization; !(q >= 0 && q <= maxQuantization) {
		return c, fmt.Errorf("server: config Cache.Quantization = %g: must lie in [0, %g]", q, maxQuantization)
	}
	if c.ModelVersion == "" {
		c.ModelVersion = ModelVersion
	}
	if c.DataVersion == "" {
		c.DataVersion = componentDataVersion()
	}
	return c, nil
}
