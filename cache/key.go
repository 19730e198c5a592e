package cache

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"slices"
)

// keyFormat is the first byte of every encoded key. It versions the
// encoding: a change to the layout below changes this byte, so keys of two
// layouts can never be confused.
const keyFormat byte = 1

// Type tags. Every appended value starts with one of these bytes, so a value
// of one type can never be read as the start of a value of another.
const (
	tagFloat64  byte = 'f'
	tagFloat64s byte = 'F'
	tagInt64    byte = 'i'
	tagUint64   byte = 'u'
	tagBool     byte = 'b'
	tagString   byte = 's'
	tagBytes    byte = 'y'
)

// Key is the canonical encoding of a request or fluid definition: the full
// encoded bytes are its identity. Caches look a Key up by a 64-bit hash of
// those bytes and then compare the bytes in full, so two different keys never
// share a value even when their hashes collide.
//
// A Key returned by [KeyBuilder.Key] is a view of the builder's buffer: it is
// valid until the builder is next appended to or reset, which makes building
// and looking up a key allocation-free. Caches copy the bytes they retain.
// Use [Key.Clone] to keep a Key beyond the builder's next use.
//
// The zero Key is not a valid key: [Results.Get] and [Fluids.Get] miss on it,
// [Results.Put] refuses it and [Results.Do] and [Fluids.GetOrBuild] return
// [ErrZeroKey].
type Key struct {
	enc []byte
}

// IsZero reports whether k is the zero Key.
func (k Key) IsZero() bool { return len(k.enc) == 0 }

// Len returns the length in bytes of the encoding of k; this is the key's
// share of an entry's accounted size (see [EntryOverhead]).
func (k Key) Len() int { return len(k.enc) }

// Equal reports whether k and o encode the same sequence of values.
func (k Key) Equal(o Key) bool { return bytes.Equal(k.enc, o.enc) }

// Clone returns a Key that owns a copy of k's bytes and stays valid after the
// builder that produced k is reused.
func (k Key) Clone() Key {
	if k.IsZero() {
		return Key{}
	}
	return Key{enc: bytes.Clone(k.enc)}
}

// KeyBuilder appends typed values to a canonical key encoding.
//
// Encoding: a format byte, then for every appended value a type tag followed
// by its payload, all integers little-endian:
//
//	float64          'f' + 8 bytes of IEEE 754 bits (−0 written as +0)
//	[]float64        'F' + uvarint length + 8 bytes per element
//	int64, uint64    'i' or 'u' + 8 bytes (two's complement for int64)
//	bool             'b' + 1 byte (0 or 1)
//	string, []byte   's' or 'y' + uvarint length + the bytes
//
// Every payload is either fixed-size for its tag or length-prefixed, so the
// encoding is a prefix code: two different sequences of appended values
// always give different bytes, and the same sequence always gives the same
// bytes on every run and platform. The caller decides the order and meaning
// of the values (for example a request kind string first, then the fluid,
// then the state); appending the same values in another order gives another
// key.
//
// Floating-point values are keyed by their exact bit pattern, so values that
// differ in the last bit are different keys (see [Quantize] for an optional
// coarsening). The one exception is zero: −0 and +0 compare equal and give
// the same key. NaN is rejected rather than canonicalised, because NaN must
// never reach a solver: appending a NaN (any payload, quiet or signalling)
// records a [*NaNError], later appends are ignored, and [KeyBuilder.Key]
// returns that error. ±Inf are keyed by their bits like any other value;
// rejecting them is the input validator's job.
//
// The zero value is ready to use. A KeyBuilder is not safe for concurrent
// use; keep one per goroutine (for example in a sync.Pool) and call
// [KeyBuilder.Reset] between keys, so the buffer's capacity is reused and
// appends allocate nothing once it has grown to the largest key seen.
type KeyBuilder struct {
	buf []byte
	n   int // values appended since Reset
	err error
}

// NaNError reports a NaN appended to a [KeyBuilder].
type NaNError struct {
	// Value is the position of the offending append among the values
	// appended since the last Reset, counting from 0.
	Value int
	// Element is the index of the NaN inside a slice appended with
	// AppendFloat64s, or −1 for a scalar.
	Element int
	// Bits is the IEEE 754 bit pattern of the NaN, payload included.
	Bits uint64
}

// Error implements the error interface.
func (e *NaNError) Error() string {
	if e.Element < 0 {
		return fmt.Sprintf("cache: key value %d is NaN (bits %#016x); NaN cannot be part of a key", e.Value, e.Bits)
	}
	return fmt.Sprintf("cache: key value %d, element %d is NaN (bits %#016x); NaN cannot be part of a key", e.Value, e.Element, e.Bits)
}

// Reset empties the builder for a new key, keeping its buffer's capacity. Any
// Key previously returned by the builder becomes invalid.
func (b *KeyBuilder) Reset() {
	b.buf = b.buf[:0]
	b.n = 0
	b.err = nil
}

// Grow makes room for at least n more encoded bytes without another
// allocation.
func (b *KeyBuilder) Grow(n int) {
	b.buf = slices.Grow(b.buf, n+1)
}

// begin writes the format byte on the first append and reports whether the
// builder still accepts values.
func (b *KeyBuilder) begin() bool {
	if b.err != nil {
		return false
	}
	if len(b.buf) == 0 {
		b.buf = append(b.buf, keyFormat)
	}
	b.n++
	return true
}

// floatBits returns the bits keyed for x: the IEEE 754 pattern, with −0 made
// equal to +0.
func floatBits(x float64) uint64 {
	if x == 0 {
		return 0
	}
	return math.Float64bits(x)
}

// AppendFloat64 appends x by its exact bit pattern (−0 as +0). A NaN is
// recorded as a [*NaNError] instead.
func (b *KeyBuilder) AppendFloat64(x float64) {
	if !b.begin() {
		return
	}
	if x != x {
		b.err = &NaNError{Value: b.n - 1, Element: -1, Bits: math.Float64bits(x)}
		return
	}
	b.buf = append(b.buf, tagFloat64)
	b.buf = binary.LittleEndian.AppendUint64(b.buf, floatBits(x))
}

// AppendFloat64s appends the length of xs and then each element by its exact
// bit pattern (−0 as +0). A NaN anywhere in xs is recorded as a [*NaNError]
// instead. A nil and an empty slice give the same key.
func (b *KeyBuilder) AppendFloat64s(xs []float64) {
	if !b.begin() {
		return
	}
	for i, x := range xs {
		if x != x {
			b.err = &NaNError{Value: b.n - 1, Element: i, Bits: math.Float64bits(x)}
			return
		}
	}
	b.buf = slices.Grow(b.buf, 1+binary.MaxVarintLen64+8*len(xs))
	b.buf = append(b.buf, tagFloat64s)
	b.buf = binary.AppendUvarint(b.buf, uint64(len(xs)))
	for _, x := range xs {
		b.buf = binary.LittleEndian.AppendUint64(b.buf, floatBits(x))
	}
}

// AppendInt64 appends v.
func (b *KeyBuilder) AppendInt64(v int64) {
	if !b.begin() {
		return
	}
	b.buf = append(b.buf, tagInt64)
	b.buf = binary.LittleEndian.AppendUint64(b.buf, uint64(v))
}

// AppendUint64 appends v. It is a different key from AppendInt64 of the same
// number.
func (b *KeyBuilder) AppendUint64(v uint64) {
	if !b.begin() {
		return
	}
	b.buf = append(b.buf, tagUint64)
	b.buf = binary.LittleEndian.AppendUint64(b.buf, v)
}

// AppendBool appends v.
func (b *KeyBuilder) AppendBool(v bool) {
	if !b.begin() {
		return
	}
	var c byte
	if v {
		c = 1
	}
	b.buf = append(b.buf, tagBool, c)
}

// AppendString appends the length of s and its bytes.
func (b *KeyBuilder) AppendString(s string) {
	if !b.begin() {
		return
	}
	b.buf = append(b.buf, tagString)
	b.buf = binary.AppendUvarint(b.buf, uint64(len(s)))
	b.buf = append(b.buf, s...)
}

// AppendBytes appends the length of p and its bytes, for example a
// deterministic serialisation of a nested message. It is a different key
// from AppendString of the same bytes.
func (b *KeyBuilder) AppendBytes(p []byte) {
	if !b.begin() {
		return
	}
	b.buf = append(b.buf, tagBytes)
	b.buf = binary.AppendUvarint(b.buf, uint64(len(p)))
	b.buf = append(b.buf, p...)
}

// Err returns the first error recorded since the last Reset, or nil.
func (b *KeyBuilder) Err() error { return b.err }

// Len returns the number of bytes encoded so far.
func (b *KeyBuilder) Len() int {
	if len(b.buf) == 0 {
		return 1
	}
	return len(b.buf)
}

// Key returns the key built so far, as a view of the builder's buffer (see
// [Key]), or the zero Key and the first recorded error. It does not allocate
// once the buffer has grown.
func (b *KeyBuilder) Key() (Key, error) {
	if b.err != nil {
		return Key{}, b.err
	}
	if len(b.buf) == 0 {
		b.buf = append(b.buf, keyFormat)
	}
	return Key{enc: b.buf}, nil
}
