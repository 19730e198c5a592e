package cache

import (
	"bytes"
	"errors"
	"fmt"
	"testing"
)

func intKey(t testing.TB, i int) Key {
	return build(t, func(b *KeyBuilder) { b.AppendString("k"); b.AppendInt64(int64(i)) })
}

func valueFor(i, n int) []byte {
	return bytes.Repeat([]byte{byte(i), byte(i >> 8), byte(i >> 16)}, n)
}

func newResults(t testing.TB, cfg Config) *Results {
	t.Helper()
	c, err := NewResults(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// accounted recomputes the byte account from the stored entries, checking
// that each is charged at least its key, value and EntryOverhead.
func accounted(t testing.TB, c *Results) (sum int64) {
	t.Helper()
	c.mu.Lock()
	defer c.mu.Unlock()
	for _, e := range c.lru.Values() {
		if min := int64(len(e.key)+len(e.value)) + EntryOverhead; e.size < min {
			t.Errorf("entry charged %d bytes, less than its %d", e.size, min)
		}
		sum += e.size
	}
	return sum
}

func TestResultsHitIsByteIdentical(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	miss := valueFor(7, 700)
	want := bytes.Clone(miss)
	if !c.Put(k, miss) {
		t.Fatal("Put refused")
	}
	miss[0] ^= 0xff // the cache keeps its own copy
	got, ok := c.Get(k)
	if !ok || !bytes.Equal(got, want) {
		t.Fatalf("hit = %v, %x…; want the stored bytes", ok, got[:4])
	}
	if _, ok := c.Get(intKey(t, 2)); ok {
		t.Fatal("hit for a key never stored")
	}
	st := c.Stats()
	if st.Hits != 1 || st.Misses != 1 || st.Entries != 1 || st.Bytes != accounted(t, c) || st.Bytes < int64(k.Len()+len(want)+EntryOverhead) {
		t.Fatalf("stats %+v", st)
	}
}

func TestResultsEvictsLeastRecentlyUsedByCount(t *testing.T) {
	c := newResults(t, Config{MaxEntries: 3})
	for i := 0; i < 3; i++ {
		c.Put(intKey(t, i), valueFor(i, 1))
	}
	c.Get(intKey(t, 0)) // order now, oldest first: 1, 2, 0
	c.Put(intKey(t, 3), valueFor(3, 1))
	c.Put(intKey(t, 4), valueFor(4, 1))
	for i, want := range []bool{true, false, false, true, true} {
		if _, ok := c.Get(intKey(t, i)); ok != want {
			t.Errorf("key %d present = %v, want %v", i, ok, want)
		}
	}
	if st := c.Stats(); st.Evictions != 2 || st.Entries != 3 {
		t.Errorf("stats %+v, want 2 evictions, 3 entries", st)
	}
}

func TestResultsByteBound(t *testing.T) {
	// Key and value together fill 4096 bytes, a power of two and so an exact
	// allocator size class: each entry is charged 4096 + EntryOverhead.
	k0 := intKey(t, 0)
	valueLen := 4096 - k0.Len()
	entry := int64(4096 + EntryOverhead)
	c := newResults(t, Config{MaxEntries: 1000, MaxBytes: 4*entry + entry/2}) // room for 4
	for i := 0; i < 4; i++ {
		c.Put(intKey(t, i), bytes.Repeat([]byte{byte(i)}, valueLen))
	}
	if st := c.Stats(); st.Entries != 4 || st.Evictions != 0 || st.Bytes != 4*entry {
		t.Fatalf("after 4 entries: %+v, want %d bytes", st, 4*entry)
	}
	// A value filling 12288 bytes (also a size class) is charged
	// 3·entry − 2·EntryOverhead: it fits once the three oldest are gone,
	// and not before.
	big := bytes.Repeat([]byte{9}, 12288-k0.Len())
	if !c.Put(intKey(t, 9), big) {
		t.Fatal("big value refused")
	}
	for i, want := range []bool{false, false, false, true} {
		if _, ok := c.Get(intKey(t, i)); ok != want {
			t.Errorf("key %d present = %v, want %v", i, ok, want)
		}
	}
	st := c.Stats()
	if st.Evictions != 3 || st.Entries != 2 || st.Bytes > c.MaxBytes() || st.Bytes != accounted(t, c) {
		t.Errorf("after big value: %+v (accounted %d, bound %d)", st, accounted(t, c), c.MaxBytes())
	}

	// An entry larger than the whole bound is not stored and evicts nothing.
	for _, n := range []int64{c.MaxBytes(), c.MaxBytes() - EntryOverhead - int64(k0.Len()) - 1} {
		if c.Put(intKey(t, 10), make([]byte, n)) {
			t.Errorf("oversize value of %d bytes stored", n)
		}
	}
	if _, ok := c.Get(intKey(t, 10)); ok {
		t.Error("oversize value found")
	}
	if st2 := c.Stats(); st2.Entries != 2 || st2.Oversize != 2 || st2.Evictions != 3 {
		t.Errorf("after oversize values: %+v", st2)
	}
}

func TestResultsReplaceSameKey(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	c.Put(k, valueFor(1, 100))
	c.Put(k, valueFor(2, 10))
	got, _ := c.Get(k)
	st := c.Stats()
	if !bytes.Equal(got, valueFor(2, 10)) || st.Entries != 1 || st.Evictions != 0 || st.Collisions != 0 || st.Bytes != accounted(t, c) {
		t.Errorf("after replacement: %+v, value %x", st, got)
	}
}

// With every key hashed to the same few slots, lookups must still never
// return another key's value: a hit is either absent or the right value.
func TestResultsForcedCollisions(t *testing.T) {
	for _, slots := range []uint64{1, 3} {
		t.Run(fmt.Sprintf("slots=%d", slots), func(t *testing.T) {
			c := newResults(t, Config{Hash: func(k []byte) uint64 { return uint64(len(k)+int(k[len(k)-1])) % slots }})
			const n = 300
			for i := 0; i < n; i++ {
				if !c.Put(intKey(t, i), valueFor(i, 5)) {
					t.Fatal("Put refused")
				}
				for j := 0; j <= i; j++ {
					if v, ok := c.Get(intKey(t, j)); ok && !bytes.Equal(v, valueFor(j, 5)) {
						t.Fatalf("key %d returned the value of another key", j)
					}
				}
			}
			st := c.Stats()
			if st.Entries > int(slots) || st.Collisions < n-slots || st.Bytes != accounted(t, c) {
				t.Errorf("stats %+v", st)
			}
			// The last key stored is still found.
			if v, ok := c.Get(intKey(t, n-1)); !ok || !bytes.Equal(v, valueFor(n-1, 5)) {
				t.Errorf("last stored key not found")
			}
		})
	}
}

func TestResultsZeroKeyAndConfig(t *testing.T) {
	c := newResults(t, Config{})
	if c.Put(Key{}, []byte("x")) {
		t.Error("zero Key stored")
	}
	if _, ok := c.Get(Key{}); ok {
		t.Error("zero Key hit")
	}
	if c.MaxEntries() != DefaultMaxEntries || c.MaxBytes() != DefaultMaxBytes {
		t.Errorf("defaults %d, %d", c.MaxEntries(), c.MaxBytes())
	}
	for _, cfg := range []Config{{MaxEntries: -1}, {MaxBytes: -5}} {
		_, err := NewResults(cfg)
		var ce *ConfigError
		if !errors.As(err, &ce) || ce.Value >= 0 || ce.Field == "" {
			t.Errorf("NewResults(%+v) error = %v, want *ConfigError", cfg, err)
		}
	}
	if _, err := NewFluids[int](FluidsConfig{MaxEntries: -1}); err == nil {
		t.Error("NewFluids accepted a negative bound")
	}
}

func TestResultsPurge(t *testing.T) {
	c := newResults(t, Config{})
	for i := 0; i < 10; i++ {
		c.Put(intKey(t, i), valueFor(i, 10))
	}
	c.Purge()
	if st := c.Stats(); st.Entries != 0 || st.Bytes != 0 || st.Evictions != 0 {
		t.Errorf("after Purge: %+v", st)
	}
}
