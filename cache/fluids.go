package cache

import (
	"bytes"
	"context"
	"sync"
	"sync/atomic"

	"github.com/hashicorp/golang-lru/v2/simplelru"
)

// FluidStats is a snapshot of a [Fluids] cache's counters. Counters only
// grow; Entries is the current occupancy.
type FluidStats struct {
	Hits       uint64 // lookups answered from the cache
	Misses     uint64 // lookups that were not; a GetOrBuild miss then builds or joins a build
	Evictions  uint64 // fluids removed to respect MaxEntries
	Collisions uint64 // fluids displaced by a different key with the same hash
	Collapsed  uint64 // GetOrBuild misses that joined a build already in flight
	Entries    int    // fluids stored now
}

type fluidEntry[V any] struct {
	key   []byte
	value V
}

// Fluids is a bounded LRU cache of compiled fluids (or any value V that is
// costly to build from a definition and immutable once built), keyed like
// [Results] and bounded by entry count. Concurrent builds of the same key
// are collapsed into one. All methods are safe for concurrent use; stored
// values are shared between callers, so V must be safe to use concurrently
// (read-only after build).
type Fluids[V any] struct {
	hash HashFunc

	mu  sync.Mutex
	lru *simplelru.LRU[uint64, *fluidEntry[V]]

	flights flightGroup

	hits, misses, evictions, collisions, collapsed atomic.Uint64
}

// NewFluids returns an empty cache with the given bound.
func NewFluids[V any](cfg FluidsConfig) (*Fluids[V], error) {
	if cfg.MaxEntries < 0 {
		return nil, &ConfigError{Field: "MaxEntries", Value: int64(cfg.MaxEntries), Reason: "must not be negative (0 means the default)"}
	}
	n := cfg.MaxEntries
	if n == 0 {
		n = DefaultMaxFluids
	}
	c := &Fluids[V]{hash: cfg.Hash}
	if c.hash == nil {
		c.hash = newSeededHash()
	}
	lru, err := simplelru.NewLRU[uint64, *fluidEntry[V]](n, nil)
	if err != nil {
		return nil, err
	}
	c.lru = lru
	return c, nil
}

func (c *Fluids[V]) lookup(h uint64, key []byte) (V, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	e, ok := c.lru.Peek(h)
	if !ok || !bytes.Equal(e.key, key) {
		var zero V
		return zero, false
	}
	c.lru.Get(h)
	return e.value, true
}

func (c *Fluids[V]) store(h uint64, key []byte, v V) {
	e := &fluidEntry[V]{key: bytes.Clone(key), value: v}
	c.mu.Lock()
	defer c.mu.Unlock()
	if old, ok := c.lru.Peek(h); ok {
		if !bytes.Equal(old.key, key) {
			c.collisions.Add(1)
		}
		c.lru.Remove(h)
	}
	if c.lru.Add(h, e) {
		c.evictions.Add(1)
	}
}

// Get returns the fluid stored under key. A zero Key always misses, without
// being counted.
func (c *Fluids[V]) Get(key Key) (V, bool) {
	if key.IsZero() {
		var zero V
		return zero, false
	}
	v, ok := c.lookup(c.hash(key.enc), key.enc)
	if ok {
		c.hits.Add(1)
	} else {
		c.misses.Add(1)
	}
	return v, ok
}

// GetOrBuild returns the fluid stored under key, or builds and stores it.
// Concurrent calls with equal keys share one build and receive its value
// and error; errors are not stored. A build that panics gives every waiter
// a [*PanicError]. A hit allocates nothing.
func (c *Fluids[V]) GetOrBuild(key Key, build func() (V, error)) (V, error) {
	var zero V
	if key.IsZero() {
		return zero, ErrZeroKey
	}
	h := c.hash(key.enc)
	if v, ok := c.lookup(h, key.enc); ok {
		c.hits.Add(1)
		return v, nil
	}
	var late V
	_, ch, leader := c.flights.join(context.Background(), string(key.enc),
		func() bool {
			v, ok := c.lookup(h, key.enc)
			late = v
			return ok
		},
		func(context.Context) (any, error) {
			v, err := build()
			if err != nil {
				return nil, err
			}
			c.store(h, key.enc, v)
			return v, nil
		})
	if ch == nil {
		c.hits.Add(1)
		return late, nil
	}
	c.misses.Add(1)
	if !leader {
		c.collapsed.Add(1)
	}
	r := <-ch
	if r.Err != nil {
		return zero, r.Err
	}
	v, _ := r.Val.(V) // a nil interface V arrives as a nil any
	return v, nil
}

// Purge removes every fluid; it does not count them as evictions.
func (c *Fluids[V]) Purge() {
	c.mu.Lock()
	c.lru.Purge()
	c.mu.Unlock()
}

// Stats returns a snapshot of the counters and the current occupancy.
func (c *Fluids[V]) Stats() FluidStats {
	c.mu.Lock()
	n := c.lru.Len()
	c.mu.Unlock()
	return FluidStats{
		Hits:       c.hits.Load(),
		Misses:     c.misses.Load(),
		Evictions:  c.evictions.Load(),
		Collisions: c.collisions.Load(),
		Collapsed:  c.collapsed.Load(),
		Entries:    n,
	}
}
