package eos

import "math"

// Workspace holds the scratch memory of one goroutine's evaluations for one
// Mixture. It caches the temperature-dependent attraction matrix, so a run
// of evaluations at one temperature (a T–P flash) skips its O(n²) rebuild.
// A Workspace is not safe for concurrent use; make one per goroutine.
type Workspace struct {
	mx *Mixture

	tValid bool
	t      float64
	ai     []float64 // a_i(T)
	aij    []float64 // a_ij(T), n×n
	aijT   []float64 // ∂a_ij/∂T
	aijTT  []float64 // ∂²a_ij/∂T²
	h      []float64 // √α_i (signed), and its T derivatives below
	hT     []float64
	hTT    []float64

	x   []float64 // normalised composition
	di  []float64 // D_i = 2 Σ_j x_j a_ij
	diT []float64 // ∂D_i/∂T
	pn  []float64 // ∂P/∂n_i at T, V
	dne []float64 // e_i and c_i of the composition derivatives (lnPhi)
	dnc []float64

	// Ideal-gas H, S (at PRef) and Cp of each component at igT, filled by
	// the first property evaluation at a temperature.
	igOK          bool
	igT           float64
	hig, sig, cpg []float64

	st state
}

// state is the result of the last kernel evaluation.
type state struct {
	T, P, V    float64 // V is the untranslated molar volume
	Z          float64
	A, B       float64
	D, DT, DTT float64
	hasTT      bool // DTT (and so FTT) was computed
	Bm         float64
	f, fV, fB  float64
	g          float64
	F, FT, FTT float64 // F = A^r/RT and its total T derivatives at fixed V, n
	dPdV, dPdT float64
	roots      int
	branch     Branch
	cshift     float64 // Σ x_i c_i
	mw         float64
}

// NewWorkspace returns a workspace sized for mx.
func (mx *Mixture) NewWorkspace() *Workspace {
	n := mx.n
	return &Workspace{
		mx:    mx,
		ai:    make([]float64, n),
		aij:   make([]float64, n*n),
		aijT:  make([]float64, n*n),
		aijTT: make([]float64, n*n),
		h:     make([]float64, n),
		hT:    make([]float64, n),
		hTT:   make([]float64, n),
		x:     make([]float64, n),
		di:    make([]float64, n),
		diT:   make([]float64, n),
		pn:    make([]float64, n),
		dne:   make([]float64, n),
		dnc:   make([]float64, n),
		hig:   make([]float64, n),
		sig:   make([]float64, n),
		cpg:   make([]float64, n),
	}
}

// setT rebuilds the attraction parameters for temperature T:
//
//	a_i = ac_i·α_i,  √α_i = 1 + m_i(1 − √(T/Tc_i)),
//	a_ij = (1 − k_ij(T))·√(a_i a_j),
//
// with first and second temperature derivatives.
func (ws *Workspace) setT(T float64) {
	if ws.tValid && ws.t == T {
		return
	}
	mx := ws.mx
	n := mx.n
	for i := range n {
		stc := math.Sqrt(T * mx.tc[i])
		sq := stc / mx.tc[i]
		h := 1 + mx.m[i]*(1-sq)
		ws.h[i] = h
		ws.hT[i] = -mx.m[i] / (2 * stc)
		ws.hTT[i] = mx.m[i] / (4 * T * stc)
		ws.ai[i] = mx.ac[i] * h * h
	}
	if mx.hasK1 {
		ws.pairsLinearK(T)
	} else {
		ws.pairsConstK()
	}
	// Pairs with a general k(T) (the aqueous set):
	//	a = (1 − k)s,  a_T = (1 − k)s_T − k′s,  a_TT = (1 − k)s_TT − 2k′s_T − k″s.
	for e := range mx.kx {
		t := &mx.kx[e]
		i, j := t.i, t.j
		k, dk, d2k := t.at(T)
		q := mx.sqac[i] * mx.sqac[j]
		hi, hj := ws.h[i], ws.h[j]
		s := q * hi * hj
		sT := q * (ws.hT[i]*hj + hi*ws.hT[j])
		sTT := q * (ws.hTT[i]*hj + 2*ws.hT[i]*ws.hT[j] + hi*ws.hTT[j])
		omk := 1 - k
		a := omk * s
		aT := omk*sT - dk*s
		aTT := omk*sTT - 2*dk*sT - d2k*s
		ws.aij[i*n+j], ws.aij[j*n+i] = a, a
		ws.aijT[i*n+j], ws.aijT[j*n+i] = aT, aT
		ws.aijTT[i*n+j], ws.aijTT[j*n+i] = aTT, aTT
	}
	ws.t = T
	ws.tValid = true
}

// pairsConstK sets a_ij and its T derivatives when every k_ij is
// constant: a_ij = q_ij·h_i·h_j with q_ij = √(ac_i ac_j)·(1 − k_ij)
// prepared by NewMixture.
func (ws *Workspace) pairsConstK() {
	mx := ws.mx
	n := mx.n
	h, hT, hTT := ws.h[:n], ws.hT[:n], ws.hTT[:n]
	for i := range n {
		hi, hTi, hTTi := h[i], hT[i], hTT[i]
		row := i * n
		q := mx.qk[row : row+n]
		for j := i; j < n; j++ {
			hj, hTj := h[j], hT[j]
			a := q[j] * hi * hj
			aT := q[j] * (hTi*hj + hi*hTj)
			aTT := q[j] * (hTTi*hj + 2*hTi*hTj + hi*hTT[j])
			ws.aij[row+j], ws.aij[j*n+i] = a, a
			ws.aijT[row+j], ws.aijT[j*n+i] = aT, aT
			ws.aijTT[row+j], ws.aijTT[j*n+i] = aTT, aTT
		}
	}
}

// pairsLinearK sets a_ij and its T derivatives with k_ij(T) = k0 + k1·T:
//
//	a = (1 − k)s,  a_T = (1 − k)s_T − k1·s,  a_TT = (1 − k)s_TT − 2k1·s_T,
//
// s = √(ac_i ac_j)·h_i·h_j.
func (ws *Workspace) pairsLinearK(T float64) {
	mx := ws.mx
	n := mx.n
	for i := range n {
		hi, hTi, hTTi := ws.h[i], ws.hT[i], ws.hTT[i]
		row := i * n
		for j := i; j < n; j++ {
			q := mx.sqac[i] * mx.sqac[j]
			hj, hTj, hTTj := ws.h[j], ws.hT[j], ws.hTT[j]
			s := q * hi * hj
			sT := q * (hTi*hj + hi*hTj)
			sTT := q * (hTTi*hj + 2*hTi*hTj + hi*hTTj)
			k0, k1 := mx.kij0[row+j], mx.kij1[row+j]
			omk := 1 - k0 - k1*T
			a := omk * s
			aT := omk*sT - k1*s
			aTT := omk*sTT - 2*k1*sT
			ws.aij[row+j], ws.aij[j*n+i] = a, a
			ws.aijT[row+j], ws.aijT[j*n+i] = aT, aT
			ws.aijTT[row+j], ws.aijTT[j*n+i] = aTT, aTT
		}
	}
}
