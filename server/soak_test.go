package server_test

import (
	"context"
	"flag"
	"os"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"

	"github.com/fugad/fugad/server"
)

// The CI run is 20 s; the documented long run is
//
//	go test -run TestSoak -soak=10m -timeout=20m -v ./server/
var soakDuration = flag.Duration("soak", 20*time.Second, "TestSoak: length of the soak run, sampled ten times (e.g. -soak=10m with -timeout=20m)")

// Bounds of the soak test.
const (
	// soakGoroutineSlack: goroutines are counted with no call in flight,
	// so only connection and server goroutines remain; a handful may come
	// and go (gRPC's keepalive and timer goroutines).
	soakGoroutineSlack = 5
	// soakHeapSlope bounds the least-squares slope of HeapInuse (after
	// collection, no call in flight) over the samples after the first:
	// 128 KiB/s. At the soak's few hundred calls per second a leak of a
	// few hundred bytes per call exceeds it; sampling noise of the heap
	// (a few hundred KiB) over the 18 s of the CI run stays below it.
	soakHeapSlope = 128 << 10
	// soakInFlight bounds the load generator's outstanding calls.
	soakInFlight = 16
	// soakLoad is the offered rate as a fraction of the sustainable one.
	soakLoad = 0.8
)

// soakSample is one sample of the soak run.
type soakSample struct {
	at                 time.Duration
	heap, rss          uint64
	goroutines         int
	ok, shed, failed   int
	p50, p99           time.Duration
	otherCodes         map[string]int
	callsPerSecondSent float64
}

// residentBytes reads the resident set size from /proc/self/statm; 0
// where that file does not exist.
func residentBytes() uint64 {
	b, err := os.ReadFile("/proc/self/statm")
	if err != nil {
		return 0
	}
	f := strings.Fields(string(b))
	if len(f) < 2 {
		return 0
	}
	pages, err := strconv.ParseUint(f[1], 10, 64)
	if err != nil {
		return 0
	}
	return pages * uint64(os.Getpagesize())
}

// slope is the least-squares slope of y over x.
func slope(x, y []float64) float64 {
	n := float64(len(x))
	var sx, sy, sxx, sxy float64
	for i := range x {
		sx += x[i]
		sy += y[i]
		sxx += x[i] * x[i]
		sxy += x[i] * y[i]
	}
	d := n*sxx - sx*sx
	if d == 0 {
		return 0
	}
	return (n*sxy - sx*sy) / d
}

// TestSoak runs FlashBatch calls through the result cache at 80 % of the
// sustainable rate for -soak (20 s by default), sampling ten times: the
// heap in use and the goroutines with no call in flight, the resident
// set, and the latency of the interval. The result cache is kept at
// 1 MiB so that it fills during the first interval and then evicts
// steadily, exercising the insert and eviction paths for the whole run.
// It checks that only shedding fails calls, that goroutines do not
// accumulate, and that the heap has no upward trend after the first
// sample (the warm-up).
func TestSoak(t *testing.T) {
	d := *soakDuration
	if d < 10*time.Second {
		t.Fatalf("-soak=%v: need at least 10 s for ten samples of 1 s", d)
	}
	every := d / 10
	procs := runtime.GOMAXPROCS(0)
	lb := startLoopback(t, server.Config{MaxConcurrentSolves: procs, Cache: server.CacheConfig{ResultBytes: 1 << 20}})
	src := &batchSource{flash: newFlashSource(false), states: overloadStates}
	ctx := context.Background()

	sequential(t, src, lb.api, 10)
	unloaded := sequential(t, src, lb.api, 50)
	// One batch takes every slot it finds free, so the server completes
	// about one batch per unloaded call time.
	rate := soakLoad / quantile(unloaded, 0.5).Seconds()
	t.Logf("unloaded p50 %v per %d-state batch; offering %.0f calls/s for %v, sampling every %v", quantile(unloaded, 0.5), overloadStates, rate, d, every)

	var samples []soakSample
	start := time.Now()
	for range 10 {
		results, dropped := openLoop(ctx, rate, every, soakInFlight, func() callResult { return src.call(ctx, lb.api) })
		s := soakSample{at: time.Since(start), otherCodes: map[string]int{}}
		var lat []time.Duration
		for _, r := range results {
			switch {
			case r.code == codes.OK:
				s.ok++
				lat = append(lat, r.d)
			case r.code == codes.Unavailable && r.reason == server.ReasonOverloaded:
				s.shed++
			default:
				s.failed++
				s.otherCodes[r.code.String()+"/"+r.reason]++
			}
		}
		slices.Sort(lat)
		s.p50, s.p99 = quantile(lat, 0.5), quantile(lat, 0.99)
		s.callsPerSecondSent = float64(len(results)) / every.Seconds()
		// openLoop has waited for every call: nothing is in flight.
		s.heap, s.rss, s.goroutines = heapInuse(), residentBytes(), runtime.NumGoroutine()
		samples = append(samples, s)
		t.Logf("t=%6.1fs  sent %5.0f/s (%d not sent)  ok %5d  shed %4d  failed %d  p50 %8v  p99 %8v  heap %6.2f MiB  RSS %6.1f MiB  goroutines %d",
			s.at.Seconds(), s.callsPerSecondSent, dropped, s.ok, s.shed, s.failed, s.p50.Round(time.Microsecond), s.p99.Round(time.Microsecond),
			float64(s.heap)/(1<<20), float64(s.rss)/(1<<20), s.goroutines)
	}

	for _, s := range samples {
		if s.failed > 0 {
			t.Errorf("t=%v: calls failed other than by shedding: %v", s.at, s.otherCodes)
		}
		if s.ok == 0 {
			t.Errorf("t=%v: no call succeeded", s.at)
		}
	}
	// The first sample is the warm-up (cache filling, pools growing).
	steady := samples[1:]
	first, last := steady[0], steady[len(steady)-1]
	if last.goroutines > first.goroutines+soakGoroutineSlack {
		t.Errorf("goroutines grew from %d to %d with no call in flight", first.goroutines, last.goroutines)
	}
	x, y := make([]float64, len(steady)), make([]float64, len(steady))
	for i, s := range steady {
		x[i], y[i] = s.at.Seconds(), float64(s.heap)
	}
	sl := slope(x, y)
	t.Logf("heap slope after warm-up %.1f KiB/s (bound %d KiB/s); goroutines %d → %d", sl/1024, soakHeapSlope>>10, first.goroutines, last.goroutines)
	if sl > soakHeapSlope {
		t.Errorf("heap in use grows by %.1f KiB/s after the warm-up (bound %d KiB/s): %v", sl/1024, soakHeapSlope>>10, y)
	}
}

// TestSlope checks the least-squares slope against an exact line and a
// symmetric scatter around one.
func TestSlope(t *testing.T) {
	x := []float64{0, 1, 2, 3, 4}
	if got := slope(x, []float64{1, 3, 5, 7, 9}); got != 2 {
		t.Errorf("slope of 1+2x = %g", got)
	}
	if got := slope(x, []float64{1, 4, 5, 6, 9}); got != 1.8 {
		t.Errorf("slope = %g, want 1.8", got)
	}
	if got := slope([]float64{1, 1}, []float64{2, 3}); got != 0 {
		t.Errorf("degenerate slope = %g", got)
	}
}
