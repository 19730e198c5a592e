package server

import (
	"context"
	"errors"
	"math"
	"strings"
	"time"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// flashScratch is one goroutine's memory for the T–P flashes of one
// compiled fluid: the flash workspace, its result and the buffers that turn
// a wire warm start into a flash.Estimate. It is pooled per compiled fluid
// (compiledFluid.getFlash), so a steady stream of flashes of one fluid
// reuses a few of them and the solver allocates nothing.
type flashScratch struct {
	ws   *flash.Workspace
	res  *flash.Result
	est  flash.Estimate
	x    [flash.MaxPhases][]float64
	beta [flash.MaxPhases]float64
	lnK  []float64
	// wire is the message tree a result is translated into for encoding
	// (encodeTP).
	wire wireTP
}

func newFlashScratch(mx *eos.Mixture) *flashScratch {
	return &flashScratch{ws: flash.NewWorkspace(mx), res: flash.NewResult(mx), lnK: make([]float64, mx.N())}
}

// estimate translates a validated wire warm start into a flash.Estimate in
// sc's buffers: phases (amounts and compositions) when given, else the
// K-values as a two-phase estimate; nil when w carries neither. The state
// the estimate describes (temperature_k, pressure_pa; zero when absent)
// and the ln K sensitivities (nil when absent) go with it, so that the
// flash shifts ln K to its own state as it would from the library's
// Result.Estimate. Compositions and sensitivities are referenced, not
// copied (the flash copies its estimate before it writes anything).
func (sc *flashScratch) estimate(w *fugadv1.WarmStart) *flash.Estimate {
	if ph := w.GetPhases(); len(ph) > 0 {
		k := min(len(ph), flash.MaxPhases)
		for j := range k {
			sc.x[j] = ph[j].GetMoleFractions()
			sc.beta[j] = ph[j].GetAmount()
		}
		sc.est = flash.Estimate{Phases: k, Beta: sc.beta[:k], X: sc.x[:k]}
	} else if kv := w.GetKValues(); len(kv) > 0 && len(kv) == len(sc.lnK) {
		for i, ki := range kv {
			sc.lnK[i] = math.Log(ki)
		}
		sc.est = flash.Estimate{Phases: 2, LnK: sc.lnK}
	} else {
		return nil
	}
	sc.est.T, sc.est.P = w.GetTemperatureK(), w.GetPressurePa()
	n := len(sc.lnK)
	if dT, dP := w.GetLnKTemperatureSensitivityPerK(), w.GetLnKPressureSensitivityPerPa(); len(dT) == n && len(dP) == n {
		sc.est.DLnKDT, sc.est.DLnKDP = dT, dP
	}
	return &sc.est
}

// Bounds of the ln K sensitivities a warm start may carry: d ln K/dT of a
// real split is of order 0.01–1 1/K and d ln K/dP of order 1/P (at most
// 1e3 1/Pa at the smallest accepted pressure), growing only very near a
// critical point, where the flash limits the shift anyway. A larger
// magnitude can only be garbage; results whose sensitivities exceed the
// bounds are sent without them, so that a warm start copied back
// unchanged is always accepted.
const (
	maxLnKTemperatureSensitivity = 1e4 // 1/K
	maxLnKPressureSensitivity    = 1e4 // 1/Pa
)

// sendableSensitivities reports whether the ln K sensitivities dT and dP
// of an n-component split go into a result's warm start: both present,
// one per component, finite and within the bounds the validation of a
// warm start accepts.
func sendableSensitivities(dT, dP []float64, n int) bool {
	if len(dT) != n || len(dP) != n || n == 0 {
		return false
	}
	for i := range n {
		if !inRange(dT[i], -maxLnKTemperatureSensitivity, maxLnKTemperatureSensitivity) ||
			!inRange(dP[i], -maxLnKPressureSensitivity, maxLnKPressureSensitivity) {
			return false
		}
	}
	return true
}

// flashOptions maps the wire solver options onto the T–P flash's; zero
// values select the flash's defaults on both sides.
func flashOptions(o *fugadv1.SolverOptions) flash.Options {
	return flash.Options{Tolerance: o.GetTolerance(), MaxIterations: int(o.GetMaxIterations())}
}

// runPT runs the job's T–P flash in sc and maps a failure onto the wire's
// errors (see solveTP).
func (s *Server) runPT(ctx context.Context, job *flashJob, sc *flashScratch) error {
	T, P := job.a, job.b
	opts := flashOptions(job.opts)
	if s.flashOptionsHook != nil {
		s.flashOptionsHook(&opts)
	}
	err := sc.ws.PT(ctx, T, P, job.x, opts, sc.estimate(job.warm), sc.res)
	if err == nil {
		return nil
	}
	var ce *flash.ConvergenceError
	if errors.As(err, &ce) {
		return s.flashNotConverged(ce, sc.res, T, P, opts, job)
	}
	return s.flashError(err, job)
}

// solveTP is the translation of a T–P flash onto flash.Workspace.PT: the
// job's temperature, pressure, composition, options and warm start in,
// a FlashResult out. Non-convergence becomes ABORTED/NOT_CONVERGED with the
// best estimate in a NotConvergedDetail; the end of ctx stops the flash
// inside its iterations and becomes DEADLINE_EXCEEDED or CANCELLED.
func (s *Server) solveTP(ctx context.Context, job *flashJob) (*fugadv1.FlashResult, error) {
	cf := job.fluid
	sc := cf.getFlash()
	defer cf.putFlash(sc)
	if err := s.runPT(ctx, job, sc); err != nil {
		return nil, err
	}
	res := s.flashResult(sc.res, s.flashReport(&sc.res.Report, job.quant), true)
	if res == nil {
		return nil, errInternal("the flash produced a non-finite number")
	}
	return res, nil
}

// solveTPEncoded is solveTP for an answer that is sent or stored as bytes
// (marshal once): the result is translated into the scratch's reused
// message tree, which refers to the flash's own slices, encoded
// (appendFlashResult, the bytes of marshalAnswer) into the scratch's
// buffer and copied into one new slice, and the solve is recorded in the
// metrics (the duration without the encoding), all before the scratch
// goes back to its pool. The bytes equal
// marshalAnswer's encoding of solveTP's message.
func (s *Server) solveTPEncoded(ctx context.Context, job *flashJob) ([]byte, error) {
	start := time.Now()
	cf := job.fluid
	sc := cf.getFlash()
	defer cf.putFlash(sc)
	if err := s.runPT(ctx, job, sc); err != nil {
		return nil, err
	}
	w := &sc.wire
	s.fillReport(&sc.res.Report, job.quant, &w.report)
	res := w.fill(sc.res, &w.report.rep, true, false)
	if res == nil {
		return nil, errInternal("the flash produced a non-finite number")
	}
	s.metrics.observeSolve(string(specTP), time.Since(start), &w.report.rep, len(res.Phases))
	if job.warmOut != nil {
		job.warmOut.copyFrom(res.WarmStart)
	}
	if s.directEncoding {
		w.buf = appendFlashResult(w.buf[:0], res)
	} else {
		b, err := marshalAnswer.MarshalAppend(w.buf[:0], res)
		if err != nil {
			return nil, errInternal("encoding a flash result: " + err.Error())
		}
		w.buf = b
	}
	return append([]byte(nil), w.buf...), nil
}

// wireLabel maps a flash phase label to the wire enum.
func wireLabel(l flash.Label) fugadv1.PhaseLabel {
	switch l {
	case flash.LabelVapour:
		return fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR
	case flash.LabelLiquid:
		return fugadv1.PhaseLabel_PHASE_LABEL_LIQUID
	case flash.LabelAqueous:
		return fugadv1.PhaseLabel_PHASE_LABEL_AQUEOUS
	}
	return fugadv1.PhaseLabel_PHASE_LABEL_UNSPECIFIED
}

// wireInitialEstimate maps the flash's path to the wire enum.
func wireInitialEstimate(p flash.Path) fugadv1.InitialEstimate {
	switch p {
	case flash.PathWarm:
		return fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START
	case flash.PathWarmFallback:
		return fugadv1.InitialEstimate_INITIAL_ESTIMATE_WARM_START_REJECTED
	}
	return fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION
}

// flashReport translates a flash.Report. The flash counts its work by
// stage but does not time-order it, so the stages are listed in the order
// a cold flash first enters them: stability analysis, successive
// substitution (with its Rachford–Rice solutions), Newton. A stage that did
// no iteration is left out; each stage's converged flag is the flash's
// overall verdict, which is the only one it reports.
func (s *Server) flashReport(r *flash.Report, quant float64) *fugadv1.SolverReport {
	w := new(wireReport)
	s.fillReport(r, quant, w)
	return &w.rep
}

// wireReport is the memory of one translated flash.Report: the report and
// its stages, in one allocation (or inside a reused wireTP).
type wireReport struct {
	rep      fugadv1.SolverReport
	stages   [4]fugadv1.StageReport
	stagePtr [4]*fugadv1.StageReport
	tpd      float64
}

// fillReport translates r into w (see flashReport), overwriting every
// field w's report had.
func (s *Server) fillReport(r *flash.Report, quant float64, w *wireReport) {
	w.rep = fugadv1.SolverReport{DataVersion: s.cfg.DataVersion, ModelVersion: s.cfg.ModelVersion}
	rep := &w.rep
	counts := [...]struct {
		stage fugadv1.SolverStage
		it    int
		ran   bool
	}{
		{fugadv1.SolverStage_SOLVER_STAGE_STABILITY, r.StabilityIterations, r.StabilityTrials > 0},
		{fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION, r.SSIterations, r.SSIterations > 0},
		{fugadv1.SolverStage_SOLVER_STAGE_RACHFORD_RICE, r.RRIterations, r.RRIterations > 0},
		{fugadv1.SolverStage_SOLVER_STAGE_NEWTON, r.NewtonIterations, r.NewtonIterations > 0},
	}
	ran := 0
	for _, c := range counts {
		if !c.ran {
			continue
		}
		sr := &w.stages[ran]
		*sr = fugadv1.StageReport{Stage: c.stage, Iterations: uint32(c.it), Converged: r.Converged}
		w.stagePtr[ran] = sr
		ran++
	}
	if ran > 0 {
		rep.Stages = w.stagePtr[:ran:ran]
	}
	rep.InitialEstimate = wireInitialEstimate(r.Path)
	rep.LnPhiEvaluations = uint64(r.LnPhiEvaluations)
	if finite(r.Residual) {
		rep.FinalResidual = r.Residual
	}
	if r.StabilityTrials > 0 && finite(r.MinTPD) {
		w.tpd = r.MinTPD
		rep.MinimumTangentPlaneDistance = &w.tpd
		rep.StabilityPhaseCount = uint32(r.Phases)
	}
	rep.Converged = r.Converged
	rep.InputQuantizationRelativeTolerance = quant
}

// optionalProps holds the optional single-phase properties of one
// Properties message, so that their pointers share one allocation.
type optionalProps [5]float64

// wireProperties translates the properties of one phase. The optional
// derivative properties are left absent where the model gives no finite
// value; a non-finite required value makes ok false.
func wireProperties(p *eos.Properties, dst *fugadv1.Properties, opt *optionalProps) (ok bool) {
	*dst = fugadv1.Properties{} // dst may be reused (wireTP)
	dst.CompressibilityFactor = p.Z
	dst.MolarVolumeM3PerMol = p.MolarVolume
	dst.MolarDensityMolPerM3 = p.MolarDensity
	dst.MassDensityKgPerM3 = p.MassDensity
	dst.MolarMassKgPerMol = p.MolarMass
	dst.MolarEnthalpyJPerMol = p.H
	dst.MolarEntropyJPerMolK = p.S
	dst.MolarGibbsEnergyJPerMol = p.G
	dst.MolarInternalEnergyJPerMol = p.U
	*opt = optionalProps{p.Cp, p.Cv, p.SpeedOfSound, p.JouleThomson, p.Compressivity}
	ptrs := [...]**float64{
		&dst.MolarIsobaricHeatCapacityJPerMolK, &dst.MolarIsochoricHeatCapacityJPerMolK,
		&dst.SpeedOfSoundMPerS, &dst.JouleThomsonCoefficientKPerPa, &dst.IsothermalCompressibilityPerPa,
	}
	for i, ptr := range ptrs {
		if finite(opt[i]) {
			*ptr = &opt[i]
		}
	}
	for _, v := range [...]float64{p.Z, p.MolarVolume, p.MolarDensity, p.MassDensity, p.MolarMass, p.H, p.S, p.G, p.U} {
		if !finite(v) {
			return false
		}
	}
	return true
}

// flashResult translates a flash.Result. With props the phase and overall
// properties are included (a converged result); without, they are left
// out (the best estimate of a failed flash, for which the flash computes
// none). The overall properties of a single phase are those of the phase;
// of several phases they are the flash's amount-weighted sums, with
// Z = P·v/(R·T) and no heat capacities or other derivatives. It returns nil
// when a number is not finite, which a validated request never causes.
//
// The result owns its memory (the float slices are copied out of r), in
// two allocations: the message tree and the floats.
func (s *Server) flashResult(r *flash.Result, rep *fugadv1.SolverReport, props bool) *fugadv1.FlashResult {
	return new(wireTP).fill(r, rep, props, true)
}

// wireTP is the memory of one translated flash.Result: the FlashResult
// message and everything it points to. A flashScratch keeps one for the
// encoding of its flashes (encodeTP), so that the message of a result
// that is marshalled at once is built without allocating.
type wireTP struct {
	out      fugadv1.FlashResult
	phases   [flash.MaxPhases]fugadv1.Phase
	phasePtr [flash.MaxPhases]*fugadv1.Phase
	props    [flash.MaxPhases + 1]fugadv1.Properties
	opt      [flash.MaxPhases + 1]optionalProps
	est      [flash.MaxPhases]fugadv1.PhaseEstimate
	estPtr   [flash.MaxPhases]*fugadv1.PhaseEstimate
	warm     fugadv1.WarmStart
	warmT    float64 // the warm start's temperature_k
	warmP    float64 // the warm start's pressure_pa
	report   wireReport
	kv       []float64 // K-values, reused
	buf      []byte    // encodings, reused
}

// fill translates r into w's message (see flashResult) and returns it, or
// nil when a number is not finite. The warm start carries the phases, T
// and P, and the ln K sensitivities of a two-phase result that has them
// (Result.Estimate; see sendableSensitivities). With own the float slices
// are copied (one allocation); without, they refer to r's, so the message
// is valid only while r is not reused: for encoding at once.
func (w *wireTP) fill(r *flash.Result, rep *fugadv1.SolverReport, props, own bool) *fugadv1.FlashResult {
	m, n := len(r.Phases), len(r.Z)
	multi := m >= 2
	var dT, dP []float64
	if m == 2 {
		if e := r.Estimate(); sendableSensitivities(e.DLnKDT, e.DLnKDP, n) {
			dT, dP = e.DLnKDT, e.DLnKDP
		}
	}
	var fbuf []float64
	if own {
		floats := 2 * m * n // compositions and ln φ
		if multi {
			floats += n // K-values
		}
		if dT != nil {
			floats += 2 * n // sensitivities
		}
		fbuf = make([]float64, 0, floats)
	}
	take := func(src []float64) []float64 {
		if !own {
			return src[:len(src):len(src)]
		}
		start := len(fbuf)
		fbuf = append(fbuf, src...)
		return fbuf[start:len(fbuf):len(fbuf)]
	}
	w.out = fugadv1.FlashResult{TemperatureK: r.T, PressurePa: r.P, Report: rep}
	out := &w.out
	out.Phases = w.phasePtr[:m:m]
	w.warmT, w.warmP = r.T, r.P
	w.warm = fugadv1.WarmStart{Phases: w.estPtr[:m:m], TemperatureK: &w.warmT, PressurePa: &w.warmP}
	if dT != nil {
		w.warm.LnKTemperatureSensitivityPerK, w.warm.LnKPressureSensitivityPerPa = take(dT), take(dP)
	}
	ok := true
	for k := range r.Phases {
		p := &r.Phases[k]
		ph := &w.phases[k]
		*ph = fugadv1.Phase{Label: wireLabel(p.Label), Amount: p.Beta, MoleFractions: take(p.X), LnFugacityCoefficients: take(p.LnPhi)}
		if props {
			ok = wireProperties(&p.Props, &w.props[k], &w.opt[k]) && ok
			ph.Properties = &w.props[k]
		}
		w.phasePtr[k] = ph
		if p.Label == flash.LabelVapour {
			out.VapourFraction = p.Beta
		}
		e := &w.est[k]
		*e = fugadv1.PhaseEstimate{Label: ph.Label, Amount: ph.Amount, MoleFractions: ph.MoleFractions}
		w.estPtr[k] = e
		ok = ok && finite(p.Beta) && allFinite(p.X) && allFinite(p.LnPhi)
	}
	out.WarmStart = &w.warm
	if multi {
		var kv []float64
		if own {
			kv = take(r.LnK)
		} else {
			w.kv = append(w.kv[:0], r.LnK...)
			kv = w.kv[:len(w.kv):len(w.kv)]
		}
		for i, l := range kv {
			kv[i] = math.Exp(l)
		}
		out.KValues = kv
		ok = ok && allFinite(kv)
	}
	if props {
		ov := &w.props[m]
		if m == 1 {
			ok = wireProperties(&r.Phases[0].Props, ov, &w.opt[m]) && ok
		} else {
			o := &r.Overall
			*ov = fugadv1.Properties{
				CompressibilityFactor:      r.P * o.MolarVolume / (eos.R * r.T),
				MolarVolumeM3PerMol:        o.MolarVolume,
				MolarDensityMolPerM3:       o.MolarDensity,
				MassDensityKgPerM3:         o.MassDensity,
				MolarMassKgPerMol:          o.MolarMass,
				MolarEnthalpyJPerMol:       o.H,
				MolarEntropyJPerMolK:       o.S,
				MolarGibbsEnergyJPerMol:    o.G,
				MolarInternalEnergyJPerMol: o.U,
			}
			for _, v := range [...]float64{ov.CompressibilityFactor, o.MolarVolume, o.MolarDensity, o.MassDensity, o.MolarMass, o.H, o.S, o.G, o.U} {
				ok = ok && finite(v)
			}
		}
		out.Overall = ov
	}
	if !ok || !finite(r.T) || !finite(r.P) {
		return nil
	}
	return out
}

func allFinite(xs []float64) bool {
	for _, x := range xs {
		if !finite(x) {
			return false
		}
	}
	return true
}

// noFiniteResidual is the NotConvergedDetail.residual of a solver that
// found no estimate with a finite residual, as documented in the contract.
const noFiniteResidual = math.MaxFloat64

// flashNotConverged builds the ABORTED/NOT_CONVERGED status of a failed T–P
// flash: the best estimate the flash left in r (phases without
// properties), its residual and the report, in a NotConvergedDetail; and
// counts it.
func (s *Server) flashNotConverged(ce *flash.ConvergenceError, r *flash.Result, T, P float64, opts flash.Options, job *flashJob) error {
	s.metrics.nonConverged.WithLabelValues(ReasonNotConverged, failedStage(ce.Stage)).Inc()
	rep := s.flashReport(&r.Report, job.quant)
	rep.Converged = false
	resid := ce.Residual
	if !finite(resid) {
		resid = noFiniteResidual
		rep.FinalResidual = 0
	} else {
		rep.FinalResidual = resid
	}
	tol := opts.Tolerance
	if tol == 0 {
		tol = defaultFlashTolerance
	}
	d := &fugadv1.NotConvergedDetail{Residual: resid, Tolerance: tol, Report: rep}
	// The flash leaves its best estimate in r; the state check guards
	// against reporting a pooled result of another state.
	if math.Float64bits(r.T) == math.Float64bits(T) && math.Float64bits(r.P) == math.Float64bits(P) {
		if best := s.flashResult(r, rep, false); best != nil {
			best.WarmStart = nil // not a start worth copying
			d.BestEstimate = &fugadv1.NotConvergedDetail_Flash{Flash: best}
		}
	}
	return notConverged("T–P flash: "+ce.Stage, ce.Iterations, resid, d)
}

// defaultFlashTolerance is flash.Options.Tolerance's default, reported in
// a NotConvergedDetail when the request left the tolerance at zero.
const defaultFlashTolerance = 1e-10

// failedStage is the metric label of the stage a solver failed in: a
// fixed, small set, so that a new message in a solver cannot grow the
// label's cardinality.
func failedStage(stage string) string {
	switch {
	case strings.Contains(stage, "three-phase"):
		return "three_phase_split"
	case strings.Contains(stage, "stability"):
		return "stability"
	case strings.Contains(stage, "split"):
		return "phase_split"
	}
	return "other"
}

// flashFields maps the argument names of flash.InputError onto the wire
// fields of a FlashState (prefix "state" or "states[i]") or of the
// request's options.
var flashFields = map[string]string{
	"T":                  "tp.temperature_k",
	"P":                  "tp.pressure_pa",
	"z":                  "mole_fractions",
	"warm.X":             "warm_start.phases",
	"warm.Beta":          "warm_start.phases",
	"warm.LnK":           "warm_start.k_values",
	"warm.Phases":        "warm_start.phases",
	"warm.T":             "warm_start.temperature_k",
	"warm.P":             "warm_start.pressure_pa",
	"warm.DLnKDT":        "warm_start.ln_k_temperature_sensitivity_per_k",
	"warm.DLnKDP":        "warm_start.ln_k_pressure_sensitivity_per_pa",
	"opts.Tolerance":     "options.tolerance",
	"opts.MaxIterations": "options.max_iterations",
}

// flashError maps an error of the flash (other than non-convergence) to a
// status: input errors that validation did not foresee are
// INVALID_ARGUMENT naming the field, the end of the context keeps its code
// (and is counted as stopped work), anything else is a defect.
func (s *Server) flashError(err error, job *flashJob) error {
	var ie *flash.InputError
	switch {
	case errors.As(err, &ie):
		name := ie.Field
		if i := strings.IndexAny(name, "["); i >= 0 {
			name = name[:i]
		}
		f, ok := flashFields[name]
		var v violations
		switch {
		case ok && strings.HasPrefix(f, "options."):
			v.add(f, "%s (value %g)", ie.Reason, ie.Value)
		case ok:
			v.add(fieldPath(job.field, f), "%s (value %g)", ie.Reason, ie.Value)
		default:
			v.add(job.field, "%s: %s (value %g)", ie.Field, ie.Reason, ie.Value)
		}
		return v.err()
	case errors.Is(err, context.DeadlineExceeded):
		s.metrics.stopped.WithLabelValues("deadline_exceeded").Inc()
		return ctxErr(err)
	case errors.Is(err, context.Canceled):
		s.metrics.stopped.WithLabelValues("cancelled").Inc()
		return ctxErr(err)
	}
	return s.solverError(err, job.field)
}

// warmCopy is a WarmStart with memory of its own, copied from a result's
// (copyFrom): the implicit warm start of a stream, which equals the
// warm_start decoded from the answer's bytes without decoding them.
type warmCopy struct {
	msg    fugadv1.WarmStart
	phases [flash.MaxPhases]fugadv1.PhaseEstimate
	ptrs   [flash.MaxPhases]*fugadv1.PhaseEstimate
	x      [flash.MaxPhases][]float64
	kv     []float64
	dT, dP []float64 // ln K sensitivities
	deriv  fugadv1.StateDerivatives
	// set reports whether msg holds the warm start of the latest solve.
	set bool
}

// copyFrom copies w (phases, K-values, the optional temperature and
// pressure, the ln K sensitivities, the optional molar enthalpy and
// entropy and the state derivatives) into c's memory, reusing it, and
// sets c.set.
func (c *warmCopy) copyFrom(w *fugadv1.WarmStart) {
	m := min(len(w.GetPhases()), flash.MaxPhases)
	c.msg = fugadv1.WarmStart{TemperatureK: w.TemperatureK, PressurePa: w.PressurePa}
	if len(w.GetPhases()) > m {
		c.set = false // not a result of the T–P flash; never the case
		return
	}
	if kv := w.GetKValues(); len(kv) > 0 {
		c.kv = append(c.kv[:0], kv...)
		c.msg.KValues = c.kv
	}
	if d := w.GetLnKTemperatureSensitivityPerK(); len(d) > 0 {
		c.dT = append(c.dT[:0], d...)
		c.msg.LnKTemperatureSensitivityPerK = c.dT
	}
	if d := w.GetLnKPressureSensitivityPerPa(); len(d) > 0 {
		c.dP = append(c.dP[:0], d...)
		c.msg.LnKPressureSensitivityPerPa = c.dP
	}
	if m > 0 {
		for k, p := range w.GetPhases()[:m] {
			c.x[k] = append(c.x[k][:0], p.GetMoleFractions()...)
			var x []float64
			if len(c.x[k]) > 0 {
				x = c.x[k]
			}
			c.phases[k] = fugadv1.PhaseEstimate{Label: p.GetLabel(), Amount: p.GetAmount(), MoleFractions: x}
			c.ptrs[k] = &c.phases[k]
		}
		c.msg.Phases = c.ptrs[:m:m]
	}
	if c.msg.TemperatureK != nil {
		t := *c.msg.TemperatureK
		c.msg.TemperatureK = &t
	}
	if c.msg.PressurePa != nil {
		p := *c.msg.PressurePa
		c.msg.PressurePa = &p
	}
	if w.MolarEnthalpyJPerMol != nil {
		h := *w.MolarEnthalpyJPerMol
		c.msg.MolarEnthalpyJPerMol = &h
	}
	if w.MolarEntropyJPerMolK != nil {
		s := *w.MolarEntropyJPerMolK
		c.msg.MolarEntropyJPerMolK = &s
	}
	if d := w.GetStateDerivatives(); d != nil {
		c.deriv = fugadv1.StateDerivatives{
			EnthalpyTemperatureDerivativeJPerMolK: d.GetEnthalpyTemperatureDerivativeJPerMolK(), EnthalpyPressureDerivativeJPerMolPa: d.GetEnthalpyPressureDerivativeJPerMolPa(),
			VolumeTemperatureDerivativeM3PerMolK: d.GetVolumeTemperatureDerivativeM3PerMolK(), VolumePressureDerivativeM3PerMolPa: d.GetVolumePressureDerivativeM3PerMolPa(),
		}
		c.msg.StateDerivatives = &c.deriv
	}
	c.set = true
}
