// Package approx holds the floating-point comparison used by the thermo
// tests, so every package compares numbers the same way.
package approx

import "math"

// Rel reports whether got is within relTol of want relative to |want|
// (absolute when want is zero).
func Rel(got, want, relTol float64) bool {
	if math.IsNaN(got) || math.IsNaN(want) {
		return false
	}
	d := math.Abs(got - want)
	if want == 0 {
		return d <= relTol
	}
	return d <= relTol*math.Abs(want)
}

// Abs reports whether |got − want| ≤ tol.
func Abs(got, want, tol float64) bool {
	return !math.IsNaN(got) && !math.IsNaN(want) && math.Abs(got-want) <= tol
}

// Close reports whether got is within absTol + relTol·|want| of want.
func Close(got, want, absTol, relTol float64) bool {
	if math.IsNaN(got) || math.IsNaN(want) {
		return false
	}
	return math.Abs(got-want) <= absTol+relTol*math.Abs(want)
}

// RelErr returns |got − want|/|want| (or |got| when want is zero).
func RelErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}
