package stateflash

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
	"github.com/fugad/fugad/thermo/internal/linalg"
)

// Workspace holds the scratch memory of one goroutine's state-function
// flashes of one Mixture: an inner T–P flash workspace and result, and the
// buffers of the sensitivity equations. It is not safe for concurrent
// use; make one per goroutine and reuse it.
type Workspace struct {
	mx  *eos.Mixture
	fws *flash.Workspace
	ews *eos.Workspace
	n   int

	// call state
	ctx  context.Context
	set  settings
	rep  *Report
	spec Spec
	z    []float64
	act  []int
	pure int // the only component with z_i > 0, or −1

	// inner flash
	fres    *flash.Result
	est     flash.Estimate
	haveEst bool
	// With lazy (P–H, P–S) an inner flash warm-started from a split of two
	// or more phases converges the split without its stability test
	// (flash.Workspace.Split); unverified says fres came from such a
	// flash, and the outer solve confirms its final state with a full T–P
	// flash before it returns.
	lazy, unverified bool
	// seedLoose says the single-phase solve stopped early
	// (wilsonTwoPhase).
	seedLoose bool

	// sensitivities
	fug  [flash.MaxPhases]*eos.Fugacity
	A    []float64 // ((m−1)·na)² system matrix
	bT   []float64 // right-hand sides, then solutions dn/dT, dn/dP
	bP   []float64
	ph   [flash.MaxPhases]int // phase order used by the sensitivity system
	sens sensitivity

	o outer
}

// NewWorkspace returns a state-function flash workspace for mx.
func NewWorkspace(mx *eos.Mixture) *Workspace {
	n := mx.N()
	dim := (flash.MaxPhases - 1) * n
	fws := flash.NewWorkspace(mx)
	ws := &Workspace{
		// One eos workspace for the inner flashes and the outer
		// evaluations: its temperature-dependent parameters are then
		// computed once per temperature.
		mx: mx, fws: fws, ews: fws.EOSWorkspace(), n: n,
		z: make([]float64, n), act: make([]int, 0, n), pure: -1,
		fres: flash.NewResult(mx),
		A:    make([]float64, dim*dim), bT: make([]float64, dim), bP: make([]float64, dim),
	}
	for k := range ws.fug {
		ws.fug[k] = mx.NewFugacity()
	}
	return ws
}

// Mixture returns the mixture the workspace was made for.
func (ws *Workspace) Mixture() *eos.Mixture { return ws.mx }

// begin validates the feed and the options and resets the report.
func (ws *Workspace) begin(ctx context.Context, spec Spec, opts *Options, z []float64, warm *Estimate, res *Result) error {
	set, err := opts.resolve()
	if err != nil {
		return err
	}
	if res == nil || res.n != ws.n {
		return &InputError{Field: "res", Value: float64(ws.n), Reason: "Result not sized for this mixture (use NewResult)"}
	}
	if len(z) != ws.n {
		return &InputError{Field: "z", Value: float64(len(z)), Reason: fmt.Sprintf("composition has %d entries, the mixture %d components", len(z), ws.n)}
	}
	s := 0.0
	for i, v := range z {
		if !finite(v) || v < 0 {
			return &InputError{Field: fmt.Sprintf("z[%d]", i), Value: v, Reason: "mole fraction must be finite and non-negative"}
		}
		s += v
	}
	if !(s > 0) || math.IsInf(s, 0) {
		return &InputError{Field: "z", Value: s, Reason: "composition must have a positive, finite sum"}
	}
	if warm != nil {
		if warm.T != 0 && !(finite(warm.T) && warm.T > 0) {
			return &InputError{Field: "warm.T", Value: warm.T, Reason: "must be a finite positive temperature in K, or zero"}
		}
		if warm.P != 0 && !(finite(warm.P) && warm.P > 0) {
			return &InputError{Field: "warm.P", Value: warm.P, Reason: "must be a finite positive pressure in Pa, or zero"}
		}
	}
	ws.act = ws.act[:0]
	for i, v := range z {
		ws.z[i] = v / s
		if v > 0 {
			ws.act = append(ws.act, i)
		}
	}
	ws.pure = -1
	if len(ws.act) == 1 {
		ws.pure = ws.act[0]
	}
	ws.ctx, ws.set, ws.spec = ctx, set, spec
	ws.rep = &res.Report
	*ws.rep = Report{Spec: spec, Warm: warm != nil}
	ws.haveEst = false
	ws.lazy, ws.unverified, ws.seedLoose = false, false, false
	return nil
}

// stop polls the context and the cancel hook of the inner options.
func (ws *Workspace) stop() error {
	if ws.ctx != nil {
		if err := ws.ctx.Err(); err != nil {
			return &canceledError{err: err}
		}
	}
	if c := ws.set.flash.Cancel; c != nil && c() {
		return flash.ErrStopped
	}
	return nil
}

// tp runs the inner T–P flash at (T, P) into ws.fres, warm-started from
// the given estimate, else from the previous inner result, else cold. An
// estimate that ends in a convergence failure is retried cold once.
func (ws *Workspace) tp(T, P float64, warm *flash.Estimate) error {
	if warm == nil && ws.haveEst {
		ws.est = ws.fres.Estimate()
		warm = &ws.est
	}
	ws.unverified = false
	if ws.lazy && warm != nil && warm.Phases >= 2 {
		fo := ws.set.flash
		if r := ws.o.resid; finite(r) && r > looseSplitResid {
			// Far from the specification the split only has to place
			// the next outer step: its error enters H at about
			// R·T·looseSplitTol, well below the error of that step.
			fo.Tolerance = math.Max(tolOf(fo), looseSplitTol)
		}
		ok, err := ws.fws.Split(ws.ctx, T, P, ws.z, fo, warm, ws.fres)
		ws.count(&ws.fres.Report)
		if err != nil && !solverFailure(err) {
			return err
		}
		if ok && err == nil {
			ws.haveEst, ws.unverified = true, true
			return nil
		}
	}
	err := ws.tpOnce(T, P, warm)
	if err != nil && warm != nil && solverFailure(err) {
		err = ws.tpOnce(T, P, nil)
	}
	ws.haveEst = err == nil
	return err
}

// solverFailure reports whether an inner error is the solver's (a
// convergence failure, or any other failure at a valid state) rather than
// bad input of ours or a cancellation.
func solverFailure(err error) bool {
	var ie *flash.InputError
	if errors.As(err, &ie) || errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) || errors.Is(err, flash.ErrStopped) {
		return false
	}
	return true
}

func (ws *Workspace) tpOnce(T, P float64, warm *flash.Estimate) error {
	err := ws.fws.PT(ws.ctx, T, P, ws.z, ws.set.flash, warm, ws.fres)
	ws.count(&ws.fres.Report)
	return err
}

// count adds the work of one inner flash to the report.
func (ws *Workspace) count(fr *flash.Report) {
	r := ws.rep
	r.Flashes++
	switch fr.Path {
	case flash.PathWarm, flash.PathUnverified:
		r.WarmFlashes++
	case flash.PathWarmFallback:
		r.FallbackFlashes++
	}
	r.StabilityTrials += fr.StabilityTrials
	r.StabilityIterations += fr.StabilityIterations
	r.SSIterations += fr.SSIterations
	r.NewtonIterations += fr.NewtonIterations
	r.RRIterations += fr.RRIterations
	r.LnPhiEvaluations += fr.LnPhiEvaluations
}

// finish copies the final inner result into res.
func (ws *Workspace) finish(res *Result, route Route, specResid float64) {
	res.copyFrom(ws.fres)
	r := ws.rep
	r.Route = route
	r.Converged = true
	r.Phases = len(res.Phases)
	r.Residual = ws.fres.Report.Residual
	r.MinTPD = ws.fres.Report.MinTPD
	r.SpecResidual = specResid
}

// sensitivity holds the derivatives of the equilibrium state of the last
// inner flash (per mole of feed), phase changes included:
// (∂H/∂T)_P, (∂H/∂P)_T, (∂V/∂T)_P, (∂V/∂P)_T.
type sensitivity struct {
	HT, HP, VT, VP float64
}

// sensitivities computes the derivatives of the equilibrium state held in
// ws.fres. With one phase they are the phase's own,
//
//	(∂v/∂T)_P = −(∂P/∂T)_v/(∂P/∂v)_T,  (∂v/∂P)_T = 1/(∂P/∂v)_T,
//	(∂h/∂T)_P = Cp,  (∂h/∂P)_T = v − T(∂v/∂T)_P.
//
// With m phases the mole numbers n_k (k = 1 … m−1; phase 0 takes the
// rest) move so that fugacity equality holds; differentiating
// ln f_ik = ln f_i0 gives (Michelsen & Mollerup 2007, ch. 11)
//
//	Σ_l (δ_kl M_k + M_0)·dn_l/dθ = −(∂ln φ_k/∂θ − ∂ln φ_0/∂θ),  θ = T, P,
//	M_k,ij = (δ_ij/x_ik − 1 + ∂ln φ_ik/∂n_j)/β_k,
//
// a symmetric positive-definite system at a stable equilibrium, solved by
// Cholesky. Then
//
//	(∂H/∂θ) = Σ_k β_k (∂h_k/∂θ) + Σ_{k≥1} Σ_i (h̄_ik − h̄_i0)·dn_ik/dθ,
//	h̄_ik − h̄_i0 = −RT²(∂ln φ_ik/∂T − ∂ln φ_i0/∂T),
//	v̄_ik − v̄_i0 = RT(∂ln φ_ik/∂P − ∂ln φ_i0/∂P),
//
// and likewise for V. The heat of phase change is in the second sum; it
// is what makes the total heat capacity of a narrow-boiling mixture large.
// It reports false when the system is not positive definite (a
// near-singular split, as for a pure component).
func (ws *Workspace) sensitivities() (bool, error) {
	r := ws.fres
	T, P := r.T, r.P
	s := &ws.sens
	*s = sensitivity{}
	m := len(r.Phases)
	for k := range m {
		pr := &r.Phases[k].Props
		b := r.Phases[k].Beta
		vT := -pr.DPDT / pr.DPDV
		s.HT += b * pr.Cp
		s.HP += b * (pr.MolarVolume - T*vT)
		s.VT += b * vT
		s.VP += b / pr.DPDV
	}
	if m == 1 {
		return finite(s.HT) && finite(s.VP), nil
	}
	if d, ok := r.Derivatives(); ok {
		// The T–P flash solved the same system with its Newton Hessian.
		*s = sensitivity{HT: d.HT, HP: d.HP, VT: d.VT, VP: d.VP}
		return s.HT > 0 && s.VP < 0, nil
	}
	// Reference phase 0 is the most abundant: its M_0 enters every block.
	ref := 0
	for k := 1; k < m; k++ {
		if r.Phases[k].Beta > r.Phases[ref].Beta {
			ref = k
		}
	}
	ws.ph[0] = ref
	j := 1
	for k := range m {
		if k != ref {
			ws.ph[j] = k
			j++
		}
	}
	for a := range m {
		k := ws.ph[a]
		ws.rep.LnPhiEvaluations++
		if err := ws.mx.Fugacity(ws.ews, T, P, r.Phases[k].X, eos.RootMinGibbs, eos.WantAll, ws.fug[a]); err != nil {
			return false, err
		}
	}
	na := len(ws.act)
	dim := (m - 1) * na
	A := ws.A[:dim*dim]
	for i := range A {
		A[i] = 0
	}
	n := ws.n
	// addBlock adds M_a into block (p, q) of A.
	addBlock := func(a, p, q int) {
		ph := &r.Phases[ws.ph[a]]
		inv := 1 / ph.Beta
		dn := ws.fug[a].DN
		for ii, i := range ws.act {
			row := A[(p*na+ii)*dim+q*na : (p*na+ii)*dim+q*na+na]
			for jj, jc := range ws.act {
				v := dn[i*n+jc] - 1
				if ii == jj {
					v += 1 / math.Max(ph.X[i], 1e-250)
				}
				row[jj] += v * inv
			}
		}
	}
	for p := range m - 1 {
		addBlock(p+1, p, p)
		for q := range m - 1 {
			addBlock(0, p, q)
		}
	}
	f0 := ws.fug[0]
	for p := range m - 1 {
		fk := ws.fug[p+1]
		for ii, i := range ws.act {
			ws.bT[p*na+ii] = -(fk.DT[i] - f0.DT[i])
			ws.bP[p*na+ii] = -(fk.DP[i] - f0.DP[i])
		}
	}
	if !linalg.Cholesky(A, dim) {
		return false, nil
	}
	linalg.CholSolve2(A, dim, ws.bT[:dim], ws.bP[:dim])
	rt := eos.R * T
	for p := range m - 1 {
		fk := ws.fug[p+1]
		for ii, i := range ws.act {
			dh := -rt * T * (fk.DT[i] - f0.DT[i])
			dv := rt * (fk.DP[i] - f0.DP[i])
			nT, nP := ws.bT[p*na+ii], ws.bP[p*na+ii]
			s.HT += dh * nT
			s.HP += dh * nP
			s.VT += dv * nT
			s.VP += dv * nP
		}
	}
	ok := finite(s.HT) && finite(s.HP) && finite(s.VT) && finite(s.VP) && s.HT > 0 && s.VP < 0
	return ok, nil
}

// An unverified inner split run while the previous outer residual exceeds
// looseSplitResid is converged to looseSplitTol (or the inner tolerance,
// if looser) instead of the inner tolerance.
const (
	looseSplitResid = 0.1
	looseSplitTol   = 1e-6
)

// tolOf is the fugacity tolerance of inner options (the flash default
// 1e-10 at zero).
func tolOf(o flash.Options) float64 {
	if o.Tolerance == 0 {
		return 1e-10
	}
	return o.Tolerance
}
