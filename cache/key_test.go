package cache

import (
	"bytes"
	"errors"
	"math"
	"testing"
)

// build returns an owned key built by f.
func build(t testing.TB, f func(b *KeyBuilder)) Key {
	t.Helper()
	var b KeyBuilder
	f(&b)
	k, err := b.Key()
	if err != nil {
		t.Fatalf("Key: %v", err)
	}
	return k.Clone()
}

func TestKeyDeterministic(t *testing.T) {
	f := func(b *KeyBuilder) {
		b.AppendString("flash/tp")
		b.AppendFloat64s([]float64{0.9, 0.05, 0.05})
		b.AppendFloat64(300.15)
		b.AppendFloat64(5e6)
		b.AppendInt64(-3)
		b.AppendUint64(7)
		b.AppendBool(true)
		b.AppendBytes([]byte{0, 1, 2})
	}
	k1, k2 := build(t, f), build(t, f)
	if !k1.Equal(k2) {
		t.Fatalf("same values gave different keys:\n%x\n%x", k1.enc, k2.enc)
	}
	// The layout is documented on KeyBuilder; pin the start of it.
	if k1.enc[0] != keyFormat || k1.enc[1] != tagString || k1.enc[2] != byte(len("flash/tp")) {
		t.Fatalf("unexpected encoding prefix % x", k1.enc[:3])
	}
}

// Pairs of value sequences that a careless encoding (no type tags, no length
// prefixes, −0 ≠ +0 by bits) would confuse. Each pair must give different
// keys.
func TestKeyInjective(t *testing.T) {
	cases := []struct {
		name string
		a, b func(*KeyBuilder)
	}{
		{"string split", func(b *KeyBuilder) { b.AppendString("ab"); b.AppendString("c") },
			func(b *KeyBuilder) { b.AppendString("a"); b.AppendString("bc") }},
		{"string vs bytes", func(b *KeyBuilder) { b.AppendString("ab") },
			func(b *KeyBuilder) { b.AppendBytes([]byte("ab")) }},
		{"int vs uint", func(b *KeyBuilder) { b.AppendInt64(1) },
			func(b *KeyBuilder) { b.AppendUint64(1) }},
		{"float vs uint of same bits", func(b *KeyBuilder) { b.AppendFloat64(1) },
			func(b *KeyBuilder) { b.AppendUint64(math.Float64bits(1)) }},
		{"slice split", func(b *KeyBuilder) { b.AppendFloat64s([]float64{1, 2}); b.AppendFloat64s(nil) },
			func(b *KeyBuilder) { b.AppendFloat64s([]float64{1}); b.AppendFloat64s([]float64{2}) }},
		{"slice vs scalars", func(b *KeyBuilder) { b.AppendFloat64s([]float64{1, 2}) },
			func(b *KeyBuilder) { b.AppendFloat64(1); b.AppendFloat64(2) }},
		{"empty string vs nothing", func(b *KeyBuilder) { b.AppendString("") },
			func(b *KeyBuilder) {}},
		{"bool", func(b *KeyBuilder) { b.AppendBool(false) },
			func(b *KeyBuilder) { b.AppendBool(true) }},
		{"last bit", func(b *KeyBuilder) { b.AppendFloat64(1) },
			func(b *KeyBuilder) { b.AppendFloat64(math.Nextafter(1, 2)) }},
		{"order", func(b *KeyBuilder) { b.AppendFloat64(300); b.AppendFloat64(1e5) },
			func(b *KeyBuilder) { b.AppendFloat64(1e5); b.AppendFloat64(300) }},
		{"+Inf vs -Inf", func(b *KeyBuilder) { b.AppendFloat64(math.Inf(1)) },
			func(b *KeyBuilder) { b.AppendFloat64(math.Inf(-1)) }},
	}
	for _, tc := range cases {
		if ka, kb := build(t, tc.a), build(t, tc.b); ka.Equal(kb) {
			t.Errorf("%s: different values gave the same key %x", tc.name, ka.enc)
		}
	}
}

func TestKeySignedZero(t *testing.T) {
	negZero := math.Copysign(0, -1)
	if math.Signbit(negZero) == false {
		t.Fatal("test setup: no negative zero")
	}
	a := build(t, func(b *KeyBuilder) { b.AppendFloat64(negZero); b.AppendFloat64s([]float64{1, negZero}) })
	z := build(t, func(b *KeyBuilder) { b.AppendFloat64(0); b.AppendFloat64s([]float64{1, 0}) })
	if !a.Equal(z) {
		t.Fatalf("−0 and +0 gave different keys:\n%x\n%x", a.enc, z.enc)
	}
}

// Every NaN, whatever its payload or sign, is rejected and reported with its
// bits; the builder then ignores further values until Reset.
func TestKeyNaNRejected(t *testing.T) {
	nans := []uint64{
		0x7ff8000000000001, // math.NaN() in Go
		0x7ff8000000000000, // default quiet NaN of x86 arithmetic
		0xfff8000000000000, // negative quiet NaN
		0x7ff0000000000001, // signalling NaN
		0x7fffffffffffffff, // all payload bits set
	}
	for _, bits := range nans {
		x := math.Float64frombits(bits)
		var b KeyBuilder
		b.AppendString("flash")
		b.AppendFloat64(x)
		b.AppendFloat64(1)
		k, err := b.Key()
		var ne *NaNError
		if !errors.As(err, &ne) {
			t.Fatalf("NaN %#x: err = %v, want *NaNError", bits, err)
		}
		if ne.Bits != bits || ne.Value != 1 || ne.Element != -1 {
			t.Errorf("NaN %#x: error %+v, want Value 1, Element -1, same bits", bits, *ne)
		}
		if !k.IsZero() {
			t.Errorf("NaN %#x: Key not zero", bits)
		}

		b.Reset()
		b.AppendFloat64s([]float64{1, 2, x})
		_, err = b.Key()
		if !errors.As(err, &ne) || ne.Value != 0 || ne.Element != 2 || ne.Bits != bits {
			t.Errorf("NaN %#x in slice: err = %v", bits, err)
		}

		b.Reset()
		b.AppendFloat64(2)
		if _, err := b.Key(); err != nil {
			t.Errorf("after Reset: %v", err)
		}
	}
}

func TestKeyViewAndClone(t *testing.T) {
	var b KeyBuilder
	b.AppendString("first")
	view, _ := b.Key()
	owned := view.Clone()
	b.Reset()
	b.AppendString("other")
	if !owned.Equal(build(t, func(b *KeyBuilder) { b.AppendString("first") })) {
		t.Error("Clone did not survive reuse of the builder")
	}
	if (Key{}).Clone().IsZero() == false {
		t.Error("Clone of the zero Key is not zero")
	}
	var empty KeyBuilder
	k, err := empty.Key()
	if err != nil || k.IsZero() || k.Len() != 1 {
		t.Errorf("key with no values: %x, %v; want the format byte alone", k.enc, err)
	}
}

func TestKeyBuilderReuseAllocatesNothing(t *testing.T) {
	var b KeyBuilder
	z := []float64{0.8, 0.1, 0.05, 0.03, 0.02}
	f := func() {
		b.Reset()
		b.AppendString("flash/tp")
		b.AppendFloat64s(z)
		b.AppendFloat64(250)
		b.AppendFloat64(3e6)
		b.AppendInt64(2)
		b.AppendBool(false)
		b.AppendBytes([]byte("pr78"))
		if _, err := b.Key(); err != nil {
			t.Fatal(err)
		}
	}
	f()
	if n := testing.AllocsPerRun(100, f); n != 0 {
		t.Errorf("reused builder allocates %v times per key, want 0", n)
	}
	if b.Len() != len(b.buf) || !bytes.Equal(b.buf[:1], []byte{keyFormat}) {
		t.Errorf("Len %d, buf % x", b.Len(), b.buf[:1])
	}
}
