package eos

import (
	"fmt"
	"math"

	"github.com/fugad/fugad/thermo/internal/fastmath"
)

// RootChoice says which root of the cubic a phase evaluation uses.
type RootChoice int

// Root choices.
const (
	// RootMinGibbs takes the root of lowest Gibbs energy when there are
	// three real roots (the stable single phase).
	RootMinGibbs RootChoice = iota
	// RootVapour takes the largest root (vapour-like).
	RootVapour
	// RootLiquid takes the smallest root above B (liquid-like).
	RootLiquid
)

// Branch says which root an evaluation ended on.
type Branch int

// Branches.
const (
	// BranchSingle: the cubic had one real root above B.
	BranchSingle Branch = iota
	// BranchVapour: the largest of three real roots.
	BranchVapour
	// BranchLiquid: the smallest of three real roots.
	BranchLiquid
)

// String names the branch.
func (b Branch) String() string {
	switch b {
	case BranchVapour:
		return "vapour"
	case BranchLiquid:
		return "liquid"
	}
	return "single"
}

// Want selects the derivatives a Fugacity call computes beyond ln φ.
type Want uint8

// Derivative flags.
const (
	WantT   Want = 1 << iota // ∂ln φ_i/∂T at fixed P, n
	WantP                    // ∂ln φ_i/∂P at fixed T, n
	WantN                    // ∂ln φ_i/∂n_j at fixed T, P
	WantAll = WantT | WantP | WantN
)

// Fugacity holds the result of one phase evaluation. Its slices are sized
// by NewFugacity and overwritten by every call, so one value serves a
// whole solver run without allocating.
type Fugacity struct {
	LnPhi []float64 // ln φ_i
	DT    []float64 // ∂ln φ_i/∂T, 1/K (filled with WantT)
	DP    []float64 // ∂ln φ_i/∂P, 1/Pa (filled with WantP)
	// DN is ∂ln φ_i/∂n_j at fixed T, P for one mole in total, row-major
	// n×n (filled with WantN). For N moles divide by N. It is symmetric and
	// satisfies Gibbs–Duhem: Σ_i x_i·DN[i][j] = 0.
	DN     []float64
	Z      float64 // compressibility factor (of the translated volume)
	V      float64 // molar volume, m³/mol (translated)
	Branch Branch
	Roots  int // number of real roots above B (1 or 3)

	// last is the kernel state of the evaluation that filled f, kept when
	// it was a trusted one with WantT (lastMx its mixture, nil otherwise),
	// for PropertiesFromFugacity.
	last   state
	lastMx *Mixture

	// Root hint (UseRootHint): the compressibility factor of the root the
	// last trusted evaluation into f took, the start of the next one's
	// root search.
	hintOn, hintOK bool
	hintZ          float64
}

// UseRootHint makes the trusted evaluations into f (FugacityTrusted) find
// the roots of the cubic by Newton's method from the root of the previous
// evaluation into f, and the other roots from the quadratic left by
// deflation, instead of by the closed form: the roots are the same (both
// are polished to round-off; the closed form remains the fall-back when
// Newton's method does not converge in a few steps, as at a double root),
// at about a third of the cost in a solver whose successive evaluations
// of a phase are close. The hint is state carried from one evaluation to
// the next, so a solver that turns it on calls ResetRootHint at the start
// of every solve: its results then depend on its inputs only, not on what
// f evaluated before.
func (f *Fugacity) UseRootHint(on bool) {
	f.hintOn, f.hintOK = on, false
}

// ResetRootHint forgets the root hint (see UseRootHint).
func (f *Fugacity) ResetRootHint() { f.hintOK = false }

// NewFugacity returns a Fugacity sized for mx.
func (mx *Mixture) NewFugacity() *Fugacity {
	n := mx.n
	return &Fugacity{
		LnPhi: make([]float64, n),
		DT:    make([]float64, n),
		DP:    make([]float64, n),
		DN:    make([]float64, n*n),
	}
}

// Fugacity evaluates ln φ_i of a phase of composition x (mole fractions or
// mole numbers; they are normalised) at temperature T (K) and pressure P
// (Pa), and the derivatives selected by want, all in one pass. It uses the
// formulation of Michelsen & Mollerup, Thermodynamic Models: Fundamentals &
// Computational Aspects, 2nd ed. (2007), ch. 2–3: with F = A^r/RT,
//
//	ln φ_i = (∂F/∂n_i)_{T,V} − ln Z,
//	n(∂ln φ_i/∂n_j)_{T,P} = n·F_ij + 1 + (n/RT)(∂P/∂n_i)(∂P/∂n_j)/(∂P/∂V),
//	(∂ln φ_i/∂T)_{P} = F_iT + 1/T − (v̄_i/RT)(∂P/∂T)_V,
//	(∂ln φ_i/∂P)_{T} = v̄_i/RT − 1/P.
//
// It allocates nothing.
func (mx *Mixture) Fugacity(ws *Workspace, T, P float64, x []float64, root RootChoice, want Want, out *Fugacity) error {
	if err := mx.checkTPX(ws, T, P, x); err != nil {
		return err
	}
	if len(out.LnPhi) != mx.n || len(out.DT) != mx.n || len(out.DP) != mx.n || len(out.DN) != mx.n*mx.n {
		return &InputError{Field: "out", Value: float64(len(out.LnPhi)), Reason: "Fugacity not sized for this mixture (use NewFugacity)"}
	}
	ws.setT(T)
	mx.composition(ws, x, want&WantT != 0, false, true)
	mx.solveZ(ws, T, P, root)
	mx.residual(ws, false)
	mx.lnPhi(ws, want, out)
	out.lastMx = nil
	return nil
}

// FugacityTrusted is Fugacity without the checks, for solvers that have
// validated their state once and then evaluate many compositions of it:
// ws must be mx's workspace, out made by NewFugacity, T and P inside the
// domain Fugacity accepts, and x mole fractions (finite, non-negative,
// summing to one: they are used as they are, not normalised; CheckState
// validates such a state once). Given anything else its results are
// undefined. It computes what Fugacity computes, by the same method,
// except for the rounding of Fugacity's normalisation, and allocates
// nothing.
func (mx *Mixture) FugacityTrusted(ws *Workspace, T, P float64, x []float64, root RootChoice, want Want, out *Fugacity) {
	ws.setT(T)
	mx.composition(ws, x, want&WantT != 0, false, false)
	if out.hintOn {
		mx.solveZFrom(ws, T, P, root, out.hintZ, out.hintOK)
		out.hintZ, out.hintOK = ws.st.Z, true
	} else {
		mx.solveZ(ws, T, P, root)
	}
	mx.residual(ws, false)
	mx.lnPhi(ws, want, out)
	if want&WantT != 0 {
		out.last, out.lastMx = ws.st, mx
	} else {
		out.lastMx = nil
	}
}

// PropertiesTrusted is Properties without the checks, under the
// conditions of FugacityTrusted.
func (mx *Mixture) PropertiesTrusted(ws *Workspace, T, P float64, x []float64, root RootChoice) Properties {
	ws.setT(T)
	mx.composition(ws, x, true, true, false)
	mx.solveZ(ws, T, P, root)
	mx.residual(ws, false)
	return mx.props(ws)
}

// PropertiesFromFugacity returns the properties of the phase whose ln φ
// the last evaluation into f computed, reusing that evaluation's mixing
// sums, root and residual Helmholtz derivatives instead of solving the
// state again: the evaluation must have been FugacityTrusted with WantT,
// on mx, at T and P, of composition x (the same slice values), and ws
// must be mx's workspace. It reports false, computing nothing, when f
// holds no such state (another mixture, state, or no WantT); otherwise
// the result is PropertiesTrusted's for that root, bit for bit. It
// allocates nothing.
func (mx *Mixture) PropertiesFromFugacity(ws *Workspace, T, P float64, x []float64, f *Fugacity) (Properties, bool) {
	if f == nil || f.lastMx != mx || ws == nil || ws.mx != mx || f.last.T != T || f.last.P != P {
		return Properties{}, false
	}
	ws.setT(T)
	ws.st = f.last
	n := mx.n
	copy(ws.x[:n], x[:n])
	st := &ws.st
	if !st.hasTT {
		st.DTT = quadForm(ws.aijTT, ws.x[:n])
		st.hasTT = true
		st.setFTT()
	}
	return mx.props(ws), true
}

// Temperatures and pressures an evaluation accepts. They lie far outside
// any state an equation of state is meant for, and far inside the range
// where the kernel's products (RT², a·P/(RT)², 1/v²) stay finite in
// float64 arithmetic: beyond about 1e60 K, 1e100 Pa or below about
// 1e-45 K, 1e-150 Pa they overflow or underflow and ln φ comes out NaN or
// ±Inf.
// The molar-volume bound of the T–V forms is the volume of the ideal gas
// at the hottest, most rarefied state (RT/P ≈ 8·10¹⁵ m³/mol), rounded up;
// beyond about 1e150 m³/mol 1/v² underflows and Cp comes out NaN.
const (
	minT, maxT = 1e-3, 1e6  // K
	minP, maxP = 1e-9, 1e13 // Pa
	maxV       = 1e20       // m³/mol
)

// inDomain returns an *InputError unless lo ≤ v ≤ hi; v must already be
// known to be finite and positive.
func inDomain(field string, v, lo, hi float64, unit string) error {
	if v < lo || v > hi {
		return &InputError{Field: field, Value: v, Reason: fmt.Sprintf("must lie within [%g, %g] %s", lo, hi, unit)}
	}
	return nil
}

// CheckState returns the *InputError Fugacity would give for the state
// (T, P, x) and workspace ws, or nil: the validation a solver runs once
// before it evaluates the state with FugacityTrusted.
func (mx *Mixture) CheckState(ws *Workspace, T, P float64, x []float64) error {
	return mx.checkTPX(ws, T, P, x)
}

// checkTPX validates a state. It is cheap next to the evaluation.
func (mx *Mixture) checkTPX(ws *Workspace, T, P float64, x []float64) error {
	if ws == nil || ws.mx != mx {
		return &InputError{Field: "workspace", Reason: "workspace belongs to another mixture (use NewWorkspace)"}
	}
	if err := positive("T", T); err != nil {
		return err
	}
	if err := inDomain("T", T, minT, maxT, "K"); err != nil {
		return err
	}
	if err := positive("P", P); err != nil {
		return err
	}
	if err := inDomain("P", P, minP, maxP, "Pa"); err != nil {
		return err
	}
	return mx.checkX(x)
}

func (mx *Mixture) checkX(x []float64) error {
	if len(x) != mx.n {
		return &InputError{Field: "x", Value: float64(len(x)), Reason: fmt.Sprintf("composition has %d entries, the mixture %d components", len(x), mx.n)}
	}
	s := 0.0
	for i, v := range x {
		if !finite(v) || v < 0 {
			return &InputError{Field: xField(i), Value: v, Reason: "mole fraction must be finite and non-negative"}
		}
		s += v
	}
	if !(s > 0) || math.IsInf(s, 0) {
		return &InputError{Field: "x", Value: s, Reason: "composition must have a positive, finite sum"}
	}
	return nil
}

func xField(i int) string { return "x[" + itoa(i) + "]" }

func itoa(i int) string {
	if i >= 0 && i < 10 {
		return string(rune('0' + i))
	}
	return fmt.Sprint(i)
}

// composition normalises x into ws.x and forms the mixing sums
//
//	D = Σ_ij x_i x_j a_ij,  D_i = 2Σ_j x_j a_ij,  B = Σ_i x_i b_i,
//
// and, with withT, the temperature derivatives D_T and D_iT (ln φ and its
// T derivative need no more) and, with withTT as well, D_TT (for heat
// capacities). With norm false x is taken as mole fractions as they are
// (the trusted entry points).
func (mx *Mixture) composition(ws *Workspace, x []float64, withT, withTT, norm bool) {
	n := mx.n
	st := &ws.st
	xs := ws.x[:n]
	x = x[:n]
	inv := 1.0
	if norm {
		s := 0.0
		for _, v := range x {
			s += v
		}
		inv = 1 / s
	}
	b, c, w := mx.b[:n], mx.c[:n], mx.mw[:n]
	bm, cs, mw := 0.0, 0.0, 0.0
	for i, v := range x {
		xi := v * inv
		xs[i] = xi
		bm += xi * b[i]
		cs += xi * c[i]
		mw += xi * w[i]
	}
	st.D = symQuad(ws.aij, xs, ws.di[:n])
	st.DT, st.DTT, st.hasTT = 0, 0, false
	if withT {
		st.DT = symQuad(ws.aijT, xs, ws.diT[:n])
		if withTT {
			st.DTT = quadForm(ws.aijTT, xs)
			st.hasTT = true
		}
	}
	st.Bm, st.cshift, st.mw = bm, cs, mw
}

// quadForm returns Σ_ij x_i a_ij x_j for the symmetric n×n row-major
// matrix a from its lower triangle, Σ_i x_i (a_ii x_i + 2Σ_{j<i} a_ij x_j),
// in a fixed order.
func quadForm(a, x []float64) float64 {
	n := len(x)
	a = a[:n*n]
	q := 0.0
	for i, xi := range x {
		row := a[i*n:][:i+1]
		s := 0.0
		for j, v := range row[:i] {
			s += v * x[j]
		}
		q += xi * (row[i]*xi + 2*s)
	}
	return q
}

// symQuad sets d_i = 2Σ_j a_ij x_j for the n×n row-major matrix a and
// returns Σ_ij x_i a_ij x_j. Rows are taken four at a time so that the
// four sums run in parallel instead of waiting on one chain of additions;
// the order of summation is fixed, so results are reproducible.
func symQuad(a, x, d []float64) float64 {
	n := len(x)
	a = a[:n*n]
	d = d[:n]
	q := 0.0
	i := 0
	for ; i+4 <= n; i += 4 {
		r0 := a[i*n:][:n]
		r1 := a[(i+1)*n:][:n]
		r2 := a[(i+2)*n:][:n]
		r3 := a[(i+3)*n:][:n]
		var s0, s1, s2, s3 float64
		for j, xj := range x {
			s0 += xj * r0[j]
			s1 += xj * r1[j]
			s2 += xj * r2[j]
			s3 += xj * r3[j]
		}
		d[i], d[i+1], d[i+2], d[i+3] = 2*s0, 2*s1, 2*s2, 2*s3
		q += x[i]*s0 + x[i+1]*s1 + x[i+2]*s2 + x[i+3]*s3
	}
	for ; i+2 <= n; i += 2 {
		r0 := a[i*n:][:n]
		r1 := a[(i+1)*n:][:n]
		var s0, s1 float64
		for j, xj := range x {
			s0 += xj * r0[j]
			s1 += xj * r1[j]
		}
		d[i], d[i+1] = 2*s0, 2*s1
		q += x[i]*s0 + x[i+1]*s1
	}
	if i < n {
		r0 := a[i*n:][:n]
		s0 := 0.0
		for j, xj := range x {
			s0 += xj * r0[j]
		}
		d[i] = 2 * s0
		q += x[i] * s0
	}
	return q
}

// solveZ finds the compressibility factor of the requested root at T, P
// and sets st.V, st.Z, st.roots, st.branch.
func (mx *Mixture) solveZ(ws *Workspace, T, P float64, root RootChoice) {
	mx.solveZFrom(ws, T, P, root, 0, false)
}

// solveZFrom is solveZ with the roots searched from z0 when hint is true
// (cubicRootsFrom), by the closed form otherwise or when that search
// fails.
func (mx *Mixture) solveZFrom(ws *Workspace, T, P float64, root RootChoice, z0 float64, hint bool) {
	st := &ws.st
	rt := R * T
	A := st.D * P / (rt * rt)
	B := st.Bm * P / rt
	st.A, st.B, st.T, st.P = A, B, T, P
	d1, d2 := mx.p.d1, mx.p.d2
	var roots [3]float64
	nr := 0
	if hint {
		nr = cubicRootsFrom(A, B, d1, d2, z0, &roots)
	}
	if nr == 0 {
		nr = cubicRoots(A, B, d1, d2, &roots)
	}
	z := roots[0]
	st.roots = nr
	st.branch = BranchSingle
	if nr == 3 {
		zl, zv := roots[0], roots[2]
		switch root {
		case RootVapour:
			z, st.branch = zv, BranchVapour
		case RootLiquid:
			z, st.branch = zl, BranchLiquid
		default:
			if gresDiff(zl, zv, A, B, d1, d2) < 0 {
				z, st.branch = zl, BranchLiquid
			} else {
				z, st.branch = zv, BranchVapour
			}
		}
	}
	st.Z = z
	st.V = z * rt / P
}

// gresDiff is the difference of G^r/RT between the liquid-like root zl and
// the vapour-like root zv, used to pick the stable one; with
// G^r/RT = Z − 1 − ln(Z − B) − A/(B(δ1 − δ2))·ln((Z + δ1B)/(Z + δ2B)) it is,
// with two logarithms instead of four,
//
//	Zl − Zv − ln((Zl − B)/(Zv − B))
//	  − A/(B(δ1 − δ2))·ln((Zl + δ1B)(Zv + δ2B)/((Zl + δ2B)(Zv + δ1B))).
func gresDiff(zl, zv, A, B, d1, d2 float64) float64 {
	return zl - zv - fastmath.Log((zl-B)/(zv-B)) -
		A/(B*(d1-d2))*fastmath.Log((zl+d1*B)*(zv+d2*B)/((zl+d2*B)*(zv+d1*B)))
}

// residual evaluates F = A^r/(nRT) and the volume and temperature
// derivatives at st.T, st.V (one mole), following Michelsen & Mollerup (2007):
//
//	F = −g(V, B) − (D/T)·f(V, B),
//	g = ln(1 − B/V),
//	f = ln((V + δ1B)/(V + δ2B)) / (R·B·(δ1 − δ2)).
//
// The pressure derivatives ∂P/∂V and ∂P/∂T are stored; with tv the
// pressure is also recomputed from V (for T–V evaluations).
func (mx *Mixture) residual(ws *Workspace, tv bool) {
	st := &ws.st
	T, V, Bm, D := st.T, st.V, st.Bm, st.D
	d1, d2 := mx.p.d1, mx.p.d2
	v1, v2 := V+d1*Bm, V+d2*Bm
	vb := V - Bm
	g := fastmath.Log(1 - Bm/V)
	f := fastmath.Log(v1/v2) / (R * Bm * (d1 - d2))
	fV := -1 / (R * v1 * v2)
	fB := -(f + V*fV) / Bm
	fVV := (1/(v2*v2) - 1/(v1*v1)) / (R * Bm * (d1 - d2))
	gV := Bm / (V * vb)
	gVV := -1/(vb*vb) + 1/(V*V)
	st.g, st.f, st.fV, st.fB = g, f, fV, fB
	st.F = -g - D/T*f
	st.FT = f / (T * T) * (D - T*st.DT)
	st.setFTT()
	FV := -gV - D/T*fV
	FVV := -gVV - D/T*fVV
	FVT := D*fV/(T*T) - fV/T*st.DT
	rt := R * T
	if tv {
		st.P = -rt*FV + rt/V
		st.Z = st.P * V / rt
		st.A = D * st.P / (rt * rt)
		st.B = Bm * st.P / rt
	}
	st.dPdV = -rt*FVV - rt/(V*V)
	st.dPdT = st.P/T - rt*FVT
}

// setFTT sets F_TT = ∂²F/∂T² at fixed V, n from f, D, D_T and D_TT
// (meaningful only with hasTT).
func (st *state) setFTT() {
	T, D, f := st.T, st.D, st.f
	st.FTT = -2*D*f/(T*T*T) + 2*f*st.DT/(T*T) - f*st.DTT/T
}

// lnPhi fills out from the last residual evaluation.
func (mx *Mixture) lnPhi(ws *Workspace, want Want, out *Fugacity) {
	st := &ws.st
	n := mx.n
	T, P, V, Bm := st.T, st.P, st.V, st.Bm
	rt := R * T
	d1, d2 := mx.p.d1, mx.p.d2
	v1, v2 := V+d1*Bm, V+d2*Bm
	vb := V - Bm
	f, fV, fB := st.f, st.fV, st.fB
	D := st.D
	gB := -1 / vb
	FB := -gB - D/T*fB // n = 1
	FD := -f / T
	lnZ := fastmath.Log(st.Z)
	shift := mx.shift
	pOverRT := P / rt
	// Slices and constants in locals: the stores into out would otherwise
	// make the compiler reload them every component.
	b, di, cc := mx.b[:n], ws.di[:n], mx.c[:n]
	lp := out.LnPhi[:n]
	c0 := -st.g - lnZ
	for i := range lp {
		v := c0 + FB*b[i] + FD*di[i]
		if shift {
			v -= cc[i] * pOverRT
		}
		lp[i] = v
	}
	out.Roots = st.roots
	out.Branch = st.branch
	out.V = V - st.cshift
	out.Z = P * out.V / rt
	if want == 0 {
		return
	}
	// Second derivatives of F (one mole).
	gV := Bm / (V * vb)
	fVV := (1/(v2*v2) - 1/(v1*v1)) / (R * Bm * (d1 - d2))
	fBV := -(2*fV + V*fVV) / Bm
	fBB := -(2*fB + V*fBV) / Bm
	gBV := 1 / (vb * vb)
	gBB := -1 / (vb * vb)
	FnV := -gV
	FnB := -gB
	FBV := -gBV - D/T*fBV
	FBB := -gBB - D/T*fBB
	FDV := -fV / T
	FBD := -fB / T
	dPdV := st.dPdV
	// ∂P/∂n_i = −RT·F_Vi + RT/V with F_Vi = F_nV + F_BV·b_i + F_DV·D_i.
	pn := ws.pn[:n]
	rtV := rt / V
	for i := range pn {
		FVi := FnV + FBV*b[i] + FDV*di[i]
		pn[i] = -rt*FVi + rtV
	}
	if want&WantN != 0 {
		// n·F_ij + 1 = e_i + e_j + b_i c_j + b_j c_i + 2F_D a_ij with
		// e_i = F_nB b_i + ½ and c_i = F_BD D_i + ½F_BB b_i.
		e, c := ws.dne[:n], ws.dnc[:n]
		for i := range e {
			e[i] = FnB*b[i] + 0.5
			c[i] = FBD*di[i] + 0.5*FBB*b[i]
		}
		fd2 := 2 * FD
		inv := 1 / (rt * dPdV)
		for i := range n {
			ei, bi, ci := e[i], b[i], c[i]
			qi := pn[i] * inv
			row := out.DN[i*n : i*n+n]
			arow := ws.aij[i*n : i*n+n]
			for j := i; j < n; j++ {
				v := ei + e[j] + bi*c[j] + b[j]*ci + fd2*arow[j] + qi*pn[j]
				row[j] = v
				out.DN[j*n+i] = v
			}
		}
	}
	if want&(WantT|WantP) != 0 {
		FBT := D * fB / (T * T)
		FDT := f / (T * T)
		DT := st.DT
		dPdT := st.dPdT
		dp, dt, diT := out.DP[:n], out.DT[:n], ws.diT[:n]
		cb := FBT + FBD*DT
		iT, iP := 1/T, 1/P
		for i, p := range pn {
			vbar := -p / dPdV
			if want&WantP != 0 {
				d := vbar/rt - iP
				if shift {
					d -= cc[i] / rt
				}
				dp[i] = d
			}
			if want&WantT != 0 {
				FiT := cb*b[i] + FDT*di[i] + FD*diT[i]
				d := FiT + iT - vbar*dPdT/rt
				if shift {
					d += cc[i] * P / (rt * T)
				}
				dt[i] = d
			}
		}
	}
}
