package server

import (
	"context"
	"sync"

	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/cache"
)

// Cached answers.
//
// The result cache stores the serialised answer of a solve (a FlashResult,
// or a FugacityCoefficientsResponse). A miss solves, marshals the answer
// once, stores those bytes and sends the same bytes. A hit sends the
// 4-byte encoding of `report { from_cache: true }` followed by the stored
// bytes. Protobuf parsers merge repeated occurrences of a singular message
// field, and the stored report never sets from_cache (proto3 omits a
// false bool), so the client decodes exactly the message the miss sent
// with report.from_cache set: a hit is byte-identical to the miss it
// replays apart from from_cache, and re-encoding the decoded hit with
// from_cache cleared gives the miss's bytes. The stored bytes travel as
// the unknown fields of a message of the right type that holds only that
// report; the protobuf encoder writes known fields first and unknown
// fields verbatim after them, so a hit neither copies, decodes nor
// re-encodes the stored answer.

// hitMessage returns m as the answer of a cache hit or a miss: raw (the
// stored encoding of a message of m's type) as its unknown fields and,
// for a hit, a report holding only from_cache. setReport sets m's report.
func hitMessage[M proto.Message](m M, raw []byte, hit bool, setReport func(*fugadv1.SolverReport)) M {
	if hit {
		setReport(&fugadv1.SolverReport{FromCache: true})
	}
	// A full slice expression: should anything ever append to the unknown
	// fields it must reallocate rather than write into the cache's memory.
	m.ProtoReflect().SetUnknown(protoreflect.RawFields(raw[:len(raw):len(raw)]))
	return m
}

// keyBuilders pools key builders, so that building a key allocates
// nothing once a builder's buffer has grown.
var keyBuilders = sync.Pool{New: func() any { return new(cache.KeyBuilder) }}

// beginKey takes a pooled key builder and starts a key of the given kind
// under the server's data and model versions. Return the builder with
// endKey once the key is no longer used.
func (s *Server) beginKey(kind string) *cache.KeyBuilder {
	kb := keyBuilders.Get().(*cache.KeyBuilder)
	kb.Reset()
	kb.AppendString(kind)
	kb.AppendString(s.cacheVersion)
	return kb
}

func endKey(kb *cache.KeyBuilder) { keyBuilders.Put(kb) }

// marshalAnswer is the one encoding of an answer: the same message always
// gives the same bytes.
var marshalAnswer = proto.MarshalOptions{Deterministic: true}

// cachedAnswer answers through the result cache under the key built in kb:
// the stored bytes on a hit, else the bytes of solve's answer, which are
// stored. It returns the builder to the pool. Errors are never stored.
// The returned bytes are shared with the cache: read-only.
func (s *Server) cachedAnswer(ctx context.Context, kb *cache.KeyBuilder, solve func(context.Context) (proto.Message, error)) (raw []byte, hit bool, err error) {
	return s.cachedRaw(ctx, kb, func(ctx context.Context) ([]byte, error) {
		m, err := solve(ctx)
		if err != nil {
			return nil, err
		}
		return marshalAnswer.Marshal(m)
	})
}

// cachedRaw is cachedAnswer for a solve that returns its answer already
// encoded with marshalAnswer.
func (s *Server) cachedRaw(ctx context.Context, kb *cache.KeyBuilder, solve func(context.Context) ([]byte, error)) (raw []byte, hit bool, err error) {
	defer endKey(kb)
	key, err := kb.Key()
	if err != nil {
		// Unreachable for validated input (a key refuses only NaN); answer
		// without the cache rather than fail.
		b, err := solve(ctx)
		return b, false, err
	}
	raw, hit, err = s.results.do(ctx, key, func(ctx context.Context) ([]byte, bool, error) {
		b, err := solve(ctx)
		return b, err == nil, err
	})
	if err != nil {
		if _, ok := status.FromError(err); ok {
			return nil, false, err
		}
		return nil, false, ctxErr(err)
	}
	if hit {
		info(ctx).cacheHits.Add(1)
	}
	return raw, hit, nil
}

// warmStartOf returns the warm_start of an encoded FlashResult, decoding
// only that field; nil when it has none or raw is malformed.
func warmStartOf(raw []byte) *fugadv1.WarmStart {
	num := (&fugadv1.FlashResult{}).ProtoReflect().Descriptor().Fields().ByName("warm_start").Number()
	var ws *fugadv1.WarmStart
	for len(raw) > 0 {
		n, typ, l := protowire.ConsumeTag(raw)
		if l < 0 {
			return nil
		}
		raw = raw[l:]
		if n == num && typ == protowire.BytesType {
			v, l := protowire.ConsumeBytes(raw)
			if l < 0 {
				return nil
			}
			if ws == nil {
				ws = new(fugadv1.WarmStart)
			}
			if err := (proto.UnmarshalOptions{Merge: true}).Unmarshal(v, ws); err != nil {
				return nil
			}
			raw = raw[l:]
			continue
		}
		l = protowire.ConsumeFieldValue(n, typ, raw)
		if l < 0 {
			return nil
		}
		raw = raw[l:]
	}
	return ws
}
