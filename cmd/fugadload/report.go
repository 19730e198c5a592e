package main

import (
	"context"
	"fmt"
	"io"
	"net/http"
	"sort"
	"strings"
	"text/tabwriter"
	"time"

	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"
)

// report is the output of one fugadload run.
type report struct {
	Workload string       `json:"workload"`
	Fugad    *runReport   `json:"fugad"`
	Baseline *runReport   `json:"empty_endpoint,omitempty"`
	Ratio    *ratioReport `json:"ratio,omitempty"`
}

// runReport is the statistics of the workload against one endpoint.
type runReport struct {
	Target         string  `json:"target"`
	ElapsedSeconds float64 `json:"elapsed_s"`
	// Timesteps counts the complete timesteps of all clients.
	Timesteps int64 `json:"timesteps"`
	Calls     int64 `json:"calls"`
	// StatesOK counts states answered with status OK (batch items, unary
	// calls); StatesPerSecond divides it by the elapsed time.
	StatesOK        int64   `json:"states_ok"`
	StatesPerSecond float64 `json:"states_per_s"`
	// Cores is runtime.NumCPU of the load generator's host. When fugad
	// runs on the same host the two share these cores.
	Cores                  int     `json:"cores"`
	StatesPerSecondPerCore float64 `json:"states_per_s_per_core"`
	// Shed counts calls and batch items answered UNAVAILABLE.
	Shed int64 `json:"shed"`
	// ErrorsByCode counts failed calls and failed batch items by code
	// (UNAVAILABLE and UNIMPLEMENTED included).
	ErrorsByCode map[string]int64 `json:"errors_by_code"`
	// Unimplemented lists the call kinds that only ever got UNIMPLEMENTED.
	Unimplemented []string `json:"unimplemented,omitempty"`
	// CacheHitRatio is the fraction of OK states whose solver report says
	// from_cache; nil when no state was answered.
	CacheHitRatio *float64     `json:"cache_hit_ratio_reports,omitempty"`
	Metrics       *serverDelta `json:"server_metrics,omitempty"`
	MetricsError  string       `json:"server_metrics_error,omitempty"`
	Kinds         []kindReport `json:"kinds"`
	Samples       []sample     `json:"samples,omitempty"`
}

// kindReport is the statistics of one call kind. Calls = OKCalls + Σ
// CallErrors; States = OKStates + Σ ItemErrors + FailedCallStates.
type kindReport struct {
	Kind             string           `json:"kind"`
	Calls            int64            `json:"calls"`
	OKCalls          int64            `json:"ok_calls"`
	CallErrors       map[string]int64 `json:"call_errors"`
	States           int64            `json:"states"`
	OKStates         int64            `json:"ok_states"`
	ItemErrors       map[string]int64 `json:"item_errors"`
	FailedCallStates int64            `json:"failed_call_states"`
	CacheHits        int64            `json:"cache_hits"`
	// Latencies of OK calls, client-side, ms.
	P50Millis  float64 `json:"p50_ms"`
	P99Millis  float64 `json:"p99_ms"`
	P999Millis float64 `json:"p99_9_ms"`
	MaxMillis  float64 `json:"max_ms"`
	MeanMillis float64 `json:"mean_ms"`
	// Shed counts UNAVAILABLE calls and items; ShedP99Millis is the p99 of
	// the UNAVAILABLE calls' latency.
	Shed              int64   `json:"shed"`
	ShedP99Millis     float64 `json:"shed_p99_ms"`
	MeanRequestBytes  float64 `json:"mean_request_bytes"`
	MeanResponseBytes float64 `json:"mean_response_bytes"`
	Unimplemented     bool    `json:"unimplemented"`
}

// ratioReport compares fugad with the empty endpoint.
type ratioReport struct {
	// EmptyOverFugadStatesPerSecond is the empty endpoint's throughput
	// divided by fugad's: how many times more states per second the same
	// traffic reaches when nothing is solved.
	EmptyOverFugadStatesPerSecond float64 `json:"empty_over_fugad_states_per_s"`
	// P50 and P99 are fugad's latency divided by the empty endpoint's, per
	// call kind answered by both.
	P50 map[string]float64 `json:"p50_fugad_over_empty"`
	P99 map[string]float64 `json:"p99_fugad_over_empty"`
}

func ratios(f, e *runReport) *ratioReport {
	r := &ratioReport{P50: map[string]float64{}, P99: map[string]float64{}}
	if f.StatesPerSecond > 0 {
		r.EmptyOverFugadStatesPerSecond = e.StatesPerSecond / f.StatesPerSecond
	}
	ek := map[string]kindReport{}
	for _, k := range e.Kinds {
		ek[k.Kind] = k
	}
	for _, k := range f.Kinds {
		b, ok := ek[k.Kind]
		if !ok || k.OKCalls == 0 || b.OKCalls == 0 || b.P50Millis == 0 || b.P99Millis == 0 {
			continue
		}
		r.P50[k.Kind] = k.P50Millis / b.P50Millis
		r.P99[k.Kind] = k.P99Millis / b.P99Millis
	}
	return r
}

// serverMetrics are the series fugadload reads from fugad's /metrics.
type serverMetrics struct {
	cacheHits, cacheMisses float64 // fugad_cache_{hits,misses}_total{cache="results"}
	shed                   float64 // Σ fugad_shed_total
	residentBytes          float64 // process_resident_memory_bytes
	goroutines             float64 // go_goroutines
}

// serverDelta is the change of the server's metrics over a run.
type serverDelta struct {
	CacheHits     float64  `json:"cache_hits"`
	CacheMisses   float64  `json:"cache_misses"`
	CacheHitRatio *float64 `json:"cache_hit_ratio,omitempty"`
	Shed          float64  `json:"shed"`
	ResidentBytes float64  `json:"resident_bytes_after"`
	Goroutines    float64  `json:"goroutines_after"`
}

func delta(before, after *serverMetrics) *serverDelta {
	d := &serverDelta{
		CacheHits: after.cacheHits - before.cacheHits, CacheMisses: after.cacheMisses - before.cacheMisses,
		Shed: after.shed - before.shed, ResidentBytes: after.residentBytes, Goroutines: after.goroutines,
	}
	if n := d.CacheHits + d.CacheMisses; n > 0 {
		r := d.CacheHits / n
		d.CacheHitRatio = &r
	}
	return d
}

// scrape reads fugad's metrics from url; nil, nil when url is empty.
func scrape(ctx context.Context, url string) (*serverMetrics, error) {
	if url == "" {
		return nil, nil
	}
	ctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, url, nil)
	if err != nil {
		return nil, err
	}
	req.Header.Set("Accept", "text/plain")
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return nil, fmt.Errorf("%s: HTTP %s", url, resp.Status)
	}
	return parseMetrics(resp.Body)
}

// parseMetrics reads the series of serverMetrics from the Prometheus text
// exposition format.
func parseMetrics(r io.Reader) (*serverMetrics, error) {
	p := expfmt.NewTextParser(model.UTF8Validation)
	fams, err := p.TextToMetricFamilies(r)
	if err != nil {
		return nil, fmt.Errorf("parsing metrics: %w", err)
	}
	value := func(m *dto.Metric) float64 {
		switch {
		case m.GetCounter() != nil:
			return m.GetCounter().GetValue()
		case m.GetGauge() != nil:
			return m.GetGauge().GetValue()
		case m.GetUntyped() != nil:
			return m.GetUntyped().GetValue()
		}
		return 0
	}
	sum := func(name, label, want string) float64 {
		total := 0.0
		for _, m := range fams[name].GetMetric() {
			if label != "" {
				match := false
				for _, lp := range m.GetLabel() {
					if lp.GetName() == label && lp.GetValue() == want {
						match = true
					}
				}
				if !match {
					continue
				}
			}
			total += value(m)
		}
		return total
	}
	return &serverMetrics{
		cacheHits:     sum("fugad_cache_hits_total", "cache", "results"),
		cacheMisses:   sum("fugad_cache_misses_total", "cache", "results"),
		shed:          sum("fugad_shed_total", "", ""),
		residentBytes: sum("process_resident_memory_bytes", "", ""),
		goroutines:    sum("go_goroutines", "", ""),
	}, nil
}

// writeTable prints the report for a person.
func writeTable(w io.Writer, r *report) error {
	fmt.Fprintf(w, "fugadload: %s\n", r.Workload)
	writeRun(w, "fugad", r.Fugad)
	if r.Baseline != nil {
		writeRun(w, "empty endpoint (in-process echo of captured fugad answers, same sizes)", r.Baseline)
	}
	if r.Ratio != nil {
		fmt.Fprintln(w)
		if r.Ratio.EmptyOverFugadStatesPerSecond > 0 {
			fmt.Fprintf(w, "empty endpoint / fugad throughput: %.2f× (fugad reaches %.0f %% of what the same traffic gets from an empty endpoint)\n",
				r.Ratio.EmptyOverFugadStatesPerSecond, 100/r.Ratio.EmptyOverFugadStatesPerSecond)
		} else {
			fmt.Fprintln(w, "empty endpoint / fugad throughput: n/a (fugad answered no state)")
		}
		names := make([]string, 0, len(r.Ratio.P50))
		for n := range r.Ratio.P50 {
			names = append(names, n)
		}
		sort.Strings(names)
		for _, n := range names {
			fmt.Fprintf(w, "  %-22s latency fugad/empty: p50 %.1f×, p99 %.1f×\n", n, r.Ratio.P50[n], r.Ratio.P99[n])
		}
	}
	return nil
}

func writeRun(w io.Writer, title string, r *runReport) {
	fmt.Fprintf(w, "\n%s at %s: %.1f s, %d timesteps, %d calls\n", title, r.Target, r.ElapsedSeconds, r.Timesteps, r.Calls)
	fmt.Fprintf(w, "  states/s %.0f (%.0f per core, %d cores shared by client and server when both run here)\n",
		r.StatesPerSecond, r.StatesPerSecondPerCore, r.Cores)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "kind\tcalls\tstates\tok states\tp50 ms\tp99 ms\tp99.9 ms\tmax ms\tcache hits\tshed\tresp bytes\terrors\t")
	for _, k := range r.Kinds {
		errs := errorList(k.CallErrors, k.ItemErrors)
		fmt.Fprintf(tw, "%s\t%d\t%d\t%d\t%.3f\t%.3f\t%.3f\t%.3f\t%d\t%d\t%.0f\t%s\t\n",
			k.Kind, k.Calls, k.States, k.OKStates, k.P50Millis, k.P99Millis, k.P999Millis, k.MaxMillis, k.CacheHits, k.Shed, k.MeanResponseBytes, errs)
	}
	_ = tw.Flush()
	if r.CacheHitRatio != nil {
		fmt.Fprintf(w, "  cache hit ratio (solver reports): %.3f\n", *r.CacheHitRatio)
	}
	if m := r.Metrics; m != nil {
		ratio := "n/a"
		if m.CacheHitRatio != nil {
			ratio = fmt.Sprintf("%.3f", *m.CacheHitRatio)
		}
		fmt.Fprintf(w, "  server /metrics over the run: result-cache hits %.0f, misses %.0f (ratio %s), shed %.0f; after: RSS %.1f MiB, %.0f goroutines\n",
			m.CacheHits, m.CacheMisses, ratio, m.Shed, m.ResidentBytes/(1<<20), m.Goroutines)
	}
	if r.MetricsError != "" {
		fmt.Fprintf(w, "  server /metrics: %s\n", r.MetricsError)
	}
	if r.Shed > 0 {
		fmt.Fprintf(w, "  shed (UNAVAILABLE): %d\n", r.Shed)
	}
	if len(r.Unimplemented) > 0 {
		fmt.Fprintf(w, "  not served by this server (UNIMPLEMENTED, excluded from states/s): %s\n", strings.Join(r.Unimplemented, ", "))
	}
}

// errorList formats call and item errors as "CODE:n", calls first.
func errorList(calls, items map[string]int64) string {
	var parts []string
	for _, m := range []struct {
		what string
		m    map[string]int64
	}{{"", calls}, {"item ", items}} {
		codes := make([]string, 0, len(m.m))
		for c := range m.m {
			codes = append(codes, c)
		}
		sort.Strings(codes)
		for _, c := range codes {
			parts = append(parts, fmt.Sprintf("%s%s:%d", m.what, c, m.m[c]))
		}
	}
	if len(parts) == 0 {
		return "-"
	}
	return strings.Join(parts, " ")
}
