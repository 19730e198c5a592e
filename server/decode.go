package server

import (
	"encoding/binary"
	"math"
	"slices"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Direct decoding of the flash requests.
//
// After the fluid (fluidMemo), what is left of a FlashRequest, a
// FlashBatchRequest or a FlashStreamRequest is its states: mole
// fractions, a specification of two numbers, perhaps a warm start. The
// protobuf runtime's table-driven decoder takes 0.7–0.9 µs over those
// few fields of a unary T–P request (BenchmarkDecodeFlashRequest), about
// a tenth of the server's own work for it, and allocates each nested
// message on its own. The decoders here read those fields with protowire
// in 0.55–0.7 of that time and build the same messages, a state's
// FlashState, its specification wrapper and message in one allocation (a
// batch's states in one for all).
//
// They take only the encodings whose result is plain to see: every field
// known and of its declared wire type, each message field at most once
// (repeated messages aside), at most one specification. Anything else
// (unknown fields, a message field repeated so that its occurrences would
// merge, malformed bytes) makes them report false, and the request is
// decoded by proto.Unmarshal instead. What they accept decodes to the
// message proto.Unmarshal builds, by the proto3 rules: a scalar's last
// occurrence wins, repeated doubles come packed or one by one and
// concatenate, a bool is any non-zero varint, an enum or uint32 is the
// varint's low 32 bits. TestDirectDecodeAsProto and FuzzDirectDecode hold
// them to that.

// decodeRest decodes the fields of the encoded request b (a part of one
// without its fluid field) into m, which holds what earlier parts set. It
// reports false for message types it does not decode and for encodings it
// leaves to proto.Unmarshal.
func decodeRest(b []byte, m proto.Message) bool {
	switch r := m.(type) {
	case *fugadv1.FlashRequest:
		return decodeFlashRequest(b, r)
	case *fugadv1.FlashBatchRequest:
		return decodeFlashBatchRequest(b, r)
	case *fugadv1.FlashStreamRequest:
		return decodeFlashStreamRequest(b, r)
	}
	return false
}

// fieldReader steps through the fields of an encoded message. After each
// successful next, num, typ and the value (val for the bytes type, x for
// the varint and fixed64 types) describe the field just read. next
// reports false at the end and at a field that is malformed or of a wire
// type none of these messages uses; bad tells the two apart.
type fieldReader struct {
	b   []byte
	num protowire.Number
	typ protowire.Type
	val []byte
	x   uint64
	bad bool
}

func (r *fieldReader) next() bool {
	if len(r.b) == 0 {
		return false
	}
	num, typ, n := protowire.ConsumeTag(r.b)
	if n < 0 {
		r.bad = true
		return false
	}
	var m int
	r.num, r.typ, r.val, r.x = num, typ, nil, 0
	switch typ {
	case protowire.BytesType:
		r.val, m = protowire.ConsumeBytes(r.b[n:])
	case protowire.Fixed64Type:
		r.x, m = protowire.ConsumeFixed64(r.b[n:])
	case protowire.VarintType:
		r.x, m = protowire.ConsumeVarint(r.b[n:])
	default:
		m = -1
	}
	if m < 0 {
		r.bad = true
		return false
	}
	r.b = r.b[n+m:]
	return true
}

// is reports whether the field just read has number num and wire type typ.
func (r *fieldReader) is(num protowire.Number, typ protowire.Type) bool {
	return r.num == num && r.typ == typ
}

// doubles appends the value of the repeated double field just read,
// packed (bytes) or one element (fixed64), to dst.
func (r *fieldReader) doubles(dst []float64) ([]float64, bool) {
	switch r.typ {
	case protowire.Fixed64Type:
		return append(dst, math.Float64frombits(r.x)), true
	case protowire.BytesType:
		val := r.val
		if len(val)%8 != 0 {
			return dst, false
		}
		if len(val) == 0 {
			return dst, true
		}
		if dst == nil {
			dst = make([]float64, 0, len(val)/8)
		}
		for ; len(val) > 0; val = val[8:] {
			dst = append(dst, math.Float64frombits(binary.LittleEndian.Uint64(val)))
		}
		return dst, true
	}
	return dst, false
}

// double is the value of the singular double field just read.
func (r *fieldReader) double() (float64, bool) {
	return math.Float64frombits(r.x), r.typ == protowire.Fixed64Type
}

// decodeFlashRequest decodes FlashRequest fields 2–4 (state, options,
// bypass_cache).
func decodeFlashRequest(b []byte, req *fugadv1.FlashRequest) bool {
	r := fieldReader{b: b}
	for r.next() {
		var ok bool
		switch {
		case r.is(2, protowire.BytesType) && req.State == nil:
			box := new(stateBox)
			ok = box.decode(r.val)
			req.State = &box.st
		case r.is(3, protowire.BytesType) && req.Options == nil:
			req.Options = decodeOptions(r.val)
			ok = req.Options != nil
		case r.is(4, protowire.VarintType):
			req.BypassCache, ok = r.x != 0, true
		}
		if !ok {
			return false
		}
	}
	return !r.bad
}

// decodeFlashStreamRequest decodes FlashStreamRequest fields 2–7.
func decodeFlashStreamRequest(b []byte, req *fugadv1.FlashStreamRequest) bool {
	r := fieldReader{b: b}
	for r.next() {
		var ok bool
		switch {
		case r.num == 2:
			req.MoleFractions, ok = r.doubles(req.MoleFractions)
		case r.is(3, protowire.BytesType) && req.State == nil:
			box := new(stateBox)
			ok = box.decode(r.val)
			req.State = &box.st
		case r.is(4, protowire.BytesType) && req.Options == nil:
			req.Options = decodeOptions(r.val)
			ok = req.Options != nil
		case r.is(5, protowire.VarintType):
			req.BypassCache, ok = r.x != 0, true
		case r.is(6, protowire.VarintType):
			req.Sequence, ok = r.x, true
		case r.is(7, protowire.VarintType):
			req.NoImplicitWarmStart, ok = r.x != 0, true
		}
		if !ok {
			return false
		}
	}
	return !r.bad
}

// decodeFlashBatchRequest decodes FlashBatchRequest fields 2–5, the
// states of this part of the encoding in one allocation.
func decodeFlashBatchRequest(b []byte, req *fugadv1.FlashBatchRequest) bool {
	count := 0
	for c := b; len(c) > 0; {
		num, typ, n := protowire.ConsumeField(c)
		if n < 0 {
			return false
		}
		if num == 3 && typ == protowire.BytesType {
			count++
		}
		c = c[n:]
	}
	var boxes []stateBox
	if count > 0 {
		boxes = make([]stateBox, count)
		req.States = slices.Grow(req.States, count)
	}
	r := fieldReader{b: b}
	for r.next() {
		var ok bool
		switch {
		case r.num == 2:
			req.MoleFractions, ok = r.doubles(req.MoleFractions)
		case r.is(3, protowire.BytesType):
			box := &boxes[0]
			boxes = boxes[1:]
			ok = box.decode(r.val)
			req.States = append(req.States, &box.st)
		case r.is(4, protowire.BytesType) && req.Options == nil:
			req.Options = decodeOptions(r.val)
			ok = req.Options != nil
		case r.is(5, protowire.VarintType):
			req.BypassCache, ok = r.x != 0, true
		}
		if !ok {
			return false
		}
	}
	return !r.bad
}

// decodeOptions decodes a SolverOptions; nil when it leaves the encoding
// to proto.Unmarshal.
func decodeOptions(b []byte) *fugadv1.SolverOptions {
	o := new(fugadv1.SolverOptions)
	r := fieldReader{b: b}
	for r.next() {
		switch {
		case r.is(1, protowire.Fixed64Type):
			o.Tolerance = math.Float64frombits(r.x)
		case r.is(2, protowire.VarintType):
			o.MaxIterations = uint32(r.x)
		default:
			return nil
		}
	}
	if r.bad {
		return nil
	}
	return o
}

// stateBox is a FlashState with room for a T–P specification, so that
// the usual state is one allocation.
type stateBox struct {
	st   fugadv1.FlashState
	spec fugadv1.FlashState_Tp
	tp   fugadv1.TemperaturePressure
}

// decode decodes the encoded FlashState b into box.st.
func (box *stateBox) decode(b []byte) bool {
	st := &box.st
	r := fieldReader{b: b}
	for r.next() {
		var ok bool
		switch {
		case r.num == 1:
			st.MoleFractions, ok = r.doubles(st.MoleFractions)
		case r.num >= 2 && r.num <= 8 && r.typ == protowire.BytesType && st.Specification == nil:
			ok = box.decodeSpec(r.num, r.val)
		case r.is(9, protowire.BytesType) && st.WarmStart == nil:
			st.WarmStart = decodeWarmStart(r.val)
			ok = st.WarmStart != nil
		}
		if !ok {
			return false
		}
	}
	return !r.bad
}

// fixedDoubles decodes a message of n ≤ 4 double fields numbered 1..n
// into v; false for any other field or a malformed encoding.
func fixedDoubles(b []byte, v []float64) bool {
	r := fieldReader{b: b}
	for r.next() {
		if r.num < 1 || int(r.num) > len(v) || r.typ != protowire.Fixed64Type {
			return false
		}
		v[r.num-1] = math.Float64frombits(r.x)
	}
	return !r.bad
}

// decodeSpec decodes specification field num of a FlashState, each a
// message of two doubles (fields 1 and 2).
func (box *stateBox) decodeSpec(num protowire.Number, b []byte) bool {
	var v [2]float64
	if !fixedDoubles(b, v[:]) {
		return false
	}
	st := &box.st
	switch num {
	case 2:
		box.tp.TemperatureK, box.tp.PressurePa = v[0], v[1]
		box.spec.Tp = &box.tp
		st.Specification = &box.spec
	case 3:
		st.Specification = &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: v[0], MolarEnthalpyJPerMol: v[1]}}
	case 4:
		st.Specification = &fugadv1.FlashState_Ps{Ps: &fugadv1.PressureEntropy{PressurePa: v[0], MolarEntropyJPerMolK: v[1]}}
	case 5:
		st.Specification = &fugadv1.FlashState_Tv{Tv: &fugadv1.TemperatureVolume{TemperatureK: v[0], MolarVolumeM3PerMol: v[1]}}
	case 6:
		st.Specification = &fugadv1.FlashState_Uv{Uv: &fugadv1.InternalEnergyVolume{MolarInternalEnergyJPerMol: v[0], MolarVolumeM3PerMol: v[1]}}
	case 7:
		st.Specification = &fugadv1.FlashState_PVapourFraction{PVapourFraction: &fugadv1.PressureVapourFraction{PressurePa: v[0], VapourFraction: v[1]}}
	case 8:
		st.Specification = &fugadv1.FlashState_TVapourFraction{TVapourFraction: &fugadv1.TemperatureVapourFraction{TemperatureK: v[0], VapourFraction: v[1]}}
	default:
		return false
	}
	return true
}

// warmBox is a WarmStart with the storage of its optional doubles.
type warmBox struct {
	ws  fugadv1.WarmStart
	opt [4]float64 // temperature, pressure, molar enthalpy, molar entropy
}

// decodeWarmStart decodes a WarmStart; nil when it leaves the encoding to
// proto.Unmarshal.
func decodeWarmStart(b []byte) *fugadv1.WarmStart {
	box := new(warmBox)
	w := &box.ws
	r := fieldReader{b: b}
	for r.next() {
		var ok bool
		switch {
		case r.num == 1:
			w.KValues, ok = r.doubles(w.KValues)
		case r.is(2, protowire.BytesType):
			p := decodePhaseEstimate(r.val)
			ok = p != nil
			w.Phases = append(w.Phases, p)
		case r.num == 3:
			box.opt[0], ok = r.double()
			w.TemperatureK = &box.opt[0]
		case r.num == 4:
			box.opt[1], ok = r.double()
			w.PressurePa = &box.opt[1]
		case r.num == 5:
			w.LnKTemperatureSensitivityPerK, ok = r.doubles(w.LnKTemperatureSensitivityPerK)
		case r.num == 6:
			w.LnKPressureSensitivityPerPa, ok = r.doubles(w.LnKPressureSensitivityPerPa)
		case r.num == 7:
			box.opt[2], ok = r.double()
			w.MolarEnthalpyJPerMol = &box.opt[2]
		case r.num == 8:
			box.opt[3], ok = r.double()
			w.MolarEntropyJPerMolK = &box.opt[3]
		case r.is(9, protowire.BytesType) && w.StateDerivatives == nil:
			var v [4]float64
			ok = fixedDoubles(r.val, v[:])
			w.StateDerivatives = &fugadv1.StateDerivatives{
				EnthalpyTemperatureDerivativeJPerMolK: v[0],
				EnthalpyPressureDerivativeJPerMolPa:   v[1],
				VolumeTemperatureDerivativeM3PerMolK:  v[2],
				VolumePressureDerivativeM3PerMolPa:    v[3],
			}
		}
		if !ok {
			return nil
		}
	}
	if r.bad {
		return nil
	}
	return w
}

// decodePhaseEstimate decodes a PhaseEstimate; nil when it leaves the
// encoding to proto.Unmarshal.
func decodePhaseEstimate(b []byte) *fugadv1.PhaseEstimate {
	p := new(fugadv1.PhaseEstimate)
	r := fieldReader{b: b}
	for r.next() {
		var ok bool
		switch {
		case r.is(1, protowire.VarintType):
			p.Label, ok = fugadv1.PhaseLabel(int32(r.x)), true
		case r.num == 2:
			p.Amount, ok = r.double()
		case r.num == 3:
			p.MoleFractions, ok = r.doubles(p.MoleFractions)
		}
		if !ok {
			return nil
		}
	}
	if r.bad {
		return nil
	}
	return p
}
