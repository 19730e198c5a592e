package server

import (
	"context"
	"math"

	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/cache"
	"github.com/fugad/fugad/thermo/envelope"
	"github.com/fugad/fugad/thermo/eos"
)

// maxQualityLines bounds PhaseEnvelopeRequest.quality_vapour_fractions.
const maxQualityLines = 9

// answerCached answers through the result cache under the key built in kb,
// unless the cache is off or bypassed: a fresh answer is returned as
// solved, a stored one (a hit, or a miss that joined an identical solve in
// flight) as the stored bytes with report.from_cache set (see
// hitMessage). empty makes the message a stored answer decodes into.
func answerCached[M proto.Message](ctx context.Context, s *Server, kb *cache.KeyBuilder, bypass bool, empty func() M, setReport func(M, *fugadv1.SolverReport), solve func(context.Context) (M, error)) (M, error) {
	var zero M
	if s.results == nil || bypass {
		endKey(kb)
		return solve(ctx)
	}
	var fresh M
	var solved bool
	raw, hit, err := s.cachedAnswer(ctx, kb, func(ctx context.Context) (proto.Message, error) {
		m, err := solve(ctx)
		if err != nil {
			return nil, err
		}
		fresh, solved = m, true
		return m, nil
	})
	if err != nil {
		return zero, err
	}
	if solved && !hit {
		return fresh, nil
	}
	m := empty()
	return hitMessage(m, raw, hit, func(r *fugadv1.SolverReport) { setReport(m, r) }), nil
}

// appendOptions appends the solver options to a key.
func appendOptions(kb *cache.KeyBuilder, o *fugadv1.SolverOptions) {
	kb.AppendFloat64(o.GetTolerance())
	kb.AppendUint64(uint64(o.GetMaxIterations()))
}

// appendWarm appends a warm start's content to a key: every field, the
// ln K sensitivities, the caloric values and the state derivatives included (they move the answer only within the
// solver tolerance, but the server answers the same request with the same
// bytes, so a request with other sensitivities is another request).
func appendWarm(kb *cache.KeyBuilder, w *fugadv1.WarmStart) {
	kb.AppendBool(w != nil)
	if w == nil {
		return
	}
	kb.AppendFloat64s(w.GetKValues())
	kb.AppendUint64(uint64(len(w.GetPhases())))
	for _, p := range w.GetPhases() {
		kb.AppendInt64(int64(p.GetLabel()))
		kb.AppendFloat64(p.GetAmount())
		kb.AppendFloat64s(p.GetMoleFractions())
	}
	kb.AppendBool(w.TemperatureK != nil)
	kb.AppendFloat64(w.GetTemperatureK())
	kb.AppendBool(w.PressurePa != nil)
	kb.AppendFloat64(w.GetPressurePa())
	kb.AppendFloat64s(w.GetLnKTemperatureSensitivityPerK())
	kb.AppendFloat64s(w.GetLnKPressureSensitivityPerPa())
	kb.AppendBool(w.MolarEnthalpyJPerMol != nil)
	kb.AppendFloat64(w.GetMolarEnthalpyJPerMol())
	kb.AppendBool(w.MolarEntropyJPerMolK != nil)
	kb.AppendFloat64(w.GetMolarEntropyJPerMolK())
	d := w.GetStateDerivatives()
	kb.AppendBool(d != nil)
	for _, x := range stateDerivativeValues(d) {
		kb.AppendFloat64(x)
	}
}

// saturationBranch maps the wire enum; ok is false for unknown values.
func saturationBranch(b fugadv1.SaturationBranch) (envelope.BranchChoice, bool) {
	switch b {
	case fugadv1.SaturationBranch_SATURATION_BRANCH_UNSPECIFIED:
		return envelope.BranchAuto, true
	case fugadv1.SaturationBranch_SATURATION_BRANCH_LOWER:
		return envelope.BranchLower, true
	case fugadv1.SaturationBranch_SATURATION_BRANCH_UPPER:
		return envelope.BranchUpper, true
	}
	return envelope.BranchAuto, false
}

// saturationPoint is the translation of a validated SaturationPoint
// request onto the envelope package's BubblePressure, DewPressure,
// BubbleTemperature and DewTemperature, through the result cache (key:
// the fluid, the type, which variable is fixed and its value, the feed,
// the branch, the warm start and the options). The warm start's estimate
// of the unknown becomes Hint.Start, its K-values Hint.LnK; branch becomes
// Hint.Branch.
func (s *Server) saturationPoint(ctx context.Context, cf *compiledFluid, req *fugadv1.SaturationPointRequest, x []float64) (*fugadv1.SaturationPointResponse, error) {
	branch, ok := saturationBranch(req.GetBranch())
	if !ok {
		var v violations
		v.add("branch", "unknown saturation branch %d", req.GetBranch())
		return nil, v.err()
	}
	_, fixT := req.GetSpecified().(*fugadv1.SaturationPointRequest_TemperatureK)
	kb := s.beginKey("saturation")
	kb.AppendBytes(cf.def)
	kb.AppendInt64(int64(req.GetType()))
	kb.AppendBool(fixT)
	kb.AppendFloat64(req.GetTemperatureK())
	kb.AppendFloat64(req.GetPressurePa())
	kb.AppendFloat64s(x)
	kb.AppendInt64(int64(branch))
	appendWarm(kb, req.GetWarmStart())
	appendOptions(kb, req.GetOptions())
	return answerCached(ctx, s, kb, req.GetBypassCache(),
		func() *fugadv1.SaturationPointResponse { return new(fugadv1.SaturationPointResponse) },
		func(m *fugadv1.SaturationPointResponse, r *fugadv1.SolverReport) { m.Report = r },
		func(ctx context.Context) (*fugadv1.SaturationPointResponse, error) {
			return s.solveSaturationPoint(ctx, cf, req, x, branch, fixT)
		})
}

func (s *Server) solveSaturationPoint(ctx context.Context, cf *compiledFluid, req *fugadv1.SaturationPointRequest, x []float64, branch envelope.BranchChoice, fixT bool) (*fugadv1.SaturationPointResponse, error) {
	sc := getSolverScratch(cf)
	defer putSolverScratch(cf, sc)
	target := errTarget{sat: req}
	sv, pt, err := sc.envelope(envelopeOptions(req.GetOptions()))
	if err != nil {
		return nil, s.envelopeError(err, target)
	}
	w := req.GetWarmStart()
	start := w.GetPressurePa()
	if !fixT {
		start = w.GetTemperatureK()
	}
	h, warm := sc.hint(w, start, branch)
	bubble := req.GetType() == fugadv1.SaturationType_SATURATION_TYPE_BUBBLE
	rejected, err := solveWithFallback(h, warm, pt, func(h envelope.Hint) error {
		switch {
		case fixT && bubble:
			return sv.BubblePressure(ctx, req.GetTemperatureK(), x, h, pt)
		case fixT:
			return sv.DewPressure(ctx, req.GetTemperatureK(), x, h, pt)
		case bubble:
			return sv.BubbleTemperature(ctx, req.GetPressurePa(), x, h, pt)
		}
		return sv.DewTemperature(ctx, req.GetPressurePa(), x, h, pt)
	})
	if err != nil {
		return nil, s.envelopeError(err, target)
	}
	out := &fugadv1.SaturationPointResponse{
		TemperatureK:              pt.T,
		PressurePa:                pt.P,
		IncipientPhase:            fugadv1.PhaseLabel_PHASE_LABEL_LIQUID,
		IncipientMoleFractions:    append([]float64(nil), pt.Incipient()...),
		KValues:                   expAll(pt.LnK),
		Report:                    s.pointReport(&pt.Report, warm),
		LiquidMolarVolumeM3PerMol: pt.VLiquid,
		VapourMolarVolumeM3PerMol: pt.VVapour,
	}
	if bubble {
		out.IncipientPhase = fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR
	}
	rejected.apply(out.Report)
	out.WarmStart = &fugadv1.WarmStart{KValues: out.KValues}
	if fixT {
		out.WarmStart.PressurePa = proto.Float64(pt.P)
	} else {
		out.WarmStart.TemperatureK = proto.Float64(pt.T)
	}
	if !finite(pt.T) || !finite(pt.P) || !finite(pt.VLiquid) || !finite(pt.VVapour) {
		return nil, errInternal("the saturation solver produced a non-finite number")
	}
	if err := checkOutputFinite(out.IncipientMoleFractions, out.KValues); err != nil {
		return nil, err
	}
	return out, nil
}

// phaseEnvelope is the translation of a validated PhaseEnvelope request
// onto envelope.Solver.Envelope, through the result cache (key: the
// fluid, the feed, the pressures, the point cap, the quality lines and
// the options). maxPoints caps each traced line. A trace that ends at a
// configured bound (max_points, maximum_pressure_pa, the minimum
// temperature) is an answer with complete = false; one that ends in
// failed Newton solves at ever smaller steps is ABORTED/NOT_CONVERGED with
// the points so far in the NotConvergedDetail; the call's deadline stops
// the trace between two Newton iterations (DEADLINE_EXCEEDED).
func (s *Server) phaseEnvelope(ctx context.Context, cf *compiledFluid, req *fugadv1.PhaseEnvelopeRequest, x []float64, maxPoints int) (*fugadv1.PhaseEnvelopeResponse, error) {
	qs := req.GetQualityVapourFractions()
	var v violations
	if len(qs) > maxQualityLines {
		v.limit("quality_vapour_fractions", "has %d vapour fractions, the limit is %d", len(qs), maxQualityLines)
	}
	for i, q := range qs {
		f := index("quality_vapour_fractions", i)
		switch {
		case !finite(q) || q <= 0 || q >= 1:
			v.add(f, "must lie strictly within (0, 1), got %v", q)
		default:
			for _, p := range qs[:i] {
				if p == q {
					v.add(f, "repeats the vapour fraction %g", q)
					break
				}
			}
		}
	}
	if err := v.err(); err != nil {
		return nil, err
	}
	opts := envelope.EnvelopeOptions{
		StartPressure: req.GetStartPressurePa(),
		MaxPressure:   req.GetMaximumPressurePa(),
		MaxPoints:     maxPoints,
		Qualities:     qs,
	}
	if opts.StartPressure == 0 {
		opts.StartPressure = defaultEnvelopeStartPa
	}
	if opts.MaxPressure == 0 {
		opts.MaxPressure = defaultEnvelopeMaxPa
	}
	kb := s.beginKey("envelope")
	kb.AppendBytes(cf.def)
	kb.AppendFloat64s(x)
	kb.AppendFloat64(opts.StartPressure)
	kb.AppendFloat64(opts.MaxPressure)
	kb.AppendUint64(uint64(maxPoints))
	kb.AppendFloat64s(qs)
	appendOptions(kb, req.GetOptions())
	return answerCached(ctx, s, kb, req.GetBypassCache(),
		func() *fugadv1.PhaseEnvelopeResponse { return new(fugadv1.PhaseEnvelopeResponse) },
		func(m *fugadv1.PhaseEnvelopeResponse, r *fugadv1.SolverReport) { m.Report = r },
		func(ctx context.Context) (*fugadv1.PhaseEnvelopeResponse, error) {
			return s.solvePhaseEnvelope(ctx, cf, req, x, opts)
		})
}

func (s *Server) solvePhaseEnvelope(ctx context.Context, cf *compiledFluid, req *fugadv1.PhaseEnvelopeRequest, x []float64, opts envelope.EnvelopeOptions) (*fugadv1.PhaseEnvelopeResponse, error) {
	sc := getSolverScratch(cf)
	defer putSolverScratch(cf, sc)
	convert := func(env *envelope.Envelope) *fugadv1.PhaseEnvelopeResponse {
		return s.envelopeResponse(sc, env, opts.MaxPoints)
	}
	sv, _, err := sc.envelope(envelopeOptions(req.GetOptions()))
	if err != nil {
		return nil, s.envelopeError(err, errTarget{env: convert})
	}
	env, err := sv.Envelope(ctx, x, opts)
	if err != nil {
		return nil, s.envelopeError(err, errTarget{env: convert, partial: env})
	}
	out := convert(env)
	if out == nil {
		return nil, errInternal("the envelope solver produced a non-finite number")
	}
	return out, nil
}

// wireBranch maps a point kind to the wire enum.
func wireBranch(k envelope.Kind) fugadv1.EnvelopeBranch {
	switch k {
	case envelope.Dew:
		return fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_DEW
	case envelope.Bubble:
		return fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_BUBBLE
	case envelope.Critical:
		return fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_CRITICAL
	case envelope.Saturated:
		return fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_SATURATED
	case envelope.Quality:
		return fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_QUALITY
	}
	return fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_UNSPECIFIED
}

// wireStop maps a stop reason to the wire enum. StopCanceled never
// reaches it: the end of the context is answered with its own code.
func wireStop(r envelope.StopReason) fugadv1.EnvelopeStop {
	switch r {
	case envelope.StopLowPressure:
		return fugadv1.EnvelopeStop_ENVELOPE_STOP_LOW_PRESSURE
	case envelope.StopCriticalPoint:
		return fugadv1.EnvelopeStop_ENVELOPE_STOP_CRITICAL_POINT
	case envelope.StopPureCritical:
		return fugadv1.EnvelopeStop_ENVELOPE_STOP_PURE_CRITICAL
	case envelope.StopMaxPressure:
		return fugadv1.EnvelopeStop_ENVELOPE_STOP_MAXIMUM_PRESSURE
	case envelope.StopMinTemperature:
		return fugadv1.EnvelopeStop_ENVELOPE_STOP_MINIMUM_TEMPERATURE
	case envelope.StopMaxPoints:
		return fugadv1.EnvelopeStop_ENVELOPE_STOP_MAXIMUM_POINTS
	case envelope.StopStepCuts:
		return fugadv1.EnvelopeStop_ENVELOPE_STOP_STEP_CUTS
	}
	return fugadv1.EnvelopeStop_ENVELOPE_STOP_UNSPECIFIED
}

// wirePoints translates the points of one line, K-values as exp(ln K).
func wirePoints(pts []envelope.EnvelopePoint) ([]*fugadv1.EnvelopePoint, bool) {
	out := make([]*fugadv1.EnvelopePoint, len(pts))
	buf := make([]fugadv1.EnvelopePoint, len(pts)) // one allocation for all points
	ok := true
	for i := range pts {
		p, w := &pts[i], &buf[i]
		w.TemperatureK, w.PressurePa, w.Branch = p.T, p.P, wireBranch(p.Kind)
		w.KValues = expAll(p.LnK)
		w.Iterations = uint32(p.Iterations)
		w.Metastable = p.Metastable
		if p.Checked && finite(p.TPD) {
			tpd := p.TPD
			w.ThirdPhaseTangentPlaneDistance = &tpd
		}
		ok = ok && finite(p.T) && finite(p.P) && allFinite(w.KValues)
		out[i] = w
	}
	return out, ok
}

// wireTrace translates the report of one traced line.
func wireTrace(r *envelope.EnvelopeReport) *fugadv1.EnvelopeTrace {
	return &fugadv1.EnvelopeTrace{
		Points:                        uint32(r.Points),
		NewtonIterations:              uint64(r.NewtonIterations),
		MaxIterationsPerPoint:         uint32(r.MaxIterations),
		StepCuts:                      uint32(r.StepCuts),
		Failures:                      uint32(r.Failures),
		Stop:                          wireStop(r.Stop),
		StopDetail:                    r.Detail,
		LastTemperatureK:              finiteOr0(r.LastT),
		LastPressurePa:                finiteOr0(r.LastP),
		MetastablePoints:              uint32(r.Metastable),
		MetastableMinimumTemperatureK: finiteOr0(r.MetastableTMin),
		MetastableMaximumTemperatureK: finiteOr0(r.MetastableTMax),
		MetastableMinimumPressurePa:   finiteOr0(r.MetastablePMin),
		MetastableMaximumPressurePa:   finiteOr0(r.MetastablePMax),
		LnPhiEvaluations:              uint64(r.LnPhiEvaluations),
	}
}

func finiteOr0(x float64) float64 {
	if finite(x) {
		return x
	}
	return 0
}

// capPoints cuts a line to at most maxPoints points: the solver's own
// cap can be exceeded by the points it adds around a critical crossing,
// and the contract promises the cap. A cut line is reported as stopped at
// the cap.
func capPoints(pts []envelope.EnvelopePoint, maxPoints int, tr *fugadv1.EnvelopeTrace) ([]envelope.EnvelopePoint, bool) {
	if maxPoints <= 0 || len(pts) <= maxPoints {
		return pts, false
	}
	pts = pts[:maxPoints]
	last := &pts[len(pts)-1]
	tr.Points = uint32(maxPoints)
	tr.Stop = fugadv1.EnvelopeStop_ENVELOPE_STOP_MAXIMUM_POINTS
	tr.StopDetail = "cut to max_points"
	tr.LastTemperatureK, tr.LastPressurePa = last.T, last.P
	return pts, true
}

// envelopeResponse translates a traced envelope (complete or partial),
// each line cut to maxPoints; nil when a number is not finite. The report
// sums the work of every line: stage ENVELOPE with all Newton iterations,
// and all ln φ evaluations.
func (s *Server) envelopeResponse(sc *solverScratch, env *envelope.Envelope, maxPoints int) *fugadv1.PhaseEnvelopeResponse {
	if env == nil {
		return nil
	}
	tr := wireTrace(&env.Report)
	kept, cut := capPoints(env.Points, maxPoints, tr)
	pts, ok := wirePoints(kept)
	out := &fugadv1.PhaseEnvelopeResponse{Points: pts, Complete: env.Closed() && !cut, Trace: tr}
	ews, fug := sc.phaseEval()
	for _, c := range env.Critical {
		if c.Index >= len(kept) {
			continue
		}
		cp := &fugadv1.CriticalPoint{TemperatureK: c.T, PressurePa: c.P, PointIndex: uint32(c.Index)}
		if err := sc.mx.Fugacity(ews, c.T, c.P, env.Z, eos.RootMinGibbs, 0, fug); err == nil && finite(fug.V) {
			cp.MolarVolumeM3PerMol = fug.V
		} else {
			ok = false
		}
		ok = ok && finite(c.T) && finite(c.P)
		out.CriticalPoints = append(out.CriticalPoints, cp)
	}
	extremum := func(e *envelope.Extremum) *fugadv1.EnvelopePoint {
		if !e.Found {
			return nil
		}
		ok = ok && finite(e.T) && finite(e.P)
		return &fugadv1.EnvelopePoint{TemperatureK: e.T, PressurePa: e.P, Branch: wireBranch(e.Kind), Iterations: uint32(e.Iterations)}
	}
	out.Cricondenbar = extremum(&env.Cricondenbar)
	out.Cricondentherm = extremum(&env.Cricondentherm)
	newton, evals := env.Report.NewtonIterations, env.Report.LnPhiEvaluations
	for i := range env.Quality {
		q := &env.Quality[i]
		qt := wireTrace(&q.Report)
		qkept, _ := capPoints(q.Points, maxPoints, qt)
		qp, qok := wirePoints(qkept)
		ok = ok && qok
		out.QualityLines = append(out.QualityLines, &fugadv1.QualityLine{VapourFraction: q.Beta, Points: qp, Trace: qt})
		newton += q.Report.NewtonIterations
		evals += q.Report.LnPhiEvaluations
	}
	rep := s.report()
	rep.Stages = []*fugadv1.StageReport{{Stage: fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE, Iterations: uint32(min(newton, math.MaxUint32)), Converged: true}}
	rep.InitialEstimate = fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION
	rep.LnPhiEvaluations = uint64(evals)
	rep.Converged = true
	out.Report = rep
	if !ok {
		return nil
	}
	return out
}
