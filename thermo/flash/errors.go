package flash

import (
	"errors"
	"fmt"
)

// InputError reports an argument that cannot be used. Field names it (for
// example "T", "P", "z[3]", "warm.Beta[1]", "opts.Tolerance") and Reason
// says why.
type InputError struct {
	Field  string
	Value  float64
	Reason string
}

func (e *InputError) Error() string {
	return fmt.Sprintf("flash: %s = %g: %s", e.Field, e.Value, e.Reason)
}

// ErrNotConverged is matched (errors.Is) by every *ConvergenceError.
var ErrNotConverged = errors.New("flash: not converged")

// ConvergenceError reports a solve that stopped before meeting its
// tolerance. Stage names the part that failed ("two-phase split",
// "three-phase split", "stability of the result", ...). Residual is the
// largest |ln f_i,α − ln f_i,β| of the best estimate, which is also left in
// the Result passed to the solver (phase count, amounts and compositions),
// so a caller can inspect or report it.
type ConvergenceError struct {
	Stage      string
	Iterations int
	Residual   float64
	Phases     int
	// Beta holds the phase amounts of the best estimate (len Phases).
	Beta []float64
}

func (e *ConvergenceError) Error() string {
	return fmt.Sprintf("flash: %s not converged after %d iterations (best estimate: %d phases, residual %.3g)", e.Stage, e.Iterations, e.Phases, e.Residual)
}

// Unwrap lets errors.Is match ErrNotConverged.
func (e *ConvergenceError) Unwrap() error { return ErrNotConverged }

// canceledError wraps the context's error when a solve is stopped by
// cancellation or a deadline; errors.Is matches context.Canceled or
// context.DeadlineExceeded through it.
type canceledError struct{ err error }

func (e *canceledError) Error() string { return "flash: stopped: " + e.err.Error() }
func (e *canceledError) Unwrap() error { return e.err }

// ErrStopped is returned (wrapped) when Options.Cancel asks a solve to stop.
var ErrStopped = errors.New("flash: stopped by Options.Cancel")
