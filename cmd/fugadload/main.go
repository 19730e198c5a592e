// Command fugadload drives a running fugad server with the traffic of
// plant digital twins and reports what it sustained.
//
// Each client is one fictional plant of 50–500 measured streams (separators,
// Joule–Thomson valves, recompressors, dew-point and bubble-point analysers).
// Every timestep the plant sends its T–P states in one FlashBatch call, its
// P–H states in another, then one SaturationPoint call per analyser and one
// PhaseEnvelope call per envelope stream. Stream conditions follow seeded
// bounded random walks (0.2 % of their range per timestep), so a seed gives
// the same traffic on every run; a fraction of the streams (--steady) holds
// still in each timestep and repeats its request, as steady units of a
// real plant do. Each result's warm start is sent back with the stream's
// next state.
//
// The report gives states per second, client-side latency quantiles per
// call kind (p50, p99, p99.9, from a log-linear histogram with 0.8 %
// resolution), the cache hit ratio from the solver reports (and from the
// server's /metrics with --metrics-url), calls shed with UNAVAILABLE and
// errors by code; call kinds the server answers UNIMPLEMENTED are listed
// separately. The same traffic is then sent to an empty endpoint — an
// in-process gRPC server on loopback that answers every request with
// captured fugad answers of the same size — and the ratio of the two runs
// is printed: what fugad adds over the RPC itself.
//
//	go run ./cmd/fugadload --addr 127.0.0.1:50051 --clients 4 --duration 30s
//	go run ./cmd/fugadload --addr 127.0.0.1:50051 --metrics-url http://127.0.0.1:9464/metrics --duration 10m --sample-every 1m
//
// See README.md beside this file. Results of fugad are engineering
// estimates from published models; the plants here are fictional.
package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"strconv"
	"strings"
	"time"
)

// config is everything a run is configured with.
type config struct {
	addr                   string
	clients                int
	minStreams, maxStreams int
	mix                    [numKinds]float64
	duration               time.Duration
	timesteps              int
	warmup                 int
	interval               time.Duration
	mode                   string
	warmStart              bool
	steady                 float64
	seed                   uint64
	timeout                time.Duration
	baseline               bool
	bypassCache            bool
	metricsURL             string
	sampleEvery            time.Duration
	json                   bool
}

// defaultMix is about 70 % T–P, 20 % P–H and 10 % saturation and
// envelope calls, by stream.
const defaultMix = "tp=70,ph=20,sat=9,env=1,fug=0"

// parseMix reads "tp=70,ph=20,..." into weights; kinds not named get 0.
func parseMix(s string) ([numKinds]float64, error) {
	var mix [numKinds]float64
	total := 0.0
	for part := range strings.SplitSeq(s, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		name, val, ok := strings.Cut(part, "=")
		if !ok {
			return mix, fmt.Errorf("--mix: %q is not kind=weight", part)
		}
		k := -1
		for i, n := range kindNames {
			if n == strings.TrimSpace(name) {
				k = i
			}
		}
		if k < 0 {
			return mix, fmt.Errorf("--mix: unknown kind %q (known: %s)", name, strings.Join(kindNames[:], ", "))
		}
		w, err := strconv.ParseFloat(strings.TrimSpace(val), 64)
		if err != nil || w < 0 || w > 1e6 {
			return mix, fmt.Errorf("--mix: weight of %s must be a number in [0, 1e6], got %q", name, val)
		}
		mix[k] = w
		total += w
	}
	if total <= 0 {
		return mix, errors.New("--mix: at least one weight must be positive")
	}
	return mix, nil
}

func (cfg *config) mixString() string {
	total := 0.0
	for _, w := range cfg.mix {
		total += w
	}
	var parts []string
	for k, w := range cfg.mix {
		if w > 0 {
			parts = append(parts, fmt.Sprintf("%s %.0f%%", kindNames[k], 100*w/total))
		}
	}
	return strings.Join(parts, " ")
}

// parseStreams reads "N" or "MIN-MAX".
func parseStreams(s string) (lo, hi int, err error) {
	a, b, ranged := strings.Cut(s, "-")
	lo, err = strconv.Atoi(strings.TrimSpace(a))
	if err != nil {
		return 0, 0, fmt.Errorf("--streams: %q is not N or MIN-MAX", s)
	}
	hi = lo
	if ranged {
		if hi, err = strconv.Atoi(strings.TrimSpace(b)); err != nil {
			return 0, 0, fmt.Errorf("--streams: %q is not N or MIN-MAX", s)
		}
	}
	if lo < 1 || hi < lo || hi > 10000 {
		return 0, 0, fmt.Errorf("--streams: need 1 ≤ MIN ≤ MAX ≤ 10000, got %q", s)
	}
	return lo, hi, nil
}

// parseConfig fills a config from the command line.
func parseConfig(args []string, stderr io.Writer) (*config, error) {
	c := &config{}
	fs := flag.NewFlagSet("fugadload", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.StringVar(&c.addr, "addr", "127.0.0.1:50051", "fugad gRPC address (plaintext)")
	fs.IntVar(&c.clients, "clients", 4, "concurrent clients, one fictional plant each")
	streams := fs.String("streams", "50-500", "streams per plant: N, or MIN-MAX drawn per plant")
	mix := fs.String("mix", defaultMix, "share of streams by kind: tp (T–P flash), ph (P–H flash), sat (saturation point), env (phase envelope), fug (fugacity coefficients)")
	fs.DurationVar(&c.duration, "duration", 10*time.Second, "length of the measured run (0: bounded by --timesteps only)")
	fs.IntVar(&c.timesteps, "timesteps", 0, "timesteps per client (0: bounded by --duration only)")
	fs.IntVar(&c.warmup, "warmup-timesteps", 1, "timesteps per client before measuring (connections, compiled fluids, first cold solves)")
	fs.DurationVar(&c.interval, "interval", 0, "timestep period per client (0: send the next timestep as soon as the last is answered)")
	fs.StringVar(&c.mode, "mode", "batch", "batch: one FlashBatch per kind per timestep; unary: one Flash per state")
	fs.BoolVar(&c.warmStart, "warm-start", true, "send each stream's last warm start with its next state")
	fs.Float64Var(&c.steady, "steady", 0.2, "probability that a stream holds still in a timestep (repeats its request)")
	fs.Uint64Var(&c.seed, "seed", 1, "seed of the plants and their random walks")
	fs.DurationVar(&c.timeout, "timeout", 30*time.Second, "deadline of each call")
	fs.BoolVar(&c.baseline, "baseline", true, "also run the same traffic against an in-process empty endpoint and print the ratio")
	fs.BoolVar(&c.bypassCache, "bypass-cache", false, "set bypass_cache on every request")
	fs.StringVar(&c.metricsURL, "metrics-url", "", "fugad's Prometheus endpoint (e.g. http://127.0.0.1:9464/metrics) for cache, shed, RSS and goroutine figures")
	fs.DurationVar(&c.sampleEvery, "sample-every", 0, "print a sample (states/s, p99, and RSS and goroutines with --metrics-url) this often; for soak runs")
	fs.BoolVar(&c.json, "json", false, "print the report as JSON")
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "Usage: fugadload [flags]\n\nDrives a running fugad server with a digital-twin workload and reports throughput, latency, cache hits, shed calls and errors.\n\n")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	fail := func(err error) (*config, error) {
		fmt.Fprintln(stderr, "fugadload:", err)
		return nil, err
	}
	if fs.NArg() > 0 {
		return fail(fmt.Errorf("unexpected arguments: %q", fs.Args()))
	}
	var err error
	if c.minStreams, c.maxStreams, err = parseStreams(*streams); err != nil {
		return fail(err)
	}
	if c.mix, err = parseMix(*mix); err != nil {
		return fail(err)
	}
	switch {
	case c.clients < 1 || c.clients > 10000:
		return fail(fmt.Errorf("--clients must be in [1, 10000], got %d", c.clients))
	case c.duration < 0 || c.timesteps < 0 || c.warmup < 0 || c.interval < 0 || c.sampleEvery < 0:
		return fail(errors.New("--duration, --timesteps, --warmup-timesteps, --interval and --sample-every must not be negative"))
	case c.duration == 0 && c.timesteps == 0:
		return fail(errors.New("one of --duration and --timesteps must be positive"))
	case c.mode != "batch" && c.mode != "unary":
		return fail(fmt.Errorf("--mode must be batch or unary, got %q", c.mode))
	case !(c.steady >= 0 && c.steady <= 1):
		return fail(fmt.Errorf("--steady must be in [0, 1], got %g", c.steady))
	case c.timeout <= 0:
		return fail(errors.New("--timeout must be positive"))
	}
	return c, nil
}

func main() {
	cfg, err := parseConfig(os.Args[1:], os.Stderr)
	if errors.Is(err, flag.ErrHelp) {
		os.Exit(0)
	}
	if err != nil {
		os.Exit(2)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	rep, err := run(ctx, cfg, os.Stderr)
	if err != nil {
		fmt.Fprintln(os.Stderr, "fugadload:", err)
		os.Exit(1)
	}
	if err := output(os.Stdout, cfg, rep); err != nil {
		fmt.Fprintln(os.Stderr, "fugadload:", err)
		os.Exit(1)
	}
}

// output prints rep as JSON or as a table.
func output(w io.Writer, cfg *config, rep *report) error {
	if cfg.json {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(rep)
	}
	return writeTable(w, rep)
}

// run drives fugad, then (with cfg.baseline) the empty endpoint, and
// returns the report. Samples are printed to progress as they come.
func run(ctx context.Context, cfg *config, progress io.Writer) (*report, error) {
	rep := &report{Workload: cfg.describe()}
	printSample := func(s sample) {
		if progress == nil {
			return
		}
		names := make([]string, 0, len(s.P99Millis))
		for n := range s.P99Millis {
			names = append(names, n)
		}
		sort.Strings(names)
		var p99 []string
		for _, n := range names {
			p99 = append(p99, fmt.Sprintf("%s %.2f", n, s.P99Millis[n]))
		}
		line := fmt.Sprintf("t=%6.0fs  states/s %8.0f  shed %d  errors %d  p99 ms: %s", s.ElapsedSeconds, s.StatesPerSecond, s.Shed, s.Errors, strings.Join(p99, ", "))
		if s.ResidentBytes > 0 {
			line += fmt.Sprintf("  server RSS %.1f MiB, %.0f goroutines", s.ResidentBytes/(1<<20), s.Goroutines)
		}
		fmt.Fprintln(progress, line)
	}
	cap := &capture{}
	f, err := drive(ctx, cfg, cfg.addr, cap, cfg.metricsURL, printSample)
	if err != nil {
		return nil, err
	}
	rep.Fugad = f
	if !cfg.baseline || ctx.Err() != nil {
		return rep, nil
	}
	addr, stop, err := startEcho(cap)
	if err != nil {
		return nil, fmt.Errorf("empty endpoint: %w", err)
	}
	defer stop()
	bcfg := *cfg
	bcfg.sampleEvery = 0
	b, err := drive(ctx, &bcfg, addr, nil, "", nil)
	if err != nil {
		return nil, fmt.Errorf("empty endpoint: %w", err)
	}
	rep.Baseline = b
	rep.Ratio = ratios(f, b)
	return rep, nil
}
