package server

import (
	"fmt"
	"strconv"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// metrics are the solver and server metrics of fugad. The gRPC server
// metrics (fugad-independent) are registered separately by NewHost.
type metrics struct {
	iterations   *prometheus.HistogramVec // fugad_solver_iterations{stage}
	lnPhiEvals   prometheus.Histogram     // fugad_solver_lnphi_evaluations
	solveSeconds *prometheus.HistogramVec // fugad_solve_duration_seconds{spec}
	nonConverged *prometheus.CounterVec   // fugad_solver_nonconverged_total{reason,stage}
	stopped      *prometheus.CounterVec   // fugad_solver_stopped_total{reason}
	phases       *prometheus.CounterVec   // fugad_phases_total{phases}
	shed         *prometheus.CounterVec   // fugad_shed_total{method}
	panics       prometheus.Counter       // fugad_panics_total

	// Series kept for observeSolve, by stage enum value and phase count.
	stageIterations [fugadv1.SolverStage_SOLVER_STAGE_FUGACITY + 1]*series[prometheus.Observer]
	phaseCounts     [4]*series[prometheus.Counter]
	tpSeconds       *series[prometheus.Observer]
}

// Buckets. Iteration counts of a converged flash stage are mostly 1–30
// with a long tail up to the iteration cap; ln φ evaluations per state run
// from 1 (FugacityCoefficients) to thousands (a hard three-phase flash);
// solves take microseconds, so prometheus.DefBuckets (made for network
// latency, 5 ms–10 s) would put everything in the first bucket.
var (
	iterationBuckets  = []float64{0, 1, 2, 3, 5, 8, 13, 20, 30, 50, 100, 200, 500, 1000, 10000}
	evaluationBuckets = []float64{1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000}
	solveBuckets      = prometheus.ExponentialBucketsRange(1e-6, 10, 22) // 1 µs … 10 s, ×2.08 per bucket
)

// newMetrics creates the metrics and registers them with reg.
func newMetrics(reg prometheus.Registerer) (*metrics, error) {
	m := &metrics{
		iterations: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "fugad_solver_iterations",
			Help:    "Iterations of one solver stage for one state, by stage.",
			Buckets: iterationBuckets,
		}, []string{"stage"}),
		lnPhiEvals: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name:    "fugad_solver_lnphi_evaluations",
			Help:    "Evaluations of ln φ (one phase, one state each) spent on one state.",
			Buckets: evaluationBuckets,
		}),
		solveSeconds: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name:    "fugad_solve_duration_seconds",
			Help:    "Time spent solving one state, excluding decoding, validation and caching, by specification.",
			Buckets: solveBuckets,
		}, []string{"spec"}),
		nonConverged: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "fugad_solver_nonconverged_total",
			Help: "States whose solver stopped without converging, by ErrorInfo reason and failed stage (phase_split, three_phase_split, stability, other).",
		}, []string{"reason", "stage"}),
		stopped: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "fugad_solver_stopped_total",
			Help: "Solves stopped inside their iterations because the call's deadline passed or it was cancelled, by reason (deadline_exceeded, cancelled).",
		}, []string{"reason"}),
		phases: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "fugad_phases_total",
			Help: "Converged flash results by number of phases found.",
		}, []string{"phases"}),
		shed: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "fugad_shed_total",
			Help: "Calls or stream messages refused with UNAVAILABLE because every solver slot was busy, by method.",
		}, []string{"method"}),
		panics: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "fugad_panics_total",
			Help: "Panics recovered in handlers and answered with INTERNAL.",
		}),
	}
	for st := range m.stageIterations {
		label := stageLabel(fugadv1.SolverStage(st))
		m.stageIterations[st] = newSeries(func() prometheus.Observer { return m.iterations.WithLabelValues(label) })
	}
	for k := range m.phaseCounts {
		label := strconv.Itoa(k)
		m.phaseCounts[k] = newSeries(func() prometheus.Counter { return m.phases.WithLabelValues(label) })
	}
	m.tpSeconds = newSeries(func() prometheus.Observer { return m.solveSeconds.WithLabelValues(string(specTP)) })
	for _, c := range []prometheus.Collector{m.iterations, m.lnPhiEvals, m.solveSeconds, m.nonConverged, m.stopped, m.phases, m.shed, m.panics} {
		if err := reg.Register(c); err != nil {
			return nil, fmt.Errorf("server: registering metrics: %w", err)
		}
	}
	return m, nil
}

// stageLabel is the metric label of a solver stage: the enum name without
// its prefix, lower case ("stability", "newton", ...).
func stageLabel(s fugadv1.SolverStage) string {
	switch s {
	case fugadv1.SolverStage_SOLVER_STAGE_STABILITY:
		return "stability"
	case fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION:
		return "successive_substitution"
	case fugadv1.SolverStage_SOLVER_STAGE_NEWTON:
		return "newton"
	case fugadv1.SolverStage_SOLVER_STAGE_RACHFORD_RICE:
		return "rachford_rice"
	case fugadv1.SolverStage_SOLVER_STAGE_STATE_FUNCTION:
		return "state_function"
	case fugadv1.SolverStage_SOLVER_STAGE_SATURATION:
		return "saturation"
	case fugadv1.SolverStage_SOLVER_STAGE_ENVELOPE:
		return "envelope"
	case fugadv1.SolverStage_SOLVER_STAGE_FUGACITY:
		return "fugacity"
	}
	return "unspecified"
}

// observeSolve records one solved state: its duration under spec, its
// report, and for a flash result its phase count (phases ≤ 0 skips that).
// The series of the T–P spec, the stages and the phase counts are looked
// up once and kept (see series), since a label lookup per observation
// costs as much as the rest of a state's bookkeeping.
func (m *metrics) observeSolve(spec string, d time.Duration, r *fugadv1.SolverReport, phases int) {
	if spec == string(specTP) {
		m.tpSeconds.get().Observe(d.Seconds())
	} else {
		m.solveSeconds.WithLabelValues(spec).Observe(d.Seconds())
	}
	if r == nil {
		return
	}
	for _, st := range r.GetStages() {
		stage := st.GetStage()
		switch {
		case stage == fugadv1.SolverStage_SOLVER_STAGE_FUGACITY:
			// A direct evaluation has no iterations to count.
		case int(stage) >= 0 && int(stage) < len(m.stageIterations):
			m.stageIterations[stage].get().Observe(float64(st.GetIterations()))
		default:
			m.iterations.WithLabelValues(stageLabel(stage)).Observe(float64(st.GetIterations()))
		}
	}
	m.lnPhiEvals.Observe(float64(r.GetLnPhiEvaluations()))
	switch {
	case phases > 0 && phases < len(m.phaseCounts):
		m.phaseCounts[phases].get().Inc()
	case phases > 0:
		m.phases.WithLabelValues(strconv.Itoa(phases)).Inc()
	}
}

// series is one labelled series of a vector, looked up on first use (so
// that the exposition lists only series that happened) and kept.
type series[T any] struct {
	once   sync.Once
	lookup func() T
	v      T
}

func newSeries[T any](lookup func() T) *series[T] { return &series[T]{lookup: lookup} }

func (s *series[T]) get() T {
	s.once.Do(func() { s.v = s.lookup() })
	return s.v
}
