package server

import (
	"bytes"
	"context"
	"fmt"
	"sync"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Same request, same bytes: every answer below is reduced to its
// canonical bytes (canonicalBytes: the deterministic encoding of the
// decoded response with from_cache cleared, or of the google.rpc.Status
// of an error, details included) and compared byte for byte across
// repeated calls, concurrent callers, cache hits against computed answers
// (bypass_cache), the cache turned off, and separate server instances.
// Whatever an endpoint answers is compared — a result, NOT_CONVERGED with
// its estimate, INVALID_ARGUMENT with its violations, or UNIMPLEMENTED
// for an endpoint without a solver yet — so the cases need no change when
// a solver is wired in.

// detCase is one request, sent with or without bypass_cache; it returns
// the canonical bytes of the answer and whether any SolverReport in it
// says from_cache.
type detCase struct {
	name string
	call func(t *testing.T, ctx context.Context, c fugadv1.FugadServiceClient, bypass bool) (canon []byte, fromCache bool)
}

// anyFromCache reports whether a SolverReport inside m has from_cache set.
func anyFromCache(m protoreflect.Message) bool {
	if r, ok := m.Interface().(*fugadv1.SolverReport); ok {
		return r.GetFromCache()
	}
	found := false
	m.Range(func(fd protoreflect.FieldDescriptor, v protoreflect.Value) bool {
		if fd.Kind() != protoreflect.MessageKind || fd.IsMap() {
			return true
		}
		if fd.IsList() {
			for i := range v.List().Len() {
				found = found || anyFromCache(v.List().Get(i).Message())
			}
		} else {
			found = found || anyFromCache(v.Message())
		}
		return !found
	})
	return found
}

// unaryCase builds a detCase from a request and the client method.
func unaryCase[Req, Resp proto.Message](name string, req Req, call func(fugadv1.FugadServiceClient, context.Context, Req, ...grpc.CallOption) (Resp, error)) detCase {
	return detCase{name: name, call: func(t *testing.T, ctx context.Context, c fugadv1.FugadServiceClient, bypass bool) ([]byte, bool) {
		r := proto.Clone(req).(Req)
		if fd := r.ProtoReflect().Descriptor().Fields().ByName("bypass_cache"); fd != nil {
			r.ProtoReflect().Set(fd, protoreflect.ValueOfBool(bypass))
		}
		resp, err := call(c, ctx, r)
		fromCache := err == nil && anyFromCache(resp.ProtoReflect())
		return canonicalBytes(t, resp, err), fromCache
	}}
}

// streamCase sends msgs on one FlashStream and returns the canonical bytes
// of all the responses in order.
func streamCase(name string, msgs ...*fugadv1.FlashStreamRequest) detCase {
	return detCase{name: name, call: func(t *testing.T, ctx context.Context, c fugadv1.FugadServiceClient, bypass bool) ([]byte, bool) {
		st, err := c.FlashStream(ctx)
		if err != nil {
			t.Fatal(err)
		}
		var out []byte
		fromCache := false
		for _, m := range msgs {
			m = proto.Clone(m).(*fugadv1.FlashStreamRequest)
			m.BypassCache = bypass
			if err := st.Send(m); err != nil {
				t.Fatal(err)
			}
			r, err := st.Recv()
			if err != nil {
				t.Fatal(err)
			}
			fromCache = fromCache || anyFromCache(r.ProtoReflect())
			out = append(out, canonicalBytes(t, r, nil)...)
		}
		if err := st.CloseSend(); err != nil {
			t.Fatal(err)
		}
		return out, fromCache
	}}
}

// detCases covers every endpoint, every kind of component and the error
// paths.
func detCases() []detCase {
	c := fugadv1.FugadServiceClient.FugacityCoefficients
	var cases []detCase
	for i, r := range fugacitySeeds()[:6] {
		cases = append(cases, unaryCase(fmt.Sprintf("fugacity/%d", i), r, c))
	}
	unknown := fugacityReq()
	unknown.Fluid.Components[1] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: "ethan"}}
	cases = append(cases, unaryCase("fugacity/unknown-component", unknown, c))

	f := fugadv1.FugadServiceClient.Flash
	cases = append(cases,
		unaryCase("flash/gas10-two-phase", &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 250, 5e6)}, f),
		unaryCase("flash/gas10-single-phase", &fugadv1.FlashRequest{Fluid: gas10Fluid(), State: tpStateX(gas10X, 350, 5e6)}, f),
		unaryCase("flash/wet-three-phase", &fugadv1.FlashRequest{Fluid: wetFluid(), State: tpStateX(wetX, 310, 7e6)}, f),
		unaryCase("flash/warm-start", &fugadv1.FlashRequest{Fluid: gasFluid(), State: flashSeeds()[7].GetState()}, f),
	)
	for i, r := range flashSeeds()[1:7] { // the other specifications
		cases = append(cases, unaryCase(fmt.Sprintf("flash/spec-%d", i+1), r, f))
	}
	for i, r := range fuzzFluids()[1:] {
		cases = append(cases, unaryCase(fmt.Sprintf("flash/fluid-%d", i+1), &fugadv1.FlashRequest{Fluid: r, State: tpStateX(fractions(len(r.GetComponents())), 260, 3e6)}, f))
	}
	batch := &fugadv1.FlashBatchRequest{Fluid: gas10Fluid(), MoleFractions: gas10X}
	for i := range 12 {
		batch.States = append(batch.States, tpStateX(nil, 200+15*float64(i), 1e6+5e5*float64(i)))
	}
	batch.States = append(batch.States, tpStateX(nil, -1, 1e6), flashSeeds()[1].GetState())
	cases = append(cases,
		unaryCase("batch/gas10", batch, fugadv1.FugadServiceClient.FlashBatch),
		unaryCase("saturation/dew", satReq(), fugadv1.FugadServiceClient.SaturationPoint),
		unaryCase("envelope/gas", envReq(), fugadv1.FugadServiceClient.PhaseEnvelope),
		streamCase("stream/cooling",
			&fugadv1.FlashStreamRequest{Sequence: 1, Fluid: gas10Fluid(), MoleFractions: gas10X, State: tpStateX(nil, 250, 5e6)},
			&fugadv1.FlashStreamRequest{Sequence: 2, State: tpStateX(nil, 249, 5e6)},
			&fugadv1.FlashStreamRequest{Sequence: 3, State: tpStateX(nil, 248, 5.1e6)},
			&fugadv1.FlashStreamRequest{Sequence: 4, State: tpStateX(nil, -5, 5e6)},
			&fugadv1.FlashStreamRequest{Sequence: 5, State: &fugadv1.FlashState{Specification: flashSeeds()[1].GetState().GetSpecification()}},
		),
	)
	return cases
}

// detConfig lets every concurrent call have a solver slot.
var detConfig = Config{MaxConcurrentSolves: 64}

// reference answers every case once on a fresh server, bypassing the
// cache.
func reference(t *testing.T, cases []detCase) [][]byte {
	t.Helper()
	e := newEnv(t, envOptions{cfg: detConfig})
	ctx := testCtx(t)
	out := make([][]byte, len(cases))
	for i, dc := range cases {
		out[i], _ = dc.call(t, ctx, e.client, true)
	}
	return out
}

func wantSame(t *testing.T, what, name string, want, got []byte) {
	t.Helper()
	if !bytes.Equal(want, got) {
		t.Errorf("%s: %s answered differently (%d bytes vs %d)\nwant %x\ngot  %x", name, what, len(want), len(got), want, got)
	}
}

// TestDeterministicRepeatedAndCached asks each case five times bypassing
// the cache and five times through it, on one server: all ten answers
// equal the reference, and the cached run really was served from the
// cache (for the cases that answer OK), so hits were compared with
// computed answers.
func TestDeterministicRepeatedAndCached(t *testing.T) {
	cases := detCases()
	ref := reference(t, cases)
	e := newEnv(t, envOptions{cfg: detConfig})
	ctx := testCtx(t)
	for i, dc := range cases {
		for k := range 5 {
			got, _ := dc.call(t, ctx, e.client, true)
			wantSame(t, fmt.Sprintf("bypass call %d", k), dc.name, ref[i], got)
		}
		hit := false
		for k := range 5 {
			got, fc := dc.call(t, ctx, e.client, false)
			hit = hit || fc
			wantSame(t, fmt.Sprintf("cached call %d", k), dc.name, ref[i], got)
		}
		if !hit && bytes.HasPrefix(ref[i], []byte("err=false")) && cachedEndpoint(dc.name) {
			t.Errorf("%s: no answer came from the cache; the hit/bypass comparison did not happen", dc.name)
		}
	}
}

// cachedEndpoint reports whether the case's endpoint answers OK results
// through the result cache (Fugacity, Flash, FlashBatch items, stream
// messages).
func cachedEndpoint(name string) bool {
	for _, p := range []string{"fugacity/", "flash/", "batch/", "stream/"} {
		if len(name) >= len(p) && name[:len(p)] == p {
			return true
		}
	}
	return false
}

// TestDeterministicConcurrent runs every case from eight goroutines at
// once, half through the cache and half bypassing it (run with -race):
// every answer equals the reference.
func TestDeterministicConcurrent(t *testing.T) {
	cases := detCases()
	ref := reference(t, cases)
	e := newEnv(t, envOptions{cfg: detConfig})
	ctx := testCtx(t)
	type diff struct {
		name string
		got  []byte
		i    int
	}
	diffs := make(chan diff, 8*len(cases))
	var wg sync.WaitGroup
	for g := range 8 {
		wg.Go(func() {
			for k := range cases {
				i := (k + g*5) % len(cases) // each goroutine in another order
				got, _ := cases[i].call(t, ctx, e.client, g%2 == 0)
				if !bytes.Equal(got, ref[i]) {
					diffs <- diff{cases[i].name, got, i}
				}
			}
		})
	}
	wg.Wait()
	close(diffs)
	for d := range diffs {
		wantSame(t, "a concurrent call", d.name, ref[d.i], d.got)
	}
}

// TestDeterministicAcrossServers answers every case on two further server
// instances, one with the caches turned off: the same bytes as the
// reference server.
func TestDeterministicAcrossServers(t *testing.T) {
	cases := detCases()
	ref := reference(t, cases)
	noCache := detConfig
	noCache.Cache.Disabled = true
	for _, cfg := range []struct {
		name string
		cfg  Config
	}{{"a second server", detConfig}, {"a server without caches", noCache}} {
		e := newEnv(t, envOptions{cfg: cfg.cfg})
		ctx := testCtx(t)
		for i, dc := range cases {
			got, fc := dc.call(t, ctx, e.client, false)
			wantSame(t, cfg.name, dc.name, ref[i], got)
			if cfg.cfg.Cache.Disabled && fc {
				t.Errorf("%s: from_cache with the caches off", dc.name)
			}
		}
	}
}
