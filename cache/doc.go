// Package cache memoises fugad's answers: a bounded LRU of results under
// canonical request keys, a bounded LRU of compiled fluids, and the collapse
// of identical requests that arrive while the first is still being solved.
//
// # Overview
//
// The package knows nothing of thermodynamics, protobuf or metrics. It
// stores opaque values under keys the caller builds:
//
//   - [KeyBuilder] and [Key]: a canonical, injective byte encoding of the
//     values that determine an answer (request kind, fluid definition,
//     state, options, data/model version).
//   - [Results]: serialised responses ([]byte), so that a hit returns the
//     very bytes the miss produced and "same request, same bytes" holds
//     across cache hits. [Results.Do] looks up, or solves once for all
//     concurrent identical callers, and stores what the solver declares
//     cacheable; [Results.Bypass] solves without the cache.
//   - [Fluids]: compiled fluids of any type V, built once per definition
//     with [Fluids.GetOrBuild].
//   - [Quantize]: an optional coarsening of floating-point inputs so that
//     nearly equal requests share a key.
//
// Both caches expose plain counters ([Results.Stats], [Fluids.Stats]); the
// server publishes them as metrics.
//
// # Keys
//
// A key is the full encoded byte string, type-tagged and length-prefixed
// (the layout is given on [KeyBuilder]); two keys are equal only if they
// encode the same values in the same order. Floats are keyed by their exact
// IEEE 754 bits with −0 made equal to +0; NaN is rejected with a
// [*NaNError] because NaN must never reach a solver.
//
// A cache files an entry under a 64-bit hash of the key (seeded
// hash/maphash by default, replaceable with Config.Hash) and keeps one entry
// per hash. Every hit compares the full key, so a collision costs a miss but
// can never return another key's value; a store displaces an entry of
// another key with the same hash (counted in Stats.Collisions).
//
// Building a key and looking it up allocate nothing once a reused builder's
// buffer has grown: [KeyBuilder.Key] returns a view of the buffer, valid
// until the builder is next used, and the caches copy what they keep. Keep
// one KeyBuilder per goroutine or in a sync.Pool.
//
// # Bounds
//
// [Results] is bounded by entry count (Config.MaxEntries) and by accounted
// bytes (Config.MaxBytes): every entry is charged the size-class-rounded
// capacity of its key-and-value buffer plus the fixed [EntryOverhead] for the
// list element, header and map slot, an approximation of its real heap cost
// (BenchmarkResultsMemoryPerEntry reports the measured figure). Storing an
// entry evicts least recently used entries until both bounds hold; an entry
// that alone exceeds MaxBytes is not stored (Stats.Oversize) and evicts
// nothing. [Fluids] is bounded by count only. Lookups that hit make the
// entry most recently used; the LRU itself is
// github.com/hashicorp/golang-lru/v2/simplelru under the cache's own mutex,
// which also guards the byte account.
//
// # Concurrency
//
// All cache methods are safe for concurrent use; values are shared between
// callers and must be treated as read-only.
//
// Identical concurrent misses are collapsed with
// golang.org/x/sync/singleflight: the first caller starts the solve, later
// ones join it (Stats.Collapsed) and all receive the same value and error.
// Each caller waits with select on its own context and returns ctx.Err() as
// soon as that ends (Stats.Abandoned), so one client's short deadline never
// shortens another's. The shared solve therefore runs under a context of
// its own: it carries the first caller's values but no caller's deadline or
// cancellation, and it is cancelled only when the last waiting caller has
// left, so work that nobody wants any more stops and a later identical
// request starts afresh. A solve that finishes after its callers have gone
// still stores a cacheable result, which a client's retry then finds.
// Errors are never stored; neither are results the solver marks not
// cacheable (they are still shared with the callers waiting at the time).
// A panicking solve or build is recovered and returned to every waiter as
// a [*PanicError].
//
// # Quantisation
//
// Keys are exact by default: inputs that differ in the last bit are
// different requests. [Quantize] rounds a value to a logarithmic grid with
// relative spacing set by a tolerance, so that a digital twin's slowly
// drifting states share entries. It changes the answer, not only the key:
// the solve must use the quantised inputs to stay deterministic, and the
// answer is then that of an input perturbed by up to the tolerance. It is
// never applied unless the caller asks for it.
package cache
