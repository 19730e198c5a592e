package cache

import (
	"errors"
	"fmt"
	"hash/maphash"
)

// HashFunc maps the full encoding of a [Key] to the 64-bit hash under which
// the caches file it. It must be deterministic for the life of the cache and
// safe for concurrent use. A poor hash costs hit rate, never correctness:
// every hit is confirmed by comparing the full key.
type HashFunc func(key []byte) uint64

// newSeededHash returns the default HashFunc: hash/maphash with a seed drawn
// once per cache, so the hash of a key cannot be predicted from outside the
// process (no crafted collisions) and costs a few nanoseconds per 100 bytes.
func newSeededHash() HashFunc {
	seed := maphash.MakeSeed()
	return func(key []byte) uint64 { return maphash.Bytes(seed, key) }
}

// Defaults used when a configuration field is zero.
const (
	// DefaultMaxEntries is the entry bound of a Results cache.
	DefaultMaxEntries = 16384
	// DefaultMaxBytes is the byte bound of a Results cache (64 MiB).
	DefaultMaxBytes int64 = 64 << 20
	// DefaultMaxFluids is the entry bound of a Fluids cache.
	DefaultMaxFluids = 256
)

// EntryOverhead is the fixed number of bytes charged to every entry of a
// Results cache on top of its buffer. An entry is accounted as
//
//	size = cap(buffer) + EntryOverhead
//
// where the buffer holds the key and the value and its capacity is their
// total length rounded up to the allocator's size class (so a 2 KB value
// under a 400-byte flash key is charged 2688 + EntryOverhead bytes). The
// overhead approximates the rest on 64-bit platforms: the LRU list element
// (80 bytes, unused expiry fields included), the entry header (48) and the
// entry's share of the LRU's hash map (about 20 to 50 bytes with its load).
// BenchmarkResultsMemoryPerEntry compares the account with the measured heap.
const EntryOverhead = 176

// Config sets the bounds of a [Results] cache. The zero value is valid and
// gives the defaults.
type Config struct {
	// MaxEntries bounds the number of stored results. Zero means
	// DefaultMaxEntries; it must not be negative.
	MaxEntries int
	// MaxBytes bounds the accounted size of all entries (key and value
	// bytes rounded up to the allocator's size class, plus EntryOverhead,
	// each). Zero means DefaultMaxBytes; it must not be
	// negative. An entry whose own size exceeds MaxBytes is not stored.
	MaxBytes int64
	// Hash replaces the default seeded hash/maphash. Nil means the default.
	// Tests use a deliberately weak hash to force collisions.
	Hash HashFunc
}

// FluidsConfig sets the bounds of a [Fluids] cache. The zero value is valid
// and gives the defaults.
type FluidsConfig struct {
	// MaxEntries bounds the number of stored fluids. Zero means
	// DefaultMaxFluids; it must not be negative. Compiled fluids are small
	// and few, so this cache is bounded by count only.
	MaxEntries int
	// Hash replaces the default seeded hash/maphash. Nil means the default.
	Hash HashFunc
}

// ConfigError reports an invalid configuration field.
type ConfigError struct {
	Field  string // name of the Config or FluidsConfig field
	Value  int64  // the value given
	Reason string // why it was refused
}

// Error implements the error interface.
func (e *ConfigError) Error() string {
	return fmt.Sprintf("cache: %s = %d: %s", e.Field, e.Value, e.Reason)
}

// ErrZeroKey is returned when a zero [Key] (typically one from a builder
// that recorded an error that was not checked) is used to solve or build.
var ErrZeroKey = errors.New("cache: zero Key (the KeyBuilder error was not checked?)")

// PanicError is returned to every caller waiting on a solve or build that
// panicked. The panic is recovered so that it neither kills the process
// nor leaves the waiters blocked; nothing is stored.
type PanicError struct {
	Value any    // the value passed to panic
	Stack []byte // the stack of the panicking goroutine
}

// Error implements the error interface.
func (e *PanicError) Error() string {
	return fmt.Sprintf("cache: panic in solve or build: %v", e.Value)
}

// Unwrap returns the panic value when it is an error.
func (e *PanicError) Unwrap() error {
	err, _ := e.Value.(error)
	return err
}
