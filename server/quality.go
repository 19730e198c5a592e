package server

import (
	"context"
	"errors"
	"math"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/envelope"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// ReasonNoSaturation is the ErrorInfo reason of FAILED_PRECONDITION for a
// feed without a saturation point (or two-phase state of the requested
// vapour fraction) at the specification; a NoSaturationDetail carries the
// numbers. FAILED_PRECONDITION rather than NOT_FOUND: nothing named is
// missing, the feed is not in a state the request presupposes (two
// phases at that temperature or pressure), and the same request always
// gets the same answer.
const ReasonNoSaturation = "NO_SATURATION_POINT"

// solveQuality is the translation of a P–β or T–β flash onto the
// envelope package's saturation and vapour-fraction solvers: β = 0 is the
// bubble point, β = 1 the dew point, any other β a point of the quality
// line. The result is built from the solved point itself (not from a T–P
// flash at it, which at β = 0 or 1 sits exactly on the boundary and may
// find one phase or a vanishing split): the vapour (the point's vapour
// composition, amount β) and the liquid (amount 1 − β), each evaluated on
// its own root of the equation of state, with the overall properties as
// amount-weighted sums and Z = P·v/(R·T), as for a multiphase T–P flash.
// No third phase is sought (see PressureVapourFraction in the contract).
// The warm start steers the solve: warm_start.temperature_k (P–β) or
// pressure_pa (T–β) as the start of the unknown, the K-values (or the
// first and last phase of a multiphase estimate) as the start of the
// ln K.
func (s *Server) solveQuality(ctx context.Context, job *flashJob) (*fugadv1.FlashResult, error) {
	cf := job.fluid
	sc := getSolverScratch(cf)
	defer putSolverScratch(cf, sc)
	sv, pt, err := sc.envelope(envelopeOptions(job.opts))
	if err != nil {
		return nil, s.envelopeError(err, errTarget{job: job})
	}
	fixed, beta := job.a, job.b
	var start float64
	if job.spec == specPVF {
		start = job.warm.GetTemperatureK()
	} else {
		start = job.warm.GetPressurePa()
	}
	solve := func(h envelope.Hint) error {
		switch {
		case job.spec == specPVF && beta == 0:
			return sv.BubbleTemperature(ctx, fixed, job.x, h, pt)
		case job.spec == specPVF && beta == 1:
			return sv.DewTemperature(ctx, fixed, job.x, h, pt)
		case job.spec == specPVF:
			return sv.QualityTemperature(ctx, fixed, beta, job.x, h, pt)
		case beta == 0:
			return sv.BubblePressure(ctx, fixed, job.x, h, pt)
		case beta == 1:
			return sv.DewPressure(ctx, fixed, job.x, h, pt)
		}
		return sv.QualityPressure(ctx, fixed, beta, job.x, h, pt)
	}
	h, warm := sc.hint(job.warm, start, envelope.BranchAuto)
	rejected, err := solveWithFallback(h, warm, pt, solve)
	if err != nil {
		return nil, s.envelopeError(err, errTarget{job: job})
	}
	rep := s.pointReport(&pt.Report, warm)
	rejected.apply(rep)
	rep.InputQuantizationRelativeTolerance = job.quant
	out, err := s.qualityResult(sc, pt, beta, job.x, rep)
	if err != nil {
		return nil, err
	}
	out.WarmStart.KValues = out.GetKValues() // T and P are set by the translation
	return out, nil
}

// fallback records a warm-started point solve that failed and was solved
// again cold: the failed attempt's work, added to the report.
type fallback struct {
	used         bool
	ss, newton   int
	lnPhi        int
	envelopeSeen int
}

// solveWithFallback runs solve from the hint and, when a warm hint (a
// start or K-values from the caller) leads to a failure other than the
// end of the context or bad input, once more from the solver's own start
// with only the hint's branch: a bad estimate must not turn a solvable
// point into an error. The answer is then as reliable as a cold one, and
// the report says WARM_START_REJECTED.
func solveWithFallback(h envelope.Hint, warm bool, pt *envelope.Point, solve func(envelope.Hint) error) (fallback, error) {
	err := solve(h)
	var ie *envelope.InputError
	if err == nil || !warm || errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) || errors.As(err, &ie) {
		return fallback{}, err
	}
	f := fallback{used: true, ss: pt.Report.SSIterations, newton: pt.Report.NewtonIterations, lnPhi: pt.Report.LnPhiEvaluations, envelopeSeen: pt.Report.EnvelopePoints}
	return f, solve(envelope.Hint{Branch: h.Branch})
}

// apply adds a failed warm attempt's work to the report of the cold solve
// that followed it.
func (f fallback) apply(rep *fugadv1.SolverReport) {
	if !f.used {
		return
	}
	rep.InitialEstimate = fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START_REJECTED
	rep.LnPhiEvaluations += uint64(f.lnPhi)
	for _, st := range rep.Stages {
		switch st.Stage {
		case fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION:
			st.Iterations += uint32(f.ss)
			f.ss = 0
		case fugadv1.SolverStage_SOLVER_STAGE_SATURATION:
			st.Iterations += uint32(f.newton)
			f.newton = 0
		case fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE:
			st.Iterations += uint32(f.envelopeSeen)
			f.envelopeSeen = 0
		}
	}
	// Stages the cold solve did not run but the failed attempt did.
	if f.ss > 0 {
		rep.Stages = append([]*fugadv1.StageReport{{Stage: fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION, Iterations: uint32(f.ss), Converged: true}}, rep.Stages...)
	}
	if f.envelopeSeen > 0 {
		rep.Stages = append(rep.Stages, &fugadv1.StageReport{Stage: fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE, Iterations: uint32(f.envelopeSeen), Converged: true})
	}
}

// qualityResult builds the two-phase FlashResult of a solved point.
func (s *Server) qualityResult(sc *solverScratch, pt *envelope.Point, beta float64, z []float64, rep *fugadv1.SolverReport) (*fugadv1.FlashResult, error) {
	mx := sc.mx
	ews, fug := sc.phaseEval()
	phases := make([]flash.Phase, 2)
	for k, p := range []struct {
		label flash.Label
		x     []float64
		amt   float64
		root  eos.RootChoice
	}{
		{flash.LabelVapour, pt.Vapour, beta, eos.RootVapour},
		{flash.LabelLiquid, pt.Liquid, 1 - beta, eos.RootLiquid},
	} {
		if err := mx.Fugacity(ews, pt.T, pt.P, p.x, p.root, 0, fug); err != nil {
			return nil, s.solverError(err, "")
		}
		props, err := mx.Properties(ews, pt.T, pt.P, p.x, p.root)
		if err != nil {
			return nil, s.solverError(err, "")
		}
		phases[k] = flash.Phase{Label: p.label, Beta: p.amt, X: p.x, LnPhi: append([]float64(nil), fug.LnPhi...), Z: fug.Z, Props: props}
	}
	var o flash.Overall
	for k := range phases {
		b, pr := phases[k].Beta, &phases[k].Props
		o.MolarVolume += b * pr.MolarVolume
		o.MolarMass += b * pr.MolarMass
		o.H += b * pr.H
		o.S += b * pr.S
		o.G += b * pr.G
		o.U += b * pr.U
		o.A += b * pr.A
	}
	o.MolarDensity = 1 / o.MolarVolume
	o.MassDensity = o.MolarMass / o.MolarVolume
	fr := flash.Result{T: pt.T, P: pt.P, Z: z, Phases: phases, Overall: o, LnK: pt.LnK}
	out := s.flashResult(&fr, rep, true)
	if out == nil {
		return nil, errInternal("the vapour-fraction flash produced a non-finite number")
	}
	// flashResult takes the vapour fraction from the vapour phase, which
	// at β = 0 has amount 0: the same number.
	return out, nil
}

// pointReport translates the report of a saturation or vapour-fraction
// point: successive substitution and Newton (SATURATION) iterations, and
// ENVELOPE with the number of envelope points traced to find the start.
func (s *Server) pointReport(r *envelope.Report, warm bool) *fugadv1.SolverReport {
	rep := s.report()
	if r.SSIterations > 0 {
		rep.Stages = append(rep.Stages, &fugadv1.StageReport{Stage: fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION, Iterations: uint32(r.SSIterations), Converged: true})
	}
	if r.EnvelopePoints > 0 {
		rep.Stages = append(rep.Stages, &fugadv1.StageReport{Stage: fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE, Iterations: uint32(r.EnvelopePoints), Converged: true})
	}
	rep.Stages = append(rep.Stages, &fugadv1.StageReport{Stage: fugadv1.SolverStage_SOLVER_STAGE_SATURATION, Iterations: uint32(r.NewtonIterations), Converged: true})
	rep.InitialEstimate = fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION
	if warm {
		rep.InitialEstimate = fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START
	}
	rep.LnPhiEvaluations = uint64(r.LnPhiEvaluations)
	if finite(r.Residual) {
		rep.FinalResidual = r.Residual
	}
	rep.Converged = true
	return rep
}

// errTarget says what an envelope-package error is reported against: a
// flash job (P–β, T–β), a SaturationPoint request, or a PhaseEnvelope
// request (with its partial envelope when the trace failed).
type errTarget struct {
	job *flashJob
	sat *fugadv1.SaturationPointRequest
	env func(*envelope.Envelope) *fugadv1.PhaseEnvelopeResponse
	// partial is the envelope traced before the error.
	partial *envelope.Envelope
}

// satFields map the argument names of envelope.InputError onto the fields
// of a SaturationPointRequest and a PhaseEnvelopeRequest.
var (
	satFields = map[string]string{
		"T": "temperature_k", "P": "pressure_pa", "z": "mole_fractions",
		"Hint.Start": "warm_start", "Hint.LnK": "warm_start.k_values", "Hint.Branch": "branch",
		"Options.Tolerance": "options.tolerance", "Options.MaxIterations": "options.max_iterations",
		"Options.MaxSSIterations": "options.max_iterations",
	}
	envFields = map[string]string{
		"z": "mole_fractions", "EnvelopeOptions.StartPressure": "start_pressure_pa", "EnvelopeOptions.StopPressure": "start_pressure_pa",
		"EnvelopeOptions.MaxPressure": "maximum_pressure_pa", "EnvelopeOptions.MaxPoints": "max_points",
		"EnvelopeOptions.Qualities": "quality_vapour_fractions",
		"Options.Tolerance":         "options.tolerance", "Options.MaxIterations": "options.max_iterations",
		"Options.MaxSSIterations": "options.max_iterations",
	}
)

// envelopeError maps an error of the envelope package to a status:
//   - *envelope.NoSaturationError: FAILED_PRECONDITION, reason
//     NO_SATURATION_POINT, with a NoSaturationDetail;
//   - *envelope.ConvergenceError: ABORTED/NOT_CONVERGED with the best
//     estimate (a flash or saturation point's temperature and pressure, an
//     envelope's points so far) and its residual;
//   - input errors: INVALID_ARGUMENT naming the field;
//   - the end of the context: its code, counted as stopped work.
func (s *Server) envelopeError(err error, t errTarget) error {
	var ns *envelope.NoSaturationError
	var ce *envelope.ConvergenceError
	var ie *envelope.InputError
	switch {
	case errors.Is(err, context.DeadlineExceeded):
		s.metrics.stopped.WithLabelValues("deadline_exceeded").Inc()
		return ctxErr(context.DeadlineExceeded)
	case errors.Is(err, context.Canceled):
		s.metrics.stopped.WithLabelValues("cancelled").Inc()
		return ctxErr(context.Canceled)
	case errors.As(err, &ns):
		return noSaturation(ns, t)
	case errors.As(err, &ce):
		s.metrics.nonConverged.WithLabelValues(ReasonNotConverged, "other").Inc()
		rep := s.report()
		resid := ce.Residual
		if finite(resid) {
			rep.FinalResidual = resid
		} else {
			resid = noFiniteResidual
		}
		tol := envelopeOptions(nil).Tolerance
		switch {
		case t.job != nil:
			tol = t.job.opts.GetTolerance()
		case t.sat != nil:
			tol = t.sat.GetOptions().GetTolerance()
		}
		if tol == 0 {
			tol = defaultFlashTolerance
		}
		d := &fugadv1.NotConvergedDetail{Residual: resid, Tolerance: tol, Report: rep}
		ok := finite(ce.T) && finite(ce.P) && ce.T > 0 && ce.P > 0
		switch {
		case t.env != nil && t.partial != nil:
			if best := t.env(t.partial); best != nil {
				best.Report.Converged = false
				for _, st := range best.Report.Stages {
					st.Converged = false
				}
				d.BestEstimate = &fugadv1.NotConvergedDetail_Envelope{Envelope: best}
			}
		case t.job != nil && ok:
			d.BestEstimate = &fugadv1.NotConvergedDetail_Flash{Flash: &fugadv1.FlashResult{TemperatureK: ce.T, PressurePa: ce.P, Report: rep}}
		case t.sat != nil && ok:
			d.BestEstimate = &fugadv1.NotConvergedDetail_Saturation{Saturation: &fugadv1.SaturationPointResponse{TemperatureK: ce.T, PressurePa: ce.P, Report: rep}}
		}
		return notConverged(ce.What, ce.Iterations, resid, d)
	case errors.As(err, &ie):
		if t.job != nil {
			return inputViolation(t.job, ie.Field, ie.Reason, ie.Value)
		}
		fields := satFields
		if t.sat == nil {
			fields = envFields
		}
		name := ie.Field
		if j := strings.IndexByte(name, '['); j >= 0 {
			name = name[:j]
		}
		var v violations
		if f, ok := fields[name]; ok {
			v.add(f, "%s (value %g)", ie.Reason, ie.Value)
		} else {
			v.add("", "%s: %s (value %g)", ie.Field, ie.Reason, ie.Value)
		}
		return v.err()
	}
	return s.solverError(err, "")
}

// noSaturation builds the FAILED_PRECONDITION status of a feed without the
// requested point.
func noSaturation(ns *envelope.NoSaturationError, t errTarget) error {
	d := &fugadv1.NoSaturationDetail{Value: ns.Value, Reason: ns.Reason}
	switch ns.Kind {
	case envelope.Bubble:
		d.Type = fugadv1.SaturationType_SATURATION_TYPE_BUBBLE
	case envelope.Dew:
		d.Type, d.VapourFraction = fugadv1.SaturationType_SATURATION_TYPE_DEW, 1
	default:
		d.VapourFraction = ns.Beta
	}
	field := "temperature_k"
	if ns.Spec == "P" {
		field = "pressure_pa"
	}
	switch {
	case t.job != nil:
		if f, ok := specFields[t.job.spec][ns.Spec]; ok {
			field = fieldPath(t.job.field, f)
		} else {
			field = t.job.field
		}
	case t.sat == nil:
		field = "start_pressure_pa"
	}
	d.Field = field
	opt := func(x float64) *float64 {
		if !finite(x) {
			return nil
		}
		return proto.Float64(x)
	}
	d.CricondenthermTemperatureK, d.CricondenthermPressurePa = opt(ns.CricondenthermT), opt(ns.CricondenthermP)
	d.CricondenbarTemperatureK, d.CricondenbarPressurePa = opt(ns.CricondenbarT), opt(ns.CricondenbarP)
	msg := "no saturation point: " + strings.TrimPrefix(ns.Error(), "envelope: ")
	pf := &errdetails.PreconditionFailure{Violations: []*errdetails.PreconditionFailure_Violation{{
		Type: ReasonNoSaturation, Subject: field, Description: ns.Reason,
	}}}
	return withDetails(codes.FailedPrecondition, msg, ReasonNoSaturation, map[string]string{"field": field},
		d, pf)
}

// expAll returns exp of each ln K into a new slice (nil for none).
func expAll(lnK []float64) []float64 {
	if len(lnK) == 0 {
		return nil
	}
	out := make([]float64, len(lnK))
	for i, l := range lnK {
		out[i] = math.Exp(l)
	}
	return out
}
