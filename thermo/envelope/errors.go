package envelope

import (
	"errors"
	"fmt"
)

// InputError reports an argument that cannot be used. Field names the
// argument (for example "T", "z[3]", "beta") and Reason says why.
type InputError struct {
	Field  string
	Value  float64
	Reason string
}

func (e *InputError) Error() string {
	return fmt.Sprintf("envelope: %s = %g: %s", e.Field, e.Value, e.Reason)
}

// ErrNoSaturation is wrapped by *NoSaturationError.
var ErrNoSaturation = errors.New("envelope: no saturation point")

// NoSaturationError reports that no saturation point of the requested kind
// exists at the specification: for example a dew pressure asked above the
// cricondentherm, a bubble temperature above the cricondenbar, or an upper
// dew point where the phase boundary at that temperature is a bubble
// point. Spec names the fixed variable ("T" or "P") and Value its value.
// The envelope extremes are filled when an envelope was traced to decide
// (NaN otherwise).
type NoSaturationError struct {
	Kind   Kind
	Spec   string
	Value  float64
	Beta   float64
	Reason string
	// Cricondentherm and Cricondenbar of the traced envelope (NaN when not
	// known).
	CricondenthermT, CricondenthermP float64
	CricondenbarT, CricondenbarP     float64
}

func (e *NoSaturationError) Error() string {
	return fmt.Sprintf("envelope: no %s point at %s = %g: %s (cricondentherm %.6g K at %.6g Pa, cricondenbar %.6g Pa at %.6g K)",
		e.Kind, e.Spec, e.Value, e.Reason, e.CricondenthermT, e.CricondenthermP, e.CricondenbarP, e.CricondenbarT)
}

// Unwrap lets errors.Is match ErrNoSaturation.
func (e *NoSaturationError) Unwrap() error { return ErrNoSaturation }

// ErrNotConverged is wrapped by *ConvergenceError.
var ErrNotConverged = errors.New("envelope: not converged")

// ConvergenceError reports an iteration that stopped before meeting its
// tolerance. T, P and Residual are the best estimate and its residual
// (max |F| of the saturation equations, or of the criticality conditions).
type ConvergenceError struct {
	What       string
	Iterations int
	T, P       float64
	Residual   float64
	Reason     string
}

func (e *ConvergenceError) Error() string {
	return fmt.Sprintf("envelope: %s not converged after %d iterations (T %.6g K, P %.6g Pa, residual %.3g): %s",
		e.What, e.Iterations, e.T, e.P, e.Residual, e.Reason)
}

// Unwrap lets errors.Is match ErrNotConverged.
func (e *ConvergenceError) Unwrap() error { return ErrNotConverged }

// canceledError wraps a context error so that errors.Is matches both the
// context's error and the stage that stopped.
type canceledError struct {
	stage string
	err   error
}

func (e *canceledError) Error() string { return "envelope: " + e.stage + " stopped: " + e.err.Error() }
func (e *canceledError) Unwrap() error { return e.err }
