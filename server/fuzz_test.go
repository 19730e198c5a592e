package server

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"
	"google.golang.org/protobuf/types/known/anypb"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Fuzzing the request path: raw bytes are decoded into a request message
// (inputs that are not a valid encoding are skipped, as gRPC would refuse
// them before any handler), the handler is called in-process with a short
// deadline, and the answer is checked against the contract:
//
//   - no panic (a panic in validation or translation fails the run; one
//     recovered inside a solver slot shows up as INTERNAL and in
//     fugad_panics_total, which fail it too);
//   - the call returns within its deadline plus a grace period;
//   - an error is a status with a code from the documented table, an
//     ErrorInfo of domain "fugad" with a reason, and for INVALID_ARGUMENT
//     a BadRequest whose violations name a field and say why;
//   - the response encodes, and decodes without unknown fields (handlers
//     may return a message that carries its encoding verbatim, as a cache
//     hit does, so the checks below look at the decoded form, onTheWire);
//   - every float of an OK response (and of any status detail, in the
//     response or the error) is finite;
//   - every solver slot is free again afterwards;
//   - the same request asked again gives the same bytes (the second answer
//     may come from the result cache; from_cache is cleared before the
//     comparison, see canonicalBytes).

const (
	fuzzDeadline = 2 * time.Second
	fuzzGrace    = 5 * time.Second
)

// fuzzConfig keeps the limits small, so that the fuzzer reaches them.
var fuzzConfig = Config{
	Limits:              Limits{MaxComponents: 12, MaxBatchStates: 8, MaxEnvelopePoints: 64, MaxDeadline: fuzzDeadline},
	MaxConcurrentSolves: 4,
}

// fuzzTarget is a Server for in-process calls, with its registry.
type fuzzTarget struct {
	srv *Server
	reg *prometheus.Registry
}

func newFuzzTarget(f *testing.F) *fuzzTarget {
	f.Helper()
	reg := prometheus.NewRegistry()
	srv, err := New(fuzzConfig, nil, reg)
	if err != nil {
		f.Fatal(err)
	}
	return &fuzzTarget{srv: srv, reg: reg}
}

// documentedCodes are the codes a handler may answer (see the service
// comment in api/fugad/v1/fugad_service.proto and Limits). UNAVAILABLE is
// absent: the fuzzer calls one at a time, so a shed call means a leaked
// slot. INTERNAL is absent: it is reserved for defects.
var documentedCodes = map[codes.Code]bool{
	codes.InvalidArgument:    true,
	codes.Unimplemented:      true,
	codes.Aborted:            true,
	codes.DeadlineExceeded:   true,
	codes.FailedPrecondition: true,
	codes.ResourceExhausted:  true,
}

// walkFloats calls visit with the path and value of every float and
// double in m, recursing into messages, lists, maps and google.protobuf.Any
// (unpacked with the global registry, which knows the errdetails types and
// ours).
func walkFloats(t *testing.T, m protoreflect.Message, path string, visit func(path string, v float64)) {
	t.Helper()
	if a, ok := m.Interface().(*anypb.Any); ok {
		inner, err := a.UnmarshalNew()
		if err != nil {
			t.Fatalf("%s: cannot unpack Any of type %q: %v", path, a.GetTypeUrl(), err)
		}
		walkFloats(t, inner.ProtoReflect(), path+"("+string(inner.ProtoReflect().Descriptor().FullName())+")", visit)
		return
	}
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		p := path + "." + string(fd.Name())
		one := func(p string, v protoreflect.Value) {
			switch fd.Kind() {
			case protoreflect.DoubleKind, protoreflect.FloatKind:
				visit(p, v.Float())
			case protoreflect.MessageKind, protoreflect.GroupKind:
				walkFloats(t, v.Message(), p, visit)
			}
		}
		switch {
		case fd.IsList():
			l := v.List()
			for i := range l.Len() {
				one(fmt.Sprintf("%s[%d]", p, i), l.Get(i))
			}
		case fd.IsMap():
			v.Map().Range(func(k protoreflect.MapKey, mv protoreflect.Value) bool {
				if vd := fd.MapValue(); vd.Kind() == protoreflect.DoubleKind || vd.Kind() == protoreflect.FloatKind {
					visit(p+"["+k.String()+"]", mv.Float())
				} else if vd.Kind() == protoreflect.MessageKind {
					walkFloats(t, mv.Message(), p+"["+k.String()+"]", visit)
				}
				return true
			})
		default:
			one(p, v)
		}
		return true
	})
}

// checkFiniteMessage fails t on any NaN or ±Inf in m.
func checkFiniteMessage(t *testing.T, m proto.Message, what string) {
	t.Helper()
	walkFloats(t, m.ProtoReflect(), what, func(p string, v float64) {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("%s = %v: a non-finite number left the server", p, v)
		}
	})
}

// checkStatus checks one error status (of a call, a batch item or a
// stream message) against the error contract.
func checkStatus(t *testing.T, st *status.Status, what string) {
	t.Helper()
	if st.Code() == codes.OK {
		return
	}
	if !documentedCodes[st.Code()] {
		t.Fatalf("%s: code %v (%s) is not one a handler may answer", what, st.Code(), st.Message())
	}
	if st.Message() == "" {
		t.Fatalf("%s: %v without a message", what, st.Code())
	}
	var ei *errdetails.ErrorInfo
	var br *errdetails.BadRequest
	for _, d := range st.Details() {
		switch d := d.(type) {
		case *errdetails.ErrorInfo:
			ei = d
		case *errdetails.BadRequest:
			br = d
		case error:
			t.Fatalf("%s: undecodable detail: %v", what, d)
		}
	}
	if ei == nil || ei.GetDomain() != ErrorDomain || ei.GetReason() == "" {
		t.Fatalf("%s: %v with ErrorInfo %v, want domain %q and a reason", what, st.Code(), ei, ErrorDomain)
	}
	if st.Code() == codes.InvalidArgument {
		if br == nil || len(br.GetFieldViolations()) == 0 {
			t.Fatalf("%s: INVALID_ARGUMENT (%s) without field violations", what, st.Message())
		}
		if len(br.GetFieldViolations()) > maxViolationsShown {
			t.Fatalf("%s: %d field violations, the cap is %d", what, len(br.GetFieldViolations()), maxViolationsShown)
		}
		for _, fv := range br.GetFieldViolations() {
			if fv.GetField() == "" || fv.GetDescription() == "" {
				t.Fatalf("%s: violation %v lacks a field or a description", what, fv)
			}
		}
	}
	sp := st.Proto()
	if _, err := proto.Marshal(sp); err != nil {
		t.Fatalf("%s: the status does not serialise: %v", what, err)
	}
	checkFiniteMessage(t, sp, what+".status")
}

// clearFromCache clears SolverReport.from_cache wherever it occurs in m.
func clearFromCache(m protoreflect.Message) {
	if r, ok := m.Interface().(*fugadv1.SolverReport); ok {
		r.FromCache = false
		return
	}
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		if fd.Kind() != protoreflect.MessageKind || fd.IsMap() {
			return true
		}
		if fd.IsList() {
			l := v.List()
			for i := range l.Len() {
				clearFromCache(l.Get(i).Message())
			}
			return true
		}
		clearFromCache(v.Message())
		return true
	})
}

// onTheWire returns what a client decodes from resp: the handler's message
// is encoded as gRPC would send it and decoded into a fresh message of the
// same type. (A handler may return a message that carries its encoding
// verbatim, as a cache hit does; only the decoded form shows its fields.)
// A field the client's schema does not know fails t.
func onTheWire[M proto.Message](t testing.TB, resp M) M {
	t.Helper()
	b, err := proto.Marshal(resp)
	if err != nil {
		t.Fatalf("the response does not serialise: %v", err)
	}
	out := resp.ProtoReflect().New().Interface().(M)
	if err := proto.Unmarshal(b, out); err != nil {
		t.Fatalf("the response does not decode: %v", err)
	}
	checkNoUnknown(t, out.ProtoReflect(), string(out.ProtoReflect().Descriptor().Name()))
	return out
}

// checkNoUnknown fails t when m or a message inside it holds fields its
// schema does not define.
func checkNoUnknown(t testing.TB, m protoreflect.Message, path string) {
	t.Helper()
	if u := m.GetUnknown(); len(u) > 0 {
		t.Fatalf("%s carries %d bytes of unknown fields", path, len(u))
	}
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		if fd.Kind() != protoreflect.MessageKind || fd.IsMap() {
			return true
		}
		p := path + "." + string(fd.Name())
		if fd.IsList() {
			for i := range v.List().Len() {
				checkNoUnknown(t, v.List().Get(i).Message(), fmt.Sprintf("%s[%d]", p, i))
			}
			return true
		}
		checkNoUnknown(t, v.Message(), p)
		return true
	})
}

// canonicalBytes is how answers are compared byte for byte: the
// deterministic encoding of the response as a client decodes it (see
// onTheWire) with every from_cache flag cleared — the one field that
// differs between a computed and a cached answer — or, for an error, the
// deterministic encoding of its google.rpc.Status (code, message and
// details).
func canonicalBytes(t testing.TB, resp proto.Message, err error) []byte {
	t.Helper()
	var m proto.Message
	if err != nil {
		m = status.Convert(err).Proto()
	} else {
		m = onTheWire(t, resp)
		clearFromCache(m.ProtoReflect())
	}
	b, merr := proto.MarshalOptions{Deterministic: true}.Marshal(m)
	if merr != nil {
		t.Fatalf("marshal: %v", merr)
	}
	return append([]byte(fmt.Sprintf("err=%v\n", err != nil)), b...)
}

// callBounded runs call with a fuzzDeadline context and fails t if it
// does not return within the deadline plus fuzzGrace. A panic in call is
// re-raised on the test goroutine, so the fuzzer records it.
func callBounded[Resp proto.Message](t *testing.T, call func(ctx context.Context) (Resp, error)) (Resp, error) {
	t.Helper()
	type result struct {
		resp  Resp
		err   error
		panic any
	}
	ctx, cancel := context.WithTimeout(context.Background(), fuzzDeadline)
	defer cancel()
	done := make(chan result, 1)
	go func() {
		var r result
		defer func() {
			if p := recover(); p != nil {
				r.panic = p
			}
			done <- r
		}()
		r.resp, r.err = call(ctx)
	}()
	select {
	case r := <-done:
		if r.panic != nil {
			panic(r.panic)
		}
		return r.resp, r.err
	case <-time.After(fuzzDeadline + fuzzGrace):
		t.Fatalf("the handler did not return within %v of its %v deadline", fuzzGrace, fuzzDeadline)
		panic("unreachable")
	}
}

// checkAnswer applies the contract to one answer of a call.
func (ft *fuzzTarget) checkAnswer(t *testing.T, method string, resp proto.Message, err error) {
	t.Helper()
	if err != nil {
		st, ok := status.FromError(err)
		if !ok {
			t.Fatalf("%s returned a non-status error %T: %v", method, err, err)
		}
		checkStatus(t, st, method)
	} else {
		checkFiniteMessage(t, onTheWire(t, resp), method)
	}
	if n := testutil.ToFloat64(ft.srv.metrics.panics); n != 0 {
		t.Fatalf("%s: %v panics recovered", method, n)
	}
	if !ft.srv.pool.TryAcquire(int64(ft.srv.cfg.MaxConcurrentSolves)) {
		t.Fatalf("%s: solver slots still held after the call returned", method)
	}
	ft.srv.pool.Release(int64(ft.srv.cfg.MaxConcurrentSolves))
}

// fuzzUnary is the body of the unary fuzz targets: decode, call twice,
// check both answers and compare them.
func fuzzUnary[Req, Resp proto.Message](f *testing.F, seeds []Req, call func(s *Server, ctx context.Context, req Req) (Resp, error), check func(t *testing.T, req Req, resp Resp)) {
	ft := newFuzzTarget(f)
	for _, s := range seeds {
		b, err := proto.Marshal(s)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	method := string(seeds[0].ProtoReflect().Descriptor().Name())
	f.Fuzz(func(t *testing.T, data []byte) {
		var zero Req
		req := zero.ProtoReflect().New().Interface().(Req)
		if err := proto.Unmarshal(data, req); err != nil {
			return
		}
		if proto.Size(req) > DefaultMaxMessageBytes {
			return // gRPC refuses it before any handler
		}
		var answers [2][]byte
		for k := range answers {
			resp, err := callBounded(t, func(ctx context.Context) (Resp, error) { return call(ft.srv, ctx, req) })
			ft.checkAnswer(t, method, resp, err)
			if err == nil && check != nil {
				check(t, req, onTheWire(t, resp))
			}
			if status.Code(err) == codes.DeadlineExceeded {
				return // a slow machine; nothing to compare
			}
			answers[k] = canonicalBytes(t, resp, err)
		}
		if !bytes.Equal(answers[0], answers[1]) {
			t.Fatalf("%s: the same request answered differently:\n%x\n%x", method, answers[0], answers[1])
		}
	})
}

// Seed requests: valid ones for every specification and component kind,
// and the edge cases of validation.
func fuzzFluids() []*fugadv1.Fluid {
	pseudo := &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Pseudo{Pseudo: &fugadv1.PseudoComponent{
		Id: "c7-cut", SpecificGravity: 0.72, Characterisation: &fugadv1.PseudoComponent_NormalBoilingPointK{NormalBoilingPointK: 370}}}}
	pseudoM := &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Pseudo{Pseudo: &fugadv1.PseudoComponent{
		Id: "c20-cut", SpecificGravity: 0.86, Characterisation: &fugadv1.PseudoComponent_MolarMassKgPerMol{MolarMassKgPerMol: 0.282}}}}
	withUser := gasFluid()
	withUser.Components[2] = userComp("heavy-end", 600, 2.5e6, 0.5, 0.14)
	withPseudo := gasFluid()
	withPseudo.Components = append(withPseudo.Components[:2], pseudo)
	withPseudoM := fluidOf(fugadv1.Model_MODEL_SRK, "methane", "n-butane")
	withPseudoM.Components = append(withPseudoM.Components, pseudoM)
	withKij := fluidOf(fugadv1.Model_MODEL_PR76, "methane", "carbon-dioxide", "water")
	withKij.InteractionParameters = []*fugadv1.InteractionParameter{{I: 0, J: 1, K0: 0.1, K1PerK: 1e-4}, {I: 2, J: 1, K0: -0.99, K1PerK: -0.01}}
	withKij.VolumeTranslation = true
	twelve := fluidOf(fugadv1.Model_MODEL_PR78, "nitrogen", "carbon-dioxide", "hydrogen-sulfide", "methane", "ethane", "propane",
		"isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane", "water")
	return []*fugadv1.Fluid{gasFluid(), withUser, withPseudo, withPseudoM, withKij, twelve}
}

// fractions returns an even composition of n components.
func fractions(n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		x[i] = 1 / float64(n)
	}
	return x
}

func fugacitySeeds() []*fugadv1.FugacityCoefficientsRequest {
	var out []*fugadv1.FugacityCoefficientsRequest
	for i, fl := range fuzzFluids() {
		n := len(fl.GetComponents())
		out = append(out, &fugadv1.FugacityCoefficientsRequest{
			Fluid: fl, TemperatureK: 200 + 40*float64(i), PressurePa: 1e5 * math.Pow(10, float64(i%4)), MoleFractions: fractions(n),
			Root: fugadv1.RootChoice(1 + i%3), TemperatureDerivatives: true, PressureDerivatives: i%2 == 0, CompositionDerivatives: true,
			BypassCache: i == 3,
		})
	}
	edge := func(mut func(r *fugadv1.FugacityCoefficientsRequest)) *fugadv1.FugacityCoefficientsRequest {
		r := fugacityReq()
		mut(r)
		return r
	}
	return append(out,
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.TemperatureK, r.PressurePa = 1, 1e10 }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.TemperatureK, r.PressurePa = 1e4, 1e-3 }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.TemperatureK = math.NaN() }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.PressurePa = math.Inf(1) }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = []float64{1, 0, 0} }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = []float64{1e-300, 1e-300, 1} }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.MoleFractions = []float64{0.85 * (1 + 9e-7), 0.1, 0.05}
		}),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.MoleFractions = []float64{math.MaxFloat64, math.MaxFloat64, 0}
		}),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.Fluid = nil }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.Fluid.Model = 42 }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) { r.Root = 17 }),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[0] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: "metha"}}
		}),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[1] = userComp("x", math.MaxFloat64, 5e-324, 3, 5)
		}),
		edge(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.InteractionParameters = []*fugadv1.InteractionParameter{{I: 0, J: 1, K0: 0.999999, K1PerK: 0.01}, {I: 4294967295, J: 0}}
		}),
	)
}

func flashSeeds() []*fugadv1.FlashRequest {
	specs := []*fugadv1.FlashState{
		tpState(220, 4e6),
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: 4e6, MolarEnthalpyJPerMol: -8e4}}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_Ps{Ps: &fugadv1.PressureEntropy{PressurePa: 4e6, MolarEntropyJPerMolK: -30}}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_Tv{Tv: &fugadv1.TemperatureVolume{TemperatureK: 250, MolarVolumeM3PerMol: 4e-4}}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_Uv{Uv: &fugadv1.InternalEnergyVolume{MolarInternalEnergyJPerMol: -8e4, MolarVolumeM3PerMol: 4e-4}}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_PVapourFraction{PVapourFraction: &fugadv1.PressureVapourFraction{PressurePa: 3e6, VapourFraction: 0}}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_TVapourFraction{TVapourFraction: &fugadv1.TemperatureVapourFraction{TemperatureK: 200, VapourFraction: 1}}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 220, PressurePa: 4e6}},
			WarmStart: &fugadv1.WarmStart{KValues: []float64{3, 0.5, 0.1}, Phases: []*fugadv1.PhaseEstimate{
				{Label: fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR, Amount: 0.9, MoleFractions: gasX},
				{Label: fugadv1.PhaseLabel_PHASE_LABEL_LIQUID, Amount: 0.1, MoleFractions: []float64{0.5, 0.3, 0.2}}},
				TemperatureK: proto.Float64(221), PressurePa: proto.Float64(4.1e6)}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_Tp{}},
		{MoleFractions: gasX, Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 1e4, PressurePa: 1e10}},
			WarmStart: &fugadv1.WarmStart{KValues: []float64{1e300, 1e-300, 1}, Phases: make([]*fugadv1.PhaseEstimate, 4)}},
		{Specification: &fugadv1.FlashState_Ph{}},
	}
	var out []*fugadv1.FlashRequest
	for i, st := range specs {
		r := &fugadv1.FlashRequest{Fluid: gasFluid(), State: st, BypassCache: i%2 == 1}
		if i%3 == 0 {
			r.Options = &fugadv1.SolverOptions{Tolerance: 1e-12, MaxIterations: 500}
		}
		out = append(out, r)
	}
	for _, fl := range fuzzFluids()[1:] {
		st := tpState(300, 2e6)
		st.MoleFractions = fractions(len(fl.GetComponents()))
		out = append(out, &fugadv1.FlashRequest{Fluid: fl, State: st})
	}
	return append(out, &fugadv1.FlashRequest{}, &fugadv1.FlashRequest{Fluid: gasFluid(), State: tpState(220, 4e6), Options: &fugadv1.SolverOptions{Tolerance: math.NaN()}})
}

func batchSeeds() []*fugadv1.FlashBatchRequest {
	many := batchReq()
	for i := range fuzzConfig.MaxBatchStates - 2 {
		many.States = append(many.States, tpState(200+10*float64(i), 1e6*float64(i+1)))
	}
	over := batchReq()
	for range fuzzConfig.MaxBatchStates {
		over.States = append(over.States, tpState(250, 1e6))
	}
	mixed := batchReq()
	mixed.States = append(mixed.States, tpState(math.NaN(), 1e6), &fugadv1.FlashState{Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 250, PressurePa: 1e6}}})
	noDefault := batchReq()
	noDefault.MoleFractions = nil
	noDefault.States = append(noDefault.States, &fugadv1.FlashState{Specification: flashSeeds()[1].GetState().GetSpecification()})
	out := []*fugadv1.FlashBatchRequest{batchReq(), many, over, mixed, noDefault, {}}
	for _, fr := range flashSeeds()[:7] {
		out = append(out, &fugadv1.FlashBatchRequest{Fluid: fr.GetFluid(), States: []*fugadv1.FlashState{fr.GetState()}, Options: fr.GetOptions()})
	}
	return out
}

func envelopeSeeds() []*fugadv1.PhaseEnvelopeRequest {
	out := []*fugadv1.PhaseEnvelopeRequest{envReq()}
	for i, fl := range fuzzFluids()[1:] {
		out = append(out, &fugadv1.PhaseEnvelopeRequest{Fluid: fl, MoleFractions: fractions(len(fl.GetComponents())),
			StartPressurePa: 1e5 * float64(i+1), MaximumPressurePa: 2e7, MaxPoints: uint32(3 + 20*i), BypassCache: i%2 == 0,
			Options: &fugadv1.SolverOptions{Tolerance: 1e-10}})
	}
	return append(out,
		&fugadv1.PhaseEnvelopeRequest{Fluid: gasFluid(), MoleFractions: gasX, MaxPoints: uint32(fuzzConfig.MaxEnvelopePoints)},
		&fugadv1.PhaseEnvelopeRequest{Fluid: gasFluid(), MoleFractions: gasX, MaxPoints: uint32(fuzzConfig.MaxEnvelopePoints + 1)},
		&fugadv1.PhaseEnvelopeRequest{Fluid: gasFluid(), MoleFractions: gasX, MaxPoints: 2},
		&fugadv1.PhaseEnvelopeRequest{Fluid: gasFluid(), MoleFractions: gasX, StartPressurePa: 1e10, MaximumPressurePa: 1e-3},
		&fugadv1.PhaseEnvelopeRequest{Fluid: gasFluid(), MoleFractions: gasX, StartPressurePa: math.Inf(-1)},
		&fugadv1.PhaseEnvelopeRequest{},
	)
}

func saturationSeeds() []*fugadv1.SaturationPointRequest {
	out := []*fugadv1.SaturationPointRequest{satReq()}
	for i, fl := range fuzzFluids()[1:] {
		r := &fugadv1.SaturationPointRequest{Fluid: fl, MoleFractions: fractions(len(fl.GetComponents())),
			Type: fugadv1.SaturationType(1 + i%2), BypassCache: i%2 == 1}
		if i%2 == 0 {
			r.Specified = &fugadv1.SaturationPointRequest_TemperatureK{TemperatureK: 250}
		} else {
			r.Specified = &fugadv1.SaturationPointRequest_PressurePa{PressurePa: 2e6}
		}
		out = append(out, r)
	}
	warm := satReq()
	warm.WarmStart = &fugadv1.WarmStart{KValues: []float64{2, 0.5, 0.1}, TemperatureK: proto.Float64(230)}
	badWarm := satReq()
	badWarm.WarmStart = &fugadv1.WarmStart{KValues: []float64{0, -1, math.NaN()}, PressurePa: proto.Float64(0)}
	return append(out, warm, badWarm,
		&fugadv1.SaturationPointRequest{Fluid: gasFluid(), MoleFractions: gasX, Type: 7},
		&fugadv1.SaturationPointRequest{Fluid: gasFluid(), MoleFractions: gasX, Type: fugadv1.SaturationType_SATURATION_TYPE_BUBBLE},
		&fugadv1.SaturationPointRequest{})
}

// FuzzFugacityCoefficientsRequest fuzzes FugacityCoefficients; besides the
// common contract, an OK answer has one ln φ per component and the
// derivative arrays asked for.
func FuzzFugacityCoefficientsRequest(f *testing.F) {
	fuzzUnary(f, fugacitySeeds(), (*Server).FugacityCoefficients, func(t *testing.T, req *fugadv1.FugacityCoefficientsRequest, resp *fugadv1.FugacityCoefficientsResponse) {
		n := len(req.GetFluid().GetComponents())
		if len(resp.GetLnFugacityCoefficients()) != n {
			t.Fatalf("%d ln φ for %d components", len(resp.GetLnFugacityCoefficients()), n)
		}
		want := func(on bool, k int) int {
			if on {
				return k
			}
			return 0
		}
		if len(resp.GetDLnPhiDTemperaturePerK()) != want(req.GetTemperatureDerivatives(), n) ||
			len(resp.GetDLnPhiDPressurePerPa()) != want(req.GetPressureDerivatives(), n) ||
			len(resp.GetDLnPhiDMolesPerMol()) != want(req.GetCompositionDerivatives(), n*n) {
			t.Fatalf("derivative lengths %d, %d, %d for n = %d and flags %v %v %v", len(resp.GetDLnPhiDTemperaturePerK()),
				len(resp.GetDLnPhiDPressurePerPa()), len(resp.GetDLnPhiDMolesPerMol()), n,
				req.GetTemperatureDerivatives(), req.GetPressureDerivatives(), req.GetCompositionDerivatives())
		}
		if !(resp.GetCompressibilityFactor() > 0) || resp.GetReport().GetModelVersion() == "" || resp.GetReport().GetDataVersion() == "" {
			t.Fatalf("Z = %g, report %v", resp.GetCompressibilityFactor(), resp.GetReport())
		}
	})
}

// FuzzFlashRequest fuzzes Flash.
func FuzzFlashRequest(f *testing.F) {
	fuzzUnary(f, flashSeeds(), (*Server).Flash, nil)
}

// FuzzFlashBatchRequest fuzzes FlashBatch; an OK answer has one item per
// state, each with a status that obeys the error contract, and a result
// exactly when the status is OK.
func FuzzFlashBatchRequest(f *testing.F) {
	fuzzUnary(f, batchSeeds(), (*Server).FlashBatch, func(t *testing.T, req *fugadv1.FlashBatchRequest, resp *fugadv1.FlashBatchResponse) {
		if len(resp.GetItems()) != len(req.GetStates()) {
			t.Fatalf("%d items for %d states", len(resp.GetItems()), len(req.GetStates()))
		}
		for i, it := range resp.GetItems() {
			if it.GetStatus() == nil {
				t.Fatalf("item %d has no status", i)
			}
			checkStatus(t, status.FromProto(it.GetStatus()), fmt.Sprintf("FlashBatch item %d", i))
			if (it.GetStatus().GetCode() == int32(codes.OK)) != (it.GetResult() != nil) {
				t.Fatalf("item %d: status %v with result %v", i, it.GetStatus(), it.GetResult() != nil)
			}
		}
	})
}

// FuzzPhaseEnvelopeRequest fuzzes PhaseEnvelope; an OK answer has at most
// the effective max_points points.
func FuzzPhaseEnvelopeRequest(f *testing.F) {
	fuzzUnary(f, envelopeSeeds(), (*Server).PhaseEnvelope, func(t *testing.T, req *fugadv1.PhaseEnvelopeRequest, resp *fugadv1.PhaseEnvelopeResponse) {
		limit := int(req.GetMaxPoints())
		if limit == 0 {
			limit = fuzzConfig.MaxEnvelopePoints
		}
		if len(resp.GetPoints()) > limit {
			t.Fatalf("%d points, the cap is %d", len(resp.GetPoints()), limit)
		}
	})
}

// FuzzSaturationPointRequest fuzzes SaturationPoint.
func FuzzSaturationPointRequest(f *testing.F) {
	fuzzUnary(f, saturationSeeds(), (*Server).SaturationPoint, nil)
}

// FuzzFlashStreamMessages fuzzes the per-message path of FlashStream: the
// input is decoded as a FlashStreamRequest and sent as the first message
// of a session, then its state alone is sent as a second message that
// relies on the session's fluid and default composition. Both answers
// obey the contract.
func FuzzFlashStreamMessages(f *testing.F) {
	ft := newFuzzTarget(f)
	for _, fr := range flashSeeds() {
		b, err := proto.Marshal(&fugadv1.FlashStreamRequest{Sequence: 7, Fluid: fr.GetFluid(), MoleFractions: fr.GetState().GetMoleFractions(),
			State: fr.GetState(), Options: fr.GetOptions(), BypassCache: fr.GetBypassCache()})
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		req := new(fugadv1.FlashStreamRequest)
		if err := proto.Unmarshal(data, req); err != nil {
			return
		}
		var sess streamSession
		for k, msg := range []*fugadv1.FlashStreamRequest{req, {Sequence: req.GetSequence() + 1, State: &fugadv1.FlashState{Specification: req.GetState().GetSpecification()}}} {
			res, err := callBounded(t, func(ctx context.Context) (*fugadv1.FlashResult, error) { return ft.srv.streamMessage(ctx, &sess, msg) })
			var resp proto.Message = res
			if res == nil {
				resp = &fugadv1.FlashResult{}
			}
			ft.checkAnswer(t, fmt.Sprintf("FlashStream message %d", k), resp, err)
		}
	})
}
