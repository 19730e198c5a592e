package flash

import (
	"context"
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/eos"

	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// begin validates a state and prepares the workspace for it.
func (ws *Workspace) begin(ctx context.Context, set settings, rep *Report, T, P float64, z []float64, field string) error {
	if !finite(T) || T <= 0 {
		return &InputError{Field: "T", Value: T, Reason: "temperature must be a finite positive number of kelvin"}
	}
	if !finite(P) || P <= 0 {
		return &InputError{Field: "P", Value: P, Reason: "pressure must be a finite positive number of pascal"}
	}
	if len(z) != ws.n {
		return &InputError{Field: field, Value: float64(len(z)), Reason: fmt.Sprintf("composition has %d entries, the mixture %d components", len(z), ws.n)}
	}
	s := 0.0
	for i, v := range z {
		if !finite(v) || v < 0 {
			return &InputError{Field: fmt.Sprintf("%s[%d]", field, i), Value: v, Reason: "mole fraction must be finite and non-negative"}
		}
		s += v
	}
	if !(s > 0) || math.IsInf(s, 0) {
		return &InputError{Field: field, Value: s, Reason: "composition must have a positive, finite sum"}
	}
	ws.ctx, ws.set, ws.rep, ws.T, ws.P = ctx, set, rep, T, P
	ws.resetHints()
	ws.act = ws.act[:0]
	for i, v := range z {
		ws.z[i] = v / s
		if ws.z[i] > 0 {
			ws.act = append(ws.act, i)
			ws.lnz[i] = fastmath.Log(ws.z[i])
		}
	}
	if err := ws.mx.CheckState(ws.ews, T, P, ws.z); err != nil {
		return err
	}
	ws.mx.LnWilsonK(T, P, ws.lnKw)
	ws.setupTrials()
	ws.m = 0
	ws.facOK, ws.sensOK, ws.pcOK = false, false, false
	ws.warmShift, ws.warmSame, ws.warmSens = false, false, false
	return nil
}

// PT computes the phase equilibrium of feed z (mole fractions or mole
// numbers) at temperature T (K) and pressure P (Pa) with up to three
// phases, writing it into res (made by NewResult for the same mixture).
//
// Without an estimate (warm == nil) the feed's stability is tested
// (Michelsen 1982a); an unstable feed is split into two phases starting
// from the trial that proved it unstable, the split is tested again, and
// a third phase is added from the trial that proves the two-phase split
// unstable. Each split is solved by successive substitution and then
// Newton's method on the Gibbs energy (Michelsen 1982b) to
// max |ln f_i,α − ln f_i,β| ≤ Options.Tolerance. With an estimate of two
// or three phases the split starts from it with Newton steps and skips
// the stability test of the feed; the converged result is tested for
// stability and, should the estimate fail in any way, the cold path is
// run instead (Report.Path says which). The result is never unstable by
// the test: a split that stays unstable at Options.MaxPhases is an error.
//
// Errors: *InputError for bad arguments; *ConvergenceError (ErrNotConverged)
// when no converged, stable split is found, with the best estimate left in
// res; a wrapped ctx.Err() or ErrStopped on cancellation (checked in every
// outer iteration). It allocates nothing.
func (ws *Workspace) PT(ctx context.Context, T, P float64, z []float64, opts Options, warm *Estimate, res *Result) error {
	set, err := opts.resolve()
	if err != nil {
		return err
	}
	if res == nil || res.n != ws.n {
		return &InputError{Field: "res", Value: float64(ws.n), Reason: "Result not sized for this mixture (use NewResult)"}
	}
	rep := &res.Report
	*rep = Report{}
	if err := ws.begin(ctx, set, rep, T, P, z, "z"); err != nil {
		return err
	}
	warmPhases, err := ws.copyWarm(warm)
	if err != nil {
		return err
	}
	path := PathCold
	if warmPhases >= 2 && warmPhases <= set.maxPhases {
		ok, err := ws.warmSolve(warmPhases, warm, true)
		if err != nil {
			return err
		}
		if ok {
			return ws.finish(res, PathWarm)
		}
		path = PathWarmFallback
	}
	if err := ws.cold(); err != nil {
		ws.fill(res, path, false)
		return err
	}
	if warmPhases == 1 {
		path = PathWarm
		if ws.m != 1 {
			path = PathWarmFallback
		}
	}
	return ws.finish(res, path)
}

// copyWarm validates an estimate and copies it into the workspace (so an
// estimate that shares memory with the result is safe). It returns the
// phase count, 0 without an estimate.
func (ws *Workspace) copyWarm(e *Estimate) (int, error) {
	if e == nil || e.Phases == 0 {
		return 0, nil
	}
	k := e.Phases
	if k < 1 || k > MaxPhases {
		return 0, &InputError{Field: "warm.Phases", Value: float64(k), Reason: "must be 1, 2 or 3"}
	}
	if k == 1 {
		return 1, nil
	}
	if e.Beta != nil && len(e.Beta) != k {
		return 0, &InputError{Field: "warm.Beta", Value: float64(len(e.Beta)), Reason: "needs one amount per phase"}
	}
	for j, b := range e.Beta {
		if !finite(b) {
			return 0, &InputError{Field: fmt.Sprintf("warm.Beta[%d]", j), Value: b, Reason: "must be finite"}
		}
		ws.warmBeta[j] = b
	}
	if e.Beta == nil {
		for j := range k {
			ws.warmBeta[j] = 1 / float64(k)
		}
	}
	switch {
	case e.X != nil:
		if len(e.X) != k {
			return 0, &InputError{Field: "warm.X", Value: float64(len(e.X)), Reason: "needs one composition per phase"}
		}
		for j, x := range e.X {
			if len(x) != ws.n {
				return 0, &InputError{Field: fmt.Sprintf("warm.X[%d]", j), Value: float64(len(x)), Reason: fmt.Sprintf("composition has %d entries, the mixture %d components", len(x), ws.n)}
			}
			for i, v := range x {
				if !finite(v) || v < 0 {
					return 0, &InputError{Field: fmt.Sprintf("warm.X[%d][%d]", j, i), Value: v, Reason: "mole fraction must be finite and non-negative"}
				}
			}
			copy(ws.warmX[j], x)
		}
	case e.LnK != nil && k == 2:
		if len(e.LnK) != ws.n {
			return 0, &InputError{Field: "warm.LnK", Value: float64(len(e.LnK)), Reason: fmt.Sprintf("has %d entries, the mixture %d components", len(e.LnK), ws.n)}
		}
		for i, v := range e.LnK {
			if !finite(v) {
				return 0, &InputError{Field: fmt.Sprintf("warm.LnK[%d]", i), Value: v, Reason: "must be finite"}
			}
			// Store K as the pair of compositions (K_i, 1) up to scale.
			ws.warmX[0][i] = fastmath.Exp(max(-700, min(700, v)))
			ws.warmX[1][i] = 1
		}
	default:
		return 0, &InputError{Field: "warm.X", Reason: "an estimate of two or more phases needs X (or LnK for two phases)"}
	}
	if err := ws.copyShift(e); err != nil {
		return 0, err
	}
	return k, nil
}

// copyShift validates the state and sensitivities of an estimate and,
// for two phases with all of them given, sets the first-order shift of
// ln K to the current state in ws.warmDL (ws.warmShift).
func (ws *Workspace) copyShift(e *Estimate) error {
	if !finite(e.T) || e.T < 0 {
		return &InputError{Field: "warm.T", Value: e.T, Reason: "must be a finite positive temperature in K, or zero (unknown)"}
	}
	if !finite(e.P) || e.P < 0 {
		return &InputError{Field: "warm.P", Value: e.P, Reason: "must be a finite positive pressure in Pa, or zero (unknown)"}
	}
	for _, s := range [...]struct {
		name string
		v    []float64
	}{{"warm.DLnKDT", e.DLnKDT}, {"warm.DLnKDP", e.DLnKDP}} {
		if s.v == nil {
			continue
		}
		if len(s.v) != ws.n {
			return &InputError{Field: s.name, Value: float64(len(s.v)), Reason: fmt.Sprintf("has %d entries, the mixture %d components", len(s.v), ws.n)}
		}
		for i, v := range s.v {
			if !finite(v) {
				return &InputError{Field: fmt.Sprintf("%s[%d]", s.name, i), Value: v, Reason: "must be finite"}
			}
		}
	}
	ws.warmSame = e.T == ws.T && e.P == ws.P
	if e.Phases != 2 || e.T == 0 || e.P == 0 || e.DLnKDT == nil || e.DLnKDP == nil {
		return nil
	}
	if ws.warmSame {
		// An estimate of this very state (a confirming flash): should it
		// need no Newton step, its sensitivities are the result's.
		copy(ws.sensT, e.DLnKDT)
		copy(ws.sensP, e.DLnKDP)
		ws.warmSens = true
		return nil
	}
	dT, dP := ws.T-e.T, ws.P-e.P
	big := 0.0
	for _, i := range ws.act {
		d := e.DLnKDT[i]*dT + e.DLnKDP[i]*dP
		ws.warmDL[i] = d
		big = max(big, math.Abs(d))
	}
	if !finite(big) {
		return nil
	}
	if big > 1 {
		for _, i := range ws.act {
			ws.warmDL[i] /= big
		}
	}
	ws.warmShift = true
	return nil
}

// Split converges the phase split of feed z at T and P from an estimate
// of two or three phases, exactly as the warm path of PT does (Newton's
// method on the Gibbs energy, Michelsen 1982b), and writes it into res
// with its properties, but does not test the result for stability:
// Report.Path is PathUnverified. It is the inner step of nested solvers
// that run many flashes along a path of nearby states and confirm only
// their final state with PT (package stateflash): such a result may be
// metastable, and must not be reported as an equilibrium until PT has
// confirmed it. It reports false, leaving res's phases, compositions and
// ln K untouched (its Report holds the work done), when there is no
// estimate of two or more phases or it does not converge to a split with
// every phase amount in (0, 1). Errors as for PT. It allocates nothing.
func (ws *Workspace) Split(ctx context.Context, T, P float64, z []float64, opts Options, warm *Estimate, res *Result) (bool, error) {
	set, err := opts.resolve()
	if err != nil {
		return false, err
	}
	if res == nil || res.n != ws.n {
		return false, &InputError{Field: "res", Value: float64(ws.n), Reason: "Result not sized for this mixture (use NewResult)"}
	}
	rep := &res.Report
	*rep = Report{Path: PathUnverified}
	if err := ws.begin(ctx, set, rep, T, P, z, "z"); err != nil {
		return false, err
	}
	k, err := ws.copyWarm(warm)
	if err != nil || k < 2 || k > set.maxPhases {
		return false, err
	}
	ok, err := ws.warmSolve(k, warm, false)
	if err != nil || !ok {
		return false, err
	}
	return true, ws.finish(res, PathUnverified)
}

// warmSolve converges the split from the estimate and, with verify, tests
// the result. It reports false when the estimate does not lead to a
// converged (and, with verify, stable) split.
func (ws *Workspace) warmSolve(k int, e *Estimate, verify bool) (bool, error) {
	ws.m = k
	var st splitStatus
	var err error
	if k == 2 {
		for _, i := range ws.act {
			ws.lnK[i] = fastmath.Log(max(ws.warmX[0][i], tiny) / max(ws.warmX[1][i], tiny))
		}
		if ws.warmShift {
			for _, i := range ws.act {
				ws.lnK[i] += ws.warmDL[i]
			}
		}
		if ws.setTwoFromK(ws.warmBeta[0]) != rrRoot {
			return false, nil
		}
		if ws.warmSame && ws.betaInside() {
			// An estimate of this very state is likely converged already:
			// its first evaluation leaves out ∂ln φ/∂n, which the first
			// Newton step adds should one be needed.
			if err := ws.evalAll(eos.WantT | eos.WantP); err != nil {
				return false, err
			}
			st, err = ws.solveSplit(true, true)
		} else {
			st, err = ws.solveSplit(ws.betaInside(), false)
		}
	} else {
		for j := range k {
			p := &ws.ph[j]
			s := 0.0
			for _, i := range ws.act {
				s += ws.warmX[j][i]
			}
			if !(s > 0) {
				return false, nil
			}
			for i := range ws.n {
				p.x[i] = 0
			}
			for _, i := range ws.act {
				p.x[i] = ws.warmX[j][i] / s
			}
			p.beta = max(ws.warmBeta[j], 1e-3)
			if err := ws.evalPhase(j, 0); err != nil {
				return false, err
			}
		}
		if err := ws.ssMulti(0); err != nil {
			return false, err
		}
		if ws.m < 2 {
			return false, nil
		}
		st, err = ws.solveSplit(true, true)
	}
	if err != nil || st != splitOK {
		return false, err
	}
	if !verify {
		return true, nil
	}
	stable, _, err := ws.resultStable()
	return stable, err
}

// cold runs the full path: stability of the feed, two-phase split, test,
// third phase, test.
func (ws *Workspace) cold() error {
	ws.warmSens = false
	if err := ws.feedReference(); err != nil {
		return err
	}
	ws.m = 1
	ws.ph[0].beta = 1
	if ws.vapourLike(&ws.ph[0]) {
		// A vapour-like feed splits off a liquid first (Michelsen 1982a).
		ws.trials[0], ws.trials[1] = ws.trials[1], ws.trials[0]
	}
	tpd, best, err := ws.stabilityTest(ws.lnz, 0)
	if err != nil {
		return err
	}
	if !(tpd < -ws.set.tpdTol) || ws.set.maxPhases == 1 {
		ws.m = 1
		copy(ws.ph[0].x, ws.z)
		return nil
	}
	// Starting K-values, best first: both Wilson trials when both are
	// unstable, the most negative trial against the feed, Wilson's K.
	var starts [3]int
	ns := 0
	if ws.nTrial >= 2 && ws.trialOK[0] && ws.trialOK[1] && ws.trialT[0] < -ws.set.tpdTol && ws.trialT[1] < -ws.set.tpdTol {
		starts[ns] = -2
		ns++
	}
	starts[ns] = best
	ns++
	starts[ns] = -1
	ns++
	var lastErr error
	for s := range ns {
		ws.m = 2
		switch t := starts[s]; {
		case t == -2:
			for _, i := range ws.act {
				ws.lnK[i] = safeLog(ws.trialW[0][i]) - safeLog(ws.trialW[1][i])
			}
		case t == -1:
			copy(ws.lnK, ws.lnKw)
		default:
			for _, i := range ws.act {
				ws.lnK[i] = safeLog(ws.trialW[t][i]) - ws.lnz[i]
			}
		}
		if stop, err := ws.splitFromK(); stop {
			return err
		} else if err != nil {
			lastErr = err
		}
	}
	// Every start failed. The test stops at its first clearly unstable
	// trial, and the result tests of the failed splits overwrote the
	// trials' compositions: test the feed again with every trial and start
	// from each of them, lowest tpd first. A trial of a component that forms
	// a further liquid (water, say) can lead to the split where a Wilson
	// trial, whose composition lies across the aqueous parameter set's
	// boundary, does not.
	return ws.retryTrials(best, lastErr)
}

// splitFromK solves the two-phase split from ws.lnK (with ws.m = 2) and
// the phases it adds. stop reports that the cold path ends here, with err
// nil (solved) or an error other than a solver failure; otherwise err is
// this start's *ConvergenceError, or nil when Rachford–Rice has no root
// for these K-values.
func (ws *Workspace) splitFromK() (stop bool, err error) {
	if ws.setTwoFromK(0.5) != rrRoot {
		return false, nil
	}
	err = ws.phaseLoop()
	if _, conv := err.(*ConvergenceError); conv {
		return false, err
	}
	return true, err
}

// retryTrials runs the feed's stability test with every trial and starts
// the split from each trial other than tried, lowest tpd first. It returns
// nil when one of them converges, an error other than a solver failure at
// once, and otherwise the last solver failure (lastErr, that of the first
// starts, when no start got as far).
func (ws *Workspace) retryTrials(tried int, lastErr error) error {
	ws.m = 1
	ws.ph[0].beta = 1
	if err := ws.feedReference(); err != nil {
		return err
	}
	ws.fullTest = true
	_, _, err := ws.stabilityTest(ws.lnz, 0)
	ws.fullTest = false
	if err != nil {
		return err
	}
	// The candidates and their compositions, which the splits' own tests
	// overwrite in ws.trialW.
	nc := 0
	for t := range ws.nTrial {
		if t == tried || math.IsInf(ws.trialT[t], 0) {
			continue
		}
		copy(ws.startW[nc], ws.trialW[t])
		ws.startT[nc] = ws.trialT[t]
		nc++
	}
	// Insertion sort by tpd (at most maxTrials entries).
	for a := 1; a < nc; a++ {
		for b := a; b > 0 && ws.startT[b] < ws.startT[b-1]; b-- {
			ws.startT[b], ws.startT[b-1] = ws.startT[b-1], ws.startT[b]
			ws.startW[b], ws.startW[b-1] = ws.startW[b-1], ws.startW[b]
		}
	}
	for c := range nc {
		ws.m = 2
		for _, i := range ws.act {
			ws.lnK[i] = safeLog(ws.startW[c][i]) - ws.lnz[i]
		}
		if stop, err := ws.splitFromK(); stop {
			return err
		} else if err != nil {
			lastErr = err
		}
	}
	if lastErr == nil {
		lastErr = &ConvergenceError{Stage: "two-phase split", Iterations: ws.rep.SSIterations + ws.rep.NewtonIterations, Residual: math.Inf(1), Phases: 1}
	}
	return lastErr
}

// phaseLoop solves the split in ws.ph, tests it, and adds a phase while
// the test fails and the phase cap allows.
func (ws *Workspace) phaseLoop() error {
	fresh := false
	for round := 0; round < 2*MaxPhases; round++ {
		st, err := ws.solveSplit(false, fresh)
		if err != nil {
			return err
		}
		if st != splitOK {
			stage := "two-phase split"
			if ws.m > 2 {
				stage = "three-phase split"
			}
			if st == splitSingle && ws.m == 1 {
				stage = "phase split (collapsed to one phase)"
			}
			return ws.convErr(stage)
		}
		stable, best, err := ws.resultStable()
		if err != nil {
			return err
		}
		if stable {
			return nil
		}
		if ws.m >= ws.set.maxPhases || best < 0 {
			return ws.convErr("stability of the result")
		}
		// Add the trial phase and balance the amounts with the convex split.
		p := &ws.ph[ws.m]
		copy(p.x, ws.trialW[best])
		p.beta = 0.01
		if err := ws.evalPhase(ws.m, 0); err != nil {
			return err
		}
		ws.m++
		if err := ws.ssMulti(0); err != nil {
			return err
		}
		if ws.m < 2 {
			return ws.convErr("three-phase split (collapsed)")
		}
		fresh = true
	}
	return ws.convErr("phase split")
}

// convErr builds the convergence error of the current split.
func (ws *Workspace) convErr(stage string) error {
	e := &ConvergenceError{Stage: stage, Iterations: ws.rep.SSIterations + ws.rep.NewtonIterations, Phases: ws.m}
	if ws.m >= 2 {
		e.Residual = ws.residual()
	}
	e.Beta = make([]float64, ws.m)
	for k := range ws.m {
		e.Beta[k] = ws.ph[k].beta
	}
	return e
}

// resultStable tests the converged split: trials against the fugacities
// of phase 0, stopping trials that approach any present phase.
func (ws *Workspace) resultStable() (bool, int, error) {
	for _, i := range ws.act {
		ws.d[i] = ws.ph[0].lnf[i]
	}
	tpd, best, err := ws.stabilityTest(ws.ph[0].lnx, ws.m)
	if err != nil {
		return false, -1, err
	}
	return !(tpd < -ws.set.tpdTol), best, nil
}

// vapourLike reports whether a phase is vapour-like by the pseudo-critical
// volume criterion: v/b above the model's critical ratio Zc/Ωb.
func (ws *Workspace) vapourLike(p *phaseState) bool {
	b, c := 0.0, 0.0
	for _, i := range ws.act {
		b += p.x[i] * ws.mx.CoVolume(i)
		c += p.x[i] * ws.mx.VolumeShift(i)
	}
	model := ws.mx.Model()
	return (p.f.V+c)/b > model.CriticalCompressibility()/model.OmegaB()
}

// finish labels and orders the phases, fills res and its properties.
func (ws *Workspace) finish(res *Result, path Path) error {
	ws.fill(res, path, true)
	if !ws.set.props {
		return nil
	}
	var o Overall
	for k := range res.Phases {
		ph := &res.Phases[k]
		mx, ews := ws.mx, ws.ews
		if ws.aqueous(ph.X) {
			mx, ews = ws.aq, ws.aws
		}
		// A phase last evaluated at its composition with ∂ln φ/∂T (the
		// end of a Newton solve) has its root and sums in its Fugacity.
		src := &ws.ph[ws.order[k]]
		pr, ok := eos.Properties{}, false
		if src.hasTP {
			pr, ok = mx.PropertiesFromFugacity(ews, ws.T, ws.P, ph.X, src.f)
		}
		if !ok {
			pr = mx.PropertiesTrusted(ews, ws.T, ws.P, ph.X, eos.RootMinGibbs)
		}
		ph.Props = pr
		b := ph.Beta
		o.MolarVolume += b * pr.MolarVolume
		o.MolarMass += b * pr.MolarMass
		o.H += b * pr.H
		o.S += b * pr.S
		o.G += b * pr.G
		o.U += b * pr.U
		o.A += b * pr.A
	}
	o.MolarDensity = 1 / o.MolarVolume
	o.MassDensity = o.MolarMass / o.MolarVolume
	res.Overall = o
	if res.sensOK && ws.pcOK && !ws.facShift {
		d := ws.pc
		for k := range res.Phases {
			pr, b := &res.Phases[k].Props, res.Phases[k].Beta
			vT := -pr.DPDT / pr.DPDV
			d.HT += b * pr.Cp
			d.HP += b * (pr.MolarVolume - ws.T*vT)
			d.VT += b * vT
			d.VP += b / pr.DPDV
		}
		res.deriv = d
		res.derivOK = finite(d.HT) && finite(d.HP) && finite(d.VT) && finite(d.VP)
	}
	return nil
}

// fill copies the current split into res, labelled and ordered.
func (ws *Workspace) fill(res *Result, path Path, converged bool) {
	m := ws.m
	if m < 1 {
		m = 1
		copy(ws.ph[0].x, ws.z)
		ws.ph[0].beta = 1
	}
	if m == 1 {
		ws.ph[0].beta = 1
	}
	var labels [MaxPhases + 1]Label
	var order [MaxPhases + 1]int
	vap := -1
	for k := range m {
		p := &ws.ph[k]
		order[k] = k
		if ws.water >= 0 && p.x[ws.water] > 0.5 {
			labels[k] = LabelAqueous
			continue
		}
		labels[k] = LabelLiquid
		if vap < 0 || p.f.V > ws.ph[vap].f.V {
			vap = k
		}
	}
	if vap >= 0 && ws.vapourLike(&ws.ph[vap]) {
		labels[vap] = LabelVapour
	}
	// Order: vapour, liquids by decreasing molar volume, aqueous.
	rank := func(k int) int {
		switch labels[k] {
		case LabelVapour:
			return 0
		case LabelLiquid:
			return 1
		}
		return 2
	}
	for a := 1; a < m; a++ {
		for b := a; b > 0; b-- {
			x, y := order[b-1], order[b]
			if rank(y) < rank(x) || (rank(y) == rank(x) && ws.ph[y].f.V > ws.ph[x].f.V) {
				order[b-1], order[b] = y, x
			} else {
				break
			}
		}
	}
	ws.order = order
	res.T, res.P = ws.T, ws.P
	copy(res.Z, ws.z)
	res.Phases = res.phaseBuf[:m]
	for a := range m {
		p := &ws.ph[order[a]]
		dst := &res.phaseBuf[a]
		dst.Label = labels[order[a]]
		dst.Beta = p.beta
		copy(dst.X, p.x)
		copy(dst.LnPhi, p.f.LnPhi)
		dst.Z = p.f.Z
		dst.Props = eos.Properties{}
	}
	for i := range res.LnK {
		res.LnK[i] = 0
		res.dLnKdT[i], res.dLnKdP[i] = 0, 0
	}
	res.sensOK = m == 2 && converged && ws.sensOK
	res.deriv, res.derivOK = StateDerivatives{}, false
	if res.sensOK {
		sg := 1.0
		if order[0] != 0 {
			sg = -1
		}
		for _, i := range ws.act {
			res.dLnKdT[i], res.dLnKdP[i] = sg*ws.sensT[i], sg*ws.sensP[i]
		}
	}
	if m >= 2 {
		first, last := &res.phaseBuf[0], &res.phaseBuf[m-1]
		for i := range res.LnK {
			res.LnK[i] = last.LnPhi[i] - first.LnPhi[i]
		}
		// A converged split was evaluated at its compositions, so the
		// phases' ln x are current.
		lf, ll := ws.ph[order[0]].lnx, ws.ph[order[m-1]].lnx
		for _, i := range ws.act {
			if converged && first.X[i] > tiny && last.X[i] > tiny {
				res.LnK[i] = lf[i] - ll[i]
			} else {
				res.LnK[i] = fastmath.Log(first.X[i]) - fastmath.Log(last.X[i])
			}
			if !finite(res.LnK[i]) {
				res.LnK[i] = last.LnPhi[i] - first.LnPhi[i]
			}
		}
	}
	res.Overall = Overall{}
	rep := &res.Report
	rep.Path = path
	rep.Phases = m
	rep.Converged = converged && path != PathUnverified
	if m >= 2 {
		rep.Residual = ws.residual()
	}
}
