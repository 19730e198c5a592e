package cache

import (
	"context"
	"fmt"
	"runtime"
	"testing"
)

// flashRequest holds the inputs of a fictional ten-component T–P flash
// request, sized like a typical natural-gas stream (demo values only).
type flashRequest struct {
	model, version string
	ids            [10]string
	z, kijRow      [10]float64
	t, p           float64
	opts           [8]float64
	threePhase     bool
	maxIter        int64
}

func newFlashRequest() *flashRequest {
	r := &flashRequest{
		model:   "PR78",
		version: "components-1/model-1",
		ids:     [10]string{"methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane", "nitrogen", "carbon-dioxide"},
		z:       [10]float64{0.83, 0.07, 0.03, 0.008, 0.012, 0.004, 0.003, 0.003, 0.02, 0.02},
		kijRow:  [10]float64{0, 0, 0, 0, 0, 0, 0, 0, 0.025, 0.105},
		t:       265.15,
		p:       6.5e6,
		opts:    [8]float64{1e-10, 1e-8, 50, 200, 1e-12, 0.5, 1, 0},
		maxIter: 200,
	}
	return r
}

// appendTo writes r's key: 30 float64, 12 strings, a bool and an int.
func (r *flashRequest) appendTo(b *KeyBuilder) {
	b.Reset()
	b.AppendString("flash/tp")
	b.AppendString(r.model)
	b.AppendString(r.version)
	for _, id := range r.ids {
		b.AppendString(id)
	}
	b.AppendFloat64s(r.z[:])
	b.AppendFloat64s(r.kijRow[:])
	b.AppendFloat64(r.t)
	b.AppendFloat64(r.p)
	b.AppendFloat64s(r.opts[:])
	b.AppendBool(r.threePhase)
	b.AppendInt64(r.maxIter)
}

func BenchmarkKeyBuildFlash(b *testing.B) {
	r := newFlashRequest()
	var kb KeyBuilder
	r.appendTo(&kb)
	k, _ := kb.Key()
	b.ReportMetric(float64(k.Len()), "key-bytes")
	b.ReportAllocs()
	for b.Loop() {
		r.appendTo(&kb)
		if _, err := kb.Key(); err != nil {
			b.Fatal(err)
		}
	}
}

// Hit path as the server sees it: build the request key, look it up.
func BenchmarkResultsGetHit(b *testing.B) {
	c, _ := NewResults(Config{})
	r := newFlashRequest()
	var kb KeyBuilder
	r.appendTo(&kb)
	k, _ := kb.Key()
	c.Put(k, make([]byte, 2048))
	b.ReportAllocs()
	for b.Loop() {
		r.appendTo(&kb)
		k, _ := kb.Key()
		if _, ok := c.Get(k); !ok {
			b.Fatal("miss")
		}
	}
}

func BenchmarkResultsDoHit(b *testing.B) {
	c, _ := NewResults(Config{})
	r := newFlashRequest()
	var kb KeyBuilder
	r.appendTo(&kb)
	k, _ := kb.Key()
	c.Put(k, make([]byte, 2048))
	ctx := context.Background()
	b.ReportAllocs()
	for b.Loop() {
		r.appendTo(&kb)
		k, _ := kb.Key()
		if _, hit, _, _ := c.Do(ctx, k, nil); !hit {
			b.Fatal("miss")
		}
	}
}

// Do on hit from all cores at once, each goroutine with its own builder:
// shows the cost of the shared mutex under contention.
func BenchmarkResultsDoHitParallel(b *testing.B) {
	c, _ := NewResults(Config{})
	const keys = 64
	reqs := make([]*flashRequest, keys)
	var kb KeyBuilder
	for i := range reqs {
		reqs[i] = newFlashRequest()
		reqs[i].t += float64(i)
		reqs[i].appendTo(&kb)
		k, _ := kb.Key()
		c.Put(k, make([]byte, 2048))
	}
	ctx := context.Background()
	b.ReportAllocs()
	b.RunParallel(func(pb *testing.PB) {
		var kb KeyBuilder
		i := 0
		for pb.Next() {
			reqs[i%keys].appendTo(&kb)
			k, _ := kb.Key()
			if _, hit, _, _ := c.Do(ctx, k, nil); !hit {
				b.Error("miss")
				return
			}
			i++
		}
	})
}

// Miss and store of a 2 KB value, in steady state (every store evicts).
func benchmarkMissStore(b *testing.B, viaDo bool) {
	c, _ := NewResults(Config{MaxEntries: 1024})
	r := newFlashRequest()
	value := make([]byte, 2048)
	ctx := context.Background()
	solve := func(context.Context) ([]byte, bool, error) { return value, true, nil }
	var kb KeyBuilder
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		r.t = 200 + float64(i)*1e-3
		i++
		r.appendTo(&kb)
		k, _ := kb.Key()
		if viaDo {
			if _, hit, _, err := c.Do(ctx, k, solve); hit || err != nil {
				b.Fatal("unexpected hit or error")
			}
		} else if !c.Put(k, value) {
			b.Fatal("not stored")
		}
	}
}

func BenchmarkResultsPutMiss(b *testing.B) { benchmarkMissStore(b, false) }
func BenchmarkResultsDoMiss(b *testing.B)  { benchmarkMissStore(b, true) }

// Heap cost of an entry holding a 2 KB value under a flash-request key,
// measured against the accounted size (key + value + EntryOverhead).
func BenchmarkResultsMemoryPerEntry(b *testing.B) {
	for _, n := range []int{1000, 10000} {
		b.Run(fmt.Sprintf("entries=%d", n), func(b *testing.B) {
			r := newFlashRequest()
			value := make([]byte, 2048)
			var kb KeyBuilder
			var heap, acct float64
			for b.Loop() {
				var before, after runtime.MemStats
				runtime.GC()
				runtime.ReadMemStats(&before)
				c, _ := NewResults(Config{MaxEntries: n})
				for i := 0; i < n; i++ {
					r.t = 200 + float64(i)*1e-3
					r.appendTo(&kb)
					k, _ := kb.Key()
					c.Put(k, value)
				}
				runtime.GC()
				runtime.ReadMemStats(&after)
				heap = float64(after.HeapAlloc-before.HeapAlloc) / float64(n)
				acct = float64(c.Stats().Bytes) / float64(n)
				runtime.KeepAlive(c)
			}
			b.ReportMetric(heap, "heap-B/entry")
			b.ReportMetric(acct, "accounted-B/entry")
		})
	}
}

func BenchmarkFluidsHit(b *testing.B) {
	c, _ := NewFluids[*compiled](FluidsConfig{})
	r := newFlashRequest()
	var kb KeyBuilder
	r.appendTo(&kb)
	k, _ := kb.Key()
	c.GetOrBuild(k, func() (*compiled, error) { return &compiled{}, nil })
	b.ReportAllocs()
	for b.Loop() {
		r.appendTo(&kb)
		k, _ := kb.Key()
		if _, err := c.GetOrBuild(k, nil); err != nil {
			b.Fatal(err)
		}
	}
}
