package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"net"
	"net/http/httptest"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"google.golang.org/protobuf/proto"

	"github.com/fugad/fugad/server"
)

// startFugad serves fugad on a loopback port with its /metrics beside it.
func startFugad(t *testing.T, cfg server.Config) (addr, metricsURL string) {
	t.Helper()
	reg := prometheus.NewRegistry()
	reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	srv, err := server.New(cfg, nil, reg)
	if err != nil {
		t.Fatal(err)
	}
	host, err := server.NewHost(srv, reg, server.HostOptions{DrainTimeout: 5 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	served := make(chan error, 1)
	go func() { served <- host.Serve(lis) }()
	hs := httptest.NewServer(server.MetricsHandler(reg))
	t.Cleanup(func() {
		hs.Close()
		host.Shutdown()
		if err := <-served; err != nil {
			t.Errorf("Serve: %v", err)
		}
	})
	return lis.Addr().String(), hs.URL + "/metrics"
}

func testConfig(t *testing.T, args ...string) *config {
	t.Helper()
	var stderr bytes.Buffer
	cfg, err := parseConfig(args, &stderr)
	if err != nil {
		t.Fatalf("parseConfig(%q): %v (%s)", args, err, stderr.String())
	}
	return cfg
}

// checkCounts checks that a run's counts add up.
func checkCounts(t *testing.T, what string, r *runReport) {
	t.Helper()
	var calls, okStates, shed int64
	for _, k := range r.Kinds {
		sumCalls, sumItems := int64(0), int64(0)
		for _, n := range k.CallErrors {
			sumCalls += n
		}
		for _, n := range k.ItemErrors {
			sumItems += n
		}
		if k.Calls != k.OKCalls+sumCalls {
			t.Errorf("%s %s: calls %d ≠ ok %d + failed %d", what, k.Kind, k.Calls, k.OKCalls, sumCalls)
		}
		if k.States != k.OKStates+sumItems+k.FailedCallStates {
			t.Errorf("%s %s: states %d ≠ ok %d + failed items %d + states of failed calls %d", what, k.Kind, k.States, k.OKStates, sumItems, k.FailedCallStates)
		}
		if k.OKCalls > 0 && !(k.P50Millis > 0 && k.P50Millis <= k.P99Millis && k.P99Millis <= k.P999Millis && k.P999Millis <= k.MaxMillis) {
			t.Errorf("%s %s: latency quantiles out of order: p50 %g p99 %g p99.9 %g max %g", what, k.Kind, k.P50Millis, k.P99Millis, k.P999Millis, k.MaxMillis)
		}
		if k.CacheHits > k.OKStates {
			t.Errorf("%s %s: %d cache hits among %d OK states", what, k.Kind, k.CacheHits, k.OKStates)
		}
		calls += k.Calls
		okStates += k.OKStates
		shed += k.Shed
	}
	if calls != r.Calls || okStates != r.StatesOK || shed != r.Shed {
		t.Errorf("%s: totals calls %d, ok states %d, shed %d; kinds sum to %d, %d, %d", what, r.Calls, r.StatesOK, r.Shed, calls, okStates, shed)
	}
	if want := float64(r.StatesOK) / r.ElapsedSeconds; math.Abs(r.StatesPerSecond-want) > 1e-9*want {
		t.Errorf("%s: states/s %g, want %g", what, r.StatesPerSecond, want)
	}
}

// TestAgainstInProcessServer runs the harness for about two seconds
// against fugad on loopback and checks that the report is sane.
func TestAgainstInProcessServer(t *testing.T) {
	// A pool larger than two clients can fill (a batch takes at most
	// GOMAXPROCS slots), so nothing may be shed.
	addr, murl := startFugad(t, server.Config{MaxConcurrentSolves: 16})
	cfg := testConfig(t, "--addr", addr, "--metrics-url", murl, "--clients", "2", "--streams", "20-60",
		"--duration", "1s", "--mix", "tp=60,ph=20,sat=9,env=1,fug=10", "--sample-every", "400ms")
	var progress bytes.Buffer
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	rep, err := run(ctx, cfg, &progress)
	if err != nil {
		t.Fatal(err)
	}
	checkCounts(t, "fugad", rep.Fugad)
	checkCounts(t, "empty endpoint", rep.Baseline)

	f := rep.Fugad
	// Only endpoints not wired yet may fail, and then every call of the
	// kind fails with UNIMPLEMENTED.
	for code, n := range f.ErrorsByCode {
		if code != "Unimplemented" {
			t.Errorf("%d calls or items failed with %s", n, code)
		}
	}
	for _, k := range f.Kinds {
		failed := len(k.CallErrors) + len(k.ItemErrors)
		if failed > 0 && !k.Unimplemented {
			t.Errorf("%s: errors %v %v but also %d OK states", k.Kind, k.CallErrors, k.ItemErrors, k.OKStates)
		}
		if k.Unimplemented != slices.Contains(f.Unimplemented, k.Kind) {
			t.Errorf("%s: unimplemented %v, list %v", k.Kind, k.Unimplemented, f.Unimplemented)
		}
	}
	// FugacityCoefficients is served by every build.
	fug := kindOf(f, nameFug)
	if fug == nil || fug.OKStates == 0 || f.StatesPerSecond <= 0 {
		t.Fatalf("no FugacityCoefficients answered: %+v", fug)
	}
	if f.Metrics == nil || f.Metrics.CacheHits+f.Metrics.CacheMisses == 0 || f.Metrics.ResidentBytes <= 0 || f.Metrics.Goroutines <= 0 {
		t.Errorf("server metrics missing: %+v (%s)", f.Metrics, f.MetricsError)
	}
	if len(f.Samples) == 0 || !strings.Contains(progress.String(), "server RSS") {
		t.Errorf("no samples printed: %q", progress.String())
	}

	// The empty endpoint served the same kinds, with the same response
	// sizes, and is faster than fugad.
	b := rep.Baseline
	for _, k := range f.Kinds {
		bk := kindOf(b, k.Kind)
		if bk == nil {
			t.Errorf("empty endpoint never saw %s", k.Kind)
			continue
		}
		if bk.Unimplemented != k.Unimplemented {
			t.Errorf("%s: unimplemented %v at fugad, %v at the empty endpoint", k.Kind, k.Unimplemented, bk.Unimplemented)
		}
		if bk.CacheHits != 0 {
			t.Errorf("%s: the empty endpoint reported %d cache hits", k.Kind, bk.CacheHits)
		}
		if k.OKStates > 0 && bk.OKStates > 0 && math.Abs(bk.MeanResponseBytes/k.MeanResponseBytes-1) > 0.25 {
			t.Errorf("%s: mean response %g bytes at fugad, %g at the empty endpoint", k.Kind, k.MeanResponseBytes, bk.MeanResponseBytes)
		}
	}
	if rep.Ratio == nil || !(rep.Ratio.EmptyOverFugadStatesPerSecond > 0) || rep.Ratio.P50[nameFug] <= 0 {
		t.Errorf("ratio: %+v", rep.Ratio)
	}

	// Both outputs.
	var table, js bytes.Buffer
	if err := output(&table, cfg, rep); err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"states/s", nameFug, "empty endpoint / fugad throughput"} {
		if !strings.Contains(table.String(), want) {
			t.Errorf("table lacks %q:\n%s", want, table.String())
		}
	}
	cfg.json = true
	if err := output(&js, cfg, rep); err != nil {
		t.Fatal(err)
	}
	var back report
	if err := json.Unmarshal(js.Bytes(), &back); err != nil || back.Fugad == nil || back.Fugad.StatesOK != f.StatesOK {
		t.Errorf("JSON round trip: %v", err)
	}
	t.Logf("\n%s", table.String())
}

func kindOf(r *runReport, name string) *kindReport {
	for i := range r.Kinds {
		if r.Kinds[i].Kind == name {
			return &r.Kinds[i]
		}
	}
	return nil
}

// TestTimestepBound checks that --timesteps bounds the run exactly.
func TestTimestepBound(t *testing.T) {
	addr, _ := startFugad(t, server.Config{MaxConcurrentSolves: 16})
	cfg := testConfig(t, "--addr", addr, "--clients", "3", "--streams", "5", "--duration", "0", "--timesteps", "4",
		"--mix", "fug=1", "--baseline=false")
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	rep, err := run(ctx, cfg, nil)
	if err != nil {
		t.Fatal(err)
	}
	checkCounts(t, "fugad", rep.Fugad)
	if rep.Fugad.Timesteps != 12 || rep.Fugad.StatesOK != 3*4*5 || rep.Baseline != nil {
		t.Errorf("timesteps %d, ok states %d, baseline %v; want 12, 60, none", rep.Fugad.Timesteps, rep.Fugad.StatesOK, rep.Baseline)
	}
}

// TestWorkloadDeterministic checks that a seed gives the same requests:
// two plants built from one seed send identical bytes for several
// timesteps, and another seed sends different ones.
func TestWorkloadDeterministic(t *testing.T) {
	mix, err := parseMix(defaultMix)
	if err != nil {
		t.Fatal(err)
	}
	requests := func(seed uint64) [][]byte {
		p, err := newPlant(seed, 3, 50, 500, mix, 0.2)
		if err != nil {
			t.Fatal(err)
		}
		var out [][]byte
		for range 5 {
			if err := p.advance(); err != nil {
				t.Fatal(err)
			}
			for _, s := range p.streams {
				var m proto.Message
				switch s.kind {
				case kindTP, kindPH:
					m = s.state(true)
				case kindSat:
					m = s.saturation(p.fluid, true)
				case kindEnv:
					m = s.envelope(p.fluid)
				case kindFug:
					m = s.fugacity(p.fluid)
				}
				b, err := proto.MarshalOptions{Deterministic: true}.Marshal(m)
				if err != nil {
					t.Fatal(err)
				}
				out = append(out, b)
			}
		}
		return out
	}
	a, b, c := requests(7), requests(7), requests(8)
	if len(a) == 0 || len(a) != len(b) {
		t.Fatalf("%d and %d requests", len(a), len(b))
	}
	for i := range a {
		if !bytes.Equal(a[i], b[i]) {
			t.Fatalf("request %d differs between two runs of one seed", i)
		}
	}
	if len(a) == len(c) && slices.EqualFunc(a, c, bytes.Equal) {
		t.Error("seeds 7 and 8 give the same requests")
	}
}

// TestPlantShape checks the plant against its description: stream count
// within bounds, the mix respected roughly, walks inside their bounds, and
// compositions normalised.
func TestPlantShape(t *testing.T) {
	mix, err := parseMix(defaultMix)
	if err != nil {
		t.Fatal(err)
	}
	var count [numKinds]int
	total := 0
	for id := range 20 {
		p, err := newPlant(1, id, 50, 500, mix, 0.2)
		if err != nil {
			t.Fatal(err)
		}
		if n := len(p.streams); n < 50 || n > 500 {
			t.Errorf("plant %d has %d streams", id, n)
		}
		for range 50 {
			if err := p.advance(); err != nil {
				t.Fatal(err)
			}
		}
		for _, s := range p.streams {
			count[s.kind]++
			total++
			for _, w := range []walk{s.t, s.p} {
				if w.hi > 0 && (w.v < w.lo || w.v > w.hi) {
					t.Errorf("%s: walk at %g outside [%g, %g]", s.unit, w.v, w.lo, w.hi)
				}
			}
			sum := 0.0
			for _, z := range s.z {
				sum += z
			}
			if math.Abs(sum-1) > 1e-12 {
				t.Errorf("%s: composition sums to %g", s.unit, sum)
			}
			if s.kind == kindPH && !(s.h != 0 && !math.IsNaN(s.h)) {
				t.Errorf("%s: outlet enthalpy %g", s.unit, s.h)
			}
		}
	}
	// About 70/20/10 % by stream: with several thousand streams the shares
	// are within a few points (binomial standard deviation < 1 %).
	for k, want := range map[kind]float64{kindTP: 0.70, kindPH: 0.20, kindSat: 0.09} {
		if got := float64(count[k]) / float64(total); math.Abs(got-want) > 0.03 {
			t.Errorf("%s share %.3f, want %.2f", kindNames[k], got, want)
		}
	}
}

// TestHistogramQuantiles checks the histogram's quantiles against exact
// order statistics of the same samples: within the stated 1/128 relative
// resolution, over seven decades.
func TestHistogramQuantiles(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	var h, h1, h2 histogram
	vals := make([]time.Duration, 100000)
	for i := range vals {
		// Log-uniform from 100 ns to 1 s.
		vals[i] = time.Duration(math.Exp(math.Log(100) + r.Float64()*math.Log(1e7)))
		h.record(vals[i])
		if i%2 == 0 {
			h1.record(vals[i])
		} else {
			h2.record(vals[i])
		}
	}
	h1.merge(&h2)
	slices.Sort(vals)
	for _, q := range []float64{0, 0.001, 0.5, 0.9, 0.99, 0.999, 1} {
		rank := int(math.Ceil(q * float64(len(vals))))
		exact := vals[max(rank, 1)-1]
		got := h.quantile(q)
		if rel := math.Abs(float64(got-exact)) / float64(exact); rel > 1.0/128 {
			t.Errorf("q=%g: %v, exact %v (rel %.4f)", q, got, exact, rel)
		}
		if m := h1.quantile(q); m != got {
			t.Errorf("q=%g: merged halves give %v, whole %v", q, m, got)
		}
	}
	if h.count() != uint64(len(vals)) || h.quantile(1) != vals[len(vals)-1] || h.quantile(0) != vals[0] {
		t.Errorf("count %d, extremes %v %v", h.count(), h.quantile(0), h.quantile(1))
	}
	// Small values are exact.
	var e histogram
	for v := range 300 {
		e.record(time.Duration(v))
	}
	if got := e.quantile(0.5); got != 149 {
		t.Errorf("median of 0..299 = %v, want 149", got)
	}
	for v := uint64(1); v < 1<<40; v = v*3 + 1 {
		low, w := bucketRange(bucketOf(v))
		if v < low || v >= low+w || float64(w) > math.Max(1, float64(low)/128) {
			t.Fatalf("value %d in bucket [%d, %d)", v, low, low+w)
		}
	}
}

// TestBadFlags checks that bad flags are refused with a reason.
func TestBadFlags(t *testing.T) {
	for _, args := range [][]string{
		{"--mix", "tp=1,xx=2"},
		{"--mix", "tp=-1"},
		{"--mix", "tp=0"},
		{"--streams", "500-50"},
		{"--streams", "abc"},
		{"--clients", "0"},
		{"--duration", "0", "--timesteps", "0"},
		{"--mode", "stream"},
		{"--steady", "1.5"},
		{"extra"},
	} {
		var stderr bytes.Buffer
		if _, err := parseConfig(args, &stderr); err == nil || stderr.Len() == 0 {
			t.Errorf("%q: err %v, stderr %q", args, err, stderr.String())
		}
	}
}
