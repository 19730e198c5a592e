// Command fugadscale measures how the cost of fugad's thermodynamic core
// grows with the number of components, in-process (no server), and prints
// a markdown table:
//
//	go run ./cmd/fugadscale [--sizes 2,5,10,20,30,50] [--min-time 300ms]
//
// For each size it builds a natural-gas-like fluid (library components,
// then petroleum pseudo-components beyond the library's share; see
// scaleFluid), finds a two-phase state (vapour fraction nearest 0.5) and a
// single-phase state above it on a temperature scan at 5 MPa, and times
//
//   - one ln φ evaluation (eos.Mixture.Fugacity, vapour root), without and
//     with all analytic derivatives;
//   - the T–P flash of the single-phase and of the two-phase state, cold
//     (stability analysis from Wilson K-values), and the two-phase flash
//     warm-started from a state 0.5 K and 0.5 % away, with the ln φ
//     evaluations each takes (flash.Report.LnPhiEvaluations);
//   - the phase envelope (envelope.Solver.Envelope) from 0.1 MPa, when
//     thermo/envelope traces it, else "n/a" with the reason.
//
// Each cell runs a few warm-up calls, then repeats the call until
// --min-time has passed (or exactly --iterations times) and reports the
// mean. The machine this runs on is shared and noisy: compare cells of one
// run (the "flash/ln φ" column is such a ratio), not runs of different days.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"strconv"
	"strings"
	"time"

	"github.com/fugad/fugad/thermo/envelope"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// config is the command line.
type config struct {
	sizes      []int
	minTime    time.Duration
	iterations int
	warmup     int
	seed       uint64
	model      eos.Model
	pressure   float64
	envelope   bool
}

func parseConfig(args []string, stderr io.Writer) (*config, error) {
	c := &config{}
	fs := flag.NewFlagSet("fugadscale", flag.ContinueOnError)
	fs.SetOutput(stderr)
	sizes := fs.String("sizes", "2,5,10,20,30,50", "component counts, comma-separated (1–100)")
	fs.DurationVar(&c.minTime, "min-time", 300*time.Millisecond, "time each cell for at least this long")
	fs.IntVar(&c.iterations, "iterations", 0, "time each cell over exactly this many calls instead of --min-time")
	fs.IntVar(&c.warmup, "warmup", 3, "untimed calls before each cell")
	fs.Uint64Var(&c.seed, "seed", 1, "seed of the feed compositions")
	model := fs.String("model", "PR78", "equation of state: PR76, PR78 or SRK")
	fs.Float64Var(&c.pressure, "pressure", 5e6, "pressure of the flash states, Pa")
	fs.BoolVar(&c.envelope, "envelope", true, "measure the phase envelope")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	fail := func(err error) (*config, error) {
		fmt.Fprintln(stderr, "fugadscale:", err)
		return nil, err
	}
	if fs.NArg() > 0 {
		return fail(fmt.Errorf("unexpected arguments: %q", fs.Args()))
	}
	for s := range strings.SplitSeq(*sizes, ",") {
		n, err := strconv.Atoi(strings.TrimSpace(s))
		if err != nil || n < 1 || n > 100 {
			return fail(fmt.Errorf("--sizes: %q is not a component count in [1, 100]", s))
		}
		c.sizes = append(c.sizes, n)
	}
	m, err := eos.ParseModel(*model)
	if err != nil {
		return fail(fmt.Errorf("--model: %w", err))
	}
	c.model = m
	switch {
	case c.minTime <= 0 && c.iterations <= 0:
		return fail(errors.New("one of --min-time and --iterations must be positive"))
	case c.iterations < 0 || c.warmup < 0:
		return fail(errors.New("--iterations and --warmup must not be negative"))
	case !(c.pressure >= 1e4 && c.pressure <= 1e8):
		return fail(fmt.Errorf("--pressure must be in [1e4, 1e8] Pa, got %g", c.pressure))
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
	rows, err := measureAll(context.Background(), cfg)
	if err != nil {
		fmt.Fprintln(os.Stderr, "fugadscale:", err)
		os.Exit(1)
	}
	writeTable(os.Stdout, cfg, rows)
}

// timing is the mean cost of one call of a cell.
type timing struct {
	perOp  time.Duration
	allocs float64 // heap allocations per call
	evals  float64 // ln φ evaluations per call (flashes, envelopes)
	calls  int
}

// timeCalls runs f warmup times, then repeats it until minTime has passed
// (doubling the batch) or exactly iterations times, and returns the mean.
// f returns the ln φ evaluations of its call.
func timeCalls(cfg *config, f func() (int, error)) (timing, error) {
	for range cfg.warmup {
		if _, err := f(); err != nil {
			return timing{}, err
		}
	}
	var ms0, ms1 runtime.MemStats
	run := func(n int) (time.Duration, int, error) {
		evals := 0
		t0 := time.Now()
		for range n {
			e, err := f()
			if err != nil {
				return 0, 0, err
			}
			evals += e
		}
		return time.Since(t0), evals, nil
	}
	runtime.ReadMemStats(&ms0)
	var (
		elapsed time.Duration
		evals   int
		calls   int
	)
	if cfg.iterations > 0 {
		d, e, err := run(cfg.iterations)
		if err != nil {
			return timing{}, err
		}
		elapsed, evals, calls = d, e, cfg.iterations
	} else {
		for n := 1; elapsed < cfg.minTime; n *= 2 {
			d, e, err := run(n)
			if err != nil {
				return timing{}, err
			}
			elapsed += d
			evals += e
			calls += n
		}
	}
	runtime.ReadMemStats(&ms1)
	return timing{
		perOp:  elapsed / time.Duration(calls),
		allocs: float64(ms1.Mallocs-ms0.Mallocs) / float64(calls),
		evals:  float64(evals) / float64(calls),
		calls:  calls,
	}, nil
}

// row is the measurements of one fluid size.
type row struct {
	n                  int
	pseudos            int
	t1, t2, beta2      float64 // single-phase T, two-phase T (K) and its vapour fraction
	lnPhi, lnPhiDeriv  timing
	flash1, flash2     timing
	warm2              timing
	env                timing
	envPoints          int
	envNA              string // why the envelope has no figure
	flashNA            string // why the flashes have no figure
	singlePhaseMissing bool
}

// states finds, on a scan of T at pressure P (150–700 K by 5 K), the
// two-phase state whose vapour fraction is nearest 0.5 and the first
// single-phase state at least 20 K above every two-phase state found.
func states(ctx context.Context, ws *flash.Workspace, res *flash.Result, z []float64, P float64) (t1, t2, beta float64, err error) {
	best, hiTwo := math.Inf(1), 0.0
	for T := 150.0; T <= 700; T += 5 {
		if err := ws.PT(ctx, T, P, z, flash.Options{NoProperties: true}, nil, res); err != nil {
			continue
		}
		if len(res.Phases) == 2 {
			hiTwo = T
			// The vapour is listed first when present.
			b := res.Phases[0].Beta
			if d := math.Abs(b - 0.5); d < best {
				best, t2, beta = d, T, b
			}
		}
	}
	if t2 == 0 {
		return 0, 0, 0, fmt.Errorf("no two-phase state at %g Pa between 150 and 700 K", P)
	}
	for T := hiTwo + 20; T <= 900; T += 5 {
		if err := ws.PT(ctx, T, P, z, flash.Options{NoProperties: true}, nil, res); err == nil && len(res.Phases) == 1 {
			return T, t2, beta, nil
		}
	}
	return 0, t2, beta, nil
}

// measureAll measures every size of cfg.
func measureAll(ctx context.Context, cfg *config) ([]row, error) {
	var rows []row
	for _, n := range cfg.sizes {
		r, err := measure(ctx, cfg, n)
		if err != nil {
			return nil, fmt.Errorf("%d components: %w", n, err)
		}
		rows = append(rows, r)
	}
	return rows, nil
}

func measure(ctx context.Context, cfg *config, n int) (row, error) {
	comps, z, err := scaleFluid(n, cfg.seed)
	if err != nil {
		return row{}, err
	}
	r := row{n: n, pseudos: max(0, n-len(slate))}
	mx, err := eos.NewMixture(cfg.model, comps, eos.Options{})
	if err != nil {
		return r, err
	}
	ws, res := flash.NewWorkspace(mx), flash.NewResult(mx)
	P := cfg.pressure

	t1, t2, beta, err := states(ctx, ws, res, z, P)
	if err != nil {
		r.flashNA = err.Error()
		t2 = 300 // the ln φ cells still need a state
	}
	r.t1, r.t2, r.beta2 = t1, t2, beta

	ews, fug := mx.NewWorkspace(), mx.NewFugacity()
	lnPhi := func(want eos.Want) func() (int, error) {
		return func() (int, error) { return 1, mx.Fugacity(ews, t2, P, z, eos.RootVapour, want, fug) }
	}
	if r.lnPhi, err = timeCalls(cfg, lnPhi(0)); err != nil {
		return r, err
	}
	if r.lnPhiDeriv, err = timeCalls(cfg, lnPhi(eos.WantT|eos.WantP|eos.WantN)); err != nil {
		return r, err
	}

	if r.flashNA == "" {
		pt := func(T float64, warm *flash.Estimate) func() (int, error) {
			return func() (int, error) {
				err := ws.PT(ctx, T, P, z, flash.Options{}, warm, res)
				return res.Report.LnPhiEvaluations, err
			}
		}
		if t1 > 0 {
			if r.flash1, err = timeCalls(cfg, pt(t1, nil)); err != nil {
				return r, err
			}
		} else {
			r.singlePhaseMissing = true
		}
		if r.flash2, err = timeCalls(cfg, pt(t2, nil)); err != nil {
			return r, err
		}
		// The warm start comes from the previous timestep of a simulation:
		// 0.5 K and 0.5 % away.
		prev := flash.NewResult(mx)
		if err := ws.PT(ctx, t2-0.5, P*0.995, z, flash.Options{}, nil, prev); err != nil {
			return r, err
		}
		est := prev.Estimate()
		if r.warm2, err = timeCalls(cfg, pt(t2, &est)); err != nil {
			return r, err
		}
	}

	if !cfg.envelope {
		r.envNA = "not asked (--envelope=false)"
		return r, nil
	}
	r.env, r.envPoints, r.envNA = measureEnvelope(ctx, cfg, mx, z)
	return r, nil
}

// measureEnvelope times envelope.Solver.Envelope from 0.1 MPa with the
// default options; on failure it returns the reason instead.
func measureEnvelope(ctx context.Context, cfg *config, mx *eos.Mixture, z []float64) (timing, int, string) {
	s, err := envelope.NewSolver(mx, envelope.Options{})
	if err != nil {
		return timing{}, 0, "solver: " + err.Error()
	}
	points := 0
	t, err := timeCalls(cfg, func() (int, error) {
		env, err := s.Envelope(ctx, z, envelope.EnvelopeOptions{})
		if err != nil {
			return 0, err
		}
		points = len(env.Points)
		return env.Report.LnPhiEvaluations, nil
	})
	if err != nil {
		return timing{}, 0, "trace failed: " + err.Error()
	}
	return t, points, ""
}

func us(d time.Duration) string { return fmt.Sprintf("%.2f", float64(d)/1e3) }

// writeTable prints the markdown table and its notes.
func writeTable(w io.Writer, cfg *config, rows []row) {
	fmt.Fprintf(w, "fugad scaling, %v, flashes at %.3g MPa, %s/%s, GOMAXPROCS %d, %d CPUs; mean per call", cfg.model, cfg.pressure/1e6, runtime.GOOS, runtime.GOARCH, runtime.GOMAXPROCS(0), runtime.NumCPU())
	if cfg.iterations > 0 {
		fmt.Fprintf(w, " over %d calls\n\n", cfg.iterations)
	} else {
		fmt.Fprintf(w, " over ≥ %v per cell\n\n", cfg.minTime)
	}
	fmt.Fprintln(w, "| n | pseudo | ln φ µs | ln φ + ∂ µs | 1-phase T K | 1-phase flash µs | ln φ evals | 2-phase T K (β) | 2-phase flash µs | ln φ evals | flash/ln φ | warm 2-phase µs | ln φ evals | allocs/flash | envelope ms | points | ln φ evals |")
	fmt.Fprintln(w, "|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
	var notes []string
	for _, r := range rows {
		cells := []string{strconv.Itoa(r.n), strconv.Itoa(r.pseudos), us(r.lnPhi.perOp), us(r.lnPhiDeriv.perOp)}
		switch {
		case r.flashNA != "":
			cells = append(cells, "n/a", "n/a", "n/a", "n/a", "n/a", "n/a", "n/a", "n/a", "n/a", "n/a")
			notes = append(notes, fmt.Sprintf("n = %d: flashes n/a: %s", r.n, r.flashNA))
		default:
			if r.singlePhaseMissing {
				cells = append(cells, "n/a", "n/a", "n/a")
				notes = append(notes, fmt.Sprintf("n = %d: no single-phase state found above the two-phase region", r.n))
			} else {
				cells = append(cells, fmt.Sprintf("%.0f", r.t1), us(r.flash1.perOp), fmt.Sprintf("%.0f", r.flash1.evals))
			}
			cells = append(cells,
				fmt.Sprintf("%.0f (%.2f)", r.t2, r.beta2), us(r.flash2.perOp), fmt.Sprintf("%.0f", r.flash2.evals),
				fmt.Sprintf("%.0f", float64(r.flash2.perOp)/float64(r.lnPhi.perOp)),
				us(r.warm2.perOp), fmt.Sprintf("%.0f", r.warm2.evals),
				fmt.Sprintf("%.1f", r.flash2.allocs))
		}
		if r.envNA != "" {
			cells = append(cells, "n/a", "n/a", "n/a")
			notes = append(notes, fmt.Sprintf("n = %d: envelope n/a: %s", r.n, r.envNA))
		} else {
			cells = append(cells, fmt.Sprintf("%.2f", float64(r.env.perOp)/1e6), strconv.Itoa(r.envPoints), fmt.Sprintf("%.0f", r.env.evals))
		}
		fmt.Fprintf(w, "| %s |\n", strings.Join(cells, " | "))
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "ln φ: one evaluation on the vapour root at the two-phase state; ln φ + ∂ adds ∂/∂T, ∂/∂P and ∂/∂n.")
	fmt.Fprintln(w, "flash/ln φ: the cold two-phase flash in units of one ln φ evaluation (a ratio from one run, robust to machine noise).")
	fmt.Fprintln(w, "allocs/flash: heap allocations per cold two-phase flash (the solvers are built to allocate nothing).")
	for _, n := range notes {
		fmt.Fprintln(w, "- "+n)
	}
}
