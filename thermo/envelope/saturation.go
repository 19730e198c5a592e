package envelope

import (
	"context"
	"math"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// BranchChoice selects one of several saturation points at the same
// specification (for example the lower and the upper dew pressure of a
// gas condensate in its retrograde range).
type BranchChoice int

// Branch choices.
const (
	// BranchAuto takes the point a direct solve from Wilson K-values finds
	// (usually the lower one, nearest the ideal-solution estimate); when
	// that fails, the lowest point of the traced envelope.
	BranchAuto BranchChoice = iota
	// BranchLower takes the point of lowest unknown (pressure or
	// temperature) among those of the requested kind.
	BranchLower
	// BranchUpper takes the point of highest unknown.
	BranchUpper
)

// Hint steers a saturation-point solve.
type Hint struct {
	// Branch chooses among several points of the requested kind.
	// Lower and Upper trace the phase envelope to find every point at the
	// specification (about a millisecond for ten components), unless
	// Start is set.
	Branch BranchChoice
	// Start is an initial estimate of the unknown: pressure in Pa for the
	// pressure solves, temperature in K for the temperature solves. Zero
	// means none. With Start set the solve runs directly from it and
	// returns the point it converges to (Branch is then not used).
	Start float64
	// LnK is an optional initial ln K_i = ln(y_i/x_i) (vapour over
	// liquid), for example from a neighbouring point; nil means Wilson's
	// correlation.
	LnK []float64
}

// Path says how a saturation point was found.
type Path int

// Paths.
const (
	// PathDirect: successive substitution from Wilson K-values (or the
	// hint), then Newton.
	PathDirect Path = iota
	// PathEnvelope: Newton from the phase envelope traced through the
	// specification, after a direct solve failed or because the hint asked
	// for a branch.
	PathEnvelope
	// PathPure: a pure component's vapour pressure (eos.VapourPressure).
	PathPure
)

var pathNames = [...]string{"direct", "envelope", "pure"}

// String names the path.
func (p Path) String() string {
	if p < 0 || int(p) >= len(pathNames) {
		return "unknown"
	}
	return pathNames[p]
}

// Report says what a saturation-point solve did.
type Report struct {
	Path Path
	// SSIterations and NewtonIterations count the iterations of the
	// solve that produced the point (and of failed attempts before it).
	SSIterations     int
	NewtonIterations int
	// LnPhiEvaluations counts calls of the ln φ kernel.
	LnPhiEvaluations int
	// Residual is max |F_i| of the saturation equations at the point.
	Residual float64
	// TrivialRejected counts attempts that converged toward the trivial
	// solution and were rejected.
	TrivialRejected int
	// EnvelopePoints is the number of envelope points traced to find the
	// start (zero on the direct path).
	EnvelopePoints int
}

// Point is a saturation or vapour-fraction point. Make one with NewPoint
// and reuse it: the solvers write into its slices.
type Point struct {
	Kind Kind
	// T and P are the temperature (K) and pressure (Pa).
	T, P float64
	// Beta is the vapour mole fraction: 0 at a bubble point, 1 at a dew
	// point.
	Beta float64
	// Liquid and Vapour are the compositions of the two phases. At a
	// bubble point Liquid is the feed and Vapour the incipient phase; at a
	// dew point Vapour is the feed and Liquid the incipient phase.
	Liquid, Vapour []float64
	// LnK holds ln K_i = ln(Vapour_i/Liquid_i).
	LnK []float64
	// VLiquid and VVapour are the molar volumes of the two phases (m³/mol).
	VLiquid, VVapour float64
	Report           Report
}

// NewPoint returns a Point sized for mx.
func NewPoint(mx *eos.Mixture) *Point {
	n := mx.N()
	return &Point{Liquid: make([]float64, n), Vapour: make([]float64, n), LnK: make([]float64, n)}
}

// Incipient returns the composition of the incipient phase: Vapour at a
// bubble point, Liquid at a dew point (and at any other kind).
func (p *Point) Incipient() []float64 {
	if p.Kind == Bubble {
		return p.Vapour
	}
	return p.Liquid
}

// satSpec is one saturation-point specification.
type satSpec struct {
	kind  Kind
	beta  float64
	fixT  bool    // T fixed (unknown P) or P fixed (unknown T)
	value float64 // the fixed T or P
}

func (sp satSpec) specName() string {
	if sp.fixT {
		return "T"
	}
	return "P"
}

// BubblePressure solves the bubble-point pressure of feed z at
// temperature T (K): the pressure where the liquid z is in equilibrium
// with an incipient vapour. See the package documentation for the method.
func (s *Solver) BubblePressure(ctx context.Context, T float64, z []float64, h Hint, out *Point) error {
	return s.saturation(ctx, satSpec{kind: Bubble, beta: 0, fixT: true, value: T}, z, h, out)
}

// DewPressure solves a dew-point pressure of feed z at temperature T (K).
// In the retrograde range two exist; Hint.Branch (or Hint.Start) selects
// one.
func (s *Solver) DewPressure(ctx context.Context, T float64, z []float64, h Hint, out *Point) error {
	return s.saturation(ctx, satSpec{kind: Dew, beta: 1, fixT: true, value: T}, z, h, out)
}

// BubbleTemperature solves the bubble-point temperature of feed z at
// pressure P (Pa).
func (s *Solver) BubbleTemperature(ctx context.Context, P float64, z []float64, h Hint, out *Point) error {
	return s.saturation(ctx, satSpec{kind: Bubble, beta: 0, fixT: false, value: P}, z, h, out)
}

// DewTemperature solves a dew-point temperature of feed z at pressure P
// (Pa). Between the critical pressure and the cricondenbar two may exist;
// Hint selects one.
func (s *Solver) DewTemperature(ctx context.Context, P float64, z []float64, h Hint, out *Point) error {
	return s.saturation(ctx, satSpec{kind: Dew, beta: 1, fixT: false, value: P}, z, h, out)
}

// QualityPressure solves the pressure at which feed z at temperature T
// (K) splits into a vapour of mole fraction beta in (0, 1) and a liquid,
// by the same Newton formulation with the Rachford–Rice material balance
// Σ(y_i − x_i) = 0, x_i = z_i/(1 − β + βK_i).
func (s *Solver) QualityPressure(ctx context.Context, T, beta float64, z []float64, h Hint, out *Point) error {
	if !(beta > 0 && beta < 1) {
		return &InputError{Field: "beta", Value: beta, Reason: "vapour fraction of a quality point must lie strictly between 0 and 1"}
	}
	return s.saturation(ctx, satSpec{kind: Quality, beta: beta, fixT: true, value: T}, z, h, out)
}

// QualityTemperature solves the temperature at which feed z at pressure P
// (Pa) has vapour fraction beta in (0, 1).
func (s *Solver) QualityTemperature(ctx context.Context, P, beta float64, z []float64, h Hint, out *Point) error {
	if !(beta > 0 && beta < 1) {
		return &InputError{Field: "beta", Value: beta, Reason: "vapour fraction of a quality point must lie strictly between 0 and 1"}
	}
	return s.saturation(ctx, satSpec{kind: Quality, beta: beta, fixT: false, value: P}, z, h, out)
}

func (s *Solver) checkSpec(sp satSpec, h Hint, out *Point) error {
	name := sp.specName()
	if math.IsNaN(sp.value) || math.IsInf(sp.value, 0) || sp.value <= 0 {
		return &InputError{Field: name, Value: sp.value, Reason: "must be a positive, finite number"}
	}
	if sp.fixT && (sp.value < minT || sp.value > maxT) {
		return &InputError{Field: "T", Value: sp.value, Reason: "temperature outside [5, 5000] K"}
	}
	if !sp.fixT && (sp.value < minP || sp.value > maxP) {
		return &InputError{Field: "P", Value: sp.value, Reason: "pressure outside [1, 1e9] Pa"}
	}
	if h.Start != 0 {
		lo, hi := minP, maxP
		if !sp.fixT {
			lo, hi = minT, maxT
		}
		if math.IsNaN(h.Start) || !(h.Start > lo && h.Start < hi) {
			return &InputError{Field: "Hint.Start", Value: h.Start, Reason: "initial estimate outside the physical range of the unknown"}
		}
	}
	if h.LnK != nil {
		if len(h.LnK) != s.n {
			return &InputError{Field: "Hint.LnK", Value: float64(len(h.LnK)), Reason: "length differs from the number of components"}
		}
		for _, v := range h.LnK {
			if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > maxLnK {
				return &InputError{Field: "Hint.LnK", Value: v, Reason: "ln K must be finite with |ln K| ≤ 300"}
			}
		}
	}
	if h.Branch < BranchAuto || h.Branch > BranchUpper {
		return &InputError{Field: "Hint.Branch", Value: float64(h.Branch), Reason: "not a defined branch choice"}
	}
	if out == nil || len(out.LnK) != s.n || len(out.Liquid) != s.n || len(out.Vapour) != s.n {
		return &InputError{Field: "out", Reason: "Point not sized for this mixture (use NewPoint)"}
	}
	return nil
}

func (s *Solver) saturation(ctx context.Context, sp satSpec, z []float64, h Hint, out *Point) error {
	if err := s.checkSpec(sp, h, out); err != nil {
		return err
	}
	if err := s.setFeed(z); err != nil {
		return err
	}
	if err := ctx.Err(); err != nil {
		return &canceledError{stage: "saturation point", err: err}
	}
	*out = Point{Liquid: out.Liquid, Vapour: out.Vapour, LnK: out.LnK}
	s.evals = 0
	if c, k := s.present(); c == 1 {
		return s.pureSaturation(sp, k, out)
	}
	rep := &out.Report
	if h.Start != 0 || h.Branch == BranchAuto {
		st := s.direct(sp, h, rep)
		if st == newtonConverged {
			s.fill(sp, out, PathDirect)
			return nil
		}
		if st == newtonTrivial {
			rep.TrivialRejected++
		}
		if h.Start != 0 {
			rep.LnPhiEvaluations = s.evals
			return &ConvergenceError{What: sp.kind.String() + " point", Iterations: rep.NewtonIterations + rep.SSIterations,
				T: fastmath.Exp(s.X[s.n]), P: fastmath.Exp(s.X[s.n+1]), Residual: rep.Residual, Reason: st.String() + " from the given start"}
		}
	}
	return s.fromEnvelope(ctx, sp, h, out)
}

// pureSaturation handles a feed with one component present.
func (s *Solver) pureSaturation(sp satSpec, k int, out *Point) error {
	var sat eos.Saturation
	var err error
	if sp.fixT {
		sat, err = s.mx.VapourPressure(s.ws, k, sp.value)
	} else {
		sat, err = s.mx.SaturationTemperature(s.ws, k, sp.value)
	}
	if err != nil {
		c := s.mx.Component(k)
		if _, ok := err.(*eos.SaturationError); ok {
			return &NoSaturationError{Kind: sp.kind, Spec: sp.specName(), Value: sp.value, Beta: sp.beta,
				Reason:          "a pure component has no saturation point beyond its critical point",
				CricondenthermT: c.Tc, CricondenthermP: c.Pc, CricondenbarT: c.Tc, CricondenbarP: c.Pc}
		}
		return err
	}
	out.Kind, out.T, out.P, out.Beta = sp.kind, sat.T, sat.P, sp.beta
	copy(out.Liquid, s.z)
	copy(out.Vapour, s.z)
	for i := range out.LnK {
		out.LnK[i] = 0
	}
	out.VLiquid, out.VVapour = sat.VL, sat.VV
	out.Report = Report{Path: PathPure, NewtonIterations: sat.Iterations, LnPhiEvaluations: sat.Evaluations, Residual: sat.Residual}
	return nil
}

// wilsonStart sets X to Wilson's K-values at the specification and the
// unknown (ln P or ln T) that satisfies the material balance on those
// K-values in the logarithmic form
//
//	h(u) = ln Σ_i y_i − ln Σ_i x_i = 0,   x_i = z_i/(1 − β + βK_i), y_i = K_i x_i,
//
// (ln Σ z_i K_i = 0 at a bubble point, −ln Σ z_i/K_i = 0 at a dew point),
// which is nearly linear in ln P and 1/T where the plain difference
// Σ(y_i − x_i) is exponentially flat. h decreases monotonically in ln P
// and increases in ln T; the root is found by Newton steps kept inside a
// shrinking bracket. With start > 0 the unknown is taken from it instead.
func (s *Solver) wilsonStart(sp satSpec, start float64) {
	n := s.n
	var lo, hi, u, lim float64
	if sp.fixT {
		s.X[n] = fastmath.Log(sp.value)
		lo, hi, u, lim = fastmath.Log(minP), fastmath.Log(maxP), fastmath.Log(1e6), 3
	} else {
		s.X[n+1] = fastmath.Log(sp.value)
		lo, hi, u, lim = fastmath.Log(minT), fastmath.Log(maxT), fastmath.Log(300), 0.7
	}
	if start > 0 {
		s.setWilsonK(sp, fastmath.Log(start))
		return
	}
	for range 200 {
		g, dg := s.setWilsonK(sp, u)
		if math.Abs(g) < 1e-12 {
			break
		}
		if g > 0 == sp.fixT { // root lies at larger u
			lo = u
		} else {
			hi = u
		}
		step := 0.0
		if dg != 0 {
			step = max(-lim, min(lim, -g/dg))
		}
		next := u + step
		if !(next > lo && next < hi) || dg == 0 {
			next = 0.5 * (lo + hi)
		}
		if math.Abs(next-u) < 1e-10 || hi-lo < 1e-10 {
			u = next
			break
		}
		u = next
	}
	s.setWilsonK(sp, u)
}

// setWilsonK writes Wilson's ln K at the unknown u into X and returns h
// and dh/du (see wilsonStart).
func (s *Solver) setWilsonK(sp satSpec, u float64) (float64, float64) {
	n := s.n
	var T, P float64
	if sp.fixT {
		T, P = sp.value, fastmath.Exp(u)
		s.X[n+1] = u
	} else {
		T, P = fastmath.Exp(u), sp.value
		s.X[n] = u
	}
	s.mx.LnWilsonK(T, P, s.X[:n])
	b := sp.beta
	sx, sy := 0.0, 0.0
	for i := range n {
		s.X[i] = max(-maxLnK, min(maxLnK, s.X[i]))
		k := fastmath.Exp(s.X[i])
		t := 1 - b + b*k
		s.x[i] = s.z[i] / t
		s.y[i] = k * s.x[i]
		sx += s.x[i]
		sy += s.y[i]
	}
	dh := 0.0
	for i := range n {
		c := s.mx.Component(i)
		k := fastmath.Exp(s.X[i])
		t := 1 - b + b*k
		dl := -1.0
		if !sp.fixT {
			dl = 5.373 * (1 + c.Omega) * c.Tc / T
		}
		dh += (s.y[i]*(1-b)/t/sy + s.x[i]*b*k/t/sx) * dl
	}
	return fastmath.Log(sy) - fastmath.Log(sx), dh
}

// direct solves a saturation point from Wilson K-values (or the hint):
// successive substitution ln K_i ← ln φ_i^x − ln φ_i^y with the unknown
// updated by one Newton step on g = Σ(y_i − x_i) per iteration, then
// Newton on the full system (Michelsen & Mollerup 2007, ch. 12).
func (s *Solver) direct(sp satSpec, h Hint, rep *Report) newtonStatus {
	n := s.n
	s.beta = sp.beta
	s.yVap = true
	s.wilsonStart(sp, h.Start)
	if h.LnK != nil {
		copy(s.X[:n], h.LnK)
	}
	spec, free := n, n+1
	if !sp.fixT {
		spec, free = n+1, n
	}
	want := eos.WantP
	if !sp.fixT {
		want = eos.WantT
	}
	ry, rx := s.roots()
	b := sp.beta
	for it := 1; it <= s.set.maxSS; it++ {
		rep.SSIterations++
		s.compositions()
		T, P := fastmath.Exp(s.X[n]), fastmath.Exp(s.X[n+1])
		if s.mx.Fugacity(s.ws, T, P, s.y, ry, want, s.fy) != nil || s.mx.Fugacity(s.ws, T, P, s.x, rx, want, s.fx) != nil {
			return newtonEval
		}
		s.evals += 2
		dmax, g, dg := 0.0, 0.0, 0.0
		for i := range n {
			lk := s.fx.LnPhi[i] - s.fy.LnPhi[i]
			lk = max(-maxLnK, min(maxLnK, lk))
			dmax = max(dmax, math.Abs(lk-s.X[i]))
			s.X[i] = lk
			k := fastmath.Exp(lk)
			t := 1 - b + b*k
			var dl float64
			if sp.fixT {
				dl = P * (s.fx.DP[i] - s.fy.DP[i])
			} else {
				dl = T * (s.fx.DT[i] - s.fy.DT[i])
			}
			g += s.z[i] * (k - 1) / t
			dg += s.z[i] * k / (t * t) * dl
		}
		du := 0.0
		if dg != 0 {
			du = -g / dg
		}
		lim := 0.4
		if !sp.fixT {
			lim = 0.1
		}
		du = max(-lim, min(lim, du))
		s.X[free] += du
		if !(s.X[n] > fastmath.Log(minT) && s.X[n] < fastmath.Log(maxT) && s.X[n+1] > fastmath.Log(minP) && s.X[n+1] < fastmath.Log(maxP)) {
			return newtonDomain
		}
		if s.sumLnK2() < trivialTol {
			return newtonTrivial
		}
		if dmax+math.Abs(du) < 1e-3 {
			break
		}
	}
	it, resid, st := s.newton(spec, s.X[spec], s.set.maxIt, true)
	rep.NewtonIterations += it
	rep.Residual = resid
	rep.LnPhiEvaluations = s.evals
	if st != newtonConverged {
		return st
	}
	// The phase on the vapour root must be the less dense one and both on
	// their stable roots; otherwise the solve reached a point of the other
	// kind (for example a "dew" point that is in fact a bubble point above
	// the critical temperature) or a spurious one.
	if !s.physical() {
		return newtonDomain
	}
	return newtonConverged
}

// fill copies the converged solution into out.
func (s *Solver) fill(sp satSpec, out *Point, path Path) {
	n := s.n
	s.compositions()
	sx, sy := 0.0, 0.0
	for i := range n {
		sx += s.x[i]
		sy += s.y[i]
	}
	for i := range n {
		out.Liquid[i] = s.x[i] / sx
		out.Vapour[i] = s.y[i] / sy
		out.LnK[i] = s.X[i]
	}
	out.Kind, out.Beta = sp.kind, sp.beta
	out.T, out.P = fastmath.Exp(s.X[n]), fastmath.Exp(s.X[n+1])
	if sp.fixT {
		out.T = sp.value
	} else {
		out.P = sp.value
	}
	out.VVapour, out.VLiquid = s.fy.V, s.fx.V
	out.Report.Path = path
	out.Report.LnPhiEvaluations = s.evals
}
