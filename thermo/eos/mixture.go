package eos

import (
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/component"
)

// R is the molar gas constant, J/(mol·K).
const R = component.R

// KijOverride sets the interaction parameter of one pair of components
// (indices into the mixture's component list), replacing the default:
//
//	k_ij(T) = K0 + K1·T   (K1 in 1/K).
type KijOverride struct {
	I, J   int
	K0, K1 float64
}

// Options configure a Mixture. The zero value uses the default interaction
// table of the model's family and no volume translation.
type Options struct {
	// Kij overrides default interaction parameters pair by pair.
	Kij []KijOverride
	// NoDefaultKij starts from k_ij = 0 for every pair instead of the
	// default table (overrides still apply).
	NoDefaultKij bool
	// VolumeTranslation applies the Péneloux, Rauzy & Fréze (1982) volume
	// shift. It changes volumes, densities and enthalpies (by −c·P), and
	// shifts every ln φ_i by the same −c_i·P/RT in all phases, so it never
	// changes an equilibrium result.
	VolumeTranslation bool
	// AqueousKij selects the interaction parameters of aqueous phases
	// (water mole fraction above AqueousWaterFraction), evaluated through
	// Mixture.Aqueous. The zero value, AqueousKijDefault, compiles the
	// Søreide & Whitson (1992) set when the fluid contains water; see
	// AqueousKijMode for the formulas and the consequences. Kij overrides
	// apply to the non-aqueous set, and to the aqueous set only for pairs
	// the aqueous correlations do not cover.
	AqueousKij AqueousKijMode
}

// Mixture is a compiled fluid: a model and a list of components with
// their pure parameters and interaction matrix prepared once, reused for
// every state. A Mixture is immutable and safe for concurrent use; the
// mutable scratch of each evaluation lives in a Workspace.
type Mixture struct {
	model  Model
	p      params
	comps  []component.Component
	n      int
	ac     []float64 // Ωa R²Tc²/Pc, Pa·m⁶/mol²
	b      []float64 // Ωb R Tc/Pc, m³/mol
	m      []float64 // α-function slope
	tc     []float64
	sqac   []float64 // √ac
	c      []float64 // Péneloux shift, m³/mol (zero when off)
	mw     []float64 // kg/mol
	lnPc   []float64 // ln Pc (Pa), for Wilson's K-values
	kij0   []float64 // n×n, row-major
	kij1   []float64 // n×n, 1/K
	hasK1  bool
	shift  bool
	kijSrc []string // n×n source per pair ("" when zero by default)
	ig     []idealGas
	qk     []float64 // n×n, √(ac_i ac_j)·(1 − k0_ij), for the pairs' a_ij(T)

	kx      []kijTerm // pairs with a general k(T), applied after kij0, kij1
	aq      *Mixture  // aqueous view (nil without an aqueous set)
	aqueous bool      // this is the aqueous view
}

// NewMixture compiles a fluid. comps must be non-empty with valid
// constants (positive Tc, Pc, molar mass; finite ω).
func NewMixture(model Model, comps []component.Component, opts Options) (*Mixture, error) {
	if !model.Valid() {
		return nil, &InputError{Field: "model", Value: float64(model), Reason: "not a defined model (PR76, PR78 or SRK)"}
	}
	n := len(comps)
	if n == 0 {
		return nil, &InputError{Field: "components", Value: 0, Reason: "a fluid needs at least one component"}
	}
	mx := &Mixture{
		model: model, p: modelParams[model], n: n,
		comps: append([]component.Component(nil), comps...),
		ac:    make([]float64, n), b: make([]float64, n), m: make([]float64, n),
		tc: make([]float64, n), sqac: make([]float64, n), c: make([]float64, n),
		mw: make([]float64, n), lnPc: make([]float64, n), ig: make([]idealGas, n),
		kij0: make([]float64, n*n), kij1: make([]float64, n*n), kijSrc: make([]string, n*n),
		shift: opts.VolumeTranslation,
	}
	for i := range comps {
		c := &comps[i]
		field := func(name string) string { return fmt.Sprintf("components[%d].%s", i, name) }
		if err := positive(field("Tc"), c.Tc); err != nil {
			return nil, err
		}
		if err := positive(field("Pc"), c.Pc); err != nil {
			return nil, err
		}
		if err := positive(field("MolarMass"), c.MolarMass); err != nil {
			return nil, err
		}
		if math.IsNaN(c.Omega) || math.IsInf(c.Omega, 0) || c.Omega < -1 || c.Omega > 3 {
			return nil, &InputError{Field: field("Omega"), Value: c.Omega, Reason: "acentric factor must be finite and within [-1, 3]"}
		}
		rtp := R * c.Tc / c.Pc
		mx.ac[i] = mx.p.omegaA * R * c.Tc * rtp
		mx.sqac[i] = math.Sqrt(mx.ac[i])
		mx.b[i] = mx.p.omegaB * rtp
		mx.m[i] = mx.p.mOf(c.Omega)
		mx.tc[i] = c.Tc
		mx.mw[i] = c.MolarMass
		mx.lnPc[i] = math.Log(c.Pc)
		mx.ig[i] = newIdealGas(c)
		if opts.VolumeTranslation {
			mx.c[i] = peneloux(model, c)
		}
	}
	if !opts.NoDefaultKij {
		for i := range n {
			for j := i + 1; j < n; j++ {
				if k, ok := component.DefaultKij(model.Family(), comps[i].ID, comps[j].ID); ok {
					mx.setKij(i, j, k.K0, k.K1, k.Source)
				}
			}
		}
	}
	for idx, o := range opts.Kij {
		f := func(s string) string { return fmt.Sprintf("kij[%d].%s", idx, s) }
		if o.I < 0 || o.I >= n {
			return nil, &InputError{Field: f("i"), Value: float64(o.I), Reason: fmt.Sprintf("component index out of range [0, %d)", n)}
		}
		if o.J < 0 || o.J >= n {
			return nil, &InputError{Field: f("j"), Value: float64(o.J), Reason: fmt.Sprintf("component index out of range [0, %d)", n)}
		}
		if o.I == o.J {
			return nil, &InputError{Field: f("j"), Value: float64(o.J), Reason: "a component has no interaction parameter with itself"}
		}
		if !finite(o.K0) || math.Abs(o.K0) >= 1 {
			return nil, &InputError{Field: f("k0"), Value: o.K0, Reason: "must be finite with |k0| < 1"}
		}
		if !finite(o.K1) || math.Abs(o.K1) > 0.01 {
			return nil, &InputError{Field: f("k1"), Value: o.K1, Reason: "must be finite with |k1| ≤ 0.01 1/K"}
		}
		mx.setKij(o.I, o.J, o.K0, o.K1, "override")
	}
	mx.qk = make([]float64, n*n)
	for i := range n {
		for j := range n {
			mx.qk[i*n+j] = mx.sqac[i] * mx.sqac[j] * (1 - mx.kij0[i*n+j])
		}
	}
	if err := mx.compileAqueous(opts.AqueousKij); err != nil {
		return nil, err
	}
	return mx, nil
}

func (mx *Mixture) setKij(i, j int, k0, k1 float64, src string) {
	n := mx.n
	mx.kij0[i*n+j], mx.kij0[j*n+i] = k0, k0
	mx.kij1[i*n+j], mx.kij1[j*n+i] = k1, k1
	mx.kijSrc[i*n+j], mx.kijSrc[j*n+i] = src, src
	if k1 != 0 {
		mx.hasK1 = true
	}
}

// peneloux returns the volume shift c of Péneloux, Rauzy & Fréze (1982),
// Fluid Phase Equilib. 8:7–23, for SRK: c = 0.40768·(RTc/Pc)·(0.29441 − Z_RA).
// For Peng–Robinson the analogous fit c = 0.50033·(RTc/Pc)·(0.25969 − Z_RA)
// is used (constants from memory). When Z_RA is unknown it is estimated
// with Yamada & Gunn (1973), J. Chem. Eng. Data 18(2):234: Z_RA = 0.29056 − 0.08775ω.
func peneloux(model Model, c *component.Component) float64 {
	zra := c.ZRA
	if zra <= 0 {
		zra = 0.29056 - 0.08775*c.Omega
	}
	rtp := R * c.Tc / c.Pc
	if model == SRK {
		return 0.40768 * rtp * (0.29441 - zra)
	}
	return 0.50033 * rtp * (0.25969 - zra)
}

// Model returns the mixture's equation of state.
func (mx *Mixture) Model() Model { return mx.model }

// N returns the number of components.
func (mx *Mixture) N() int { return mx.n }

// Component returns component i.
func (mx *Mixture) Component(i int) *component.Component { return &mx.comps[i] }

// Components returns a copy of the component list.
func (mx *Mixture) Components() []component.Component {
	return append([]component.Component(nil), mx.comps...)
}

// Kij returns the interaction parameter of pair (i, j) at T and the source
// of its value ("" when it is zero by default, "override" when set by the
// caller).
func (mx *Mixture) Kij(i, j int, T float64) (float64, string) {
	for e := range mx.kx {
		if t := &mx.kx[e]; (t.i == i && t.j == j) || (t.i == j && t.j == i) {
			k, _, _ := t.at(T)
			return k, t.source
		}
	}
	k := i*mx.n + j
	return mx.kij0[k] + mx.kij1[k]*T, mx.kijSrc[k]
}

// VolumeShift returns component i's Péneloux shift c_i in m³/mol (zero
// when translation is off).
func (mx *Mixture) VolumeShift(i int) float64 { return mx.c[i] }

// CoVolume returns component i's b_i in m³/mol.
func (mx *Mixture) CoVolume(i int) float64 { return mx.b[i] }

// MolarMass returns the molar mass of composition x (fractions) in kg/mol.
func (mx *Mixture) MolarMass(x []float64) float64 {
	s, t := 0.0, 0.0
	for i, xi := range x {
		s += xi * mx.mw[i]
		t += xi
	}
	return s / t
}

// WilsonK writes Wilson's (1969) K-value estimate
//
//	ln K_i = ln(Pc_i/P) + 5.373·(1 + ω_i)·(1 − Tc_i/T)
//
// into dst.
func (mx *Mixture) WilsonK(T, P float64, dst []float64) {
	for i := range mx.comps {
		c := &mx.comps[i]
		dst[i] = c.Pc / P * math.Exp(5.373*(1+c.Omega)*(1-c.Tc/T))
	}
}

// LnWilsonK writes ln of Wilson's K-value estimate into dst.
func (mx *Mixture) LnWilsonK(T, P float64, dst []float64) {
	lnP := math.Log(P)
	for i := range mx.comps {
		c := &mx.comps[i]
		dst[i] = mx.lnPc[i] - lnP + 5.373*(1+c.Omega)*(1-c.Tc/T)
	}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func positive(field string, v float64) error {
	if !finite(v) {
		return &InputError{Field: field, Value: v, Reason: "must be a finite number"}
	}
	if v <= 0 {
		return &InputError{Field: field, Value: v, Reason: "must be positive"}
	}
	return nil
}
