// Command fugad serves the fugad phase-behaviour API over gRPC, with
// Prometheus metrics on a separate HTTP port.
//
// Every flag has an environment-variable fallback: --grpc-addr reads
// FUGAD_GRPC_ADDR, --max-concurrent-solves reads FUGAD_MAX_CONCURRENT_SOLVES,
// and so on (upper case, dashes as underscores, prefix FUGAD_). A flag given
// on the command line wins over the environment.
//
// Results are engineering estimates from published models with known
// limits; design of relief, flare and pressure systems must follow the
// applicable codes and be checked by licensed engineers.
package main

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"flag"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/signal"
	"strings"
	"syscall"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"go.uber.org/zap"
	"go.uber.org/zap/zapcore"

	"github.com/fugad/fugad/server"
)

// version is set at build time with -ldflags "-X main.version=…".
var version = "dev"

// config is everything the binary is configured with.
type config struct {
	GRPCAddr    string
	MetricsAddr string
	TLSCert     string
	TLSKey      string
	TLSClientCA string
	LogLevel    string
	Reflection  bool
	DrainDelay  time.Duration
	Drain       time.Duration
	Version     bool
	Server      server.Config
}

// parseConfig fills a config from args with FUGAD_* environment fallbacks.
func parseConfig(args []string, getenv func(string) string, stderr io.Writer) (*config, error) {
	c := &config{}
	fs := flag.NewFlagSet("fugad", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.StringVar(&c.GRPCAddr, "grpc-addr", ":50051", "address the gRPC service listens on")
	fs.StringVar(&c.MetricsAddr, "metrics-addr", ":9464", "address the Prometheus metrics endpoint (/metrics) listens on; empty disables it")
	fs.StringVar(&c.TLSCert, "tls-cert", "", "PEM certificate file; with --tls-key enables TLS")
	fs.StringVar(&c.TLSKey, "tls-key", "", "PEM private key file for --tls-cert")
	fs.StringVar(&c.TLSClientCA, "tls-client-ca", "", "PEM CA bundle; when set, clients must present a certificate it signs (mutual TLS)")
	fs.StringVar(&c.LogLevel, "log-level", "info", "log level: debug, info, warn, error")
	fs.BoolVar(&c.Reflection, "reflection", true, "register the gRPC server reflection service")
	fs.DurationVar(&c.DrainDelay, "drain-delay", 0, "time between health turning NOT_SERVING and the graceful stop")
	fs.DurationVar(&c.Drain, "drain-timeout", server.DefaultDrainTimeout, "bound on the graceful stop before a hard stop")
	fs.IntVar(&c.Server.MaxConcurrentSolves, "max-concurrent-solves", server.DefaultMaxConcurrentSolves(), "solver slots: calls answered at once (default GOMAXPROCS−1, at least 1, leaving a processor to the RPC layer); excess calls get UNAVAILABLE at once")
	fs.IntVar(&c.Server.MaxComponents, "max-components", server.DefaultMaxComponents, "components per fluid")
	fs.IntVar(&c.Server.MaxBatchStates, "max-batch-states", server.DefaultMaxBatchStates, "states per FlashBatch call")
	fs.IntVar(&c.Server.MaxEnvelopePoints, "max-envelope-points", server.DefaultMaxEnvelopePoints, "points per phase envelope")
	fs.IntVar(&c.Server.MaxMessageBytes, "max-message-bytes", server.DefaultMaxMessageBytes, "largest gRPC message received or sent, bytes")
	fs.DurationVar(&c.Server.MaxDeadline, "max-deadline", server.DefaultMaxDeadline, "cap on a call's deadline (and the deadline of calls without one)")
	fs.DurationVar(&c.Server.StreamIdleTimeout, "stream-idle-timeout", server.DefaultStreamIdleTimeout, "end a FlashStream idle this long")
	fs.BoolVar(&c.Server.Cache.Disabled, "disable-cache", false, "turn the result and compiled-fluid caches off")
	fs.IntVar(&c.Server.Cache.ResultEntries, "result-cache-entries", 0, "entries of the result cache (0: the cache's default)")
	fs.Int64Var(&c.Server.Cache.ResultBytes, "result-cache-bytes", 0, "accounted bytes of the result cache (0: the cache's default)")
	fs.Float64Var(&c.Server.Cache.Quantization, "cache-quantization", 0, "relative tolerance (at most 1e-3) to which flash inputs are rounded so that nearly equal states share cached results; the solve uses the rounded inputs and every report states it (0: off, exact keys)")
	fs.BoolVar(&c.Version, "version", false, "print the version and exit")
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "Usage: fugad [flags]\n\nServes the fugad phase-behaviour API. Each flag falls back to the environment variable FUGAD_<FLAG> (upper case, '-' as '_').\n\n")
		fs.PrintDefaults()
	}
	// Environment values become the defaults, so explicit flags win.
	var envErr error
	fs.VisitAll(func(f *flag.Flag) {
		name := "FUGAD_" + strings.ToUpper(strings.ReplaceAll(f.Name, "-", "_"))
		if v := getenv(name); v != "" {
			if err := f.Value.Set(v); err != nil && envErr == nil {
				envErr = fmt.Errorf("invalid value %q for %s: %v", v, name, err)
			}
		}
	})
	if envErr != nil {
		fmt.Fprintln(stderr, envErr)
		fs.Usage()
		return nil, envErr
	}
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if fs.NArg() > 0 {
		err := fmt.Errorf("unexpected arguments: %q", fs.Args())
		fmt.Fprintln(stderr, err)
		fs.Usage()
		return nil, err
	}
	if (c.TLSCert == "") != (c.TLSKey == "") {
		err := errors.New("--tls-cert and --tls-key must be given together")
		fmt.Fprintln(stderr, err)
		return nil, err
	}
	if c.TLSClientCA != "" && c.TLSCert == "" {
		err := errors.New("--tls-client-ca needs --tls-cert and --tls-key")
		fmt.Fprintln(stderr, err)
		return nil, err
	}
	return c, nil
}

// tlsConfig loads the TLS configuration, or returns nil for plaintext.
func (c *config) tlsConfig() (*tls.Config, error) {
	if c.TLSCert == "" {
		return nil, nil
	}
	cert, err := tls.LoadX509KeyPair(c.TLSCert, c.TLSKey)
	if err != nil {
		return nil, fmt.Errorf("loading TLS key pair: %w", err)
	}
	tc := &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	if c.TLSClientCA != "" {
		pem, err := os.ReadFile(c.TLSClientCA)
		if err != nil {
			return nil, fmt.Errorf("reading client CA: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("no certificates in %s", c.TLSClientCA)
		}
		tc.ClientCAs = pool
		tc.ClientAuth = tls.RequireAndVerifyClientCert
	}
	return tc, nil
}

// newLogger returns the zap production logger (JSON, sampled) at level.
func newLogger(level string) (*zap.Logger, error) {
	lvl, err := zapcore.ParseLevel(level)
	if err != nil {
		return nil, err
	}
	zc := zap.NewProductionConfig()
	zc.Level = zap.NewAtomicLevelAt(lvl)
	return zc.Build()
}

func main() {
	c, err := parseConfig(os.Args[1:], os.Getenv, os.Stderr)
	if errors.Is(err, flag.ErrHelp) {
		os.Exit(0)
	}
	if err != nil {
		os.Exit(2)
	}
	if c.Version {
		fmt.Println("fugad", version)
		return
	}
	if err := run(c); err != nil {
		fmt.Fprintln(os.Stderr, "fugad:", err)
		os.Exit(1)
	}
}

// run starts the components and blocks until a signal or a failure. Each
// component is an (execute, interrupt) pair in its own block, after
// prometheus/cmd/prometheus.
func run(c *config) error {
	log, err := newLogger(c.LogLevel)
	if err != nil {
		return fmt.Errorf("--log-level: %w", err)
	}
	defer func() { _ = log.Sync() }()

	reg := prometheus.NewRegistry()
	reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	srv, err := server.New(c.Server, log, reg)
	if err != nil {
		return err
	}
	tc, err := c.tlsConfig()
	if err != nil {
		return err
	}
	host, err := server.NewHost(srv, reg, server.HostOptions{Reflection: c.Reflection, TLS: tc, DrainDelay: c.DrainDelay, DrainTimeout: c.Drain})
	if err != nil {
		return err
	}
	eff := srv.Config()
	log.Info("configuration",
		zap.String("version", version),
		zap.String("grpc_addr", c.GRPCAddr),
		zap.String("metrics_addr", c.MetricsAddr),
		zap.Bool("tls", tc != nil),
		zap.Bool("mutual_tls", c.TLSClientCA != ""),
		zap.String("log_level", c.LogLevel),
		zap.Bool("reflection", c.Reflection),
		zap.Duration("drain_delay", c.DrainDelay),
		zap.Duration("drain_timeout", c.Drain),
		zap.Int("max_concurrent_solves", eff.MaxConcurrentSolves),
		zap.Int("max_components", eff.MaxComponents),
		zap.Int("max_batch_states", eff.MaxBatchStates),
		zap.Int("max_envelope_points", eff.MaxEnvelopePoints),
		zap.Int("max_message_bytes", eff.MaxMessageBytes),
		zap.Duration("max_deadline", eff.MaxDeadline),
		zap.Duration("stream_idle_timeout", eff.StreamIdleTimeout),
		zap.Bool("cache_disabled", eff.Cache.Disabled),
		zap.Int("result_cache_entries", eff.Cache.ResultEntries),
		zap.Int64("result_cache_bytes", eff.Cache.ResultBytes),
		zap.Float64("cache_quantization", eff.Cache.Quantization),
		zap.String("data_version", eff.DataVersion),
		zap.String("model_version", eff.ModelVersion),
	)

	glis, err := net.Listen("tcp", c.GRPCAddr)
	if err != nil {
		return err
	}
	var mlis net.Listener
	if c.MetricsAddr != "" {
		if mlis, err = net.Listen("tcp", c.MetricsAddr); err != nil {
			_ = glis.Close()
			return err
		}
	}

	errc := make(chan error, 3)

	// Signals: SIGTERM or SIGINT starts the shutdown.
	sig := make(chan os.Signal, 1)
	signal.Notify(sig, syscall.SIGTERM, syscall.SIGINT)
	defer signal.Stop(sig)

	// gRPC service.
	go func() {
		log.Info("listening", zap.String("grpc", glis.Addr().String()))
		errc <- host.Serve(glis)
	}()

	// Metrics endpoint.
	var hs *http.Server
	if mlis != nil {
		mux := http.NewServeMux()
		mux.Handle("/metrics", server.MetricsHandler(reg))
		hs = &http.Server{Handler: mux, ReadHeaderTimeout: 10 * time.Second}
		go func() {
			log.Info("listening", zap.String("metrics", "http://"+mlis.Addr().String()+"/metrics"))
			if err := hs.Serve(mlis); !errors.Is(err, http.ErrServerClosed) {
				errc <- err
			}
		}()
	}

	var runErr error
	select {
	case s := <-sig:
		log.Info("signal received, shutting down", zap.String("signal", s.String()))
	case runErr = <-errc:
		log.Error("component failed, shutting down", zap.Error(runErr))
	}
	graceful := host.Shutdown()
	if hs != nil {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		_ = hs.Shutdown(ctx)
		cancel()
	}
	log.Info("stopped", zap.Bool("graceful", graceful))
	return runErr
}
