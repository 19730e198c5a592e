package server

import (
	"encoding/binary"
	"math"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Direct decoding of the flash requests.
//
// After the fluid (fluidMemo), what is left of a FlashRequest, a
// FlashBatchRequest or a FlashStreamRequest is its states: mole
// fractions, a specification of two numbers, perhaps a warm start. The
// protobuf runtime's table-driven decoder spends about as long on those
// few fields as the server spends on everything else it does for a
// unary flash, and allocates each nested message on its own. The
// decoders here read those fields with protowire and build the same
// messages, a state's FlashState, its specification wrapper and message
// in one allocation (a batch's states in one for all).
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

// field consumes one field of b: its number, its wire type and its value
// (val for the bytes type, x for the varint and fixed64 types). n is the
// length consumed; it is negative when the field is malformed or of a
// wire type none of these messages uses.
func field(b []byte) (num protowire.Number, typ protowire.Type, val []byte, x uint64, n int) {
	num, typ, n = protowire.ConsumeTag(b)
	if n < 0 {
		return 0, 0, nil, 0, -1
	}
	var m int
	switch typ {
	case protowire.BytesType:
		val, m = protowire.ConsumeBytes(b[n:])
	case protowire.Fixed64Type:
		x, m = protowire.ConsumeFixed64(b[n:])
	case protowire.VarintType:
		x, m = protowire.ConsumeVarint(b[n:])
	default:
		return 0, 0, nil, 0, -1
	}
	if m < 0 {
		return 0, 0, nil, 0, -1
	}
	return num, typ, val, x, n + m
}

// consumeDoubles appends the value of a repeated double field, packed
// (bytes) or one element (fixed64), to dst.
func consumeDoubles(dst []float64, typ protowire.Type, val []byte, x uint64) ([]float64, bool) {
	switch typ {
	case protowire.Fixed64Type:
		return append(dst, math.Float64frombits(x)), true
	case protowire.BytesType:
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

// consumeDouble is the value of a singular double field.
func consumeDouble(typ protowire.Type, x uint64) (float64, bool) {
	return math.Float64frombits(x), typ == protowire.Fixed64Type
}

// decodeFlashRequest decodes FlashRequest fields 2–4 (state, options,
// bypass_cache).
func decodeFlashRequest(b []byte, r *fugadv1.FlashRequest) bool {
	for len(b) > 0 {
		num, typ, val, x, n := field(b)
		if n < 0 {
			return false
		}
		b = b[n:]
		switch {
		case num == 2 && typ == protowire.BytesType && r.State == nil:
			box := new(stateBox)
			if !box.decode(val) {
				return false
			}
			r.State = &box.st
		case num == 3 && typ == protowire.BytesType && r.Options == nil:
			if r.Options = decodeOptions(val); r.Options == nil {
				return false
			}
		case num == 4 && typ == protowire.VarintType:
			r.BypassCache = x != 0
		default:
			return false
		}
	}
	return true
}

// decodeFlashStreamRequest decodes FlashStreamRequest fields 2–7.
func decodeFlashStreamRequest(b []byte, r *fugadv1.FlashStreamRequest) bool {
	for len(b) > 0 {
		num, typ, val, x, n := field(b)
		if n < 0 {
			return false
		}
		b = b[n:]
		var ok bool
		switch {
		case num == 2:
			r.MoleFractions, ok = consumeDoubles(r.MoleFractions, typ, val, x)
		case num == 3 && typ == protowire.BytesType && r.State == nil:
			box := new(stateBox)
			ok = box.decode(val)
			r.State = &box.st
		case num == 4 && typ == protowire.BytesType && r.Options == nil:
			r.Options = decodeOptions(val)
			ok = r.Options != nil
		case num == 5 && typ == protowire.VarintType:
			r.BypassCache, ok = x != 0, true
		case num == 6 && typ == protowire.VarintType:
			r.Sequence, ok = x, true
		case num == 7 && typ == protowire.VarintType:
			r.NoImplicitWarmStart, ok = x != 0, true
		}
		if !ok {
			return false
		}
	}
	return true
}

// decodeFlashBatchRequest decodes FlashBatchRequest fields 2–5, the
// states of this part of the encoding in one allocation.
func decodeFlashBatchRequest(b []byte, r *fugadv1.FlashBatchRequest) bool {
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
		r.States = growStates(r.States, count)
	}
	for len(b) > 0 {
		num, typ, val, x, n := field(b)
		if n < 0 {
			return false
		}
		b = b[n:]
		var ok bool
		switch {
		case num == 2:
			r.MoleFractions, ok = consumeDoubles(r.MoleFractions, typ, val, x)
		case num == 3 && typ == protowire.BytesType:
			box := &boxes[0]
			boxes = boxes[1:]
			ok = box.decode(val)
			r.States = append(r.States, &box.st)
		case num == 4 && typ == protowire.BytesType && r.Options == nil:
			r.Options = decodeOptions(val)
			ok = r.Options != nil
		case num == 5 && typ == protowire.VarintType:
			r.BypassCache, ok = x != 0, true
		}
		if !ok {
			return false
		}
	}
	return true
}

// growStates returns s with room for n more states.
func growStates(s []*fugadv1.FlashState, n int) []*fugadv1.FlashState {
	if cap(s)-len(s) >= n {
		return s
	}
	t := make([]*fugadv1.FlashState, len(s), len(s)+n)
	copy(t, s)
	return t
}

// decodeOptions decodes a SolverOptions; nil when it leaves the encoding
// to proto.Unmarshal.
func decodeOptions(b []byte) *fugadv1.SolverOptions {
	o := new(fugadv1.SolverOptions)
	for len(b) > 0 {
		num, typ, _, x, n := field(b)
		if n < 0 {
			return nil
		}
		b = b[n:]
		switch {
		case num == 1 && typ == protowire.Fixed64Type:
			o.Tolerance = math.Float64frombits(x)
		case num == 2 && typ == protowire.VarintType:
			o.MaxIterations = uint32(x)
		default:
			return nil
		}
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
	for len(b) > 0 {
		num, typ, val, x, n := field(b)
		if n < 0 {
			return false
		}
		b = b[n:]
		var ok bool
		switch {
		case num == 1:
			st.MoleFractions, ok = consumeDoubles(st.MoleFractions, typ, val, x)
		case num >= 2 && num <= 8 && typ == protowire.BytesType && st.Specification == nil:
			ok = box.decodeSpec(num, val)
		case num == 9 && typ == protowire.BytesType && st.WarmStart == nil:
			st.WarmStart = decodeWarmStart(val)
			ok = st.WarmStart != nil
		}
		if !ok {
			return false
		}
	}
	return true
}

// decodeSpec decodes specification field num of a FlashState, each a
// message of two doubles (fields 1 and 2).
func (box *stateBox) decodeSpec(num protowire.Number, b []byte) bool {
	var v [2]float64
	for len(b) > 0 {
		k, typ, _, x, n := field(b)
		if n < 0 || (k != 1 && k != 2) || typ != protowire.Fixed64Type {
			return false
		}
		b = b[n:]
		v[k-1] = math.Float64frombits(x)
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
	for len(b) > 0 {
		num, typ, val, x, n := field(b)
		if n < 0 {
			return nil
		}
		b = b[n:]
		ok := true
		switch {
		case num == 1:
			w.KValues, ok = consumeDoubles(w.KValues, typ, val, x)
		case num == 2 && typ == protowire.BytesType:
			p := decodePhaseEstimate(val)
			ok = p != nil
			w.Phases = append(w.Phases, p)
		case num == 3:
			box.opt[0], ok = consumeDouble(typ, x)
			w.TemperatureK = &box.opt[0]
		case num == 4:
			box.opt[1], ok = consumeDouble(typ, x)
			w.PressurePa = &box.opt[1]
		case num == 5:
			w.LnKTemperatureSensitivityPerK, ok = consumeDoubles(w.LnKTemperatureSensitivityPerK, typ, val, x)
		case num == 6:
			w.LnKPressureSensitivityPerPa, ok = consumeDoubles(w.LnKPressureSensitivityPerPa, typ, val, x)
		case num == 7:
			box.opt[2], ok = consumeDouble(typ, x)
			w.MolarEnthalpyJPerMol = &box.opt[2]
		case num == 8:
			box.opt[3], ok = consumeDouble(typ, x)
			w.MolarEntropyJPerMolK = &box.opt[3]
		case num == 9 && typ == protowire.BytesType && w.StateDerivatives == nil:
			w.StateDerivatives = decodeStateDerivatives(val)
			ok = w.StateDerivatives != nil
		default:
			ok = false
		}
		if !ok {
			return nil
		}
	}
	return w
}

// decodePhaseEstimate decodes a PhaseEstimate; nil when it leaves the
// encoding to proto.Unmarshal.
func decodePhaseEstimate(b []byte) *fugadv1.PhaseEstimate {
	p := new(fugadv1.PhaseEstimate)
	for len(b) > 0 {
		num, typ, val, x, n := field(b)
		if n < 0 {
			return nil
		}
		b = b[n:]
		ok := true
		switch {
		case num == 1 && typ == protowire.VarintType:
			p.Label = fugadv1.PhaseLabel(int32(x))
		case num == 2:
			p.Amount, ok = consumeDouble(typ, x)
		case num == 3:
			p.MoleFractions, ok = consumeDoubles(p.MoleFractions, typ, val, x)
		default:
			ok = false
		}
		if !ok {
			return nil
		}
	}
	return p
}

// decodeStateDerivatives decodes a StateDerivatives (four doubles); nil
// when it leaves the encoding to proto.Unmarshal.
func decodeStateDerivatives(b []byte) *fugadv1.StateDerivatives {
	var v [4]float64
	for len(b) > 0 {
		num, typ, _, x, n := field(b)
		if n < 0 || num < 1 || num > 4 || typ != protowire.Fixed64Type {
			return nil
		}
		b = b[n:]
		v[num-1] = math.Float64frombits(x)
	}
	return &fugadv1.StateDerivatives{
		EnthalpyTemperatureDerivativeJPerMolK: v[0],
		EnthalpyPressureDerivativeJPerMolPa:   v[1],
		VolumeTemperatureDerivativeM3PerMolK:  v[2],
		VolumePressureDerivativeM3PerMolPa:    v[3],
	}
}
