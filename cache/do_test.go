package cache

import (
	"bytes"
	"context"
	"errors"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// waitFor polls cond until it holds, failing the test after a bounded wait.
// It orders goroutines; it measures nothing.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	for i := 0; i < 5000; i++ {
		if cond() {
			return
		}
		time.Sleep(time.Millisecond)
	}
	t.Fatalf("timed out waiting for %s", what)
}

func TestDoMissThenHit(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	want := valueFor(1, 300)
	var solves int
	solve := func(context.Context) ([]byte, bool, error) { solves++; return bytes.Clone(want), true, nil }
	v1, hit1, shared1, err1 := c.Do(context.Background(), k, solve)
	v2, hit2, shared2, err2 := c.Do(context.Background(), k, solve)
	if err1 != nil || err2 != nil || hit1 || !hit2 || shared1 || shared2 || solves != 1 {
		t.Fatalf("miss (%v %v %v), hit (%v %v %v), solves %d", hit1, shared1, err1, hit2, shared2, err2, solves)
	}
	if !bytes.Equal(v1, want) || !bytes.Equal(v2, v1) {
		t.Fatal("hit differs from the miss")
	}
	if _, _, _, err := c.Do(context.Background(), Key{}, solve); !errors.Is(err, ErrZeroKey) {
		t.Errorf("zero Key: err = %v", err)
	}
}

func TestDoCollapsesConcurrentRequests(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	const n = 16
	release := make(chan struct{})
	var solves atomic.Int32
	solve := func(context.Context) ([]byte, bool, error) {
		solves.Add(1)
		<-release
		return valueFor(42, 100), true, nil
	}
	type answer struct {
		v           []byte
		hit, shared bool
		err         error
	}
	answers := make(chan answer, n)
	for i := 0; i < n; i++ {
		go func() {
			v, hit, shared, err := c.Do(context.Background(), k, solve)
			answers <- answer{v, hit, shared, err}
		}()
	}
	waitFor(t, "all requests to join", func() bool { return c.Stats().Collapsed == n-1 })
	close(release)
	var sharedCount int
	for i := 0; i < n; i++ {
		a := <-answers
		if a.err != nil || a.hit || !bytes.Equal(a.v, valueFor(42, 100)) {
			t.Fatalf("answer %+v", a)
		}
		if a.shared {
			sharedCount++
		}
	}
	st := c.Stats()
	if solves.Load() != 1 || sharedCount != n-1 || st.Collapsed != n-1 || st.Misses != n || st.Entries != 1 {
		t.Errorf("solves %d, shared %d, stats %+v", solves.Load(), sharedCount, st)
	}
}

// A waiter whose deadline passes returns DeadlineExceeded while the solve is
// still running; the solve's context is not cancelled and the remaining
// waiters get the value.
func TestDoWaiterDeadline(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	release := make(chan struct{})
	started := make(chan context.Context, 1)
	solve := func(ctx context.Context) ([]byte, bool, error) {
		started <- ctx
		<-release
		return []byte("value"), true, nil
	}
	leaderDone := make(chan error, 1)
	go func() {
		_, _, _, err := c.Do(context.Background(), k, solve)
		leaderDone <- err
	}()
	solveCtx := <-started

	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Millisecond)
	defer cancel()
	v, hit, shared, err := c.Do(ctx, k, solve)
	if !errors.Is(err, context.DeadlineExceeded) || v != nil || hit || !shared {
		t.Fatalf("short-deadline waiter: %q %v %v %v", v, hit, shared, err)
	}
	// It returned while the solve was still blocked, and did not cancel it.
	if solveCtx.Err() != nil {
		t.Fatalf("solve context cancelled by one waiter leaving: %v", solveCtx.Err())
	}
	close(release)
	if err := <-leaderDone; err != nil {
		t.Fatalf("remaining waiter: %v", err)
	}
	if got, ok := c.Get(k); !ok || string(got) != "value" {
		t.Errorf("value not stored after the shared solve")
	}
	if st := c.Stats(); st.Abandoned != 1 || st.Collapsed != 1 {
		t.Errorf("stats %+v", st)
	}
}

// The leader leaving does not stop the solve for the others; when the last
// waiter leaves, the solve's context is cancelled and a new request starts a
// fresh solve rather than joining the cancelled one. A solve that finishes
// after everyone left still stores its cacheable result.
func TestDoLastWaiterLeavingCancelsSolve(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	started := make(chan context.Context, 2)
	release := make(chan struct{})
	var solves atomic.Int32
	solve := func(ctx context.Context) ([]byte, bool, error) {
		solves.Add(1)
		started <- ctx
		select {
		case <-ctx.Done():
			return nil, false, ctx.Err()
		case <-release:
			return []byte("fresh"), true, nil
		}
	}
	leaderCtx, leaderCancel := context.WithCancel(context.Background())
	joinerCtx, joinerCancel := context.WithCancel(context.Background())
	errs := make(chan error, 2)
	go func() { _, _, _, err := c.Do(leaderCtx, k, solve); errs <- err }()
	first := <-started
	go func() { _, _, _, err := c.Do(joinerCtx, k, solve); errs <- err }()
	waitFor(t, "second request to join", func() bool { return c.Stats().Collapsed == 1 })

	leaderCancel()
	if err := <-errs; !errors.Is(err, context.Canceled) {
		t.Fatalf("leader: err = %v", err)
	}
	if first.Err() != nil {
		t.Fatal("solve cancelled while a waiter remained")
	}
	joinerCancel()
	if err := <-errs; !errors.Is(err, context.Canceled) {
		t.Fatalf("joiner: err = %v", err)
	}
	waitFor(t, "solve context cancelled", func() bool { return first.Err() != nil })

	close(release)
	v, hit, shared, err := c.Do(context.Background(), k, solve)
	if err != nil || hit || shared || string(v) != "fresh" || solves.Load() != 2 {
		t.Fatalf("after abandonment: %q %v %v %v, solves %d", v, hit, shared, err, solves.Load())
	}
	if st := c.Stats(); st.Abandoned != 2 || st.Entries != 1 {
		t.Errorf("stats %+v", st)
	}

	// Everyone leaves a solve that then succeeds: the result is stored.
	k2 := intKey(t, 2)
	began, gate, done := make(chan struct{}), make(chan struct{}), make(chan struct{})
	ctx, cancel := context.WithCancel(context.Background())
	go func() {
		_, _, _, err := c.Do(ctx, k2, func(context.Context) ([]byte, bool, error) {
			close(began)
			<-gate
			defer close(done)
			return []byte("late"), true, nil
		})
		if !errors.Is(err, context.Canceled) {
			t.Errorf("err = %v", err)
		}
		close(gate)
	}()
	<-began
	cancel()
	<-done
	waitFor(t, "late result stored", func() bool { v, ok := c.Get(k2); return ok && string(v) == "late" })
}

func TestDoErrorsAndUncacheableAreNotStored(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	boom := errors.New("not converged")
	if _, _, _, err := c.Do(context.Background(), k, func(context.Context) ([]byte, bool, error) {
		return []byte("partial"), true, boom
	}); !errors.Is(err, boom) {
		t.Fatalf("err = %v", err)
	}
	if v, _, _, err := c.Do(context.Background(), k, func(context.Context) ([]byte, bool, error) {
		return []byte("warm"), false, nil
	}); err != nil || string(v) != "warm" {
		t.Fatalf("uncacheable: %q %v", v, err)
	}
	if _, ok := c.Get(k); ok {
		t.Fatal("error or uncacheable result was stored")
	}
	var panicErr *PanicError
	if _, _, _, err := c.Do(context.Background(), k, func(context.Context) ([]byte, bool, error) {
		panic(boom)
	}); !errors.As(err, &panicErr) || !errors.Is(err, boom) || len(panicErr.Stack) == 0 {
		t.Fatalf("panic: err = %v", err)
	}
	if st := c.Stats(); st.Entries != 0 || st.Hits != 0 || st.Misses != 4 {
		t.Errorf("stats %+v, want no entries, no hits, 4 misses", st)
	}
}

func TestDoContextDoneBeforeStart(t *testing.T) {
	c := newResults(t, Config{})
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	called := false
	_, _, _, err := c.Do(ctx, intKey(t, 1), func(context.Context) ([]byte, bool, error) { called = true; return nil, true, nil })
	if !errors.Is(err, context.Canceled) || called {
		t.Errorf("err = %v, solve called = %v", err, called)
	}
	// A stored value is still returned to a caller whose context has ended.
	c.Put(intKey(t, 2), []byte("x"))
	if v, hit, _, err := c.Do(ctx, intKey(t, 2), nil); err != nil || !hit || string(v) != "x" {
		t.Errorf("hit with ended context: %q %v %v", v, hit, err)
	}
}

func TestBypass(t *testing.T) {
	c := newResults(t, Config{})
	k := intKey(t, 1)
	c.Put(k, []byte("stored"))
	v, err := c.Bypass(context.Background(), func(context.Context) ([]byte, bool, error) { return []byte("fresh"), true, nil })
	if err != nil || string(v) != "fresh" {
		t.Fatalf("Bypass: %q %v", v, err)
	}
	if got, _ := c.Get(k); string(got) != "stored" {
		t.Fatal("Bypass changed the stored value")
	}
	if _, err := c.Bypass(context.Background(), func(context.Context) ([]byte, bool, error) { panic("x") }); err == nil {
		t.Fatal("panic not returned")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := c.Bypass(ctx, nil); !errors.Is(err, context.Canceled) {
		t.Fatalf("ended context: %v", err)
	}
	if st := c.Stats(); st.Bypassed != 3 || st.Hits != 1 || st.Misses != 0 || st.Entries != 1 {
		t.Errorf("stats %+v", st)
	}
}

// Many goroutines mixing Get, Put, Do and Bypass over a small key set, with
// a bound that forces evictions and a weak hash that forces collisions. Every
// value returned must be the one that belongs to its key; run with -race.
func TestResultsConcurrentMix(t *testing.T) {
	for _, weak := range []bool{false, true} {
		cfg := Config{MaxEntries: 12, MaxBytes: 12 * (40 + 64 + EntryOverhead)}
		if weak {
			cfg.Hash = func(k []byte) uint64 { return uint64(k[len(k)-1]) % 5 }
		}
		c := newResults(t, cfg)
		const goroutines, ops, keys = 8, 3000, 40
		var wg sync.WaitGroup
		for g := 0; g < goroutines; g++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				var b KeyBuilder
				for i := 0; i < ops; i++ {
					id := (i*7 + g*13) % keys
					if i%4 == 0 && i >= 4 {
						// The key this goroutine's last operation (a Do)
						// stored: a hit unless another goroutine has
						// replaced it since, so that hits do not depend on
						// how the goroutines interleave. Run one after
						// another, as on a loaded machine, they otherwise
						// leave none under the weak hash, which puts every
						// key in one slot.
						id = ((i-1)*7 + g*13) % keys
					}
					b.Reset()
					b.AppendString("k")
					b.AppendInt64(int64(id))
					k, _ := b.Key()
					want := valueFor(id, 1+id%20)
					solve := func(context.Context) ([]byte, bool, error) { return valueFor(id, 1+id%20), id%9 != 0, nil }
					var got []byte
					var ok = true
					switch i % 4 {
					case 0:
						got, ok = c.Get(k)
					case 1:
						c.Put(k, want)
						got = want
					case 2:
						var err error
						got, _, _, err = c.Do(context.Background(), k, solve)
						if err != nil {
							t.Error(err)
						}
					case 3:
						ctx, cancel := context.WithTimeout(context.Background(), time.Millisecond)
						var err error
						got, _, _, err = c.Do(ctx, k, solve)
						cancel()
						if err != nil {
							ok = false
						}
					}
					if ok && !bytes.Equal(got, want) {
						t.Errorf("key %d: got a value of another key", id)
						return
					}
				}
			}()
		}
		wg.Wait()
		st := c.Stats()
		if st.Entries > cfg.MaxEntries || st.Bytes > cfg.MaxBytes || st.Bytes != accounted(t, c) {
			t.Errorf("weak=%v: bounds broken: %+v (accounted %d)", weak, st, accounted(t, c))
		}
		if st.Hits == 0 || st.Evictions+st.Collisions == 0 {
			t.Errorf("weak=%v: mix did not exercise hits and evictions: %+v", weak, st)
		}
	}
}

func TestDoHitAllocatesNothing(t *testing.T) {
	c := newResults(t, Config{})
	var b KeyBuilder
	mk := func() Key {
		b.Reset()
		b.AppendString("flash/tp")
		b.AppendFloat64(300)
		k, _ := b.Key()
		return k
	}
	c.Put(mk(), []byte("v"))
	ctx := context.Background()
	n := testing.AllocsPerRun(100, func() {
		if _, hit, _, _ := c.Do(ctx, mk(), nil); !hit {
			t.Fatal("miss")
		}
		if _, ok := c.Get(mk()); !ok {
			t.Fatal("miss")
		}
	})
	if n != 0 {
		t.Errorf("hit path allocates %v times, want 0", n)
	}
}
