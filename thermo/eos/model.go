package eos

import (
	"fmt"
	"math"
	"strings"
)

// Model selects a cubic equation of state.
type Model int

// Models. The zero value is not a model, so an unset choice is an error.
const (
	ModelUnspecified Model = iota
	// PR76 is Peng & Robinson (1976), Ind. Eng. Chem. Fundam. 15(1):59–64.
	PR76
	// PR78 is the Robinson & Peng (1978) revision with a cubic m(ω) for
	// ω > 0.491 (GPA Research Report RR-28).
	PR78
	// SRK is Soave (1972), Chem. Eng. Sci. 27(6):1197–1203.
	SRK
)

var modelNames = [...]string{"unspecified", "PR76", "PR78", "SRK"}

// String returns the model's short name.
func (m Model) String() string {
	if m < 0 || int(m) >= len(modelNames) {
		return fmt.Sprintf("Model(%d)", int(m))
	}
	return modelNames[m]
}

// Models lists the models in a fixed order.
func Models() []Model { return []Model{PR76, PR78, SRK} }

// ParseModel accepts "PR76", "PR78", "SRK" in any case.
func ParseModel(s string) (Model, error) {
	for _, m := range Models() {
		if strings.EqualFold(strings.TrimSpace(s), m.String()) {
			return m, nil
		}
	}
	return ModelUnspecified, fmt.Errorf("eos: unknown model %q (known: PR76, PR78, SRK)", s)
}

// Family returns "PR" for both Peng–Robinson variants and "SRK" for
// Soave–Redlich–Kwong: the key of the default interaction-parameter table.
func (m Model) Family() string {
	if m == SRK {
		return "SRK"
	}
	return "PR"
}

// Valid reports whether m is one of the defined models.
func (m Model) Valid() bool { return m == PR76 || m == PR78 || m == SRK }

// params of the generalised cubic
//
//	P = RT/(v − b) − a(T)/((v + δ1·b)(v + δ2·b)),
//
// with Ωa and Ωb solved from the critical conditions so that every model
// reproduces its input Tc and Pc exactly.
type params struct {
	d1, d2     float64
	omegaA     float64
	omegaB     float64
	zc         float64
	mOf        func(omega float64) float64
	descriptor string
}

var modelParams [4]params

func init() {
	sqrt2 := math.Sqrt2
	modelParams[PR76] = newParams(1+sqrt2, 1-sqrt2, mPR76, "Peng-Robinson 1976")
	modelParams[PR78] = newParams(1+sqrt2, 1-sqrt2, mPR78, "Peng-Robinson 1978")
	modelParams[SRK] = newParams(1, 0, mSRK, "Soave-Redlich-Kwong 1972")
}

// mPR76 is m(ω) of Peng & Robinson (1976).
func mPR76(w float64) float64 { return 0.37464 + w*(1.54226-0.26992*w) }

// mPR78 is m(ω) of Robinson & Peng (1978): the 1976 form up to ω = 0.491,
// a cubic above it.
func mPR78(w float64) float64 {
	if w <= 0.491 {
		return mPR76(w)
	}
	return 0.379642 + w*(1.48503+w*(-0.164423+w*0.016666))
}

// mSRK is m(ω) of Soave (1972).
func mSRK(w float64) float64 { return 0.480 + w*(1.574-0.176*w) }

// newParams solves the critical conditions of the generalised cubic. With
// u = δ1+δ2 and w = δ1·δ2 the cubic in Z is
//
//	Z³ − (1 + B − uB)Z² + (A + wB² − uB − uB²)Z − (AB + wB² + wB³) = 0,
//
// and at the critical point it has a triple root Zc: 3Zc = 1 + (1−u)B,
// 3Zc² = A + wB² − uB − uB², Zc³ = AB + wB² + wB³. Eliminating Zc and A
// leaves one equation in B = Ωb, solved by bisection to machine precision.
func newParams(d1, d2 float64, m func(float64) float64, desc string) params {
	u, w := d1+d2, d1*d2
	resid := func(B float64) float64 {
		zc := (1 + (1-u)*B) / 3
		A := 3*zc*zc - w*B*B + u*B + u*B*B
		return zc*zc*zc - A*B - w*B*B - w*B*B*B
	}
	lo, hi := 1e-3, 0.2
	flo := resid(lo)
	for range 200 {
		mid := 0.5 * (lo + hi)
		fm := resid(mid)
		if fm == 0 {
			lo, hi = mid, mid
			break
		}
		if (fm > 0) == (flo > 0) {
			lo, flo = mid, fm
		} else {
			hi = mid
		}
	}
	B := 0.5 * (lo + hi)
	zc := (1 + (1-u)*B) / 3
	A := 3*zc*zc - w*B*B + u*B + u*B*B
	return params{d1: d1, d2: d2, omegaA: A, omegaB: B, zc: zc, mOf: m, descriptor: desc}
}

// CriticalCompressibility returns the model's universal critical
// compressibility factor Zc (0.30740… for PR, 1/3 for SRK).
func (m Model) CriticalCompressibility() float64 { return modelParams[m].zc }

// OmegaA returns the model's Ωa (a = Ωa·R²Tc²/Pc·α).
func (m Model) OmegaA() float64 { return modelParams[m].omegaA }

// OmegaB returns the model's Ωb (b = Ωb·R·Tc/Pc).
func (m Model) OmegaB() float64 { return modelParams[m].omegaB }

// Deltas returns δ1 and δ2 of the generalised cubic.
func (m Model) Deltas() (d1, d2 float64) { return modelParams[m].d1, modelParams[m].d2 }

// M returns the model's α-function slope m(ω).
func (m Model) M(omega float64) float64 { return modelParams[m].mOf(omega) }

// Description returns the model's full name.
func (m Model) Description() string { return modelParams[m].descriptor }
