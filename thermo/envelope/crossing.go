package envelope

import (
	"context"
	"math"
	"sort"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// fromEnvelope finds the saturation points of the specification on a
// traced envelope (or quality line): every pair of neighbouring points of
// the requested kind that brackets the specified T or P gives a start,
// interpolated linearly in ln T or ln P, from which Newton solves the
// point. Hint.Branch picks among the solutions. When no pair brackets the
// specification the point does not exist and a *NoSaturationError says
// why, with the envelope's cricondentherm and cricondenbar.
func (s *Solver) fromEnvelope(ctx context.Context, sp satSpec, h Hint, out *Point) error {
	n := s.n
	eo := EnvelopeOptions{StartPressure: 1e4, NoStabilityCheck: true}
	if !sp.fixT {
		eo.StartPressure = max(1e2, min(1e5, sp.value/2))
	}
	if sp.kind == Quality {
		eo.Qualities = []float64{sp.beta}
	}
	rep := out.Report
	env, err := s.Envelope(ctx, s.z, eo)
	if env == nil {
		return err
	}
	if err != nil && !(sp.kind == Quality && len(env.Quality) > 0) && len(env.Points) < 2 {
		return err
	}
	pts := env.Points
	rep.EnvelopePoints = env.Report.Points
	rep.NewtonIterations += env.Report.NewtonIterations
	rep.LnPhiEvaluations += env.Report.LnPhiEvaluations
	if sp.kind == Quality {
		if len(env.Quality) == 0 {
			return err
		}
		pts = env.Quality[0].Points
		rep.EnvelopePoints += env.Quality[0].Report.Points
	}
	v := n
	if !sp.fixT {
		v = n + 1
	}
	target := fastmath.Log(sp.value)
	type sol struct {
		unknown float64
		x       []float64
		it      int
	}
	var sols []sol
	get := func(p *EnvelopePoint) float64 {
		if sp.fixT {
			return fastmath.Log(p.T)
		}
		return fastmath.Log(p.P)
	}
	s.evals = 0
	for k := 0; k+1 < len(pts); k++ {
		a, b := &pts[k], &pts[k+1]
		// A pair may end at the critical point (ln K = 0), which belongs to
		// both branches.
		if !(a.Kind == sp.kind && (b.Kind == sp.kind || b.Kind == Critical)) && !(a.Kind == Critical && b.Kind == sp.kind) {
			continue
		}
		ga, gb := get(a), get(b)
		if (ga-target)*(gb-target) > 0 || ga == gb {
			continue
		}
		if !s.alongEnvelope(a, b, v, target, sp, sp.kind) {
			continue
		}
		// Polish with the specification itself, in the convention of the
		// requested point (y the vapour).
		if sp.kind == Bubble {
			for i := range n {
				s.X[i] = -s.X[i] // the β = 1 trace keeps K = feed/incipient
			}
		}
		s.beta, s.yVap = sp.beta, true
		it, _, st := s.newton(v, target, s.set.maxIt, true)
		rep.NewtonIterations += it
		if st == newtonTrivial {
			rep.TrivialRejected++
		}
		if st != newtonConverged || !s.physical() {
			continue
		}
		u := s.X[n+1]
		if !sp.fixT {
			u = s.X[n]
		}
		sols = append(sols, sol{unknown: u, x: append([]float64(nil), s.X...), it: it})
	}
	rep.LnPhiEvaluations += s.evals
	if len(sols) == 0 {
		e := &NoSaturationError{Kind: sp.kind, Spec: sp.specName(), Value: sp.value, Beta: sp.beta,
			CricondenthermT: env.Cricondentherm.T, CricondenthermP: env.Cricondentherm.P,
			CricondenbarT: env.Cricondenbar.T, CricondenbarP: env.Cricondenbar.P}
		switch {
		case !env.Closed() && sp.kind != Quality:
			e.Reason = "none found on the traced envelope, which is incomplete (" + env.Report.Stop.String() + ": " + env.Report.Detail + ")"
		case sp.fixT && env.Cricondentherm.Found && sp.value > env.Cricondentherm.T:
			e.Reason = "temperature above the cricondentherm"
		case !sp.fixT && env.Cricondenbar.Found && sp.value > env.Cricondenbar.P:
			e.Reason = "pressure above the cricondenbar"
		default:
			e.Reason = "the phase boundary at this specification has no point of this kind"
		}
		return e
	}
	sort.Slice(sols, func(i, j int) bool { return sols[i].unknown < sols[j].unknown })
	pick := sols[0]
	if h.Branch == BranchUpper {
		pick = sols[len(sols)-1]
	}
	copy(s.X, pick.x)
	s.beta, s.yVap = sp.beta, true
	spec := s.X[v]
	s.evals = 0
	it, resid, st := s.newton(v, spec, s.set.maxIt, true)
	rep.NewtonIterations += it
	rep.LnPhiEvaluations += s.evals
	rep.Residual = resid
	if st != newtonConverged || !s.physical() {
		return &ConvergenceError{What: sp.kind.String() + " point", Iterations: it, T: fastmath.Exp(s.X[n]), P: fastmath.Exp(s.X[n+1]), Residual: resid, Reason: st.String()}
	}
	out.Report = rep
	s.fill(sp, out, PathEnvelope)
	out.Report.LnPhiEvaluations = rep.LnPhiEvaluations
	return nil
}

// alongEnvelope moves along the traced line from point a to point b
// (neighbours that bracket X_v = target) to the point with X_v = target,
// leaving it in s.X in the tracing convention. The line is parameterised
// by the variable X_w that changes most between a and b; regula falsi
// (Illinois) on X_w solves X_v(X_w) = target, each iterate a converged
// point with X_w specified. A regular parameter keeps every solve well
// conditioned even next to the critical point, where a start
// interpolated in T or P alone may fall into the trivial solution.
func (s *Solver) alongEnvelope(a, b *EnvelopePoint, v int, target float64, sp satSpec, k Kind) bool {
	n, m := s.n, s.m
	load := func(p *EnvelopePoint, dst []float64) {
		copy(dst, p.LnK)
		dst[n], dst[n+1] = fastmath.Log(p.T), fastmath.Log(p.P)
	}
	ax, bx := s.r1X, s.r2X
	load(a, ax)
	load(b, bx)
	w := -1
	for i := range m {
		if i != v && (w < 0 || math.Abs(ax[i]-bx[i]) > math.Abs(ax[w]-bx[w])) {
			w = i
		}
	}
	s.beta = 1
	if sp.kind == Quality {
		s.beta = sp.beta
	}
	s.yVap = k != Bubble
	lo, hi := ax[w], bx[w]
	flo, fhi := ax[v]-target, bx[v]-target
	last := 0
	for it := 0; it < 60; it++ {
		x := lo - flo*(hi-lo)/(fhi-flo)
		f := (x - ax[w]) / (bx[w] - ax[w])
		for i := range m {
			s.X[i] = ax[i] + f*(bx[i]-ax[i])
		}
		_, _, st := s.newton(w, x, 20, false)
		if st != newtonConverged {
			return false
		}
		fx := s.X[v] - target
		if math.Abs(fx) < 1e-12 || math.Abs(hi-lo) < 1e-14 {
			return true
		}
		if fx*fhi < 0 {
			lo, flo = hi, fhi
			hi, fhi = x, fx
			last = 0
		} else {
			hi, fhi = x, fx
			if last == 1 {
				flo /= 2
			}
			last = 1
		}
	}
	return false
}

// physical reports whether the vapour of the last evaluation is the less
// dense phase and the feed (both phases of a quality point) sits on the
// root of least Gibbs energy for its composition where the cubic has
// three roots. A feed forced onto its other root can satisfy the
// saturation equations without being a real boundary point. The root of
// the incipient phase of a bubble or dew point is not checked: a point
// inside a three-phase region is not detected here (stability analysis
// belongs to thermo/flash).
func (s *Solver) physical() bool {
	if s.fy.V < s.fx.V {
		return false
	}
	yb, xb := s.fy.Branch, s.fx.Branch
	yr, xr := s.fy.Roots, s.fx.Roots
	if s.beta == 0 {
		yr = 0
	}
	if s.beta == 1 {
		xr = 0
	}
	T, P := fastmath.Exp(s.X[s.n]), fastmath.Exp(s.X[s.n+1])
	if yr == 3 {
		if s.mx.Fugacity(s.ws, T, P, s.y, eos.RootMinGibbs, 0, s.fy) != nil || s.fy.Branch != yb {
			return false
		}
		s.evals++
	}
	if xr == 3 {
		if s.mx.Fugacity(s.ws, T, P, s.x, eos.RootMinGibbs, 0, s.fx) != nil || s.fx.Branch != xb {
			return false
		}
		s.evals++
	}
	return true
}
