package server

import (
	"context"
	"errors"
	"fmt"

	"github.com/prometheus/client_golang/prometheus"

	"github.com/fugad/fugad/cache"
)

// CacheConfig sizes the server's caches. The zero value enables both with
// the cache package's defaults.
type CacheConfig struct {
	// Disabled turns both caches off.
	Disabled bool
	// ResultEntries and ResultBytes bound the result cache; zero selects
	// cache.DefaultMaxEntries and cache.DefaultMaxBytes.
	ResultEntries int
	ResultBytes   int64
	// FluidEntries bounds the compiled-fluid cache; zero selects
	// cache.DefaultMaxFluids.
	FluidEntries int
	// Quantization, when positive, is the relative tolerance with which
	// the floating-point inputs of every flash (the two specified values,
	// the feed's mole fractions and the warm start) are rounded by
	// cache.Quantize before the cache key is built, so that nearly equal
	// states share a cached result. The solve then uses the rounded
	// inputs, also with bypass_cache or the cache disabled, so that the
	// answer does not depend on which nearby request came first, and
	// every SolverReport states the tolerance in
	// input_quantization_relative_tolerance. Off (exact keys) when zero;
	// at most 1e-3. FugacityCoefficients is never quantised.
	Quantization float64
}

// maxQuantization bounds CacheConfig.Quantization: a coarser grid would
// move states by more than an engineer would accept unannounced.
const maxQuantization = 1e-3

// caches adapts the cache package to the server's fluidStore and
// resultStore seams.
type caches struct {
	results *cache.Results
	fluids  *cache.Fluids[*compiledFluid]
	onPanic func(p any) error
	version string // data and model version, part of every key
}

func newCaches(cfg CacheConfig, version string, onPanic func(any) error) (*caches, error) {
	r, err := cache.NewResults(cache.Config{MaxEntries: cfg.ResultEntries, MaxBytes: cfg.ResultBytes})
	if err != nil {
		return nil, fmt.Errorf("server: result cache: %w", err)
	}
	f, err := cache.NewFluids[*compiledFluid](cache.FluidsConfig{MaxEntries: cfg.FluidEntries})
	if err != nil {
		return nil, fmt.Errorf("server: fluid cache: %w", err)
	}
	return &caches{results: r, fluids: f, onPanic: onPanic, version: version}, nil
}

// key builds a cache key from a kind and encoded bytes.
func (c *caches) key(kind string, b []byte) (cache.Key, error) {
	var kb cache.KeyBuilder
	kb.AppendString(kind)
	kb.AppendString(c.version)
	kb.AppendBytes(b)
	return kb.Key()
}

func (c *caches) get(def []byte) (*compiledFluid, bool) {
	kb := keyBuilders.Get().(*cache.KeyBuilder)
	defer keyBuilders.Put(kb)
	kb.Reset()
	kb.AppendString("fluid")
	kb.AppendString(c.version)
	kb.AppendBytes(def)
	k, err := kb.Key()
	if err != nil {
		return nil, false
	}
	return c.fluids.Get(k)
}

func (c *caches) compiled(def []byte, build func() (*compiledFluid, error)) (*compiledFluid, error) {
	k, err := c.key("fluid", def)
	if err != nil {
		return build()
	}
	cf, err := c.fluids.GetOrBuild(k, build)
	var pe *cache.PanicError
	if errors.As(err, &pe) {
		return nil, c.onPanic(pe.Value)
	}
	return cf, err
}

func (c *caches) do(ctx context.Context, k cache.Key, solve func(ctx context.Context) ([]byte, bool, error)) ([]byte, bool, error) {
	v, hit, _, err := c.results.Do(ctx, k, cache.SolveFunc(solve))
	var pe *cache.PanicError
	if errors.As(err, &pe) {
		return nil, false, c.onPanic(pe.Value)
	}
	return v, hit, err
}

// registerCacheMetrics publishes the caches' counters.
func registerCacheMetrics(reg prometheus.Registerer, c *caches) error {
	type series struct {
		name, help string
		counter    bool
		value      func() float64
	}
	rs := func() cache.Stats { return c.results.Stats() }
	fs := func() cache.FluidStats { return c.fluids.Stats() }
	all := []struct {
		cache string
		list  []series
	}{
		{"results", []series{
			{"fugad_cache_hits_total", "Cache lookups answered from the cache.", true, func() float64 { return float64(rs().Hits) }},
			{"fugad_cache_misses_total", "Cache lookups that were not.", true, func() float64 { return float64(rs().Misses) }},
			{"fugad_cache_evictions_total", "Entries evicted to respect the cache's bounds.", true, func() float64 { return float64(rs().Evictions) }},
			{"fugad_cache_collapsed_total", "Misses that joined an identical solve already in flight.", true, func() float64 { return float64(rs().Collapsed) }},
			{"fugad_cache_entries", "Entries stored now.", false, func() float64 { return float64(rs().Entries) }},
		}},
		{"fluids", []series{
			{"fugad_cache_hits_total", "Cache lookups answered from the cache.", true, func() float64 { return float64(fs().Hits) }},
			{"fugad_cache_misses_total", "Cache lookups that were not.", true, func() float64 { return float64(fs().Misses) }},
			{"fugad_cache_evictions_total", "Entries evicted to respect the cache's bounds.", true, func() float64 { return float64(fs().Evictions) }},
			{"fugad_cache_collapsed_total", "Misses that joined an identical solve already in flight.", true, func() float64 { return float64(fs().Collapsed) }},
			{"fugad_cache_entries", "Entries stored now.", false, func() float64 { return float64(fs().Entries) }},
		}},
	}
	for _, a := range all {
		for _, s := range a.list {
			opts := prometheus.Opts{Name: s.name, Help: s.help, ConstLabels: prometheus.Labels{"cache": a.cache}}
			var col prometheus.Collector
			if s.counter {
				col = prometheus.NewCounterFunc(prometheus.CounterOpts(opts), s.value)
			} else {
				col = prometheus.NewGaugeFunc(prometheus.GaugeOpts(opts), s.value)
			}
			if err := reg.Register(col); err != nil {
				return fmt.Errorf("server: registering cache metrics: %w", err)
			}
		}
	}
	b := prometheus.NewGaugeFunc(prometheus.GaugeOpts{Name: "fugad_cache_bytes", Help: "Accounted bytes stored in the result cache.", ConstLabels: prometheus.Labels{"cache": "results"}},
		func() float64 { return float64(rs().Bytes) })
	return reg.Register(b)
}
