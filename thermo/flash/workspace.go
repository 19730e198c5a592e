package flash

import (
	"context"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"

	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// maxTrials bounds the trial phases of one stability test: two Wilson
// trials and up to five pure-component-like trials.
const maxTrials = 7

// phaseState is one phase of the split being solved.
type phaseState struct {
	x     []float64 // mole fractions
	nm    []float64 // moles per mole of feed, β·x
	nm0   []float64 // saved moles (line search)
	lnf   []float64 // ln x_i + ln φ_i
	lnx   []float64 // ln x_i
	f     *eos.Fugacity
	beta  float64
	hasDN bool
	hasTP bool // f holds ∂ln φ/∂T and ∂ln φ/∂P of the current x
}

// trialSpec says how a stability trial starts.
type trialSpec struct {
	kind int // trialVapour, trialLiquid or trialPure
	comp int // component of a pure-component-like trial
}

const (
	trialVapour = iota
	trialLiquid
	trialPure
)

// Workspace holds the scratch memory of one goroutine's flashes of one
// Mixture. It is not safe for concurrent use; make one per goroutine and
// reuse it: a flash then allocates nothing.
type Workspace struct {
	mx  *eos.Mixture
	ews *eos.Workspace
	n   int
	// aq is the mixture's aqueous view (nil without an aqueous parameter
	// set) and aws its workspace: compositions with a water mole fraction
	// above eos.AqueousWaterFraction are evaluated through it.
	aq  *eos.Mixture
	aws *eos.Workspace

	// evalHook, when set (by tests), sees every composition evaluated.
	evalHook func(x []float64, want eos.Want)

	// call state
	ctx    context.Context
	set    settings
	rep    *Report
	T, P   float64
	z      []float64
	lnz    []float64
	act    []int // components with z_i > 0
	lnKw   []float64
	water  int // index of water, −1 when absent
	family []component.Family
	mw     []float64

	ph [MaxPhases + 1]phaseState
	m  int
	// order maps the phases of the last filled Result to ws.ph.
	order [MaxPhases + 1]int

	// stability
	trials  []trialSpec
	d       []float64
	W       []float64
	lnW     []float64
	lnWn    []float64
	w       []float64
	Wp      []float64
	dir     []float64
	tf      *eos.Fugacity
	trialW  [maxTrials][]float64
	trialT  [maxTrials]float64
	trialOK [maxTrials]bool
	nTrial  int
	// fullTest runs every trial (no stop at the first clearly unstable
	// one); startW and startT hold the trials the cold path starts from
	// after its first starts failed (retryTrials).
	fullTest  bool
	startW    [maxTrials][]float64
	startT    [maxTrials]float64
	nearTol   float64 // distance below which a trial is converging to a found phase
	nearLoose float64 // the same for a trial whose tm is nearly zero (existNear)

	// two-phase successive substitution
	lnK, lnKp, dK1, dK2, K []float64

	// linear algebra, sized for (MaxPhases−1)·n unknowns
	H, L, g, dx, sc []float64
	A               []float64 // A^k_ij of the Newton Hessian, (MaxPhases+1)·n·n
	sig             []float64 // σ_i of the two-phase Hessian
	vi, vk          []int     // Newton unknown p is n of component vi[p] in phase vk[p]
	dep             []int     // dependent phase of each component in the Newton step
	// The Cholesky factor of the last Newton Hessian of a two-phase split
	// stays in L and sc (facDim unknowns, mapping vi, vk, dep) while facOK;
	// facResid is the residual at the point where it was evaluated.
	facOK, facShift bool // facShift: the factor is of a Levenberg-shifted Hessian
	facDim          int
	facResid        float64

	// sensitivities d ln K_i/dT and d ln K_i/dP, K_i = x_i0/x_i1 of the
	// converged two-phase split in ph (valid while sensOK)
	sensT, sensP []float64
	sensOK       bool
	pc           StateDerivatives // phase-change parts of the state derivatives
	pcOK         bool             // pc is valid

	// multiphase split
	e  []float64 // e_ik, n×(MaxPhases+1)
	Ei []float64
	qb [MaxPhases + 1]float64

	// warm-start copy
	warmX    [MaxPhases][]float64
	warmBeta [MaxPhases]float64
	// warmDL is the first-order shift of ln K from the estimate's state to
	// the current one (set when warmShift).
	warmDL    []float64
	warmShift bool
	// warmSame: the estimate is of the current state; warmSens: its
	// sensitivities are in sensT, sensP.
	warmSame, warmSens bool
}

// NewWorkspace returns a flash workspace for mx.
func NewWorkspace(mx *eos.Mixture) *Workspace {
	n := mx.N()
	v := func() []float64 { return make([]float64, n) }
	ws := &Workspace{mx: mx, ews: mx.NewWorkspace(), n: n,
		z: v(), lnz: v(), lnKw: v(), act: make([]int, 0, n),
		family: make([]component.Family, n), mw: v(), water: -1,
		trials: make([]trialSpec, 0, maxTrials),
		d:      v(), W: v(), lnW: v(), lnWn: v(), w: v(), Wp: v(), dir: v(), tf: mx.NewFugacity(),
		lnK: v(), lnKp: v(), dK1: v(), dK2: v(), K: v(),
		e: make([]float64, n*(MaxPhases+1)), Ei: v(),
	}
	dim := (MaxPhases - 1) * n
	ws.H = make([]float64, dim*dim)
	ws.L = make([]float64, dim*dim)
	ws.g = make([]float64, dim)
	ws.dx = make([]float64, dim)
	ws.sc = make([]float64, dim)
	ws.vi = make([]int, dim)
	ws.vk = make([]int, dim)
	ws.dep = make([]int, n)
	ws.sensT, ws.sensP, ws.warmDL = v(), v(), v()
	ws.A = make([]float64, (MaxPhases+1)*n*n)
	ws.sig = make([]float64, dim)
	for k := range ws.ph {
		ws.ph[k] = phaseState{x: v(), nm: v(), nm0: v(), lnf: v(), lnx: v(), f: mx.NewFugacity()}
	}
	for t := range ws.trialW {
		ws.trialW[t] = v()
		ws.startW[t] = v()
	}
	for k := range ws.warmX {
		ws.warmX[k] = v()
	}
	for i := range n {
		c := mx.Component(i)
		ws.family[i] = c.Family
		ws.mw[i] = c.MolarMass
		if c.Family == component.FamilyWater && ws.water < 0 {
			ws.water = i
		}
	}
	if mx.HasAqueous() && ws.water >= 0 {
		ws.aq = mx.Aqueous()
		ws.aws = ws.aq.NewWorkspace()
	}
	// Successive evaluations of a phase slot or of the trial phase are of
	// nearby compositions: their roots are searched from the last one
	// (eos.Fugacity.UseRootHint), and begin forgets the hints.
	ws.tf.UseRootHint(true)
	for k := range ws.ph {
		ws.ph[k].f.UseRootHint(true)
	}
	return ws
}

// resetHints forgets the root hints of every evaluation slot, so that a
// solve depends on its inputs only.
func (ws *Workspace) resetHints() {
	ws.tf.ResetRootHint()
	for k := range ws.ph {
		ws.ph[k].f.ResetRootHint()
	}
}

// aqueous reports whether composition x (mole fractions) is evaluated on
// the aqueous parameter set.
func (ws *Workspace) aqueous(x []float64) bool {
	return ws.aq != nil && x[ws.water] > eos.AqueousWaterFraction
}

// Mixture returns the mixture the workspace was made for.
func (ws *Workspace) Mixture() *eos.Mixture { return ws.mx }

// EOSWorkspace returns the eos workspace the flashes evaluate the mixture
// with (not its aqueous view), for evaluations of the same mixture by the
// owner of ws between flashes, in the same goroutine: sharing it keeps
// the temperature-dependent parameters of a state computed once.
func (ws *Workspace) EOSWorkspace() *eos.Workspace { return ws.ews }

// eval evaluates ln φ of composition x (mole fractions) on the root of
// lowest Gibbs energy, with the aqueous parameter set when x is aqueous.
// T and P were validated by begin and every composition the solver forms
// is normalised, so the kernel's unchecked entry point is used; should a
// composition ever not be finite (the volume comes out non-finite), the
// checked one is run to report it.
func (ws *Workspace) eval(x []float64, want eos.Want, f *eos.Fugacity) error {
	ws.rep.LnPhiEvaluations++
	if ws.evalHook != nil {
		ws.evalHook(x, want)
	}
	mx, ews := ws.mx, ws.ews
	if ws.aqueous(x) {
		mx, ews = ws.aq, ws.aws
	}
	mx.FugacityTrusted(ews, ws.T, ws.P, x, eos.RootMinGibbs, want, f)
	if finite(f.Z) && finite(f.V) {
		return nil
	}
	return mx.Fugacity(ews, ws.T, ws.P, x, eos.RootMinGibbs, want, f)
}

// evalPhase evaluates phase k and its ln f.
func (ws *Workspace) evalPhase(k int, want eos.Want) error {
	p := &ws.ph[k]
	if err := ws.eval(p.x, want, p.f); err != nil {
		return err
	}
	p.hasDN = want&eos.WantN != 0
	p.hasTP = want&(eos.WantT|eos.WantP) == eos.WantT|eos.WantP
	n := ws.n
	x, lnx, lnf, lp := p.x[:n], p.lnx[:n], p.lnf[:n], p.f.LnPhi[:n]
	for _, i := range ws.act {
		l := safeLog(x[i])
		lnx[i] = l
		lnf[i] = l + lp[i]
	}
	return nil
}

// stop polls the context and the cancel hook.
func (ws *Workspace) stop() error {
	if ws.ctx != nil {
		if err := ws.ctx.Err(); err != nil {
			return &canceledError{err: err}
		}
	}
	if ws.set.cancel != nil && ws.set.cancel() {
		return ErrStopped
	}
	return nil
}

// tiny is the floor of mole fractions inside logarithms: a component with
// z_i > 0 that underflows in one phase keeps a finite ln x.
const tiny = 1e-300

// lnTiny is ln tiny, the logarithm safeLog gives below the floor.
var lnTiny = fastmath.Log(tiny)

func safeLog(x float64) float64 {
	if x < tiny {
		return lnTiny
	}
	return fastmath.Log(x)
}
