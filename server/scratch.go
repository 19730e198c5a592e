package server

import (
	"math"
	"runtime"
	"sync"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/envelope"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/stateflash"
)

// solverScratch is one goroutine's memory for the solvers other than the
// T–P flash on one compiled fluid: a state-function flash workspace and
// result, an envelope solver with its point, the buffers of a warm start,
// and an ln φ workspace for the phases of a vapour-fraction point. Each
// part is made on first use, so a fluid only ever flashed at P–H carries
// no envelope solver.
type solverScratch struct {
	mx *eos.Mixture

	state *stateflash.Workspace
	sres  *stateflash.Result

	env     *envelope.Solver
	envOpts envelope.Options
	point   *envelope.Point

	// fe translates a wire warm start into a flash.Estimate (its flash
	// workspace stays nil).
	fe flashScratch
	// lnK holds the ln K of an envelope hint.
	lnK []float64

	ews *eos.Workspace
	fug *eos.Fugacity
}

// scratchPools maps a compiled fluid's mixture to its pool of
// *solverScratch. A pool lives in this side table rather than in
// compiledFluid so that compiled fluids stay the T–P flash's own; the entry
// is deleted when the compiled fluid is collected (runtime.AddCleanup), so
// evicted fluids do not accumulate.
var scratchPools sync.Map // *eos.Mixture → *sync.Pool

func scratchPool(cf *compiledFluid) *sync.Pool {
	if p, ok := scratchPools.Load(cf.mixture); ok {
		return p.(*sync.Pool)
	}
	p, loaded := scratchPools.LoadOrStore(cf.mixture, new(sync.Pool))
	if !loaded {
		runtime.AddCleanup(cf, func(mx *eos.Mixture) { scratchPools.Delete(mx) }, cf.mixture)
	}
	return p.(*sync.Pool)
}

// getSolverScratch takes a scratch for cf from its pool; putSolverScratch
// returns it.
func getSolverScratch(cf *compiledFluid) *solverScratch {
	if sc, ok := scratchPool(cf).Get().(*solverScratch); ok {
		return sc
	}
	n := cf.n()
	return &solverScratch{mx: cf.mixture, fe: flashScratch{lnK: make([]float64, n)}, lnK: make([]float64, n)}
}

func putSolverScratch(cf *compiledFluid, sc *solverScratch) { scratchPool(cf).Put(sc) }

// stateFlash returns the state-function flash workspace and result.
func (sc *solverScratch) stateFlash() (*stateflash.Workspace, *stateflash.Result) {
	if sc.state == nil {
		sc.state, sc.sres = stateflash.NewWorkspace(sc.mx), stateflash.NewResult(sc.mx)
	}
	return sc.state, sc.sres
}

// envelope returns an envelope solver with options o (made anew when the
// options differ from the kept solver's) and its point.
func (sc *solverScratch) envelope(o envelope.Options) (*envelope.Solver, *envelope.Point, error) {
	if sc.env == nil || sc.envOpts != o {
		s, err := envelope.NewSolver(sc.mx, o)
		if err != nil {
			return nil, nil, err
		}
		sc.env, sc.envOpts = s, o
	}
	if sc.point == nil {
		sc.point = envelope.NewPoint(sc.mx)
	}
	return sc.env, sc.point, nil
}

// phaseEval returns the ln φ workspace and result.
func (sc *solverScratch) phaseEval() (*eos.Workspace, *eos.Fugacity) {
	if sc.ews == nil {
		sc.ews, sc.fug = sc.mx.NewWorkspace(), sc.mx.NewFugacity()
	}
	return sc.ews, sc.fug
}

// envelopeOptions maps the wire solver options onto the envelope
// package's; zero values select its defaults on both sides.
func envelopeOptions(o *fugadv1.SolverOptions) envelope.Options {
	return envelope.Options{Tolerance: o.GetTolerance(), MaxIterations: int(o.GetMaxIterations())}
}

// hint builds the envelope hint of a wire warm start: start is the
// estimate of the unknown (zero for none), and the K-values come from
// warm_start.k_values or, failing those, from a two-phase warm start's
// first (vapour) and last phase compositions. The ln K are written into
// sc's buffer.
func (sc *solverScratch) hint(w *fugadv1.WarmStart, start float64, branch envelope.BranchChoice) (h envelope.Hint, used bool) {
	h = envelope.Hint{Branch: branch, Start: start}
	if kv := w.GetKValues(); len(kv) == len(sc.lnK) {
		for i, k := range kv {
			sc.lnK[i] = math.Log(k)
		}
		h.LnK = sc.lnK
	} else if ph := w.GetPhases(); len(ph) >= 2 {
		y, x := ph[0].GetMoleFractions(), ph[len(ph)-1].GetMoleFractions()
		ok := len(y) == len(sc.lnK) && len(x) == len(sc.lnK)
		for i := 0; ok && i < len(sc.lnK); i++ {
			if !(y[i] > 0 && x[i] > 0) {
				ok = false
				break
			}
			sc.lnK[i] = math.Log(y[i] / x[i])
		}
		if ok {
			h.LnK = sc.lnK
		}
	}
	return h, h.Start > 0 || h.LnK != nil
}
