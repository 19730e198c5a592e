package server

import (
	"bytes"
	"testing"

	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// TestWireCodecDecodesAsProto holds the wire codec's decoding to
// proto.Unmarshal's: for every request type with a fluid, decoded twice
// (the second time through the memo), and for encodings the memo must
// leave to proto.Unmarshal (the fluid field repeated, so that its
// occurrences merge; unknown fields around it; no fluid; malformed bytes).
// A memo hit shares the decoded fluid and knows its deterministic
// encoding.
func TestWireCodecDecodesAsProto(t *testing.T) {
	fl := gas10Fluid()
	fl.VolumeTranslation = true
	other := fluidOf(fugadv1.Model_MODEL_SRK, "methane", "ethane")
	reqs := []proto.Message{
		&fugadv1.FlashRequest{Fluid: fl, State: tpStateX(gas10X, 250, 5e6), BypassCache: true},
		&fugadv1.FlashBatchRequest{Fluid: fl, MoleFractions: gas10X, States: []*fugadv1.FlashState{tpStateX(nil, 250, 5e6), tpStateX(nil, 251, 5e6)}},
		&fugadv1.FlashStreamRequest{Fluid: fl, State: tpStateX(gas10X, 250, 5e6), Sequence: 9},
		&fugadv1.FugacityCoefficientsRequest{Fluid: fl, TemperatureK: 300, PressurePa: 1e6, MoleFractions: gas10X},
		&fugadv1.SaturationPointRequest{Fluid: fl, MoleFractions: gas10X, Type: fugadv1.SaturationType_SATURATION_TYPE_DEW},
		&fugadv1.PhaseEnvelopeRequest{Fluid: fl, MoleFractions: gas10X, MaxPoints: 50},
	}
	type input struct {
		name string
		b    []byte
		new  func() proto.Message
		memo bool // whether the memo may take it
	}
	var inputs []input
	for _, r := range reqs {
		b, err := proto.Marshal(r)
		if err != nil {
			t.Fatal(err)
		}
		name := string(r.ProtoReflect().Descriptor().Name())
		newMsg := func() proto.Message { return r.ProtoReflect().New().Interface() }
		inputs = append(inputs, input{name, b, newMsg, true})
		// An unknown field before the fluid and one after the request.
		u := protowire.AppendTag(nil, 99, protowire.VarintType)
		u = protowire.AppendVarint(u, 7)
		inputs = append(inputs, input{name + " with unknown fields", append(append(u, b...), u...), newMsg, true})
		// A second fluid field: proto merges the occurrences.
		f2, err := proto.Marshal(other)
		if err != nil {
			t.Fatal(err)
		}
		rep := protowire.AppendTag(append([]byte(nil), b...), fluidFieldNumber, protowire.BytesType)
		rep = protowire.AppendBytes(rep, f2)
		inputs = append(inputs, input{name + " with two fluid fields", rep, newMsg, false})
		inputs = append(inputs, input{name + " truncated", b[:len(b)-3], newMsg, false})
	}
	noFluid, err := proto.Marshal(&fugadv1.FlashRequest{State: tpStateX(gas10X, 250, 5e6)})
	if err != nil {
		t.Fatal(err)
	}
	inputs = append(inputs, input{"FlashRequest without fluid", noFluid, func() proto.Message { return new(fugadv1.FlashRequest) }, false})
	wantDef, err := proto.MarshalOptions{Deterministic: true}.Marshal(fl)
	if err != nil {
		t.Fatal(err)
	}

	memo := newFluidMemo()
	c := newWireCodec(memo)
	for _, in := range inputs {
		want := in.new()
		wantErr := proto.Unmarshal(in.b, want)
		var fluids []*fugadv1.Fluid
		for pass := range 2 {
			got := in.new()
			err := c.Unmarshal(mem.BufferSlice{mem.SliceBuffer(in.b)}, got)
			if (err != nil) != (wantErr != nil) {
				t.Fatalf("%s, pass %d: error %v, proto.Unmarshal's %v", in.name, pass, err, wantErr)
			}
			if err != nil {
				continue
			}
			if !proto.Equal(got, want) {
				t.Fatalf("%s, pass %d: decoded\n%v\nwant\n%v", in.name, pass, got, want)
			}
			// Every request type here has its fluid as field 1.
			fd := got.ProtoReflect().Descriptor().Fields().ByNumber(fluidFieldNumber)
			if f, ok := got.ProtoReflect().Get(fd).Message().Interface().(*fugadv1.Fluid); ok && got.ProtoReflect().Has(fd) {
				fluids = append(fluids, f)
			}
		}
		if !in.memo {
			for _, f := range fluids {
				if _, ok := memo.def(f); ok {
					t.Errorf("%s: decoded through the memo", in.name)
				}
			}
			continue
		}
		if len(fluids) != 2 || fluids[0] != fluids[1] {
			t.Errorf("%s: the second decoding does not share the first's fluid", in.name)
			continue
		}
		def, ok := memo.def(fluids[0])
		if !ok || !bytes.Equal(def, wantDef) {
			t.Errorf("%s: memo encoding %x (found %v), want %x", in.name, def, ok, wantDef)
		}
	}
}

// TestFluidMemoBounded checks that the memo holds at most memoFluids
// entries, replacing the oldest, and forgets replaced messages.
func TestFluidMemoBounded(t *testing.T) {
	memo := newFluidMemo()
	c := newWireCodec(memo)
	decode := func(k int) *fugadv1.Fluid {
		fl := gas10Fluid()
		fl.InteractionParameters = []*fugadv1.InteractionParameter{{I: 0, J: 1, K0: float64(k) * 1e-4}}
		b, err := proto.Marshal(&fugadv1.FlashRequest{Fluid: fl})
		if err != nil {
			t.Fatal(err)
		}
		req := new(fugadv1.FlashRequest)
		if err := c.Unmarshal(mem.BufferSlice{mem.SliceBuffer(b)}, req); err != nil {
			t.Fatal(err)
		}
		return req.GetFluid()
	}
	first := decode(0)
	for k := 1; k <= memoFluids; k++ {
		decode(k)
	}
	if n, m := len(memo.byRaw), len(memo.byMsg); n != memoFluids || m != memoFluids {
		t.Fatalf("memo holds %d encodings and %d messages, want %d", n, m, memoFluids)
	}
	if _, ok := memo.def(first); ok {
		t.Error("the oldest fluid is still memoised after memoFluids newer ones")
	}
	if again := decode(0); again == first {
		t.Error("a replaced fluid decoded to its old message")
	}
}

// TestWireCodecEncodesAsProto holds the wire codec's encoding to
// proto.Marshal's bytes, below and above gRPC's pooling threshold, and
// checks that a reused pool buffer with stale bytes in it gives the same.
func TestWireCodecEncodesAsProto(t *testing.T) {
	c := newWireCodec(nil)
	items := make([]*fugadv1.FlashBatchItem, 200)
	for i := range items {
		items[i] = &fugadv1.FlashBatchItem{Status: okStatus, Result: &fugadv1.FlashResult{TemperatureK: 250 + float64(i), PressurePa: 5e6, KValues: gas10X}}
	}
	msgs := []proto.Message{
		&fugadv1.FlashResponse{Result: &fugadv1.FlashResult{TemperatureK: 250, PressurePa: 5e6}},
		&fugadv1.FlashBatchResponse{Items: items[:3]},
		&fugadv1.FlashBatchResponse{Items: items},
	}
	for round := range 3 {
		for i, m := range msgs {
			want, err := proto.Marshal(m)
			if err != nil {
				t.Fatal(err)
			}
			got, err := c.Marshal(m)
			if err != nil {
				t.Fatal(err)
			}
			if b := got.Materialize(); !bytes.Equal(b, want) {
				t.Errorf("round %d, message %d: %d bytes differ from proto.Marshal's %d", round, i, len(b), len(want))
			}
			got.Free()
		}
		// Leave stale bytes in the pooled buffers for the next round.
		bp := encodeBuffers.Get(64 << 10)
		for j := range *bp {
			(*bp)[j] = 0xff
		}
		encodeBuffers.Put(bp)
	}
}

// TestBufferPoolClasses checks the pool's size classes: a buffer of the
// asked length with a power-of-two capacity, returned to its class.
func TestBufferPoolClasses(t *testing.T) {
	p := new(bufferPool)
	for _, n := range []int{1, 1000, 1024, 1025, 130 << 10, 1 << maxBufferClass, 1<<maxBufferClass + 1} {
		bp := p.Get(n)
		if len(*bp) != n {
			t.Errorf("Get(%d): length %d", n, len(*bp))
		}
		if c := cap(*bp); n <= 1<<maxBufferClass && (c < n || c&(c-1) != 0 || c >= 2*n && n > 1) {
			t.Errorf("Get(%d): capacity %d, want the next power of two", n, c)
		}
		p.Put(bp)
	}
}
