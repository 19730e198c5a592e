package cache

import (
	"bytes"
	"context"
	"runtime/debug"
	"slices"
	"sync"
	"sync/atomic"

	"github.com/hashicorp/golang-lru/v2/simplelru"
)

// SolveFunc computes the value for a key on a miss. It reports whether the
// value may be stored: a result that depends on something outside the key
// (a warm start that changed the path, a partial answer) must say false.
// Errors are never stored, whatever cacheable says.
//
// ctx is the shared solve's own context, not any single caller's: it carries
// the values of the caller that started the solve but none of its deadline,
// and it is cancelled once every caller waiting on the solve has left (each
// at its own deadline) so that unwanted work stops. A SolveFunc should honour
// it inside its loops.
type SolveFunc func(ctx context.Context) (value []byte, cacheable bool, err error)

// Stats is a snapshot of a [Results] cache's counters. Counters only grow;
// Entries and Bytes are the current occupancy.
type Stats struct {
	Hits       uint64 // lookups (Get or Do) answered from the cache
	Misses     uint64 // lookups that were not; a Do miss then solves or joins a solve
	Evictions  uint64 // entries removed to respect MaxEntries or MaxBytes
	Collisions uint64 // entries displaced by a different key with the same hash
	Oversize   uint64 // values not stored because the entry alone exceeds MaxBytes
	Collapsed  uint64 // Do misses that joined a solve already in flight instead of starting one
	Abandoned  uint64 // Do calls that returned at their own context's end before the solve did
	Bypassed   uint64 // Bypass calls (neither looked up nor stored)
	Entries    int    // entries stored now
	Bytes      int64  // accounted bytes stored now (see EntryOverhead)
}

// resultEntry is one stored result. key and value share one allocation.
type resultEntry struct {
	key   []byte
	value []byte
	size  int64
}

// Results is a bounded LRU cache of opaque results (typically serialised
// responses) under canonical keys, with collapse of identical concurrent
// solves. It is bounded both by entry count and by accounted bytes; see the
// package documentation. All methods are safe for concurrent use.
//
// Values are stored as copies and handed out shared: a slice returned by Get
// or Do must not be modified.
type Results struct {
	hash       HashFunc
	maxEntries int
	maxBytes   int64

	mu    sync.Mutex
	lru   *simplelru.LRU[uint64, *resultEntry]
	bytes int64

	flights flightGroup

	hits, misses, evictions, collisions, oversize, collapsed, abandoned, bypassed atomic.Uint64
}

// NewResults returns an empty cache with the given bounds.
func NewResults(cfg Config) (*Results, error) {
	if cfg.MaxEntries < 0 {
		return nil, &ConfigError{Field: "MaxEntries", Value: int64(cfg.MaxEntries), Reason: "must not be negative (0 means the default)"}
	}
	if cfg.MaxBytes < 0 {
		return nil, &ConfigError{Field: "MaxBytes", Value: cfg.MaxBytes, Reason: "must not be negative (0 means the default)"}
	}
	c := &Results{hash: cfg.Hash, maxEntries: cfg.MaxEntries, maxBytes: cfg.MaxBytes}
	if c.hash == nil {
		c.hash = newSeededHash()
	}
	if c.maxEntries == 0 {
		c.maxEntries = DefaultMaxEntries
	}
	if c.maxBytes == 0 {
		c.maxBytes = DefaultMaxBytes
	}
	// The callback runs for every removal (bound, collision, replacement,
	// purge), always with c.mu held, and keeps the byte account.
	lru, err := simplelru.NewLRU(c.maxEntries, func(_ uint64, e *resultEntry) { c.bytes -= e.size })
	if err != nil {
		return nil, err
	}
	c.lru = lru
	return c, nil
}

// MaxEntries returns the entry bound in force.
func (c *Results) MaxEntries() int { return c.maxEntries }

// MaxBytes returns the byte bound in force.
func (c *Results) MaxBytes() int64 { return c.maxBytes }

// lookup returns the value stored under exactly key and marks it most
// recently used. An entry filed under the same hash for another key is a
// miss and keeps its place in the LRU order.
func (c *Results) lookup(h uint64, key []byte) ([]byte, bool) {
	c.mu.Lock()
	defer c.mu.Unlock()
	e, ok := c.lru.Peek(h)
	if !ok || !bytes.Equal(e.key, key) {
		return nil, false
	}
	c.lru.Get(h)
	return e.value, true
}

// Get returns the value stored under key. The returned slice is shared and
// must not be modified. A zero Key always misses, without being counted.
func (c *Results) Get(key Key) ([]byte, bool) {
	if key.IsZero() {
		return nil, false
	}
	v, ok := c.lookup(c.hash(key.enc), key.enc)
	if ok {
		c.hits.Add(1)
	} else {
		c.misses.Add(1)
	}
	return v, ok
}

// Put stores a copy of value under key, evicting least recently used entries
// as needed to respect both bounds, and reports whether it was stored. It
// refuses a zero Key and an entry whose own accounted size (see
// [EntryOverhead]) exceeds MaxBytes; such an entry evicts nothing.
func (c *Results) Put(key Key, value []byte) bool {
	if key.IsZero() {
		return false
	}
	return c.store(c.hash(key.enc), key.enc, value)
}

func (c *Results) store(h uint64, key, value []byte) bool {
	n := len(key) + len(value)
	if int64(n)+EntryOverhead > c.maxBytes {
		c.oversize.Add(1)
		return false
	}
	// One buffer for key and value; slices.Grow rounds its capacity up to
	// the allocator's size class, which is what the entry really occupies.
	buf := slices.Grow([]byte(nil), n)[:n]
	size := int64(cap(buf)) + EntryOverhead
	if size > c.maxBytes {
		c.oversize.Add(1)
		return false
	}
	nk := copy(buf, key)
	copy(buf[nk:], value)
	e := &resultEntry{key: buf[:nk:nk], value: buf[nk:n:n], size: size}

	c.mu.Lock()
	defer c.mu.Unlock()
	if old, ok := c.lru.Peek(h); ok {
		if !bytes.Equal(old.key, key) {
			c.collisions.Add(1)
		}
		c.lru.Remove(h)
	}
	for c.bytes+size > c.maxBytes {
		if _, _, ok := c.lru.RemoveOldest(); !ok {
			break
		}
		c.evictions.Add(1)
	}
	c.bytes += size
	if c.lru.Add(h, e) {
		c.evictions.Add(1)
	}
	return true
}

// Do returns the value for key from the cache, or solves it. Concurrent
// calls with equal keys share one solve: the first starts it and the others
// wait for its result (shared reports that this call received another
// call's result). The result is stored when solve returns no error and says
// it is cacheable; every waiter receives the same value and error either
// way.
//
// Each caller waits only as long as its own ctx allows: when ctx ends first,
// Do returns ctx.Err() (context.DeadlineExceeded or context.Canceled) at once
// while the solve goes on for the others. The solve runs with its own
// context (see [SolveFunc]), cancelled only when every waiter has left. A
// solve that panics gives every waiter a [*PanicError].
//
// A hit costs one hash of the key, one map lookup and one full-key
// comparison, and allocates nothing.
func (c *Results) Do(ctx context.Context, key Key, solve SolveFunc) (value []byte, hit, shared bool, err error) {
	if key.IsZero() {
		return nil, false, false, ErrZeroKey
	}
	h := c.hash(key.enc)
	if v, ok := c.lookup(h, key.enc); ok {
		c.hits.Add(1)
		return v, true, false, nil
	}
	if err := ctx.Err(); err != nil {
		c.misses.Add(1)
		return nil, false, false, err
	}
	k := string(key.enc)
	var late []byte
	f, ch, leader := c.flights.join(ctx, k,
		func() bool {
			v, ok := c.lookup(h, key.enc)
			late = v
			return ok
		},
		func(fctx context.Context) (any, error) {
			v, cacheable, err := solve(fctx)
			if err == nil && cacheable {
				c.store(h, []byte(k), v)
			}
			return v, err
		})
	if ch == nil {
		c.hits.Add(1)
		return late, true, false, nil
	}
	c.misses.Add(1)
	if !leader {
		c.collapsed.Add(1)
	}
	select {
	case r := <-ch:
		v, _ := r.Val.([]byte)
		return v, false, !leader, r.Err
	case <-ctx.Done():
		select {
		case r := <-ch:
			v, _ := r.Val.([]byte)
			return v, false, !leader, r.Err
		default:
		}
		c.flights.leave(f, k)
		c.abandoned.Add(1)
		return nil, false, !leader, ctx.Err()
	}
}

// Bypass runs solve with the caller's own ctx and returns its result,
// neither looking the key up nor storing the value nor joining identical
// solves in flight; for callers that ask for a fresh computation. A panic in
// solve is returned as a [*PanicError].
func (c *Results) Bypass(ctx context.Context, solve SolveFunc) (value []byte, err error) {
	c.bypassed.Add(1)
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	defer func() {
		if r := recover(); r != nil {
			value, err = nil, &PanicError{Value: r, Stack: debug.Stack()}
		}
	}()
	value, _, err = solve(ctx)
	return value, err
}

// Purge removes every entry; it does not count them as evictions. Solves in
// flight are not affected and may store their results afterwards.
func (c *Results) Purge() {
	c.mu.Lock()
	c.lru.Purge()
	c.mu.Unlock()
}

// Stats returns a snapshot of the counters and the current occupancy.
// Counters are read one by one, so a snapshot taken under load may be off
// by the operations in progress.
func (c *Results) Stats() Stats {
	c.mu.Lock()
	n, b := c.lru.Len(), c.bytes
	c.mu.Unlock()
	return Stats{
		Hits:       c.hits.Load(),
		Misses:     c.misses.Load(),
		Evictions:  c.evictions.Load(),
		Collisions: c.collisions.Load(),
		Oversize:   c.oversize.Load(),
		Collapsed:  c.collapsed.Load(),
		Abandoned:  c.abandoned.Load(),
		Bypassed:   c.bypassed.Load(),
		Entries:    n,
		Bytes:      b,
	}
}
