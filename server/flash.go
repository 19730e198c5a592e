package server

import (
	"context"
	"errors"
	"io"
	"sync"
	"sync/atomic"
	"time"

	spb "google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/cache"
)

// flashJob is one validated flash: everything a solver needs, and
// everything its answer depends on (the result-cache key is built from
// exactly these fields).
type flashJob struct {
	fluid *compiledFluid
	// field is the wire path of the state ("state", "states[3]"), for
	// errors the solver reports against it.
	field string
	spec  specKind
	// a and b are the two specified values in the order of the
	// specification's message (T and P for tp, P and H for ph, ...).
	a, b float64
	// x is the feed, validated and normalised.
	x []float64
	// warm is the initial estimate (validated), nil for none.
	warm   *fugadv1.WarmStart
	opts   *fugadv1.SolverOptions
	bypass bool
	// quant is the relative tolerance the inputs were quantised with,
	// zero when they were not (CacheConfig.Quantization).
	quant float64
	// warmOut, when set, receives the warm start of a T–P result this
	// job's own solve produced (a stream's implicit estimate for its next
	// message), so that it need not be decoded back out of the answer's
	// bytes.
	warmOut *warmCopy
}

// specValues returns the two specified values of a validated state.
func specValues(st *fugadv1.FlashState) (a, b float64) {
	switch sp := st.GetSpecification().(type) {
	case *fugadv1.FlashState_Tp:
		return sp.Tp.GetTemperatureK(), sp.Tp.GetPressurePa()
	case *fugadv1.FlashState_Ph:
		return sp.Ph.GetPressurePa(), sp.Ph.GetMolarEnthalpyJPerMol()
	case *fugadv1.FlashState_Ps:
		return sp.Ps.GetPressurePa(), sp.Ps.GetMolarEntropyJPerMolK()
	case *fugadv1.FlashState_Tv:
		return sp.Tv.GetTemperatureK(), sp.Tv.GetMolarVolumeM3PerMol()
	case *fugadv1.FlashState_Uv:
		return sp.Uv.GetMolarInternalEnergyJPerMol(), sp.Uv.GetMolarVolumeM3PerMol()
	case *fugadv1.FlashState_PVapourFraction:
		return sp.PVapourFraction.GetPressurePa(), sp.PVapourFraction.GetVapourFraction()
	case *fugadv1.FlashState_TVapourFraction:
		return sp.TVapourFraction.GetTemperatureK(), sp.TVapourFraction.GetVapourFraction()
	}
	return 0, 0
}

// newFlashJob builds the job of a validated state. warm is the estimate to
// use (the state's own, or a stream's implicit one); an estimate without
// content counts as none. With quantisation configured the specified
// values, the feed and the estimate are rounded here, before the key is
// built and before the solve, so that both see the same numbers.
func (s *Server) newFlashJob(cf *compiledFluid, field string, st flashState, warm *fugadv1.WarmStart, opts *fugadv1.SolverOptions, bypass bool) *flashJob {
	job := new(flashJob)
	s.fillFlashJob(job, cf, field, st, warm, opts, bypass)
	return job
}

// fillFlashJob is newFlashJob into job's memory (a batch allocates its
// jobs together).
func (s *Server) fillFlashJob(job *flashJob, cf *compiledFluid, field string, st flashState, warm *fugadv1.WarmStart, opts *fugadv1.SolverOptions, bypass bool) {
	if warm != nil && len(warm.GetKValues()) == 0 && len(warm.GetPhases()) == 0 && warm.TemperatureK == nil && warm.PressurePa == nil {
		warm = nil
	}
	*job = flashJob{fluid: cf, field: field, spec: st.spec, x: st.x, warm: warm, opts: opts, bypass: bypass}
	job.a, job.b = specValues(st.msg)
	if q := s.cfg.Cache.Quantization; q > 0 {
		job.quant = q
		job.a, job.b = cache.Quantize(job.a, q), cache.Quantize(job.b, q)
		job.x = quantizeAll(job.x, q)
		if warm != nil {
			w := &fugadv1.WarmStart{KValues: quantizeAll(warm.GetKValues(), q)}
			for _, p := range warm.GetPhases() {
				w.Phases = append(w.Phases, &fugadv1.PhaseEstimate{Label: p.GetLabel(), Amount: cache.Quantize(p.GetAmount(), q), MoleFractions: quantizeAll(p.GetMoleFractions(), q)})
			}
			if warm.TemperatureK != nil {
				w.TemperatureK = proto.Float64(cache.Quantize(warm.GetTemperatureK(), q))
			}
			if warm.PressurePa != nil {
				w.PressurePa = proto.Float64(cache.Quantize(warm.GetPressurePa(), q))
			}
			w.LnKTemperatureSensitivityPerK = quantizeAll(warm.GetLnKTemperatureSensitivityPerK(), q)
			w.LnKPressureSensitivityPerPa = quantizeAll(warm.GetLnKPressureSensitivityPerPa(), q)
			if warm.MolarEnthalpyJPerMol != nil {
				w.MolarEnthalpyJPerMol = proto.Float64(cache.Quantize(warm.GetMolarEnthalpyJPerMol(), q))
			}
			if warm.MolarEntropyJPerMolK != nil {
				w.MolarEntropyJPerMolK = proto.Float64(cache.Quantize(warm.GetMolarEntropyJPerMolK(), q))
			}
			if d := warm.GetStateDerivatives(); d != nil {
				w.StateDerivatives = &fugadv1.StateDerivatives{
					EnthalpyTemperatureDerivativeJPerMolK: cache.Quantize(d.GetEnthalpyTemperatureDerivativeJPerMolK(), q),
					EnthalpyPressureDerivativeJPerMolPa:   cache.Quantize(d.GetEnthalpyPressureDerivativeJPerMolPa(), q),
					VolumeTemperatureDerivativeM3PerMolK:  cache.Quantize(d.GetVolumeTemperatureDerivativeM3PerMolK(), q),
					VolumePressureDerivativeM3PerMolPa:    cache.Quantize(d.GetVolumePressureDerivativeM3PerMolPa(), q),
				}
			}
			job.warm = w
		}
	}
}

// quantizeAll returns a copy of xs rounded by cache.Quantize.
func quantizeAll(xs []float64, relTol float64) []float64 {
	if xs == nil {
		return nil
	}
	out := make([]float64, len(xs))
	for i, x := range xs {
		out[i] = cache.Quantize(x, relTol)
	}
	return out
}

// flashKey builds the result-cache key of a job: the kind, the versions,
// the fluid's definition and every input of the solve.
func (s *Server) flashKey(job *flashJob) *cache.KeyBuilder {
	kb := s.beginKey("flash")
	kb.AppendBytes(job.fluid.def)
	kb.AppendString(string(job.spec))
	kb.AppendFloat64(job.a)
	kb.AppendFloat64(job.b)
	kb.AppendFloat64s(job.x)
	kb.AppendFloat64(job.opts.GetTolerance())
	kb.AppendUint64(uint64(job.opts.GetMaxIterations()))
	appendWarm(kb, job.warm)
	kb.AppendFloat64(job.quant)
	return kb
}

// solveFlash is the translation of one flash onto the thermo solvers, by
// specification: T–P onto flash (solveTP), P–H, P–S, T–V and U–V onto
// stateflash (solveState), P–β and T–β onto the envelope package's
// saturation and vapour-fraction solvers (solveQuality). It runs inside a
// solver slot.
func (s *Server) solveFlash(ctx context.Context, job *flashJob) (*fugadv1.FlashResult, error) {
	switch job.spec {
	case specTP:
		return s.solveTP(ctx, job)
	case specPH, specPS, specTV, specUV:
		return s.solveState(ctx, job)
	case specPVF, specTVF:
		return s.solveQuality(ctx, job)
	}
	return nil, errNotImplemented("Flash with specification " + string(job.spec))
}

// solveSaturation is the translation of SaturationPoint onto the envelope
// package's saturation solvers, through the result cache (see
// saturationPoint).
func (s *Server) solveSaturation(ctx context.Context, cf *compiledFluid, req *fugadv1.SaturationPointRequest, x []float64) (*fugadv1.SaturationPointResponse, error) {
	return s.saturationPoint(ctx, cf, req, x)
}

// solveEnvelope is the translation of PhaseEnvelope onto
// envelope.Solver.Envelope, through the result cache (see phaseEnvelope).
// maxPoints is the effective point cap of each traced line.
func (s *Server) solveEnvelope(ctx context.Context, cf *compiledFluid, req *fugadv1.PhaseEnvelopeRequest, x []float64, maxPoints int) (*fugadv1.PhaseEnvelopeResponse, error) {
	return s.phaseEnvelope(ctx, cf, req, x, maxPoints)
}

// Flash computes the equilibrium state of one feed.
func (s *Server) Flash(ctx context.Context, req *fugadv1.FlashRequest) (*fugadv1.FlashResponse, error) {
	info(ctx).states.Add(1)
	var v violations
	fc := s.checkFluid(&v, "fluid", req.GetFluid())
	var st flashState
	if n := s.fluidComponentCount(req.GetFluid()); n > 0 {
		st = checkFlashState(&v, "state", req.GetState(), n, nil)
	}
	solverOptions(&v, "options", req.GetOptions())
	if err := v.err(); err != nil {
		return nil, err
	}
	cf, err := s.compiled("fluid", fc)
	if err != nil {
		return nil, err
	}
	job := s.newFlashJob(cf, "state", st, req.GetState().GetWarmStart(), req.GetOptions(), req.GetBypassCache())
	res, err := s.answerFlash(ctx, "Flash", req, job, true, nil)
	if err != nil {
		return nil, err
	}
	return &fugadv1.FlashResponse{Result: res}, nil
}

// answerFlash answers one flash job, through the result cache unless it is
// disabled or the job bypasses it. A cached answer (hit or miss) comes back
// as an encoded FlashResult (see hitMessage). With ownSlot the solve of a
// miss takes a solver slot of its own (unary calls and stream messages;
// a hit needs none); without, the caller already holds one (a batch
// worker). req is logged with a recovered panic; it may be nil. dst, when
// not nil, is the (zero) message a T–P answer is written into.
func (s *Server) answerFlash(ctx context.Context, method string, req proto.Message, job *flashJob, ownSlot bool, dst *fugadv1.FlashResult) (*fugadv1.FlashResult, error) {
	if job.spec == specTP {
		return s.answerTP(ctx, method, req, job, ownSlot, dst)
	}
	solve := func(ctx context.Context) (*fugadv1.FlashResult, error) {
		if !ownSlot {
			return s.flashTimed(ctx, job)
		}
		var res *fugadv1.FlashResult
		err := s.inSlot(ctx, method, req, func() error {
			var err error
			res, err = s.flashTimed(ctx, job)
			return err
		})
		return res, err
	}
	if s.results == nil || job.bypass {
		return solve(ctx)
	}
	raw, hit, err := s.cachedAnswer(ctx, s.flashKey(job), func(ctx context.Context) (proto.Message, error) {
		return solve(ctx)
	})
	if err != nil {
		return nil, err
	}
	r := new(fugadv1.FlashResult)
	return hitMessage(r, raw, hit, func(rep *fugadv1.SolverReport) { r.Report = rep }), nil
}

// answerTP is answerFlash for a T–P flash, which is encoded once, as the
// solve ends (solveTPEncoded): the answer is always an encoded
// FlashResult, whether it came from the cache, from a solve stored in it,
// or from a solve that bypassed it.
func (s *Server) answerTP(ctx context.Context, method string, req proto.Message, job *flashJob, ownSlot bool, dst *fugadv1.FlashResult) (*fugadv1.FlashResult, error) {
	solve := func(ctx context.Context) ([]byte, error) {
		if !ownSlot {
			return s.solveTPEncoded(ctx, job)
		}
		var raw []byte
		err := s.inSlot(ctx, method, req, func() error {
			var err error
			raw, err = s.solveTPEncoded(ctx, job)
			return err
		})
		return raw, err
	}
	var (
		raw []byte
		hit bool
		err error
	)
	if s.results == nil || job.bypass {
		raw, err = solve(ctx)
	} else {
		raw, hit, err = s.cachedRaw(ctx, s.flashKey(job), solve)
	}
	if err != nil {
		return nil, err
	}
	r := dst
	if r == nil {
		r = new(fugadv1.FlashResult)
	}
	if hit && job.warmOut != nil {
		job.warmOut.set = false // not this job's solve
	}
	return hitMessage(r, raw, hit, func(rep *fugadv1.SolverReport) { r.Report = rep }), nil
}

// resultWarmStart returns the warm_start of a result, decoding it from an
// encoded result.
func resultWarmStart(r *fugadv1.FlashResult) *fugadv1.WarmStart {
	if r.GetWarmStart() != nil {
		return r.GetWarmStart()
	}
	if u := r.ProtoReflect().GetUnknown(); len(u) > 0 {
		return warmStartOf(u)
	}
	return nil
}

// flashTimed runs solveFlash and records its metrics.
func (s *Server) flashTimed(ctx context.Context, job *flashJob) (*fugadv1.FlashResult, error) {
	start := time.Now()
	res, err := s.solveFlash(ctx, job)
	if err != nil {
		return nil, err
	}
	s.metrics.observeSolve(string(job.spec), time.Since(start), res.GetReport(), len(res.GetPhases()))
	return res, nil
}

// okStatus is the google.rpc.Status of every successful batch item and
// stream message: one shared message, read-only.
var okStatus = &spb.Status{Code: int32(codes.OK)}

// statusProto converts a status error to its google.rpc.Status message
// (okStatus, shared and read-only, for nil).
func statusProto(err error) *spb.Status {
	if err == nil {
		return okStatus
	}
	st, ok := status.FromError(err)
	if !ok {
		st = status.New(codes.Internal, "internal error")
	}
	return st.Proto()
}

// FlashBatch flashes many states of one fluid. Whole-request problems
// (fluid, sizes, options, the default composition) fail the call; a bad or
// failed state fails only its own item. The call holds one solver slot
// (shed when none is free) and solves states in parallel on spare slots
// while there are any (runBatch); results are placed by index, so the
// response does not depend on the schedule.
func (s *Server) FlashBatch(ctx context.Context, req *fugadv1.FlashBatchRequest) (*fugadv1.FlashBatchResponse, error) {
	ci := info(ctx)
	var v violations
	fc := s.checkFluid(&v, "fluid", req.GetFluid())
	states := req.GetStates()
	ci.states.Add(int64(len(states)))
	switch {
	case len(states) == 0:
		v.add("states", "required: at least one state")
	case len(states) > s.cfg.MaxBatchStates:
		v.limit("states", "has %d states, the limit is %d", len(states), s.cfg.MaxBatchStates)
	}
	solverOptions(&v, "options", req.GetOptions())
	n := s.fluidComponentCount(req.GetFluid())
	var def []float64
	if n > 0 && len(req.GetMoleFractions()) > 0 {
		def = composition(&v, "mole_fractions", req.GetMoleFractions(), n)
	}
	if err := v.err(); err != nil {
		return nil, err
	}
	cf, err := s.compiled("fluid", fc)
	if err != nil {
		return nil, err
	}

	// The items, their results and the jobs are allocated together, one
	// allocation each for the whole batch.
	items := make([]*fugadv1.FlashBatchItem, len(states))
	mem := &batchMemory{items: make([]fugadv1.FlashBatchItem, len(states)), results: make([]fugadv1.FlashResult, len(states))}
	jobs := make([]*flashJob, len(states))
	jobMem := make([]flashJob, len(states))
	for i, st := range states {
		items[i] = &mem.items[i]
		var sv violations
		f := index("states", i)
		if len(st.GetMoleFractions()) == 0 && def == nil {
			sv.add(fieldPath(f, "mole_fractions"), "required: the state has no composition and the request no default mole_fractions")
		}
		fs := checkFlashState(&sv, f, st, n, def)
		if err := sv.err(); err != nil {
			items[i].Status = statusProto(err)
			continue
		}
		jobs[i] = &jobMem[i]
		s.fillFlashJob(jobs[i], cf, f, fs, st.GetWarmStart(), req.GetOptions(), req.GetBypassCache())
	}

	release, err := s.slot(ctx, "FlashBatch")
	if err != nil {
		return nil, err
	}
	defer release()
	s.runBatch(ctx, jobs, items, mem.results)
	if err := ctx.Err(); err != nil {
		return nil, ctxErr(err)
	}
	return &fugadv1.FlashBatchResponse{Items: items}, nil
}

// runBatch solves jobs into items; a nil job's item is already set. The
// calling goroutine is the first worker, on the call's own slot. Up to
// batchWorkers−1 helpers join it on borrowed slots while slots are spare
// (checked at the start and after each state the first worker solves).
// Every worker takes the next state from a shared atomic index; a helper
// gives its slot back and stops after the state it is solving once
// admissions need the slot (solverPool.oversubscribed), so a batch holds
// more than one slot only while no other call wants one.
func (s *Server) runBatch(ctx context.Context, jobs []*flashJob, items []*fugadv1.FlashBatchItem, results []fugadv1.FlashResult) {
	pending := 0
	for _, j := range jobs {
		if j != nil {
			pending++
		}
	}
	var (
		next    atomic.Int64
		helpers atomic.Int64
		wg      sync.WaitGroup
	)
	maxHelpers := int64(batchWorkers(pending) - 1)
	// take solves the next state and reports whether there was one.
	take := func() bool {
		i := int(next.Add(1) - 1)
		if i >= len(jobs) {
			return false
		}
		if jobs[i] != nil {
			s.batchItem(ctx, jobs[i], items[i], &results[i])
		}
		return true
	}
	recruit := func() {
		for helpers.Load() < maxHelpers && int(next.Load()) < len(jobs) && s.pool.tryBorrow() {
			helpers.Add(1)
			wg.Go(func() {
				defer helpers.Add(-1)
				defer s.pool.giveBack()
				for take() && !s.pool.oversubscribed() {
				}
			})
		}
	}
	recruit()
	for take() {
		if helpers.Load() < maxHelpers && s.pool.spare() {
			recruit()
		}
	}
	wg.Wait()
}

// batchMemory is the memory of a batch's items and their results.
type batchMemory struct {
	items   []fugadv1.FlashBatchItem
	results []fugadv1.FlashResult
}

// batchItem solves one state of a batch inside the batch's slots into
// item (zero until now), with dst as the memory of a T–P result.
func (s *Server) batchItem(ctx context.Context, job *flashJob, item *fugadv1.FlashBatchItem, dst *fugadv1.FlashResult) {
	defer func() {
		if p := recover(); p != nil {
			item.Result = nil
			item.Status = statusProto(s.panicked(fugadv1.FugadService_FlashBatch_FullMethodName, nil, p))
		}
	}()
	if err := ctx.Err(); err != nil {
		item.Status = statusProto(ctxErr(err))
		return
	}
	if s.solveHook != nil {
		s.solveHook(ctx, "FlashBatch")
	}
	res, err := s.answerFlash(ctx, "FlashBatch", nil, job, false, dst)
	if err != nil {
		item.Status = statusProto(err)
		return
	}
	item.Status, item.Result = okStatus, res
}

// streamSession is the state a FlashStream carries between messages.
type streamSession struct {
	fluid *compiledFluid
	def   []float64
	opts  *fugadv1.SolverOptions
	// warm is the warm_start of the most recent successful result for the
	// current fluid: the implicit estimate of the next message (see
	// FlashStreamRequest.no_implicit_warm_start).
	warm *fugadv1.WarmStart
	// copies are the memory of warm when a solve of this stream produced
	// it: one holds warm while the next message's solve writes the other.
	copies [2]warmCopy
	next   int
}

// FlashStream answers one flash per request message, in order. A message
// with a problem gets a response with its own error status; the stream
// goes on. A stream idle for longer than Config.StreamIdleTimeout is ended
// with DEADLINE_EXCEEDED (reason STREAM_IDLE). Each message takes one
// solver slot as soon as it is received, before it is validated, and holds
// it until it is answered; a message that finds none free gets
// UNAVAILABLE (reason OVERLOADED) in its status at once and leaves the
// session (fluid, default composition, options, implicit warm start) as
// it was, so that the client can simply send it again.
func (s *Server) FlashStream(stream fugadv1.FugadService_FlashStreamServer) error {
	ctx := stream.Context()
	ci := info(ctx)
	type received struct {
		req *fugadv1.FlashStreamRequest
		err error
	}
	// One message of read-ahead: the next message is received and decoded
	// while this one is solved. Its solver slot is still taken only when
	// the loop below takes it up.
	recv := make(chan received, 1)
	go func() {
		for {
			req, err := stream.Recv()
			select {
			case recv <- received{req, err}:
			case <-ctx.Done():
				return
			}
			if err != nil {
				return
			}
		}
	}()
	var sess streamSession
	idle := time.NewTimer(s.cfg.StreamIdleTimeout)
	defer idle.Stop()
	for {
		var r received
		select {
		case <-ctx.Done():
			return ctxErr(ctx.Err())
		case <-idle.C:
			return errStreamIdle(s.cfg.StreamIdleTimeout.String())
		case r = <-recv:
		}
		if errors.Is(r.err, io.EOF) {
			return nil
		}
		if r.err != nil {
			if _, ok := status.FromError(r.err); ok {
				return r.err
			}
			return ctxErr(r.err)
		}
		idle.Reset(s.cfg.StreamIdleTimeout)
		ci.states.Add(1)
		resp := &fugadv1.FlashStreamResponse{Sequence: r.req.GetSequence()}
		if s.pool.TryAcquire(1) {
			res, err := s.streamMessage(ctx, &sess, r.req)
			s.pool.Release(1)
			resp.Status = statusProto(err)
			resp.Result = res
		} else {
			resp.Status = statusProto(s.shedAnswer("FlashStream"))
		}
		if err := stream.Send(resp); err != nil {
			return err
		}
	}
}

// streamMessage validates and solves one stream message, updating the
// session's fluid, default composition and options.
func (s *Server) streamMessage(ctx context.Context, sess *streamSession, req *fugadv1.FlashStreamRequest) (*fugadv1.FlashResult, error) {
	var v violations
	var fc fluidCheck
	newFluid := req.GetFluid() != nil
	if newFluid {
		fc = s.checkFluid(&v, "fluid", req.GetFluid())
	} else if sess.fluid == nil {
		v.add("fluid", "required on the first message of a stream (and after a message whose fluid was rejected)")
	}
	n := -1
	switch {
	case newFluid:
		n = s.fluidComponentCount(req.GetFluid())
	case sess.fluid != nil:
		n = sess.fluid.n()
	}
	def := sess.def
	if newFluid {
		def = nil // a new fluid invalidates the old default composition
	}
	if n > 0 && len(req.GetMoleFractions()) > 0 {
		def = composition(&v, "mole_fractions", req.GetMoleFractions(), n)
	}
	solverOptions(&v, "options", req.GetOptions())
	var fs flashState
	if n > 0 {
		if len(req.GetState().GetMoleFractions()) == 0 && def == nil {
			v.add("state.mole_fractions", "required: no composition in the state and no default for the stream")
		}
		fs = checkFlashState(&v, "state", req.GetState(), n, def)
	}
	if err := v.err(); err != nil {
		if newFluid {
			sess.fluid, sess.def, sess.warm = nil, nil, nil
		}
		return nil, err
	}
	if newFluid {
		cf, err := s.compiled("fluid", fc)
		if err != nil {
			sess.fluid, sess.def, sess.warm = nil, nil, nil
			return nil, err
		}
		sess.fluid, sess.warm = cf, nil
	}
	sess.def = def
	if req.GetOptions() != nil {
		sess.opts = req.GetOptions()
	}
	mctx, cancel := context.WithTimeout(context.WithValue(ctx, admissionKey{}, heldByCaller), s.cfg.MaxDeadline)
	defer cancel()
	warm := req.GetState().GetWarmStart()
	if warm == nil && !req.GetNoImplicitWarmStart() {
		warm = sess.warm
	}
	job := s.newFlashJob(sess.fluid, "state", fs, warm, sess.opts, req.GetBypassCache())
	out := &sess.copies[sess.next]
	out.set = false
	job.warmOut = out
	res, err := s.answerFlash(mctx, "FlashStream", req, job, true, nil)
	if err != nil {
		return nil, err
	}
	switch {
	case out.set:
		sess.warm = &out.msg
		sess.next = 1 - sess.next
	default:
		if w := resultWarmStart(res); w != nil {
			sess.warm = w
		}
	}
	return res, nil
}

// SaturationPoint finds a bubble or dew point.
func (s *Server) SaturationPoint(ctx context.Context, req *fugadv1.SaturationPointRequest) (*fugadv1.SaturationPointResponse, error) {
	info(ctx).states.Add(1)
	var v violations
	fc := s.checkFluid(&v, "fluid", req.GetFluid())
	n := s.fluidComponentCount(req.GetFluid())
	var x []float64
	if n > 0 {
		x = composition(&v, "mole_fractions", req.GetMoleFractions(), n)
		warmStart(&v, "warm_start", req.GetWarmStart(), n)
	}
	switch t := req.GetType(); t {
	case fugadv1.SaturationType_SATURATION_TYPE_BUBBLE, fugadv1.SaturationType_SATURATION_TYPE_DEW:
	default:
		v.add("type", "required: SATURATION_TYPE_BUBBLE or SATURATION_TYPE_DEW (got %v)", t)
	}
	switch sp := req.GetSpecified().(type) {
	case *fugadv1.SaturationPointRequest_TemperatureK:
		checkTemperature(&v, "temperature_k", sp.TemperatureK)
	case *fugadv1.SaturationPointRequest_PressurePa:
		checkPressure(&v, "pressure_pa", sp.PressurePa)
	default:
		v.add("specified", "required: one of temperature_k, pressure_pa")
	}
	solverOptions(&v, "options", req.GetOptions())
	if err := v.err(); err != nil {
		return nil, err
	}
	cf, err := s.compiled("fluid", fc)
	if err != nil {
		return nil, err
	}
	var resp *fugadv1.SaturationPointResponse
	err = s.inSlot(ctx, "SaturationPoint", req, func() error {
		start := time.Now()
		var err error
		if resp, err = s.solveSaturation(ctx, cf, req, x); err == nil {
			s.metrics.observeSolve("saturation", time.Since(start), resp.GetReport(), 0)
		}
		return err
	})
	return resp, err
}

// Default pressures of PhaseEnvelopeRequest.
const (
	defaultEnvelopeStartPa = 1e5
	defaultEnvelopeMaxPa   = 1e8
)

// PhaseEnvelope traces the phase envelope of a feed.
func (s *Server) PhaseEnvelope(ctx context.Context, req *fugadv1.PhaseEnvelopeRequest) (*fugadv1.PhaseEnvelopeResponse, error) {
	info(ctx).states.Add(1)
	var v violations
	fc := s.checkFluid(&v, "fluid", req.GetFluid())
	var x []float64
	if n := s.fluidComponentCount(req.GetFluid()); n > 0 {
		x = composition(&v, "mole_fractions", req.GetMoleFractions(), n)
	}
	start, top := req.GetStartPressurePa(), req.GetMaximumPressurePa()
	if start != 0 {
		checkPressure(&v, "start_pressure_pa", start)
	} else {
		start = defaultEnvelopeStartPa
	}
	if top != 0 {
		checkPressure(&v, "maximum_pressure_pa", top)
	} else {
		top = defaultEnvelopeMaxPa
	}
	if finite(start) && finite(top) && start >= top {
		v.add("maximum_pressure_pa", "must exceed start_pressure_pa (%g Pa ≥ %g Pa)", start, top)
	}
	maxPoints := int(req.GetMaxPoints())
	switch {
	case maxPoints == 0:
		maxPoints = s.cfg.MaxEnvelopePoints
	case maxPoints > s.cfg.MaxEnvelopePoints:
		v.limit("max_points", "is %d, the limit is %d", maxPoints, s.cfg.MaxEnvelopePoints)
	case maxPoints < 3:
		v.add("max_points", "must be at least 3 (or 0 for the server's limit), got %d", maxPoints)
	}
	solverOptions(&v, "options", req.GetOptions())
	if err := v.err(); err != nil {
		return nil, err
	}
	cf, err := s.compiled("fluid", fc)
	if err != nil {
		return nil, err
	}
	var resp *fugadv1.PhaseEnvelopeResponse
	err = s.inSlot(ctx, "PhaseEnvelope", req, func() error {
		t0 := time.Now()
		var err error
		if resp, err = s.solveEnvelope(ctx, cf, req, x, maxPoints); err == nil {
			s.metrics.observeSolve("envelope", time.Since(t0), resp.GetReport(), 0)
		}
		return err
	})
	return resp, err
}
