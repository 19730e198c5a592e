package eos

import (
	"errors"
	"fmt"
)

// InputError reports an argument that cannot be used: a non-finite or
// out-of-range number, a length mismatch, a bad option. Field names the
// argument (for example "T", "P", "x[3]", "kij[1][2]") and Reason says why.
type InputError struct {
	Field  string
	Value  float64
	Reason string
}

func (e *InputError) Error() string {
	return fmt.Sprintf("eos: %s = %g: %s", e.Field, e.Value, e.Reason)
}

// ErrNoSaturation is wrapped by *SaturationError.
var ErrNoSaturation = errors.New("eos: no saturation point")

// SaturationError reports that a pure-component saturation point does not
// exist at the requested temperature (T ≥ Tc of the model).
type SaturationError struct {
	Component string
	T, Tc     float64
}

func (e *SaturationError) Error() string {
	return fmt.Sprintf("eos: %s has no vapour pressure at T = %g K (critical temperature %g K)", e.Component, e.T, e.Tc)
}

// Unwrap lets errors.Is match ErrNoSaturation.
func (e *SaturationError) Unwrap() error { return ErrNoSaturation }

// ErrNotConverged is wrapped by *ConvergenceError.
var ErrNotConverged = errors.New("eos: not converged")

// ConvergenceError reports an iteration that stopped before meeting its
// tolerance. Estimate is the best value reached and Residual its residual.
type ConvergenceError struct {
	What       string
	Iterations int
	Estimate   float64
	Residual   float64
}

func (e *ConvergenceError) Error() string {
	return fmt.Sprintf("eos: %s not converged after %d iterations (estimate %g, residual %.3g)", e.What, e.Iterations, e.Estimate, e.Residual)
}

// Unwrap lets errors.Is match ErrNotConverged.
func (e *ConvergenceError) Unwrap() error { return ErrNotConverged }
