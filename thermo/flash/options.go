package flash

import "math"

// MaxPhases is the largest number of phases a T–P flash returns.
const MaxPhases = 3

// Options configure a flash. Every field works at its zero value, which
// selects the default given in its comment.
type Options struct {
	// Tolerance is the convergence criterion on fugacity equality,
	//	max_i |ln f_i,α − ln f_i,β| ≤ Tolerance,
	// over every pair of phases. Valid range [1e-14, 1e-4]; default 1e-10.
	Tolerance float64
	// TPDTolerance is the margin of the stability test: a phase is unstable
	// when a trial reaches tpd < −TPDTolerance. Valid range [1e-14, 1e-3];
	// default 1e-8.
	TPDTolerance float64
	// MaxIterations caps the iterations of each stage (stability trial,
	// successive substitution, Newton). Valid range [10, 10000]; default 200.
	MaxIterations int
	// MaxPhases caps the phase count, 1 to 3; default 3. With 1 the solver
	// only runs the stability test of the feed and reports a single phase
	// (Report.MinTPD tells whether it is stable).
	MaxPhases int
	// NoProperties skips eos.Properties of each phase and the overall
	// properties (saves about two ln φ evaluations per phase).
	NoProperties bool
	// Cancel, when set, is polled in every outer iteration beside the
	// context; returning true stops the solve with ErrStopped.
	Cancel func() bool
}

// settings are Options with defaults filled in.
type settings struct {
	tol, tpdTol float64
	maxIt       int
	maxPhases   int
	props       bool
	cancel      func() bool
}

func (o *Options) resolve() (settings, error) {
	s := settings{tol: 1e-10, tpdTol: 1e-8, maxIt: 200, maxPhases: MaxPhases, props: !o.NoProperties, cancel: o.Cancel}
	if o.Tolerance != 0 {
		if !(o.Tolerance >= 1e-14 && o.Tolerance <= 1e-4) {
			return s, &InputError{Field: "opts.Tolerance", Value: o.Tolerance, Reason: "must lie in [1e-14, 1e-4] (or be zero for the default 1e-10)"}
		}
		s.tol = o.Tolerance
	}
	if o.TPDTolerance != 0 {
		if !(o.TPDTolerance >= 1e-14 && o.TPDTolerance <= 1e-3) {
			return s, &InputError{Field: "opts.TPDTolerance", Value: o.TPDTolerance, Reason: "must lie in [1e-14, 1e-3] (or be zero for the default 1e-8)"}
		}
		s.tpdTol = o.TPDTolerance
	}
	if o.MaxIterations != 0 {
		if o.MaxIterations < 10 || o.MaxIterations > 10000 {
			return s, &InputError{Field: "opts.MaxIterations", Value: float64(o.MaxIterations), Reason: "must lie in [10, 10000] (or be zero for the default 200)"}
		}
		s.maxIt = o.MaxIterations
	}
	if o.MaxPhases != 0 {
		if o.MaxPhases < 1 || o.MaxPhases > MaxPhases {
			return s, &InputError{Field: "opts.MaxPhases", Value: float64(o.MaxPhases), Reason: "must be 1, 2 or 3 (or zero for the default 3)"}
		}
		s.maxPhases = o.MaxPhases
	}
	return s, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
