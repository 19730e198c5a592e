package stateflash

import (
	"errors"
	"fmt"
)

// InputError reports an argument that cannot be used. Field names it (for
// example "P", "H", "V", "z[2]", "warm.T", "opts.Tmin") and Reason says
// why. Errors of the inner T–P flash keep their own type
// (*flash.InputError).
type InputError struct {
	Field  string
	Value  float64
	Reason string
}

func (e *InputError) Error() string {
	return fmt.Sprintf("stateflash: %s = %g: %s", e.Field, e.Value, e.Reason)
}

// ErrNotConverged is matched (errors.Is) by every *ConvergenceError.
var ErrNotConverged = errors.New("stateflash: not converged")

// ConvergenceError reports a state-function flash that stopped before
// meeting its tolerance. Stage names the part that failed ("outer
// iteration on T", "inner T–P flash", "pure-component saturation", ...).
// T and P are the best estimate, Residual its specification residual in
// the dimensionless measure of Options.Tolerance, Phases its phase count.
// Err is the cause when an inner solver failed (a *flash.ConvergenceError
// or an *eos.ConvergenceError), so errors.Is(err, flash.ErrNotConverged)
// also holds then.
type ConvergenceError struct {
	Spec       Spec
	Stage      string
	Iterations int
	T, P       float64
	Residual   float64
	Phases     int
	Err        error
}

func (e *ConvergenceError) Error() string {
	s := fmt.Sprintf("stateflash: %v flash: %s not converged after %d outer iterations (best estimate T = %.6g K, P = %.6g Pa, %d phases, residual %.3g)",
		e.Spec, e.Stage, e.Iterations, e.T, e.P, e.Phases, e.Residual)
	if e.Err != nil {
		s += ": " + e.Err.Error()
	}
	return s
}

// Unwrap lets errors.Is match ErrNotConverged and the inner cause.
func (e *ConvergenceError) Unwrap() []error {
	if e.Err != nil {
		return []error{ErrNotConverged, e.Err}
	}
	return []error{ErrNotConverged}
}

// ErrOutOfRange is matched (errors.Is) by every *RangeError.
var ErrOutOfRange = errors.New("stateflash: specification outside the search range")

// RangeError reports a specification that no state inside the search
// range attains: the specified value Want lies beyond the value Got that
// the equilibrium fluid has at the bound Bound of Variable ("T" in K or
// "P" in Pa). Widen Options.Tmin/Tmax (or Pmin/Pmax), or check the
// specification.
type RangeError struct {
	Spec     Spec
	Variable string
	Bound    float64
	Want     float64
	Got      float64
}

func (e *RangeError) Error() string {
	return fmt.Sprintf("stateflash: %v flash: specified %s = %g is not reached inside the search range: at %s = %g the fluid has %g",
		e.Spec, e.Spec.quantity(), e.Want, e.Variable, e.Bound, e.Got)
}

// Unwrap lets errors.Is match ErrOutOfRange.
func (e *RangeError) Unwrap() error { return ErrOutOfRange }

// canceledError wraps the context's error when a solve is stopped by
// cancellation or a deadline; errors.Is matches context.Canceled or
// context.DeadlineExceeded through it.
type canceledError struct{ err error }

func (e *canceledError) Error() string { return "stateflash: stopped: " + e.err.Error() }
func (e *canceledError) Unwrap() error { return e.err }
