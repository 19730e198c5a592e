package envelope

import (
	"context"
	"math"

	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// extrema looks for the cricondenbar (d ln P/ds changes from + to −) and
// the cricondentherm (d ln T/ds from + to −) between points a and b with
// tangents ta, tb oriented in the direction of travel.
func (s *Solver) extrema(env *Envelope, rep *EnvelopeReport, side bool, aX, ta, bX, tb []float64) {
	n := s.n
	if ta[n+1] > 0 && tb[n+1] <= 0 {
		s.locateExtremum(&env.Cricondenbar, rep, side, n+1, aX, ta, bX, tb)
	}
	if ta[n] > 0 && tb[n] <= 0 {
		s.locateExtremum(&env.Cricondentherm, rep, side, n, aX, ta, bX, tb)
	}
}

// locateExtremum solves the cricondenbar (o = n+1: d ln P/ds = 0) or the
// cricondentherm (o = n: d ln T/ds = 0) between points a and b (with
// tangents or sensitivities aS, bS), where the derivative changes sign.
// The envelope is parameterised by the variable X_v that changes most
// between a and b (never X_o), which stays a regular parameter near the
// critical point where ln T or ln P alone would not; the condition is
//
//	g(X_v) = dX_o/dX_v = 0,
//
// with dX/dX_v read from the sensitivity vector of the converged point
// with X_v specified (Michelsen 1980, eq. 9: J·dX = e_{n+2}). The root is
// found by the Illinois variant of regula falsi (Dowell & Jarratt 1971,
// BIT 11:168–174), each iterate a converged envelope point; the
// cricondenbar and cricondentherm are therefore exact conditions of the
// model, not read off the traced points. The result replaces ext when it
// is the higher extremum.
func (s *Solver) locateExtremum(ext *Extremum, rep *EnvelopeReport, side bool, o int, aX, aS, bX, bS []float64) {
	n, m := s.n, s.m
	v := -1
	for i := range m {
		if i != o && (v < 0 || math.Abs(aX[i]-bX[i]) > math.Abs(aX[v]-bX[v])) {
			v = i
		}
	}
	if aS[v] == 0 || bS[v] == 0 {
		return
	}
	lo, hi := aX[v], bX[v]
	glo, ghi := aS[o]/aS[v], bS[o]/bS[v]
	if !(glo*ghi <= 0) || lo == hi {
		return
	}
	x, g := lo, glo
	iters, steps := 0, 0
	last := 0
	conv := false
	for steps < 40 {
		steps++
		x = lo - glo*(hi-lo)/(ghi-glo)
		w := (x - aX[v]) / (bX[v] - aX[v])
		for i := range m {
			s.X[i] = aX[i] + w*(bX[i]-aX[i])
		}
		s.yVap = side
		it, _, st := s.newton(v, x, 20, false)
		iters += it
		if st != newtonConverged {
			break
		}
		s.sensitivity(s.sens)
		g = s.sens[o]
		if math.Abs(g) < 1e-12 || math.Abs(hi-lo) < 1e-13 {
			conv = true
			break
		}
		if g*ghi < 0 {
			lo, glo = hi, ghi
			hi, ghi = x, g
			last = 0
		} else {
			hi, ghi = x, g
			if last == 1 {
				glo /= 2
			}
			last = 1
		}
	}
	rep.NewtonIterations += iters
	if !conv {
		return
	}
	other := n
	if o == n {
		other = n + 1
	}
	res := math.Abs(s.sens[o] / s.sens[other])
	T, P := fastmath.Exp(s.X[n]), fastmath.Exp(s.X[n+1])
	better := !ext.Found || (o == n+1 && P > ext.P) || (o == n && T > ext.T)
	if !better {
		return
	}
	k := Dew
	if !side {
		k = Bubble
	}
	*ext = Extremum{Found: true, T: T, P: P, Kind: k, Iterations: steps, Residual: res}
}

// pureEnvelope traces a pure component's vapour-pressure curve from the
// saturation temperature at o.p0 to the critical point, with points
// crowded toward Tc (T_j = Tc − (Tc − T_0)(1 − j/N)², N = 64), and ends
// with the model's critical point (Tc, Pc) exactly: every cubic of this
// package reproduces the input critical constants.
func (s *Solver) pureEnvelope(ctx context.Context, k int, o envSettings, env *Envelope, qualities []float64) error {
	c := s.mx.Component(k)
	n := s.n
	rep := &env.Report
	if o.p0 >= c.Pc {
		return &NoSaturationError{Kind: Saturated, Spec: "P", Value: o.p0, Reason: "start pressure at or above the critical pressure of the only component present",
			CricondenthermT: c.Tc, CricondenthermP: c.Pc, CricondenbarT: c.Tc, CricondenbarP: c.Pc}
	}
	sat, err := s.mx.SaturationTemperature(s.ws, k, o.p0)
	if err != nil {
		return err
	}
	t0 := sat.T
	const N = 64
	for j := range N {
		if err := ctx.Err(); err != nil {
			rep.Stop = StopCanceled
			return &canceledError{stage: "envelope", err: err}
		}
		f := 1 - float64(j)/N
		T := c.Tc - (c.Tc-t0)*f*f
		st, err := s.mx.VapourPressure(s.ws, k, T)
		if err != nil {
			rep.Stop, rep.Detail = StopStepCuts, err.Error()
			return err
		}
		if j == 0 {
			st.T = t0
		}
		rep.NewtonIterations += st.Iterations
		rep.LnPhiEvaluations += st.Evaluations
		rep.MaxIterations = max(rep.MaxIterations, st.Iterations)
		env.Points = append(env.Points, EnvelopePoint{Kind: Saturated, T: st.T, P: st.P, LnK: env.alloc(n), Iterations: st.Iterations, Spec: n})
	}
	env.Points = append(env.Points, EnvelopePoint{Kind: Critical, T: c.Tc, P: c.Pc, LnK: env.alloc(n), Spec: -1})
	env.Critical = append(env.Critical, CriticalPoint{T: c.Tc, P: c.Pc, Index: len(env.Points) - 1})
	env.Cricondenbar = Extremum{Found: true, T: c.Tc, P: c.Pc, Kind: Critical}
	env.Cricondentherm = env.Cricondenbar
	rep.Points = len(env.Points)
	rep.Stop, rep.Detail = StopPureCritical, c.ID+" critical point"
	rep.LastT, rep.LastP = c.Tc, c.Pc
	for _, b := range qualities {
		q := QualityLine{Beta: b, Points: make([]EnvelopePoint, len(env.Points)), Report: env.Report}
		copy(q.Points, env.Points)
		for i := range q.Points {
			if q.Points[i].Kind == Saturated {
				q.Points[i].Kind = Quality
			}
		}
		env.Quality = append(env.Quality, q)
	}
	return nil
}
