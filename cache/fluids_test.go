package cache

import (
	"errors"
	"sync"
	"sync/atomic"
	"testing"
)

// compiled stands in for a compiled fluid: built once, read-only after.
type compiled struct{ id int }

func TestFluidsBuildCollapse(t *testing.T) {
	c, err := NewFluids[*compiled](FluidsConfig{})
	if err != nil {
		t.Fatal(err)
	}
	k := intKey(t, 5)
	const n = 12
	release := make(chan struct{})
	var builds atomic.Int32
	build := func() (*compiled, error) {
		builds.Add(1)
		<-release
		return &compiled{id: 5}, nil
	}
	got := make(chan *compiled, n)
	for i := 0; i < n; i++ {
		go func() {
			v, err := c.GetOrBuild(k, build)
			if err != nil {
				t.Error(err)
			}
			got <- v
		}()
	}
	waitFor(t, "all builds to join", func() bool { return c.Stats().Collapsed == n-1 })
	close(release)
	first := <-got
	for i := 1; i < n; i++ {
		if v := <-got; v != first || v.id != 5 {
			t.Fatalf("callers received different fluids")
		}
	}
	if v, err := c.GetOrBuild(k, build); err != nil || v != first {
		t.Fatal("hit did not return the built fluid")
	}
	st := c.Stats()
	if builds.Load() != 1 || st.Collapsed != n-1 || st.Misses != n || st.Hits != 1 || st.Entries != 1 {
		t.Errorf("builds %d, stats %+v", builds.Load(), st)
	}
}

func TestFluidsErrorsEvictionCollisions(t *testing.T) {
	c, _ := NewFluids[int](FluidsConfig{MaxEntries: 2, Hash: func(k []byte) uint64 { return uint64(k[len(k)-1]) % 2 }})
	boom := errors.New("unknown component")
	if _, err := c.GetOrBuild(intKey(t, 1), func() (int, error) { return 0, boom }); !errors.Is(err, boom) {
		t.Fatalf("err = %v", err)
	}
	if _, ok := c.Get(intKey(t, 1)); ok {
		t.Fatal("build error stored")
	}
	var pe *PanicError
	if _, err := c.GetOrBuild(intKey(t, 1), func() (int, error) { panic("bad table") }); !errors.As(err, &pe) {
		t.Fatalf("panic: err = %v", err)
	}
	if _, err := c.GetOrBuild(Key{}, nil); !errors.Is(err, ErrZeroKey) {
		t.Fatalf("zero Key: %v", err)
	}
	// Keys 0..9 land in two hash slots; whatever is found must be right.
	for i := 0; i < 10; i++ {
		v, err := c.GetOrBuild(intKey(t, i), func() (int, error) { return 100 + i, nil })
		if err != nil || v != 100+i {
			t.Fatalf("key %d: %d, %v", i, v, err)
		}
		for j := 0; j <= i; j++ {
			if v, ok := c.Get(intKey(t, j)); ok && v != 100+j {
				t.Fatalf("key %d returned the fluid of another key", j)
			}
		}
	}
	st := c.Stats()
	if st.Entries > 2 || st.Collisions == 0 {
		t.Errorf("stats %+v", st)
	}

	// Count bound with a good hash: the least recently used goes first.
	d, _ := NewFluids[int](FluidsConfig{MaxEntries: 2})
	for i := 0; i < 3; i++ {
		d.GetOrBuild(intKey(t, i), func() (int, error) { return i, nil })
		if i == 1 {
			d.Get(intKey(t, 0))
		}
	}
	if _, ok := d.Get(intKey(t, 1)); ok {
		t.Error("least recently used fluid not evicted")
	}
	if st := d.Stats(); st.Evictions != 1 || st.Entries != 2 {
		t.Errorf("stats %+v", st)
	}
	d.Purge()
	if d.Stats().Entries != 0 {
		t.Error("Purge left entries")
	}
}

func TestFluidsConcurrent(t *testing.T) {
	c, _ := NewFluids[*compiled](FluidsConfig{MaxEntries: 4})
	var wg sync.WaitGroup
	for g := 0; g < 8; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var b KeyBuilder
			for i := 0; i < 2000; i++ {
				id := (i + g) % 10
				b.Reset()
				b.AppendString("k")
				b.AppendInt64(int64(id))
				k, _ := b.Key()
				v, err := c.GetOrBuild(k, func() (*compiled, error) { return &compiled{id: id}, nil })
				if err != nil || v.id != id {
					t.Errorf("key %d: %v, %v", id, v, err)
					return
				}
			}
		}()
	}
	wg.Wait()
	if st := c.Stats(); st.Entries > 4 || st.Hits == 0 || st.Evictions == 0 {
		t.Errorf("stats %+v", st)
	}
}
