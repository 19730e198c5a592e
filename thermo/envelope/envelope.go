package envelope

import (
	"context"
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// EnvelopeOptions configure Envelope. The zero value selects the
// defaults.
type EnvelopeOptions struct {
	// StartPressure is the pressure (Pa) of the dew point the trace starts
	// from. Valid range [1e2, 1e7]; default 1e5.
	StartPressure float64
	// StopPressure ends the trace on the far branch: the last point is the
	// bubble point at this pressure. Valid range [1e2, 1e7]; default
	// StartPressure.
	StopPressure float64
	// MaxPressure stops an envelope that has not closed by this pressure
	// (Pa); default 2e8, at most 1e9.
	MaxPressure float64
	// MinTemperature stops the trace below this temperature (K); default
	// 10 K.
	MinTemperature float64
	// MaxPoints caps the number of points of each traced line; default
	// 2000.
	MaxPoints int
	// MaxStep caps the step between points, measured as the largest change
	// of any of ln K_i, ln T, ln P (to first order). Valid range
	// (0, 1]; default 0.1, which gives relative changes of T and P between
	// neighbours of at most about 11 %.
	MaxStep float64
	// Qualities lists vapour fractions in (0, 1) whose quality lines are
	// traced as well, from StartPressure to the critical point.
	Qualities []float64
	// NoStabilityCheck skips the third-phase test of the envelope's points
	// (EnvelopePoint.Checked stays false). The test costs about as much as
	// the trace itself; skip it only where the feed is known to form no
	// second liquid.
	NoStabilityCheck bool
}

type envSettings struct {
	p0, pStop, pMax, tMin float64
	maxPts                int
	hMax, h0              float64
}

func (o *EnvelopeOptions) resolve() (envSettings, error) {
	e := envSettings{p0: 1e5, pMax: 2e8, tMin: 10, maxPts: 2000, hMax: 0.1}
	if o.StartPressure != 0 {
		if !(o.StartPressure >= 1e2 && o.StartPressure <= 1e7) {
			return e, &InputError{Field: "EnvelopeOptions.StartPressure", Value: o.StartPressure, Reason: "must lie in [1e2, 1e7] Pa"}
		}
		e.p0 = o.StartPressure
	}
	e.pStop = e.p0
	if o.StopPressure != 0 {
		if !(o.StopPressure >= 1e2 && o.StopPressure <= 1e7) {
			return e, &InputError{Field: "EnvelopeOptions.StopPressure", Value: o.StopPressure, Reason: "must lie in [1e2, 1e7] Pa"}
		}
		e.pStop = o.StopPressure
	}
	if o.MaxPressure != 0 {
		if !(o.MaxPressure > e.p0 && o.MaxPressure <= maxP) {
			return e, &InputError{Field: "EnvelopeOptions.MaxPressure", Value: o.MaxPressure, Reason: "must exceed StartPressure and be at most 1e9 Pa"}
		}
		e.pMax = o.MaxPressure
	}
	if o.MinTemperature != 0 {
		if !(o.MinTemperature >= minT && o.MinTemperature < 1000) {
			return e, &InputError{Field: "EnvelopeOptions.MinTemperature", Value: o.MinTemperature, Reason: "must lie in [5, 1000) K"}
		}
		e.tMin = o.MinTemperature
	}
	if o.MaxPoints != 0 {
		if o.MaxPoints < 3 || o.MaxPoints > 100000 {
			return e, &InputError{Field: "EnvelopeOptions.MaxPoints", Value: float64(o.MaxPoints), Reason: "must lie in [3, 100000]"}
		}
		e.maxPts = o.MaxPoints
	}
	if o.MaxStep != 0 {
		if !(o.MaxStep > 0 && o.MaxStep <= 1) {
			return e, &InputError{Field: "EnvelopeOptions.MaxStep", Value: o.MaxStep, Reason: "must lie in (0, 1]"}
		}
		e.hMax = o.MaxStep
	}
	e.h0 = min(0.05, e.hMax)
	for i, b := range o.Qualities {
		if !(b > 0 && b < 1) {
			return e, &InputError{Field: fmt.Sprintf("EnvelopeOptions.Qualities[%d]", i), Value: b, Reason: "vapour fraction must lie strictly between 0 and 1"}
		}
	}
	return e, nil
}

// EnvelopePoint is one point of a traced phase boundary or quality line.
type EnvelopePoint struct {
	Kind Kind
	T, P float64 // K, Pa
	// LnK holds ln K_i = ln(y_i/x_i) in the tracing convention: y is the
	// phase of vapour fraction β (the feed itself on the β = 1 trace of
	// the phase envelope, so that x_i = z_i/K_i is the incipient phase on
	// both branches; ln K changes sign at the critical point). Zero at a
	// critical point.
	LnK []float64
	// Iterations is the number of Newton iterations the point took.
	Iterations int
	// Spec is the index of the specified variable: 0..n−1 for ln K_i, n
	// for ln T, n+1 for ln P.
	Spec int
	// Checked says the point had the third-phase test (points of the
	// phase envelope unless EnvelopeOptions.NoStabilityCheck; not the
	// points of quality lines).
	Checked bool
	// Metastable is true when the feed at (T, P) is unstable against a
	// phase other than the incipient one (for example a second liquid): the
	// two-phase boundary traced here is then not the phase boundary of the
	// equilibrium system, and a T–P flash just outside it finds two (or
	// three) phases. See the package documentation, "Metastable points".
	Metastable bool
	// TPD is the smallest tangent-plane distance of the feed at (T, P)
	// found by the third-phase test away from the feed and the incipient
	// phase: negative where Metastable, zero when every trial fell back onto
	// one of the two, small and positive next to the point where a third
	// phase appears.
	TPD float64
	// ThirdPhase is the trial composition of TPD at a metastable point
	// (mole fractions; nil elsewhere).
	ThirdPhase []float64
}

// CriticalPoint is a critical point located on a traced envelope.
type CriticalPoint struct {
	T, P float64 // K, Pa
	// Index is the position of the point in Envelope.Points.
	Index int
	// Iterations counts the Newton iterations of the two refinement points.
	Iterations int
}

// Extremum is the cricondenbar or cricondentherm of an envelope.
type Extremum struct {
	Found bool
	T, P  float64 // K, Pa
	Kind  Kind    // the branch it lies on (Bubble or Dew)
	// Iterations counts the secant steps (each a converged Newton point).
	Iterations int
	// Residual is |d ln P/d ln T| (cricondenbar) or |d ln T/d ln P|
	// (cricondentherm) along the envelope at the point.
	Residual float64
}

// StopReason says why the trace of a line ended.
type StopReason int

// Stop reasons. StopLowPressure (envelope) and StopCriticalPoint (quality
// line) are the normal ends.
const (
	StopUnspecified StopReason = iota
	// StopLowPressure: the far branch reached StopPressure.
	StopLowPressure
	// StopCriticalPoint: a quality line reached the critical point.
	StopCriticalPoint
	// StopPureCritical: a pure component's vapour-pressure curve reached
	// its critical point.
	StopPureCritical
	// StopMaxPressure: the boundary rose above MaxPressure (an envelope
	// that does not close at process pressures).
	StopMaxPressure
	// StopMinTemperature: the boundary fell below MinTemperature.
	StopMinTemperature
	// StopMaxPoints: the point cap was reached.
	StopMaxPoints
	// StopStepCuts: Newton failed at ever smaller steps.
	StopStepCuts
	// StopCanceled: the context was cancelled or its deadline passed.
	StopCanceled
)

var stopNames = [...]string{"unspecified", "low pressure", "critical point", "pure-component critical point", "maximum pressure", "minimum temperature", "maximum points", "step cuts", "canceled"}

// String names the reason.
func (r StopReason) String() string {
	if r < 0 || int(r) >= len(stopNames) {
		return "unknown"
	}
	return stopNames[r]
}

// EnvelopeReport says what the trace of one line did.
type EnvelopeReport struct {
	// Points is the number of converged points (critical points
	// included).
	Points int
	// NewtonIterations counts all Newton iterations, including those of
	// rejected steps and of the critical-point and extremum refinements.
	NewtonIterations int
	// MaxIterations is the most Newton iterations any accepted point took.
	MaxIterations int
	// LnPhiEvaluations counts calls of the ln φ kernel.
	LnPhiEvaluations int
	// StepCuts counts steps halved after a failed Newton solve; Failures
	// counts failed Newton solves (every cut follows one).
	StepCuts, Failures int
	// Metastable counts the points of the line the third-phase test found
	// metastable, and MetastableTMin … MetastablePMax span their
	// temperatures (K) and pressures (Pa); all zero when there are none.
	Metastable                     int
	MetastableTMin, MetastableTMax float64
	MetastablePMin, MetastablePMax float64
	// StabilityTrials counts the trial phases of the third-phase test and
	// StabilityEvaluations its ln φ evaluations (included in
	// LnPhiEvaluations).
	StabilityTrials, StabilityEvaluations int
	// Stop says why the trace ended, Detail adds the numbers, and LastT,
	// LastP are the last converged point.
	Stop         StopReason
	Detail       string
	LastT, LastP float64
}

// QualityLine is a traced line of constant vapour fraction.
type QualityLine struct {
	Beta   float64
	Points []EnvelopePoint
	Report EnvelopeReport
}

// Envelope is a traced phase envelope.
type Envelope struct {
	// Z is the normalised feed.
	Z []float64
	// Points runs from the dew point at StartPressure over the dew branch,
	// through the critical point(s) (included as Kind Critical), down the
	// bubble branch to StopPressure. For a pure component it is the
	// vapour-pressure curve ending at the critical point.
	Points []EnvelopePoint
	// Critical lists the critical points found (normally one).
	Critical []CriticalPoint
	// Cricondenbar and Cricondentherm are the points of highest pressure
	// and highest temperature, solved as dP/dT = 0 and dT/dP = 0 along the
	// envelope.
	Cricondenbar, Cricondentherm Extremum
	// Quality holds the lines asked for in EnvelopeOptions.Qualities.
	Quality []QualityLine
	Report  EnvelopeReport

	slab []float64
}

// Closed reports whether the trace reached the low-pressure end of the
// far branch (or, for a pure component, the critical point).
func (e *Envelope) Closed() bool {
	return e.Report.Stop == StopLowPressure || e.Report.Stop == StopPureCritical
}

// alloc hands out n floats from a slab grown 64 points at a time, so a
// traced line allocates once per 64 points rather than once per point.
func (e *Envelope) alloc(n int) []float64 {
	if len(e.slab) < n {
		e.slab = make([]float64, 64*n)
	}
	v := e.slab[:n:n]
	e.slab = e.slab[n:]
	return v
}

// Envelope traces the phase envelope of feed z by continuation
// (Michelsen 1980): see the package documentation. It returns the
// envelope traced so far with an error when the start point cannot be
// solved (*ConvergenceError), when Newton fails at ever smaller steps
// (*ConvergenceError; Report.Stop is StopStepCuts), or when ctx ends.
// An envelope that does not close below MaxPressure is returned without
// error with Report.Stop = StopMaxPressure.
func (s *Solver) Envelope(ctx context.Context, z []float64, opts EnvelopeOptions) (*Envelope, error) {
	o, err := opts.resolve()
	if err != nil {
		return nil, err
	}
	if err := s.setFeed(z); err != nil {
		return nil, err
	}
	env := &Envelope{Z: append([]float64(nil), s.z...), Points: make([]EnvelopePoint, 0, 128)}
	env.Cricondenbar.T, env.Cricondenbar.P = math.NaN(), math.NaN()
	env.Cricondentherm.T, env.Cricondentherm.P = math.NaN(), math.NaN()
	if c, k := s.present(); c == 1 {
		return env, s.pureEnvelope(ctx, k, o, env, opts.Qualities)
	}
	s.evals = 0
	err = s.trace(ctx, 1, o, env, &env.Points, &env.Report)
	if !opts.NoStabilityCheck {
		s.checkStability(env, env.Points, &env.Report)
	}
	if err != nil {
		return env, err
	}
	for _, b := range opts.Qualities {
		q := QualityLine{Beta: b, Points: make([]EnvelopePoint, 0, 64)}
		s.evals = 0
		err := s.trace(ctx, b, o, env, &q.Points, &q.Report)
		if len(env.Critical) > 0 && q.Report.Stop == StopCriticalPoint {
			c := env.Critical[0]
			q.Points = append(q.Points, EnvelopePoint{Kind: Critical, T: c.T, P: c.P, LnK: env.alloc(s.n), Spec: -1})
			q.Report.Points++
		}
		env.Quality = append(env.Quality, q)
		if err != nil {
			return env, err
		}
	}
	return env, nil
}

func infNormalize(v []float64) {
	m := 0.0
	for _, x := range v {
		m = max(m, math.Abs(x))
	}
	if m > 0 {
		for i := range v {
			v[i] /= m
		}
	}
}

func dot(a, b []float64) float64 {
	s := 0.0
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// hermite evaluates at σ the cubic Hermite interpolant (or extrapolant)
// through (σ0, X0) and (σ1, X1) with slopes D0, D1 (dX/dσ), into dst.
func hermite(dst, x0, d0, x1, d1 []float64, s0, s1, s float64) {
	h := s1 - s0
	t := (s - s0) / h
	t2, t3 := t*t, t*t*t
	h00 := 2*t3 - 3*t2 + 1
	h10 := t3 - 2*t2 + t
	h01 := -2*t3 + 3*t2
	h11 := t3 - t2
	for i := range dst {
		dst[i] = h00*x0[i] + h10*h*d0[i] + h01*x1[i] + h11*h*d1[i]
	}
}

// predict writes into s.X the initial estimate for the point with X_sp =
// target: cubic Hermite through the previous and current points when both
// have a usable slope in X_sp and the step is not far beyond their
// interval, otherwise linear from the current point along its tangent.
func (s *Solver) predict(havePrev bool, sp int, target float64) {
	m := s.m
	cs := s.curS[sp]
	if havePrev {
		ps := s.prvS[sp]
		pm := 0.0
		for _, v := range s.prvS {
			pm = max(pm, math.Abs(v))
		}
		h := s.curX[sp] - s.prvX[sp]
		if math.Abs(ps) > 0.05*pm && math.Abs(h) > 1e-12 && math.Abs(target-s.curX[sp]) <= 2*math.Abs(h) {
			for i := range m {
				s.tNew[i] = s.prvS[i] / ps // reuse tNew as scratch for D0
				s.dX[i] = s.curS[i] / cs
			}
			hermite(s.X, s.prvX, s.tNew, s.curX, s.dX, s.prvX[sp], s.curX[sp], target)
			return
		}
	}
	d := target - s.curX[sp]
	for i := range m {
		s.X[i] = s.curX[i] + d*s.curS[i]/cs
	}
}

// lnKWeight is how much more ln K_i may change than ln T or ln P in one
// step: K-values of the heavy components vary steeply along an envelope
// while T and P set its resolution.
const lnKWeight = 3

// stepLength returns the change of the specified variable X_sp that moves
// no ln T or ln P by more than h and no ln K_i by more than lnKWeight·h,
// to first order along the current tangent.
func (s *Solver) stepLength(sp int, h float64) float64 {
	n := s.n
	r := 0.0
	for i, d := range s.tCur {
		d = math.Abs(d / s.tCur[sp])
		if i < n {
			d /= lnKWeight
		}
		r = max(r, d)
	}
	return h / r
}

func argmaxAbs(v []float64) int {
	k := 0
	for i := range v {
		if math.Abs(v[i]) > math.Abs(v[k]) {
			k = i
		}
	}
	return k
}

// trace follows one line of vapour fraction beta (1: the phase envelope)
// from the point at o.p0 and appends its points.
func (s *Solver) trace(ctx context.Context, beta float64, o envSettings, env *Envelope, pts *[]EnvelopePoint, rep *EnvelopeReport) error {
	n, m := s.n, s.m
	quality := beta < 1
	kind0 := Dew
	if quality {
		kind0 = Quality
	}
	sp0 := satSpec{kind: kind0, beta: beta, fixT: false, value: o.p0}
	var srep Report
	st := s.direct(sp0, Hint{}, &srep)
	rep.NewtonIterations += srep.NewtonIterations
	if st != newtonConverged {
		rep.LnPhiEvaluations = s.evals
		rep.Stop, rep.Detail = StopStepCuts, "start point: "+st.String()
		return &ConvergenceError{What: fmt.Sprintf("envelope start (%s point at P = %g Pa)", kind0, o.p0), Iterations: srep.NewtonIterations + srep.SSIterations,
			T: fastmath.Exp(s.X[n]), P: o.p0, Residual: srep.Residual, Reason: st.String()}
	}
	side := true // y (feed on the β = 1 trace) on the vapour root
	copy(s.curX, s.X)
	s.sensitivity(s.curS)
	copy(s.tCur, s.curS)
	infNormalize(s.tCur)
	s.appendPoint(env, pts, rep, kind0, srep.NewtonIterations, n+1)
	lnPstop, lnPmax, lnTmin := fastmath.Log(o.pStop), fastmath.Log(o.pMax), fastmath.Log(o.tMin)
	h := o.h0
	havePrev := false
	cuts := 0
	for {
		if err := ctx.Err(); err != nil {
			rep.Stop, rep.Detail = StopCanceled, err.Error()
			rep.LnPhiEvaluations = s.evals
			return &canceledError{stage: "envelope", err: err}
		}
		if len(*pts) >= o.maxPts {
			rep.Stop, rep.Detail = StopMaxPoints, fmt.Sprintf("%d points", len(*pts))
			break
		}
		sp := argmaxAbs(s.tCur)
		dS := math.Copysign(s.stepLength(sp, h), s.tCur[sp])
		flip, final := false, false
		if sp < n && s.curX[sp]*dS < 0 && math.Abs(s.curX[sp]) <= math.Abs(dS) {
			if quality {
				rep.Stop, rep.Detail = StopCriticalPoint, fmt.Sprintf("ln K_%d = %.3g next to the critical point", sp, s.curX[sp])
				break
			}
			dS = -2 * s.curX[sp]
			flip = true
		}
		if !flip && len(*pts) > 2 && s.tCur[n+1] < 0 {
			pred := s.curX[n+1] + dS*s.curS[n+1]/s.curS[sp]
			if pred <= lnPstop {
				sp = n + 1
				dS = lnPstop - s.curX[n+1]
				final = true
			}
		}
		target := s.curX[sp] + dS
		s.predict(havePrev, sp, target)
		s.yVap = side != flip
		it, _, st := s.newton(sp, target, 20, false)
		rep.NewtonIterations += it
		ok := st == newtonConverged
		if ok {
			fwd := 0.0
			for i := range m {
				fwd += (s.X[i] - s.curX[i]) * s.tCur[i]
			}
			ok = fwd > 0
			// A phase boundary point without a flip must keep ln K away
			// from zero; a collapse to the trivial solution is a failure.
			if ok && !flip && dot(s.X[:n], s.curX[:n]) < 0 && s.sumLnK2() < 1e-12 {
				ok = false
			}
		}
		if !ok {
			rep.Failures++
			rep.StepCuts++
			cuts++
			h /= 2
			if cuts > 12 || h < 1e-8 {
				rep.Stop = StopStepCuts
				rep.Detail = fmt.Sprintf("Newton failed (%v) at step %.3g after %d cuts, from T = %.6g K, P = %.6g Pa", st, h*2, cuts, fastmath.Exp(s.curX[n]), fastmath.Exp(s.curX[n+1]))
				rep.LastT, rep.LastP = fastmath.Exp(s.curX[n]), fastmath.Exp(s.curX[n+1])
				rep.LnPhiEvaluations = s.evals
				return &ConvergenceError{What: "envelope point", Iterations: it, T: fastmath.Exp(s.curX[n]), P: fastmath.Exp(s.curX[n+1]), Residual: math.NaN(), Reason: rep.Detail}
			}
			continue
		}
		cuts = 0
		s.sensitivity(s.sens)
		copy(s.tNew, s.sens)
		if dS < 0 {
			for i := range s.tNew {
				s.tNew[i] = -s.tNew[i]
			}
		}
		infNormalize(s.tNew)
		crossed := dot(s.X[:n], s.curX[:n]) < 0
		// s.X, s.sens hold the new point; keep copies in bX, bS.
		copy(s.bX, s.X)
		copy(s.bS, s.sens)
		newSide := side
		if crossed {
			newSide = !side
		}
		if !quality {
			// Extrema are searched on each side of a critical point
			// separately, between the points that bracket it at ln K_c = ±δ
			// (an extremum within δ of the critical point is not resolved).
			if crossed && s.locateCritical(env, pts, rep, side) {
				s.extrema(env, rep, side, s.curX, s.tCur, s.r1X, s.r1S)
				s.extrema(env, rep, !side, s.r2X, s.r2S, s.bX, s.tNew)
			} else {
				s.extrema(env, rep, side, s.curX, s.tCur, s.bX, s.tNew)
			}
		}
		side = newSide
		copy(s.prvX, s.curX)
		copy(s.prvS, s.curS)
		copy(s.curX, s.bX)
		copy(s.curS, s.bS)
		copy(s.tCur, s.tNew)
		copy(s.X, s.curX)
		havePrev = true
		k := kind0
		if !quality && !side {
			k = Bubble
		}
		s.appendPoint(env, pts, rep, k, it, sp)
		rep.MaxIterations = max(rep.MaxIterations, it)
		switch {
		case it <= 2:
			h *= 1.6
		case it <= 3:
			h *= 1.25
		case it <= 5:
		default:
			h *= 0.6
		}
		h = min(h, o.hMax)
		if final {
			rep.Stop, rep.Detail = StopLowPressure, fmt.Sprintf("reached %g Pa", o.pStop)
			break
		}
		if s.curX[n+1] > lnPmax {
			rep.Stop, rep.Detail = StopMaxPressure, fmt.Sprintf("P = %.6g Pa above %g Pa with the envelope still open", fastmath.Exp(s.curX[n+1]), o.pMax)
			break
		}
		if s.curX[n] < lnTmin {
			rep.Stop, rep.Detail = StopMinTemperature, fmt.Sprintf("T = %.6g K below %g K", fastmath.Exp(s.curX[n]), o.tMin)
			break
		}
	}
	rep.LastT, rep.LastP = fastmath.Exp(s.curX[n]), fastmath.Exp(s.curX[n+1])
	rep.LnPhiEvaluations = s.evals
	return nil
}

// appendPoint appends s.X as a point of kind k.
func (s *Solver) appendPoint(env *Envelope, pts *[]EnvelopePoint, rep *EnvelopeReport, k Kind, it, spec int) {
	n := s.n
	lk := env.alloc(n)
	copy(lk, s.X[:n])
	*pts = append(*pts, EnvelopePoint{Kind: k, T: fastmath.Exp(s.X[n]), P: fastmath.Exp(s.X[n+1]), LnK: lk, Iterations: it, Spec: spec})
	rep.Points++
}

// locateCritical finds the critical point between the current point
// (s.curX, s.curS, on side sideA) and the new point (s.bX, s.bS) whose ln K
// have the opposite sign. Along the envelope X is a smooth function of the
// ln K_c of the component that crosses zero most steeply; the two points
// at ln K_c = ±δ (δ ≤ 0.01) are solved and the cubic Hermite interpolant
// between them, with their sensitivities as slopes, is evaluated at
// ln K_c = 0. Its error is O(δ⁴); if either refinement point fails the
// interpolant between the bracketing points is used instead.
//
// It reports whether both refinement points converged; their oriented
// tangents are then left in s.r1S and s.r2S, the points in s.r1X, s.r2X.
func (s *Solver) locateCritical(env *Envelope, pts *[]EnvelopePoint, rep *EnvelopeReport, sideA bool) bool {
	n, m := s.n, s.m
	c := 0
	for i := 1; i < n; i++ {
		if math.Abs(s.curX[i]-s.bX[i]) > math.Abs(s.curX[c]-s.bX[c]) {
			c = i
		}
	}
	ax, bx := s.curX[c], s.bX[c]
	// Slopes dX/d ln K_c at the bracketing points.
	for i := range m {
		s.sA[i] = s.curS[i] / s.curS[c]
		s.sB[i] = s.bS[i] / s.bS[c]
	}
	delta := min(0.01, 0.5*min(math.Abs(ax), math.Abs(bx)))
	iters := 0
	ok := delta > 1e-6
	refine := func(target float64, yVap bool, dstX, dstS []float64) bool {
		hermite(s.X, s.curX, s.sA, s.bX, s.sB, ax, bx, target)
		s.yVap = yVap
		it, _, st := s.newton(c, target, 20, false)
		iters += it
		if st != newtonConverged || s.X[c]*target <= 0 {
			return false
		}
		s.sensitivity(dstS)
		copy(dstX, s.X)
		return true
	}
	ta, tb := math.Copysign(delta, ax), math.Copysign(delta, bx)
	ok = ok && refine(ta, sideA, s.r1X, s.r1S) && refine(tb, !sideA, s.r2X, s.r2S)
	rep.NewtonIterations += iters
	if ok {
		hermite(s.guess, s.r1X, s.r1S, s.r2X, s.r2S, ta, tb, 0)
	} else {
		hermite(s.guess, s.curX, s.sA, s.bX, s.sB, ax, bx, 0)
	}
	T, P := fastmath.Exp(s.guess[n]), fastmath.Exp(s.guess[n+1])
	env.Critical = append(env.Critical, CriticalPoint{T: T, P: P, Index: len(*pts), Iterations: iters})
	*pts = append(*pts, EnvelopePoint{Kind: Critical, T: T, P: P, LnK: env.alloc(n), Iterations: iters, Spec: c})
	rep.Points++
	if ok && tb < ta {
		for i := range m {
			s.r1S[i], s.r2S[i] = -s.r1S[i], -s.r2S[i]
		}
	}
	return ok
}
