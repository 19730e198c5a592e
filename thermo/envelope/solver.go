package envelope

import (
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/internal/fastmath"
	"github.com/fugad/fugad/thermo/internal/linalg"
)

// Kind labels a point of a phase boundary.
type Kind int

// Point kinds.
const (
	// KindUnspecified is the zero value; no solver returns it.
	KindUnspecified Kind = iota
	// Bubble: the feed is liquid and an incipient vapour appears (β = 0).
	Bubble
	// Dew: the feed is vapour and an incipient liquid appears (β = 1).
	Dew
	// Quality: two phases with vapour fraction β strictly between 0 and 1.
	Quality
	// Saturated: a pure component on its vapour-pressure curve, where
	// bubble and dew point coincide.
	Saturated
	// Critical: a critical point (all K-values equal to one).
	Critical
)

var kindNames = [...]string{"unspecified", "bubble", "dew", "quality", "saturated", "critical"}

// String names the kind.
func (k Kind) String() string {
	if k < 0 || int(k) >= len(kindNames) {
		return fmt.Sprintf("Kind(%d)", int(k))
	}
	return kindNames[k]
}

// Options configure the Newton solver shared by every calculation of the
// package. The zero value selects the defaults.
type Options struct {
	// Tolerance is the convergence test max_i |F_i| on the saturation
	// equations (ln-fugacity differences and the material-balance sum).
	// Valid range (0, 1e-4]; default 1e-10.
	Tolerance float64
	// MaxIterations caps the Newton iterations of one saturation point.
	// Default 40.
	MaxIterations int
	// MaxSSIterations caps the successive-substitution iterations that
	// precede Newton in a saturation point started from Wilson K-values.
	// Default 30.
	MaxSSIterations int
}

type settings struct {
	tol   float64
	maxIt int
	maxSS int
}

func (o Options) resolve() (settings, error) {
	st := settings{tol: 1e-10, maxIt: 40, maxSS: 30}
	if o.Tolerance != 0 {
		if !(o.Tolerance > 0 && o.Tolerance <= 1e-4) {
			return st, &InputError{Field: "Options.Tolerance", Value: o.Tolerance, Reason: "must lie in (0, 1e-4]"}
		}
		st.tol = o.Tolerance
	}
	if o.MaxIterations != 0 {
		if o.MaxIterations < 1 || o.MaxIterations > 1000 {
			return st, &InputError{Field: "Options.MaxIterations", Value: float64(o.MaxIterations), Reason: "must lie in [1, 1000]"}
		}
		st.maxIt = o.MaxIterations
	}
	if o.MaxSSIterations != 0 {
		if o.MaxSSIterations < 1 || o.MaxSSIterations > 1000 {
			return st, &InputError{Field: "Options.MaxSSIterations", Value: float64(o.MaxSSIterations), Reason: "must lie in [1, 1000]"}
		}
		st.maxSS = o.MaxSSIterations
	}
	return st, nil
}

// Bounds of the unknowns: outside them no cubic-EoS phase boundary of a
// process fluid lies, and an iterate that leaves them has diverged.
const (
	minT   = 5.0    // K
	maxT   = 5000.0 // K
	minP   = 1.0    // Pa
	maxP   = 1e9    // Pa
	maxLnK = 300.0  // |ln K| cap against overflow of exp
	// trivialTol: Σ ln K_i² below it marks the trivial solution (the
	// incipient phase equal to the feed) in a saturation-point solve; a
	// genuine point this close to the trivial one (|ln K| ~ 1e-3) lies next
	// to the critical point, which the standalone solvers do not resolve
	// (the envelope's critical point does).
	trivialTol = 1e-5
)

// Solver computes saturation points, phase envelopes and critical points
// of one Mixture. It owns its scratch memory; a Solver is not safe for
// concurrent use (make one per goroutine; the Mixture itself is shared).
type Solver struct {
	mx  *eos.Mixture
	ws  *eos.Workspace
	fy  *eos.Fugacity
	fx  *eos.Fugacity
	set settings
	n   int
	m   int // n + 2 unknowns

	z    []float64 // normalised feed
	beta float64
	yVap bool // phase y on the vapour root (x on the liquid root)

	X, F, J, dX []float64
	sens        []float64
	piv         []int
	x, y        []float64
	work        []float64

	evals int // ln φ evaluations of the current call

	// scratch of the continuation
	curX, curS, prvX, prvS, tCur, tNew, guess []float64
	bX, bS, sA, sB, r1X, r1S, r2X, r2S        []float64
	// scratch of the critical-point calculation
	bq, bv, u, dn, w []float64
	// scratch of the third-phase test
	stab stabScratch
}

// NewSolver returns a Solver for mx. Options follow the rules of Options.
func NewSolver(mx *eos.Mixture, opts Options) (*Solver, error) {
	if mx == nil {
		return nil, &InputError{Field: "mixture", Reason: "nil mixture"}
	}
	set, err := opts.resolve()
	if err != nil {
		return nil, err
	}
	n := mx.N()
	m := n + 2
	v := func(k int) []float64 { return make([]float64, k) }
	return &Solver{
		mx: mx, ws: mx.NewWorkspace(), fy: mx.NewFugacity(), fx: mx.NewFugacity(),
		set: set, n: n, m: m,
		z: v(n), X: v(m), F: v(m), J: v(m * m), dX: v(m), sens: v(m), piv: make([]int, m),
		x: v(n), y: v(n), work: v(n),
		curX: v(m), curS: v(m), prvX: v(m), prvS: v(m), tCur: v(m), tNew: v(m), guess: v(m),
		bX: v(m), bS: v(m), sA: v(m), sB: v(m), r1X: v(m), r1S: v(m), r2X: v(m), r2S: v(m),
		bq: v(n * n), bv: v(n * n), u: v(n), dn: v(n), w: v(n),
		stab: newStabScratch(n),
	}, nil
}

// Mixture returns the solver's mixture.
func (s *Solver) Mixture() *eos.Mixture { return s.mx }

// setFeed validates and normalises z into s.z.
func (s *Solver) setFeed(z []float64) error {
	if len(z) != s.n {
		return &InputError{Field: "z", Value: float64(len(z)), Reason: fmt.Sprintf("feed has %d entries, the mixture %d components", len(z), s.n)}
	}
	sum := 0.0
	for i, v := range z {
		if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
			return &InputError{Field: fmt.Sprintf("z[%d]", i), Value: v, Reason: "mole fraction must be finite and non-negative"}
		}
		sum += v
	}
	if !(sum > 0) || math.IsInf(sum, 0) {
		return &InputError{Field: "z", Value: sum, Reason: "feed must have a positive, finite sum"}
	}
	for i, v := range z {
		s.z[i] = v / sum
	}
	return nil
}

// present returns the number of components with z_i > 0 and the index of
// the last one.
func (s *Solver) present() (int, int) {
	c, k := 0, -1
	for i, v := range s.z {
		if v > 0 {
			c++
			k = i
		}
	}
	return c, k
}

func (s *Solver) roots() (ry, rx eos.RootChoice) {
	if s.yVap {
		return eos.RootVapour, eos.RootLiquid
	}
	return eos.RootLiquid, eos.RootVapour
}

// compositions sets x_i = z_i/(1 − β + βK_i) and y_i = K_i·x_i from the
// ln K part of X.
func (s *Solver) compositions() {
	b := s.beta
	for i := range s.n {
		k := fastmath.Exp(s.X[i])
		t := 1 - b + b*k
		s.x[i] = s.z[i] / t
		s.y[i] = k * s.x[i]
	}
}

// evaluate fills F and, with jac, the Jacobian J of Michelsen's (1980)
// phase-boundary equations at X = (ln K_1..n, ln T, ln P) for the vapour
// fraction β and the specification X_s = S:
//
//	F_i = ln K_i + ln φ_i(y, T, P) − ln φ_i(x, T, P) = 0,   i = 1..n,
//	F_{n+1} = Σ_i (y_i − x_i) = 0,
//	F_{n+2} = X_s − S = 0,
//
// with x_i = z_i/(1 − β + βK_i), y_i = K_i·x_i. The derivatives use the
// analytic ∂ln φ/∂T, ∂ln φ/∂P and ∂ln φ/∂n of the equation of state:
//
//	∂F_i/∂ln K_j = δ_ij + (∂ln φ_i^y/∂n_j)·y_j(1−β)/t_j + (∂ln φ_i^x/∂n_j)·x_jβK_j/t_j,
//	∂F_i/∂ln T = T(∂ln φ_i^y/∂T − ∂ln φ_i^x/∂T),  ∂F_i/∂ln P = P(∂ln φ_i^y/∂P − ∂ln φ_i^x/∂P),
//	∂F_{n+1}/∂ln K_j = (y_j(1−β) + x_jβK_j)/t_j,
//
// where t_j = 1 − β + βK_j and ∂ln φ/∂n_j is for the phase's own total.
func (s *Solver) evaluate(spec int, S float64, jac bool) error {
	n, m := s.n, s.m
	s.compositions()
	T, P := fastmath.Exp(s.X[n]), fastmath.Exp(s.X[n+1])
	ry, rx := s.roots()
	want := eos.Want(0)
	if jac {
		want = eos.WantAll
	}
	if err := s.mx.Fugacity(s.ws, T, P, s.y, ry, want, s.fy); err != nil {
		return err
	}
	if err := s.mx.Fugacity(s.ws, T, P, s.x, rx, want, s.fx); err != nil {
		return err
	}
	s.evals += 2
	sum := 0.0
	sx, sy := 0.0, 0.0
	for i := range n {
		s.F[i] = s.X[i] + s.fy.LnPhi[i] - s.fx.LnPhi[i]
		sum += s.y[i] - s.x[i]
		sx += s.x[i]
		sy += s.y[i]
	}
	s.F[n] = sum
	s.F[n+1] = s.X[spec] - S
	if !jac {
		return nil
	}
	b := s.beta
	J := s.J
	for j := range n {
		k := fastmath.Exp(s.X[j])
		t := 1 - b + b*k
		dy := s.y[j] * (1 - b) / t / sy
		dx := s.x[j] * b * k / t / sx
		for i := range n {
			J[i*m+j] = s.fy.DN[i*n+j]*dy + s.fx.DN[i*n+j]*dx
		}
		J[j*m+j] += 1
		J[n*m+j] = (s.y[j]*(1-b) + s.x[j]*b*k) / t
	}
	for i := range n {
		J[i*m+n] = T * (s.fy.DT[i] - s.fx.DT[i])
		J[i*m+n+1] = P * (s.fy.DP[i] - s.fx.DP[i])
	}
	J[n*m+n], J[n*m+n+1] = 0, 0
	row := J[(n+1)*m : (n+2)*m]
	for j := range row {
		row[j] = 0
	}
	row[spec] = 1
	return nil
}

func (s *Solver) residual() float64 {
	r := 0.0
	for i := 0; i <= s.n; i++ {
		r = max(r, math.Abs(s.F[i]))
	}
	return r
}

func (s *Solver) sumLnK2() float64 {
	q := 0.0
	for i := range s.n {
		q += s.X[i] * s.X[i]
	}
	return q
}

// newtonStatus says how a Newton solve ended.
type newtonStatus int

const (
	newtonConverged newtonStatus = iota
	newtonMaxIter
	newtonSingular
	newtonDomain
	newtonTrivial
	newtonEval
)

var newtonReasons = [...]string{"converged", "iteration limit reached", "singular Jacobian", "left the physical domain", "trivial solution (incipient phase equal to the feed)", "equation of state evaluation failed"}

func (st newtonStatus) String() string { return newtonReasons[st] }

// newton solves the phase-boundary equations from s.X with X_spec = S by
// Newton's method with a step limited to |Δln K| ≤ 1.5, |Δln T| ≤ 0.1,
// |Δln P| ≤ 0.4. On convergence the Jacobian at the solution is left
// factored in s.J for sensitivity. With trivial set, an iterate or a
// solution with Σ ln K_i² < trivialTol ends the solve as trivial.
func (s *Solver) newton(spec int, S float64, maxIt int, trivial bool) (int, float64, newtonStatus) {
	n, m := s.n, s.m
	s.X[spec] = S
	resid := math.Inf(1)
	for it := 1; it <= maxIt+1; it++ {
		if err := s.evaluate(spec, S, true); err != nil {
			return it, resid, newtonEval
		}
		resid = s.residual()
		if math.IsNaN(resid) {
			return it, resid, newtonEval
		}
		if !linalg.LUFactor(s.J, m, s.piv) {
			return it, resid, newtonSingular
		}
		if resid <= s.set.tol {
			if trivial && s.sumLnK2() < trivialTol {
				return it - 1, resid, newtonTrivial
			}
			return it - 1, resid, newtonConverged
		}
		if it > maxIt {
			break
		}
		for i := range m {
			s.dX[i] = -s.F[i]
		}
		linalg.LUSolve(s.J, m, s.piv, s.dX)
		scale := 1.0
		for i := range n {
			if a := math.Abs(s.dX[i]); a*scale > 1.5 {
				scale = 1.5 / a
			}
		}
		if a := math.Abs(s.dX[n]); a*scale > 0.1 {
			scale = 0.1 / a
		}
		if a := math.Abs(s.dX[n+1]); a*scale > 0.4 {
			scale = 0.4 / a
		}
		for i := range m {
			s.X[i] += scale * s.dX[i]
		}
		s.X[spec] = S
		for i := range n {
			s.X[i] = max(-maxLnK, min(maxLnK, s.X[i]))
		}
		if !(s.X[n] > fastmath.Log(minT) && s.X[n] < fastmath.Log(maxT) && s.X[n+1] > fastmath.Log(minP) && s.X[n+1] < fastmath.Log(maxP)) {
			return it, resid, newtonDomain
		}
		if trivial && s.sumLnK2() < 1e-3*trivialTol {
			return it, resid, newtonTrivial
		}
	}
	return maxIt, resid, newtonMaxIter
}

// sensitivity solves J·(dX/dS) = e_{n+2} with the factored Jacobian of the
// last converged Newton solve: the derivative of the solution with respect
// to the specified value (Michelsen 1980, eq. 9).
func (s *Solver) sensitivity(dst []float64) {
	for i := range dst {
		dst[i] = 0
	}
	dst[s.m-1] = 1
	linalg.LUSolve(s.J, s.m, s.piv, dst)
}
