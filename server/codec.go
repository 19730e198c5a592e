package server

import (
	"math/bits"
	"sync"

	"google.golang.org/grpc/encoding"
	_ "google.golang.org/grpc/encoding/proto" // registers the proto codec wireCodec falls back to
	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// The server's wire codec.
//
// wireCodec is what a Host decodes requests and encodes answers with
// (grpc.ForceServerCodecV2). Its bytes are those of gRPC's proto codec,
// which it replaces under the same name, and it differs in two costs only:
//
//   - Decoding. Every solving request carries its Fluid (field 1 of each
//     request message), and a client sends the same fluid call after call.
//     Decoding ten ComponentSpecs (oneof wrappers, strings) and then
//     encoding the fluid again deterministically for the compiled-fluid
//     cache (checkFluid) cost as much as a fifth of a flash. The codec
//     keeps the raw bytes of recent fluid fields with the message decoded
//     from them and its deterministic encoding (fluidMemo): a request
//     whose fluid field holds bytes seen before gets that decoded message
//     (shared, read-only) and the rest of the request decoded around it,
//     which by the protobuf encoding's merge rule is the message
//     proto.Unmarshal would build. Anything unusual (no fluid field, the
//     field repeated, an error anywhere) takes proto.Unmarshal's own path.
//     The rest of a flash request is decoded directly (decode.go) where
//     its encoding allows.
//   - Encoding. Answers above gRPC's pooling threshold are encoded into
//     buffers of their own pool (encodeBuffers), which are handed out
//     without being cleared: the encoding overwrites every byte that is
//     sent. gRPC's default pool clears a whole size tier (up to 1 MiB for a
//     batch answer of 130 KB) on every reuse.
type wireCodec struct {
	fluids *fluidMemo
	// fallback is gRPC's proto codec, for values that are not
	// proto.Message (protoadapt V1 messages).
	fallback encoding.CodecV2
}

func newWireCodec(fluids *fluidMemo) *wireCodec {
	return &wireCodec{fluids: fluids, fallback: encoding.GetCodecV2("proto")}
}

// Name is the proto codec's: clients need nothing of their own.
func (*wireCodec) Name() string { return "proto" }

// Marshal encodes v as gRPC's proto codec does (proto.Size, then a
// marshal that reuses the computed sizes).
func (c *wireCodec) Marshal(v any) (mem.BufferSlice, error) {
	m, ok := v.(proto.Message)
	if !ok {
		return c.fallback.Marshal(v)
	}
	size := proto.Size(m)
	opts := proto.MarshalOptions{UseCachedSize: true}
	if mem.IsBelowBufferPoolingThreshold(size) {
		b, err := opts.Marshal(m)
		if err != nil {
			return nil, err
		}
		return mem.BufferSlice{mem.SliceBuffer(b)}, nil
	}
	buf := encodeBuffers.Get(size)
	b, err := opts.MarshalAppend((*buf)[:0], m)
	if err != nil {
		encodeBuffers.Put(buf)
		return nil, err
	}
	*buf = b
	return mem.BufferSlice{mem.NewBuffer(buf, encodeBuffers)}, nil
}

// Unmarshal decodes data into v, through the fluid memo for the request
// messages that carry a fluid.
func (c *wireCodec) Unmarshal(data mem.BufferSlice, v any) error {
	m, ok := v.(proto.Message)
	if !ok {
		return c.fallback.Unmarshal(data, v)
	}
	buf := data.MaterializeToBuffer(mem.DefaultBufferPool())
	defer buf.Free()
	b := buf.ReadOnlyData()
	if c.fluids != nil && c.fluids.unmarshal(b, m) {
		return nil
	}
	return proto.Unmarshal(b, m)
}

// setFluid sets the fluid field (number 1) of a request message that has
// one to f (nil: only reports whether it has one).
func setFluid(m proto.Message, f *fugadv1.Fluid) bool {
	switch r := m.(type) {
	case *fugadv1.FlashRequest:
		r.Fluid = f
	case *fugadv1.FlashBatchRequest:
		r.Fluid = f
	case *fugadv1.FlashStreamRequest:
		r.Fluid = f
	case *fugadv1.FugacityCoefficientsRequest:
		r.Fluid = f
	case *fugadv1.SaturationPointRequest:
		r.Fluid = f
	case *fugadv1.PhaseEnvelopeRequest:
		r.Fluid = f
	default:
		return false
	}
	return true
}

// fluidFieldNumber is the number of the fluid field in every request
// message that has one (api/fugad/v1: flash, fugacity, saturation and
// envelope protos).
const fluidFieldNumber protowire.Number = 1

// fluidField finds the one fluid field of an encoded request: the offsets
// of the whole field (tag to end of value) and its value. ok is false
// when there is none, when it occurs more than once (the occurrences would
// merge), or when the encoding is malformed.
func fluidField(b []byte) (start, end int, val []byte, ok bool) {
	found := false
	for off := 0; off < len(b); {
		num, typ, n := protowire.ConsumeTag(b[off:])
		if n < 0 {
			return 0, 0, nil, false
		}
		if num == fluidFieldNumber {
			if found || typ != protowire.BytesType {
				return 0, 0, nil, false
			}
			v, m := protowire.ConsumeBytes(b[off+n:])
			if m < 0 {
				return 0, 0, nil, false
			}
			start, end, val, found = off, off+n+m, v, true
			off = end
			continue
		}
		m := protowire.ConsumeFieldValue(num, typ, b[off+n:])
		if m < 0 {
			return 0, 0, nil, false
		}
		off += n + m
	}
	return start, end, val, found
}

// Bounds of the fluid memo: the fluids of a few dozen clients' streams,
// each at most maxMemoFluidBytes encoded (a 100-component fluid of ids is
// about 2 KB; user-defined constants make it larger), so that it holds at
// most about 1 MiB of encodings.
const (
	memoFluids        = 64
	maxMemoFluidBytes = 16 << 10
)

// fluidMemo maps the raw bytes of recent fluid fields to the Fluid decoded
// from them and that message's deterministic encoding (the fluid's
// identity in cache keys, see checkFluid). A decoded message is shared by
// every request whose fluid field held its bytes, so the server never
// writes into a request's fluid. Entries are replaced round-robin.
type fluidMemo struct {
	mu    sync.RWMutex
	byRaw map[string]*memoFluid
	byMsg map[*fugadv1.Fluid]*memoFluid
	ring  [memoFluids]*memoFluid
	next  int
}

type memoFluid struct {
	raw string
	msg *fugadv1.Fluid
	def []byte // deterministic encoding of msg; read-only
}

func newFluidMemo() *fluidMemo {
	return &fluidMemo{byRaw: make(map[string]*memoFluid, memoFluids), byMsg: make(map[*fugadv1.Fluid]*memoFluid, memoFluids)}
}

// unmarshal decodes b into m through the memo and reports whether it did;
// when it did not, m is to be decoded by proto.Unmarshal (which resets it).
func (f *fluidMemo) unmarshal(b []byte, m proto.Message) bool {
	if !setFluid(m, nil) {
		return false
	}
	start, end, val, ok := fluidField(b)
	if !ok || len(val) > maxMemoFluidBytes {
		return false
	}
	e := f.lookup(val)
	if e == nil {
		return false
	}
	proto.Reset(m)
	if decodeRest(b[:start], m) && decodeRest(b[end:], m) {
		setFluid(m, e.msg)
		return true
	}
	proto.Reset(m)
	merge := proto.UnmarshalOptions{Merge: true}
	if merge.Unmarshal(b[:start], m) != nil {
		return false
	}
	setFluid(m, e.msg)
	return merge.Unmarshal(b[end:], m) == nil
}

// lookup returns the entry of the raw fluid bytes val, decoding and
// adding it when it is new; nil when val does not decode.
func (f *fluidMemo) lookup(val []byte) *memoFluid {
	f.mu.RLock()
	e := f.byRaw[string(val)]
	f.mu.RUnlock()
	if e != nil {
		return e
	}
	msg := new(fugadv1.Fluid)
	if proto.Unmarshal(val, msg) != nil {
		return nil
	}
	def, err := proto.MarshalOptions{Deterministic: true}.Marshal(msg)
	if err != nil {
		return nil
	}
	e = &memoFluid{raw: string(val), msg: msg, def: def}
	f.mu.Lock()
	defer f.mu.Unlock()
	if old := f.byRaw[e.raw]; old != nil {
		return old
	}
	if old := f.ring[f.next]; old != nil {
		delete(f.byRaw, old.raw)
		delete(f.byMsg, old.msg)
	}
	f.ring[f.next] = e
	f.next = (f.next + 1) % memoFluids
	f.byRaw[e.raw] = e
	f.byMsg[msg] = e
	return e
}

// def returns the deterministic encoding of fl when fl is a message the
// memo decoded.
func (f *fluidMemo) def(fl *fugadv1.Fluid) ([]byte, bool) {
	if f == nil {
		return nil, false
	}
	f.mu.RLock()
	e := f.byMsg[fl]
	f.mu.RUnlock()
	if e == nil {
		return nil, false
	}
	return e.def, true
}

// bufferPool is a mem.BufferPool of power-of-two size classes whose
// buffers are handed out as they were left: for encodings, which
// overwrite every byte they use.
type bufferPool struct {
	classes [maxBufferClass + 1]sync.Pool // of *[]byte with cap 1<<class
}

// maxBufferClass is the largest pooled class, 16 MiB (the default
// MaxMessageBytes); larger buffers are allocated and dropped.
const maxBufferClass = 24

var encodeBuffers = new(bufferPool)

// Get returns a buffer of the given length.
func (p *bufferPool) Get(length int) *[]byte {
	c := bits.Len(uint(max(length, 1) - 1))
	if c > maxBufferClass {
		b := make([]byte, length)
		return &b
	}
	if bp, ok := p.classes[c].Get().(*[]byte); ok {
		*bp = (*bp)[:length]
		return bp
	}
	b := make([]byte, length, 1<<c)
	return &b
}

// Put returns a buffer got from Get.
func (p *bufferPool) Put(bp *[]byte) {
	c := bits.Len(uint(cap(*bp)) - 1)
	if cap(*bp) == 0 || cap(*bp) != 1<<c || c > maxBufferClass {
		return
	}
	p.classes[c].Put(bp)
}
