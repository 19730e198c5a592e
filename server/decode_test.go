package server

import (
	"bytes"
	"math"
	"testing"

	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// directDecodeRequests are requests without their fluid covering every
// field the direct decoders read: every specification, a warm start with
// all its fields, options, negative and out-of-range enum values.
func directDecodeRequests() []proto.Message {
	f := func(v float64) *float64 { return &v }
	warm := &fugadv1.WarmStart{
		KValues: []float64{2.5, 0.1, math.Inf(1)},
		Phases: []*fugadv1.PhaseEstimate{
			{Label: fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR, Amount: 0.3, MoleFractions: []float64{0.9, 0.1, 0}},
			{Label: fugadv1.PhaseLabel(-3), Amount: 0.7, MoleFractions: []float64{0.2, 0.8, 0}},
			{},
		},
		TemperatureK:                  f(249.5),
		PressurePa:                    f(0),
		LnKTemperatureSensitivityPerK: []float64{0.01, -0.02, math.NaN()},
		LnKPressureSensitivityPerPa:   []float64{-1e-7, 2e-7, math.Copysign(0, -1)},
		MolarEnthalpyJPerMol:          f(-1234.5),
		MolarEntropyJPerMolK:          f(-10),
		StateDerivatives:              &fugadv1.StateDerivatives{EnthalpyTemperatureDerivativeJPerMolK: 40, VolumePressureDerivativeM3PerMolPa: -1e-9},
	}
	specs := []*fugadv1.FlashState{
		tpStateX(gas10X, 250, 5e6),
		{MoleFractions: []float64{0.5, 0.5}, Specification: &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: 1e6, MolarEnthalpyJPerMol: -500}}},
		{Specification: &fugadv1.FlashState_Ps{Ps: &fugadv1.PressureEntropy{PressurePa: 1e6, MolarEntropyJPerMolK: -20}}},
		{Specification: &fugadv1.FlashState_Tv{Tv: &fugadv1.TemperatureVolume{TemperatureK: 300, MolarVolumeM3PerMol: 1e-3}}},
		{Specification: &fugadv1.FlashState_Uv{Uv: &fugadv1.InternalEnergyVolume{MolarInternalEnergyJPerMol: -3000, MolarVolumeM3PerMol: 1e-4}}},
		{Specification: &fugadv1.FlashState_PVapourFraction{PVapourFraction: &fugadv1.PressureVapourFraction{PressurePa: 2e6, VapourFraction: 0}}},
		{Specification: &fugadv1.FlashState_TVapourFraction{TVapourFraction: &fugadv1.TemperatureVapourFraction{TemperatureK: 200, VapourFraction: 1}}},
		{Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{}}},
		{MoleFractions: []float64{0.2, 0.8}, Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 251, PressurePa: 5e6}}, WarmStart: warm},
		{WarmStart: &fugadv1.WarmStart{}},
		{},
	}
	opts := &fugadv1.SolverOptions{Tolerance: 1e-9, MaxIterations: 77}
	var reqs []proto.Message
	for _, s := range specs {
		reqs = append(reqs,
			&fugadv1.FlashRequest{State: s, Options: opts, BypassCache: true},
			&fugadv1.FlashStreamRequest{MoleFractions: gas10X, State: s, Options: opts, BypassCache: true, Sequence: 1 << 40, NoImplicitWarmStart: true},
		)
	}
	reqs = append(reqs,
		&fugadv1.FlashRequest{},
		&fugadv1.FlashRequest{Options: &fugadv1.SolverOptions{}},
		&fugadv1.FlashStreamRequest{},
		&fugadv1.FlashBatchRequest{MoleFractions: gas10X, States: specs, Options: opts, BypassCache: true},
		&fugadv1.FlashBatchRequest{States: []*fugadv1.FlashState{{}, {}}},
		&fugadv1.FlashBatchRequest{},
	)
	return reqs
}

// decodedAsProto decodes b with decodeRest into a new message like proto
// and reports whether it took b; when it did, it fails t unless the
// message is proto.Unmarshal's to the bit (deterministic encodings
// compared, so NaN payloads and the sign of zero count).
func decodedAsProto(t *testing.T, b []byte, like proto.Message) bool {
	t.Helper()
	got := like.ProtoReflect().New().Interface()
	if !decodeRest(b, got) {
		return false
	}
	want := like.ProtoReflect().New().Interface()
	if err := proto.Unmarshal(b, want); err != nil {
		t.Fatalf("direct decoding took %x, which proto.Unmarshal refuses: %v", b, err)
	}
	det := proto.MarshalOptions{Deterministic: true}
	gb, err1 := det.Marshal(got)
	wb, err2 := det.Marshal(want)
	if err1 != nil || err2 != nil {
		t.Fatalf("encoding the decodings: %v, %v", err1, err2)
	}
	if !bytes.Equal(gb, wb) {
		t.Fatalf("direct decoding of %x:\n%v\nproto.Unmarshal:\n%v", b, got, want)
	}
	return true
}

// TestDirectDecodeAsProto holds the direct decoders to proto.Unmarshal:
// canonical encodings of every field they read, the same with repeated
// doubles one by one and scalars repeated (the last wins), and encodings
// they must leave to proto.Unmarshal, which the wire codec then decodes
// as proto.Unmarshal does.
func TestDirectDecodeAsProto(t *testing.T) {
	reqs := directDecodeRequests()
	for _, r := range reqs {
		b, err := proto.Marshal(r)
		if err != nil {
			t.Fatal(err)
		}
		if !decodedAsProto(t, b, r) {
			t.Fatalf("%T %v: canonical encoding left to proto.Unmarshal", r, r)
		}
	}

	// Unpacked doubles, a scalar given twice, a bool and a uint32 from
	// varints beyond their range.
	var st []byte
	for _, v := range []float64{0.25, 0.75} {
		st = protowire.AppendTag(st, 1, protowire.Fixed64Type)
		st = protowire.AppendFixed64(st, math.Float64bits(v))
	}
	st = protowire.AppendTag(st, 1, protowire.BytesType)
	st = protowire.AppendBytes(st, protowire.AppendFixed64(nil, math.Float64bits(0.5)))
	tp := protowire.AppendTag(nil, 1, protowire.Fixed64Type)
	tp = protowire.AppendFixed64(tp, math.Float64bits(100))
	tp = protowire.AppendTag(tp, 2, protowire.Fixed64Type)
	tp = protowire.AppendFixed64(tp, math.Float64bits(1e5))
	tp = protowire.AppendTag(tp, 1, protowire.Fixed64Type)
	tp = protowire.AppendFixed64(tp, math.Float64bits(300))
	st = protowire.AppendTag(st, 2, protowire.BytesType)
	st = protowire.AppendBytes(st, tp)
	opt := protowire.AppendTag(nil, 2, protowire.VarintType)
	opt = protowire.AppendVarint(opt, 1<<33+5)
	var req []byte
	req = protowire.AppendTag(req, 2, protowire.BytesType)
	req = protowire.AppendBytes(req, st)
	req = protowire.AppendTag(req, 3, protowire.BytesType)
	req = protowire.AppendBytes(req, opt)
	req = protowire.AppendTag(req, 4, protowire.VarintType)
	req = protowire.AppendVarint(req, 2)
	req = protowire.AppendTag(req, 4, protowire.VarintType)
	req = protowire.AppendVarint(req, 0)
	req = protowire.AppendTag(req, 4, protowire.VarintType)
	req = protowire.AppendVarint(req, 1<<40)
	if !decodedAsProto(t, req, new(fugadv1.FlashRequest)) {
		t.Fatal("unpacked doubles and repeated scalars left to proto.Unmarshal")
	}

	// Left to proto.Unmarshal.
	canon, err := proto.Marshal(&fugadv1.FlashRequest{State: tpStateX(gas10X, 250, 5e6), Options: &fugadv1.SolverOptions{Tolerance: 1e-9}})
	if err != nil {
		t.Fatal(err)
	}
	field := func(num protowire.Number, typ protowire.Type, v []byte) []byte {
		b := protowire.AppendTag(nil, num, typ)
		switch typ {
		case protowire.BytesType:
			return protowire.AppendBytes(b, v)
		case protowire.VarintType:
			return protowire.AppendVarint(b, 1)
		case protowire.Fixed32Type:
			return protowire.AppendFixed32(b, 1)
		}
		return protowire.AppendFixed64(b, 1)
	}
	stateOnly := func(s []byte) []byte { return field(2, protowire.BytesType, s) }
	tpMsg := field(2, protowire.BytesType, tp)
	phMsg := field(3, protowire.BytesType, tp)
	refused := map[string][]byte{
		"unknown request field":           append(append([]byte(nil), canon...), field(99, protowire.VarintType, nil)...),
		"state twice (merges)":            append(append([]byte(nil), canon...), stateOnly(tpMsg)...),
		"options twice (merge)":           append(append([]byte(nil), canon...), field(3, protowire.BytesType, nil)...),
		"two specifications":              stateOnly(append(append([]byte(nil), tpMsg...), phMsg...)),
		"specification twice (merges)":    stateOnly(append(append([]byte(nil), tpMsg...), tpMsg...)),
		"unknown state field":             stateOnly(field(12, protowire.Fixed64Type, nil)),
		"fixed32 mole fraction":           stateOnly(field(1, protowire.Fixed32Type, nil)),
		"packed doubles of 7 bytes":       stateOnly(field(1, protowire.BytesType, make([]byte, 7))),
		"varint temperature":              stateOnly(field(2, protowire.BytesType, field(1, protowire.VarintType, nil))),
		"third field in a specification":  stateOnly(field(2, protowire.BytesType, field(3, protowire.Fixed64Type, nil))),
		"bool as fixed64":                 field(4, protowire.Fixed64Type, nil),
		"state as varint":                 field(2, protowire.VarintType, nil),
		"fluid field in the rest":         field(1, protowire.BytesType, nil),
		"warm start twice (merges)":       stateOnly(append(field(9, protowire.BytesType, nil), field(9, protowire.BytesType, nil)...)),
		"unknown warm-start field":        stateOnly(field(9, protowire.BytesType, field(20, protowire.VarintType, nil))),
		"fixed32 warm temperature":        stateOnly(field(9, protowire.BytesType, field(3, protowire.Fixed32Type, nil))),
		"phase label as fixed64":          stateOnly(field(9, protowire.BytesType, field(2, protowire.BytesType, field(1, protowire.Fixed64Type, nil)))),
		"state derivatives twice (merge)": stateOnly(field(9, protowire.BytesType, append(field(9, protowire.BytesType, nil), field(9, protowire.BytesType, nil)...))),
		"fifth state derivative":          stateOnly(field(9, protowire.BytesType, field(9, protowire.BytesType, field(5, protowire.Fixed64Type, nil)))),
		"truncated":                       canon[:len(canon)-3],
		"group":                           protowire.AppendTag(nil, 2, protowire.StartGroupType),
	}
	fluid, err := proto.Marshal(&fugadv1.FlashRequest{Fluid: gas10Fluid()})
	if err != nil {
		t.Fatal(err)
	}
	c := newWireCodec(newFluidMemo())
	for name, b := range refused {
		if decodedAsProto(t, b, new(fugadv1.FlashRequest)) {
			t.Errorf("%s: taken by the direct decoder", name)
		}
		// Through the codec, with a fluid in front (twice: the second
		// decoding has the fluid memoised).
		full := append(append([]byte(nil), fluid...), b...)
		want := new(fugadv1.FlashRequest)
		wantErr := proto.Unmarshal(full, want)
		for pass := range 2 {
			got := new(fugadv1.FlashRequest)
			err := c.Unmarshal(mem.BufferSlice{mem.SliceBuffer(full)}, got)
			if (err != nil) != (wantErr != nil) || (err == nil && !proto.Equal(got, want)) {
				t.Errorf("%s, pass %d: codec %v / %v, proto.Unmarshal %v / %v", name, pass, got, err, want, wantErr)
			}
		}
	}
}

// FuzzDirectDecode holds the direct decoders to proto.Unmarshal on
// arbitrary bytes: whatever they take decodes to proto.Unmarshal's
// message, for each of the three request types.
func FuzzDirectDecode(f *testing.F) {
	for _, r := range directDecodeRequests() {
		b, err := proto.Marshal(r)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		for _, like := range []proto.Message{new(fugadv1.FlashRequest), new(fugadv1.FlashBatchRequest), new(fugadv1.FlashStreamRequest)} {
			decodedAsProto(t, b, like)
		}
	})
}

// BenchmarkDecodeFlashRequest decodes a unary flash request of the
// 10-component gas whose fluid is memoised, directly and by the protobuf
// runtime around the memoised fluid (the codec's path before the direct
// decoders).
func BenchmarkDecodeFlashRequest(b *testing.B) {
	f := func(v float64) *float64 { return &v }
	req := benchFlashReq(true)
	warmReq := proto.Clone(req).(*fugadv1.FlashRequest)
	warmReq.State.WarmStart = &fugadv1.WarmStart{
		KValues: gas10X, TemperatureK: f(249.5), PressurePa: f(4.975e6),
		LnKTemperatureSensitivityPerK: gas10X, LnKPressureSensitivityPerPa: gas10X,
		Phases: []*fugadv1.PhaseEstimate{{Amount: 0.9, MoleFractions: gas10X}, {Amount: 0.1, MoleFractions: gas10X}},
	}
	for _, c := range []struct {
		name string
		req  *fugadv1.FlashRequest
	}{{"cold", req}, {"warm", warmReq}} {
		raw, err := proto.Marshal(c.req)
		if err != nil {
			b.Fatal(err)
		}
		memo := newFluidMemo()
		start, end, val, ok := fluidField(raw)
		if !ok || memo.lookup(val) == nil {
			b.Fatal("no fluid")
		}
		b.Run(c.name+"/direct", func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				m := new(fugadv1.FlashRequest)
				if !memo.unmarshal(raw, m) {
					b.Fatal("not decoded")
				}
			}
		})
		b.Run(c.name+"/runtime", func(b *testing.B) {
			merge := proto.UnmarshalOptions{Merge: true}
			b.ReportAllocs()
			for b.Loop() {
				m := new(fugadv1.FlashRequest)
				if merge.Unmarshal(raw[:start], m) != nil || merge.Unmarshal(raw[end:], m) != nil {
					b.Fatal("not decoded")
				}
			}
		})
	}
}
