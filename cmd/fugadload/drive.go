package main

import (
	"context"
	"fmt"
	"runtime"
	"sort"
	"sync"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// maxMessageBytes matches the server's default message limit, so that
// large batches are not refused by the client first.
const maxMessageBytes = 16 << 20

// dial opens one client connection to addr (plaintext).
func dial(addr string) (*grpc.ClientConn, error) {
	return grpc.NewClient(addr,
		grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(maxMessageBytes), grpc.MaxCallSendMsgSize(maxMessageBytes)),
	)
}

// Call-kind names in the report.
const (
	nameBatchTP = "FlashBatch/tp"
	nameBatchPH = "FlashBatch/ph"
	nameFlashTP = "Flash/tp"
	nameFlashPH = "Flash/ph"
	nameSat     = "SaturationPoint"
	nameEnv     = "PhaseEnvelope"
	nameFug     = "FugacityCoefficients"
)

// outcome is what one call did.
type outcome struct {
	name      string
	states    int
	d         time.Duration
	err       error
	okStates  int
	itemErrs  []codes.Code // codes of failed batch items
	hits      int          // OK states whose report says from_cache
	reqBytes  int
	respBytes int
}

// kindStats accumulates the outcomes of one call kind.
type kindStats struct {
	calls, okCalls              int64
	callErrs                    map[codes.Code]int64
	states, okStates, failedRun int64 // failedRun: states of calls that failed whole
	itemErrs                    map[codes.Code]int64
	hits                        int64
	reqBytes, respBytes         int64
	lat, shed                   histogram // OK calls; UNAVAILABLE calls
}

func newKindStats() *kindStats {
	return &kindStats{callErrs: map[codes.Code]int64{}, itemErrs: map[codes.Code]int64{}}
}

func (k *kindStats) add(o *outcome) {
	k.calls++
	k.states += int64(o.states)
	k.reqBytes += int64(o.reqBytes)
	code := status.Code(o.err)
	if code != codes.OK {
		k.callErrs[code]++
		k.failedRun += int64(o.states)
		if code == codes.Unavailable {
			k.shed.record(o.d)
		}
		return
	}
	k.okCalls++
	k.lat.record(o.d)
	k.okStates += int64(o.okStates)
	k.hits += int64(o.hits)
	k.respBytes += int64(o.respBytes)
	for _, c := range o.itemErrs {
		k.itemErrs[c]++
	}
}

func (k *kindStats) merge(o *kindStats) {
	k.calls += o.calls
	k.okCalls += o.okCalls
	k.states += o.states
	k.okStates += o.okStates
	k.failedRun += o.failedRun
	k.hits += o.hits
	k.reqBytes += o.reqBytes
	k.respBytes += o.respBytes
	for c, n := range o.callErrs {
		k.callErrs[c] += n
	}
	for c, n := range o.itemErrs {
		k.itemErrs[c] += n
	}
	k.lat.merge(&o.lat)
	k.shed.merge(&o.shed)
}

// recorder collects outcomes from every client: the totals of the run and
// the current sampling interval.
type recorder struct {
	mu       sync.Mutex
	total    map[string]*kindStats
	interval map[string]*kindStats
	capture  *capture // nil: keep no responses
}

func newRecorder(c *capture) *recorder {
	return &recorder{total: map[string]*kindStats{}, interval: map[string]*kindStats{}, capture: c}
}

func (r *recorder) add(o *outcome) {
	r.mu.Lock()
	defer r.mu.Unlock()
	for _, m := range []map[string]*kindStats{r.total, r.interval} {
		k := m[o.name]
		if k == nil {
			k = newKindStats()
			m[o.name] = k
		}
		k.add(o)
	}
}

// takeInterval returns the interval's statistics and starts a new
// interval.
func (r *recorder) takeInterval() map[string]*kindStats {
	r.mu.Lock()
	defer r.mu.Unlock()
	iv := r.interval
	r.interval = map[string]*kindStats{}
	return iv
}

// client is one plant with its connection.
type client struct {
	cfg   *config
	plant *plant
	api   fugadv1.FugadServiceClient
	rec   *recorder
}

// timestep sends one timestep of the plant: its T–P states, its P–H
// states, then its saturation, envelope and fugacity calls, one after
// another as a plant model would. It stops early (returning false) when
// stop says the run is over.
func (c *client) timestep(ctx context.Context, stop func() bool) (complete bool, err error) {
	if err := c.plant.advance(); err != nil {
		return false, err
	}
	for _, k := range []kind{kindTP, kindPH} {
		ss := c.plant.byKind[k]
		if len(ss) == 0 {
			continue
		}
		if c.cfg.mode == "unary" {
			for _, s := range ss {
				if stop() {
					return false, nil
				}
				c.flash(ctx, s)
			}
			continue
		}
		if stop() {
			return false, nil
		}
		c.batch(ctx, k, ss)
	}
	for _, s := range c.plant.byKind[kindSat] {
		if stop() {
			return false, nil
		}
		c.saturation(ctx, s)
	}
	for _, s := range c.plant.byKind[kindEnv] {
		if stop() {
			return false, nil
		}
		c.envelope(ctx, s)
	}
	for _, s := range c.plant.byKind[kindFug] {
		if stop() {
			return false, nil
		}
		c.fugacity(ctx, s)
	}
	return true, nil
}

func (c *client) callCtx(ctx context.Context) (context.Context, context.CancelFunc) {
	return context.WithTimeout(ctx, c.cfg.timeout)
}

func (c *client) batch(ctx context.Context, k kind, ss []*stream) {
	req := &fugadv1.FlashBatchRequest{Fluid: c.plant.fluid, BypassCache: c.cfg.bypassCache}
	for _, s := range ss {
		req.States = append(req.States, s.state(c.cfg.warmStart))
	}
	o := &outcome{name: nameBatchTP, states: len(ss), reqBytes: proto.Size(req)}
	if k == kindPH {
		o.name = nameBatchPH
	}
	cctx, cancel := c.callCtx(ctx)
	t0 := time.Now()
	resp, err := c.api.FlashBatch(cctx, req)
	o.d = time.Since(t0)
	cancel()
	o.err = err
	if err == nil {
		o.respBytes = proto.Size(resp)
		items := resp.GetItems()
		for i, s := range ss {
			var it *fugadv1.FlashBatchItem
			if i < len(items) {
				it = items[i]
			}
			if code := codes.Code(it.GetStatus().GetCode()); it == nil || code != codes.OK {
				if it == nil {
					code = codes.DataLoss // a missing item is a broken response
				}
				o.itemErrs = append(o.itemErrs, code)
				continue
			}
			o.okStates++
			res := it.GetResult()
			if res.GetReport().GetFromCache() {
				o.hits++
			}
			if ws := res.GetWarmStart(); ws != nil {
				s.warm = ws
			}
			c.rec.capture.item(k, it)
		}
	}
	c.rec.add(o)
}

// reported is a response that carries a solver report.
type reported interface {
	proto.Message
	GetReport() *fugadv1.SolverReport
}

// unary makes one call of a single-state method, times it and records the
// outcome under name; report picks the solver report out of the answer.
// It returns the answer, nil when the call failed.
func unary[Req proto.Message, Resp proto.Message](ctx context.Context, c *client, name string, req Req,
	call func(context.Context, Req, ...grpc.CallOption) (Resp, error), report func(Resp) *fugadv1.SolverReport) (Resp, bool) {
	o := &outcome{name: name, states: 1, reqBytes: proto.Size(req)}
	cctx, cancel := c.callCtx(ctx)
	t0 := time.Now()
	resp, err := call(cctx, req)
	o.d = time.Since(t0)
	cancel()
	o.err = err
	if err == nil {
		o.okStates, o.respBytes = 1, proto.Size(resp)
		if report(resp).GetFromCache() {
			o.hits = 1
		}
	}
	c.rec.add(o)
	return resp, err == nil
}

// ownReport is the report of a response that carries one itself.
func ownReport[R reported](r R) *fugadv1.SolverReport { return r.GetReport() }

func (c *client) flash(ctx context.Context, s *stream) {
	req := &fugadv1.FlashRequest{Fluid: c.plant.fluid, State: s.state(c.cfg.warmStart), BypassCache: c.cfg.bypassCache}
	name := nameFlashTP
	if s.kind == kindPH {
		name = nameFlashPH
	}
	resp, ok := unary(ctx, c, name, req, c.api.Flash, func(r *fugadv1.FlashResponse) *fugadv1.SolverReport { return r.GetResult().GetReport() })
	if !ok {
		return
	}
	if ws := resp.GetResult().GetWarmStart(); ws != nil {
		s.warm = ws
	}
	c.rec.capture.flash(s.kind, resp)
}

func (c *client) saturation(ctx context.Context, s *stream) {
	req := s.saturation(c.plant.fluid, c.cfg.warmStart)
	req.BypassCache = c.cfg.bypassCache
	resp, ok := unary(ctx, c, nameSat, req, c.api.SaturationPoint, ownReport[*fugadv1.SaturationPointResponse])
	if !ok {
		return
	}
	if ws := resp.GetWarmStart(); ws != nil {
		s.warm = ws
	}
	c.rec.capture.saturation(resp)
}

func (c *client) envelope(ctx context.Context, s *stream) {
	req := s.envelope(c.plant.fluid)
	req.BypassCache = c.cfg.bypassCache
	if resp, ok := unary(ctx, c, nameEnv, req, c.api.PhaseEnvelope, ownReport[*fugadv1.PhaseEnvelopeResponse]); ok {
		c.rec.capture.envelope(resp)
	}
}

func (c *client) fugacity(ctx context.Context, s *stream) {
	req := s.fugacity(c.plant.fluid)
	req.BypassCache = c.cfg.bypassCache
	if resp, ok := unary(ctx, c, nameFug, req, c.api.FugacityCoefficients, ownReport[*fugadv1.FugacityCoefficientsResponse]); ok {
		c.rec.capture.fugacity(resp)
	}
}

// sample is one sampling interval of a run.
type sample struct {
	ElapsedSeconds  float64            `json:"elapsed_s"`
	StatesPerSecond float64            `json:"states_per_s"`
	P99Millis       map[string]float64 `json:"p99_ms"`
	Shed            int64              `json:"shed"`
	Errors          int64              `json:"errors"`
	// Server figures from /metrics, when --metrics-url is given.
	ResidentBytes float64 `json:"resident_bytes,omitempty"`
	Goroutines    float64 `json:"goroutines,omitempty"`
}

// drive runs the workload against addr and returns its statistics.
// Samples are written to progress (when not nil) as they are taken.
func drive(ctx context.Context, cfg *config, addr string, cap *capture, metricsURL string, progress func(sample)) (*runReport, error) {
	clients := make([]*client, cfg.clients)
	rec := newRecorder(cap)
	warmRec := newRecorder(cap)
	for i := range clients {
		p, err := newPlant(cfg.seed, i, cfg.minStreams, cfg.maxStreams, cfg.mix, cfg.steady)
		if err != nil {
			return nil, err
		}
		conn, err := dial(addr)
		if err != nil {
			return nil, err
		}
		defer conn.Close()
		clients[i] = &client{cfg: cfg, plant: p, api: fugadv1.NewFugadServiceClient(conn), rec: warmRec}
	}

	// Warm-up: connections, compiled fluids and the first (cold) solves,
	// outside the statistics.
	never := func() bool { return false }
	var wg sync.WaitGroup
	errs := make(chan error, len(clients))
	for _, c := range clients {
		wg.Go(func() {
			for range cfg.warmup {
				if _, err := c.timestep(ctx, never); err != nil {
					errs <- err
					return
				}
			}
			c.rec = rec
		})
	}
	wg.Wait()
	select {
	case err := <-errs:
		return nil, err
	default:
	}

	before, beforeErr := scrape(ctx, metricsURL)
	start := time.Now()
	deadline := start.Add(cfg.duration)
	stop := func() bool {
		return cfg.duration > 0 && !time.Now().Before(deadline) || ctx.Err() != nil
	}
	var (
		tsMu      sync.Mutex
		timesteps int64
	)
	for _, c := range clients {
		wg.Go(func() {
			n := int64(0)
			defer func() {
				tsMu.Lock()
				timesteps += n
				tsMu.Unlock()
			}()
			for step := 0; cfg.timesteps == 0 || step < cfg.timesteps; step++ {
				if stop() {
					return
				}
				complete, err := c.timestep(ctx, stop)
				if err != nil {
					errs <- err
					return
				}
				if !complete {
					return
				}
				n++
				if cfg.interval > 0 {
					next := start.Add(time.Duration(step+1) * cfg.interval)
					if cfg.duration > 0 && next.After(deadline) {
						return
					}
					select {
					case <-time.After(time.Until(next)):
					case <-ctx.Done():
						return
					}
				}
			}
		})
	}

	var samples []sample
	done := make(chan struct{})
	var sampler sync.WaitGroup
	if cfg.sampleEvery > 0 {
		sampler.Go(func() {
			t := time.NewTicker(cfg.sampleEvery)
			defer t.Stop()
			last := start
			for {
				select {
				case <-done:
					return
				case now := <-t.C:
					s := intervalSample(rec.takeInterval(), now.Sub(last), now.Sub(start))
					last = now
					if m, err := scrape(ctx, metricsURL); err == nil && m != nil {
						s.ResidentBytes, s.Goroutines = m.residentBytes, m.goroutines
					}
					samples = append(samples, s)
					if progress != nil {
						progress(s)
					}
				}
			}
		})
	}
	wg.Wait()
	elapsed := time.Since(start)
	close(done)
	sampler.Wait()
	select {
	case err := <-errs:
		return nil, err
	default:
	}

	rep := buildRunReport(addr, rec.total, elapsed, timesteps)
	rep.Samples = samples
	if metricsURL != "" {
		after, afterErr := scrape(ctx, metricsURL)
		switch {
		case beforeErr != nil:
			rep.MetricsError = beforeErr.Error()
		case afterErr != nil:
			rep.MetricsError = afterErr.Error()
		default:
			rep.Metrics = delta(before, after)
		}
	}
	return rep, nil
}

// intervalSample summarises one sampling interval.
func intervalSample(iv map[string]*kindStats, length, elapsed time.Duration) sample {
	s := sample{ElapsedSeconds: elapsed.Seconds(), P99Millis: map[string]float64{}}
	var ok int64
	for name, k := range iv {
		ok += k.okStates
		if k.lat.count() > 0 {
			s.P99Millis[name] = millis(k.lat.quantile(0.99))
		}
		s.Shed += k.callErrs[codes.Unavailable] + k.itemErrs[codes.Unavailable]
		for c, n := range k.callErrs {
			if c != codes.Unavailable {
				s.Errors += n
			}
		}
		for c, n := range k.itemErrs {
			if c != codes.Unavailable {
				s.Errors += n
			}
		}
	}
	if length > 0 {
		s.StatesPerSecond = float64(ok) / length.Seconds()
	}
	return s
}

func millis(d time.Duration) float64 { return float64(d) / 1e6 }

// buildRunReport turns the statistics of a run into its report.
func buildRunReport(target string, kinds map[string]*kindStats, elapsed time.Duration, timesteps int64) *runReport {
	rep := &runReport{
		Target: target, ElapsedSeconds: elapsed.Seconds(), Timesteps: timesteps,
		Cores: runtime.NumCPU(), ErrorsByCode: map[string]int64{},
	}
	names := make([]string, 0, len(kinds))
	for n := range kinds {
		names = append(names, n)
	}
	sort.Strings(names)
	var okStates, hits int64
	for _, n := range names {
		k := kinds[n]
		kr := kindReport{
			Kind: n, Calls: k.calls, OKCalls: k.okCalls, States: k.states, OKStates: k.okStates,
			FailedCallStates: k.failedRun, CacheHits: k.hits,
			CallErrors: codeMap(k.callErrs), ItemErrors: codeMap(k.itemErrs),
			P50Millis: millis(k.lat.quantile(0.50)), P99Millis: millis(k.lat.quantile(0.99)),
			P999Millis: millis(k.lat.quantile(0.999)), MaxMillis: millis(time.Duration(k.lat.max)),
			MeanMillis: millis(k.lat.mean()), Shed: k.callErrs[codes.Unavailable] + k.itemErrs[codes.Unavailable],
			ShedP99Millis: millis(k.shed.quantile(0.99)),
			Unimplemented: k.calls > 0 && k.callErrs[codes.Unimplemented]+k.itemErrs[codes.Unimplemented] > 0 && k.okStates == 0,
		}
		if k.calls > 0 {
			kr.MeanRequestBytes = float64(k.reqBytes) / float64(k.calls)
		}
		if k.okCalls > 0 {
			kr.MeanResponseBytes = float64(k.respBytes) / float64(k.okCalls)
		}
		if kr.Unimplemented {
			rep.Unimplemented = append(rep.Unimplemented, n)
		}
		rep.Calls += k.calls
		rep.Shed += kr.Shed
		for c, v := range k.callErrs {
			rep.ErrorsByCode[c.String()] += v
		}
		for c, v := range k.itemErrs {
			rep.ErrorsByCode[c.String()] += v
		}
		okStates += k.okStates
		hits += k.hits
		rep.Kinds = append(rep.Kinds, kr)
	}
	rep.StatesOK = okStates
	if elapsed > 0 {
		rep.StatesPerSecond = float64(okStates) / elapsed.Seconds()
		rep.StatesPerSecondPerCore = rep.StatesPerSecond / float64(rep.Cores)
	}
	if okStates > 0 {
		r := float64(hits) / float64(okStates)
		rep.CacheHitRatio = &r
	}
	return rep
}

func codeMap(m map[codes.Code]int64) map[string]int64 {
	out := make(map[string]int64, len(m))
	for c, n := range m {
		out[c.String()] = n
	}
	return out
}

// describe names a run's shape for the report header.
func (cfg *config) describe() string {
	streams := fmt.Sprintf("%d", cfg.minStreams)
	if cfg.maxStreams > cfg.minStreams {
		streams = fmt.Sprintf("%d–%d", cfg.minStreams, cfg.maxStreams)
	}
	bound := fmt.Sprintf("%v", cfg.duration)
	if cfg.timesteps > 0 {
		bound = fmt.Sprintf("%d timesteps", cfg.timesteps)
		if cfg.duration > 0 {
			bound += fmt.Sprintf(" or %v", cfg.duration)
		}
	}
	return fmt.Sprintf("%d clients (plants of %s streams), %s, %s mode, mix %s, seed %d", cfg.clients, streams, bound, cfg.mode, cfg.mixString(), cfg.seed)
}
