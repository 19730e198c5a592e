package eos

import (
	"errors"
	"fmt"
	"math"
	"testing"

	"github.com/fugad/fugad/thermo/component"
)

// fuzzLibrary is the component library, in its fixed (sorted) order.
var fuzzLibrary = component.All()

// fuzzFluid decodes a fluid from fuzz bytes: the model from sel, 1–12
// library components from comps (first byte the count, then one index
// each; repeats are allowed, the kernel must cope), and k_ij overrides
// from kij in groups of four bytes (i, j, k0, k1), mapped into the ranges
// NewMixture accepts: |k0| < 1 and |k1| ≤ 0.01 1/K. Pairs with i = j are
// skipped; a later override of a pair replaces an earlier one.
func fuzzFluid(sel uint8, comps, kij []byte, translate bool) (Model, []component.Component, Options) {
	model := Models()[int(sel)%len(Models())]
	n := 1
	if len(comps) > 0 {
		n = 1 + int(comps[0])%12
		comps = comps[1:]
	}
	cs := make([]component.Component, n)
	for i := range n {
		k := i
		if i < len(comps) {
			k = int(comps[i])
		}
		cs[i] = fuzzLibrary[k%len(fuzzLibrary)]
	}
	opts := Options{VolumeTranslation: translate, NoDefaultKij: sel&0x80 != 0}
	for g := 0; g+4 <= len(kij) && len(opts.Kij) < 66; g += 4 {
		i, j := int(kij[g])%n, int(kij[g+1])%n
		if i == j {
			continue
		}
		k0 := (float64(kij[g+2]) - 127.5) / 128 // (−0.997, 0.997)
		k1 := (float64(kij[g+3]) - 127.5) / 127.5 * 0.01
		opts.Kij = append(opts.Kij, KijOverride{I: i, J: j, K0: k0, K1: k1})
	}
	return model, cs, opts
}

// fuzzComposition decodes n mole numbers from b: entry i is b[i]
// scaled by 10^−(b[n+i] mod 40), so traces down to 1e−40 and exact zeros
// occur. Missing bytes read as 1.
func fuzzComposition(b []byte, n int) []float64 {
	x := make([]float64, n)
	for i := range x {
		v, e := 1.0, 0
		if i < len(b) {
			v = float64(b[i])
		}
		if n+i < len(b) {
			e = int(b[n+i]) % 40
		}
		x[i] = v * math.Pow(10, -float64(e))
	}
	return x
}

// checkFinite fails t when any named value is NaN or ±Inf.
func checkAllFinite(t *testing.T, what string, vals map[string]float64) {
	t.Helper()
	for name, v := range vals {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("%s: %s = %v", what, name, v)
		}
	}
}

// wantInput fails t unless err is a *InputError with a field and reason.
func wantInput(t *testing.T, what string, err error) {
	t.Helper()
	var ie *InputError
	if !errors.As(err, &ie) || ie.Field == "" || ie.Reason == "" {
		t.Fatalf("%s: error %T %v, want *InputError with field and reason", what, err, err)
	}
}

// unitInterval maps any float64 onto [0, 1): the fractional part of its
// magnitude, 0 for NaN and ±Inf.
func unitInterval(v float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0
	}
	_, fr := math.Modf(math.Abs(v))
	return fr
}

// logBetween returns lo·(hi/lo)^u, clamped to [lo, hi] against round-off.
func logBetween(lo, hi, u float64) float64 {
	return math.Min(hi, math.Max(lo, lo*math.Pow(hi/lo, u)))
}

// inServerRange reports whether T and P lie within the ranges the gRPC
// server accepts (1–10⁴ K, 10⁻³–10¹⁰ Pa), so that a failure there is
// reachable by a client.
func inServerRange(T, P float64) bool { return T >= 1 && T <= 1e4 && P >= 1e-3 && P <= 1e10 }

// FuzzFugacity evaluates random fluids — 1–12 library components, any
// model, k_ij overrides within the accepted range, volume translation on
// or off — at random compositions, temperatures and pressures (the raw
// float64 values the fuzzer picks, extremes included), with every
// derivative and every root choice, and their Properties. The contract
// checked: no panic; an error is always a *InputError; without an error
// every number is finite, Z and the untranslated volume are positive, and
// the root count is 1 or 3; a state outside the accepted domain
// (minT–maxT, minP–maxP) is refused. PropertiesTV and FugacityTV are
// held to the same contract at the volume found (volumes above maxV are
// refused). The two high bits of rootSel choose how T and P are read: raw
// (0x80; P then also serves as the volume of the T–V forms), mapped
// log-uniformly onto the whole accepted domain (0x40), or onto the
// server's ranges (neither).
func FuzzFugacity(f *testing.F) {
	type seed struct {
		sel       uint8
		comps     []byte
		kij       []byte
		translate bool
		T, P      float64
		x         []byte
		root      uint8
	}
	// Component indices are positions in the sorted library; the seeds
	// only need to be varied, not particular mixtures.
	seeds := []seed{
		{0, []byte{2, 0, 1, 2}, nil, false, 250, 5e6, []byte{85, 10, 5}, 0},
		{1, []byte{9, 3, 7, 11, 13, 17, 19, 23, 29, 31, 37}, nil, true, 300, 1e5, []byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, 1},
		{2, []byte{11, 40, 41, 42, 43, 44, 45, 46, 47, 48, 49, 50, 51}, []byte{0, 1, 200, 255, 2, 3, 0, 0}, false, 600, 3e7, nil, 2},
		{0x81, []byte{1, 5, 6}, []byte{0, 1, 128, 128}, true, 1, 1e10, []byte{1, 0}, 0},
		{2, []byte{0, 12}, nil, false, 1e4, 1e-3, []byte{1}, 0},
		{0, []byte{3, 1, 2, 3, 4}, nil, false, 150, 1e6, []byte{0, 0, 0, 0}, 0},
		{1, []byte{2, 8, 9, 10}, nil, false, 350, 2e6, []byte{255, 1, 1, 0, 39, 39}, 0},
		{0, []byte{1, 2, 2}, nil, false, 200, 1e6, []byte{1, 1}, 0}, // a component twice
		{0, []byte{0, 4}, nil, false, 5e-324, 1e5, nil, 0x80},
		{0, []byte{0, 4}, nil, false, 300, math.MaxFloat64, nil, 0x80},
		{0, []byte{0, 4}, nil, false, math.NaN(), 1e5, nil, 0x80},
		{0, []byte{0, 4}, nil, false, 300, math.Inf(1), nil, 0x80},
		{0, []byte{0, 4}, nil, false, -300, 1e5, nil, 0x80},
		{0, []byte{0, 4}, nil, true, 1e300, 1e-300, nil, 0x81},
		{1, []byte{4, 0, 1, 2, 3, 4}, nil, false, 250, 5e6, []byte{9, 9, 9, 9, 9}, 0x82},
		{2, []byte{5, 1, 3, 5, 7, 9, 11}, []byte{0, 1, 255, 255, 2, 3, 0, 0}, true, 0.999, 0.999, nil, 0x40},
		{0, []byte{0, 4}, nil, false, 1e-3, 1e-9, nil, 0x80}, // the domain's corners
		{0, []byte{0, 4}, nil, false, 1e6, 1e13, nil, 0x81},
		{0, []byte{0, 4}, nil, false, 1e6 * (1 + 1e-15), 1e5, nil, 0x80}, // just outside
	}
	for _, s := range seeds {
		f.Add(s.sel, s.comps, s.kij, s.translate, s.T, s.P, s.x, s.root)
	}
	f.Fuzz(func(t *testing.T, sel uint8, comps, kij []byte, translate bool, T, P float64, xb []byte, rootSel uint8) {
		switch {
		case rootSel&0x80 != 0: // raw values, extremes included
		case rootSel&0x40 != 0: // log-uniform over the whole accepted domain
			T = logBetween(minT, maxT, unitInterval(T))
			P = logBetween(minP, maxP, unitInterval(P))
		default: // log-uniform over the ranges the server accepts
			T = logBetween(1, 1e4, unitInterval(T))
			P = logBetween(1e-3, 1e10, unitInterval(P))
		}
		model, cs, opts := fuzzFluid(sel, comps, kij, translate)
		mx, err := NewMixture(model, cs, opts)
		if err != nil {
			t.Fatalf("NewMixture with library components and valid overrides: %v", err)
		}
		n := mx.N()
		x := fuzzComposition(xb, n)
		ws := mx.NewWorkspace()
		fug := mx.NewFugacity()
		root := RootChoice(int(rootSel) % 3)
		what := func(call string) string {
			return fmt.Sprintf("%s(%v, %d comps, translate %v, T %v, P %v, x %v, root %v; server range %v)", call, model, n, translate, T, P, x, root, inServerRange(T, P))
		}
		tpOK := func() bool {
			err = mx.Fugacity(ws, T, P, x, root, WantAll, fug)
			if !(T >= minT && T <= maxT && P >= minP && P <= maxP) && err == nil {
				t.Fatalf("%s: accepted a state outside [%g, %g] K × [%g, %g] Pa", what("Fugacity"), minT, maxT, minP, maxP)
			}
			if err != nil {
				wantInput(t, what("Fugacity"), err)
			} else {
				vals := map[string]float64{"Z": fug.Z, "V": fug.V}
				for i := range n {
					vals[fmt.Sprintf("lnφ[%d]", i)] = fug.LnPhi[i]
					vals[fmt.Sprintf("∂lnφ/∂T[%d]", i)] = fug.DT[i]
					vals[fmt.Sprintf("∂lnφ/∂P[%d]", i)] = fug.DP[i]
				}
				for k, v := range fug.DN {
					vals[fmt.Sprintf("∂lnφ/∂n[%d][%d]", k/n, k%n)] = v
				}
				checkAllFinite(t, what("Fugacity"), vals)
				if fug.Roots != 1 && fug.Roots != 3 {
					t.Fatalf("%s: %d roots", what("Fugacity"), fug.Roots)
				}
				if !translate && !(fug.Z > 0 && fug.V > 0) {
					t.Fatalf("%s: Z = %g, V = %g; want positive", what("Fugacity"), fug.Z, fug.V)
				}
			}
			p, perr := mx.Properties(ws, T, P, x, root)
			if (perr == nil) != (err == nil) {
				t.Fatalf("%s: Fugacity error %v but Properties error %v", what("Properties"), err, perr)
			}
			if perr != nil {
				wantInput(t, what("Properties"), perr)
				return false
			}
			checkAllFinite(t, what("Properties"), map[string]float64{
				"T": p.T, "P": p.P, "Z": p.Z, "MolarVolume": p.MolarVolume, "MolarDensity": p.MolarDensity,
				"MassDensity": p.MassDensity, "MolarMass": p.MolarMass, "H": p.H, "S": p.S, "G": p.G, "U": p.U,
				"A": p.A, "Cp": p.Cp, "Cv": p.Cv, "SpeedOfSound": p.SpeedOfSound, "JouleThomson": p.JouleThomson,
				"Compressivity": p.Compressivity, "DPDT": p.DPDT, "DPDV": p.DPDV, "HRes": p.HRes, "SRes": p.SRes,
			})
			if p.Roots != fug.Roots || p.Branch != fug.Branch {
				t.Fatalf("%s: Properties on %v (%d roots), Fugacity on %v (%d roots)", what("Properties"), p.Branch, p.Roots, fug.Branch, fug.Roots)
			}
			return true
		}()

		// The T–V forms at the volume just found, or, with raw inputs, at
		// P read as a molar volume (extremes included).
		v := fug.V
		if !tpOK || rootSel&0x80 != 0 {
			v = P
		}
		tv := fmt.Sprintf("T–V forms at v = %v m³/mol, %s", v, what(""))
		ptv, err := mx.PropertiesTV(ws, T, v, x)
		if err != nil {
			wantInput(t, tv, err)
			return
		}
		if v > maxV {
			t.Fatalf("%s: accepted a volume above %g m³/mol", tv, maxV)
		}
		tvVals := map[string]float64{
			"P": ptv.P, "Z": ptv.Z, "H": ptv.H, "U": ptv.U, "Cp": ptv.Cp, "Cv": ptv.Cv,
			"SpeedOfSound": ptv.SpeedOfSound, "JouleThomson": ptv.JouleThomson, "Compressivity": ptv.Compressivity,
			"DPDT": ptv.DPDT, "DPDV": ptv.DPDV, "HRes": ptv.HRes,
		}
		// S, G, A and SRes stay finite where the equation of state gives a
		// non-positive pressure at (T, v) (a liquid under tension, e.g.
		// PR76 methane at 10⁻³ K and its liquid volume): S is formed from
		// ln(RT/(v·P°)), not from ln P and ln Z apart.
		tvVals["S"], tvVals["G"], tvVals["A"], tvVals["SRes"] = ptv.S, ptv.G, ptv.A, ptv.SRes
		checkAllFinite(t, tv, tvVals)
		if _, err := mx.FugacityTV(ws, T, v, x, WantAll, fug); err != nil {
			wantInput(t, tv, err)
			return
		}
		vals := map[string]float64{"Z": fug.Z, "V": fug.V}
		for i := range n {
			vals[fmt.Sprintf("lnφ[%d]", i)] = fug.LnPhi[i]
			vals[fmt.Sprintf("∂lnφ/∂T[%d]", i)] = fug.DT[i]
			vals[fmt.Sprintf("∂lnφ/∂P[%d]", i)] = fug.DP[i]
		}
		for k, d := range fug.DN {
			vals[fmt.Sprintf("∂lnφ/∂n[%d]", k)] = d
		}
		checkAllFinite(t, "FugacityTV: "+tv, vals)
	})
}

// TestDomainCornersFinite evaluates every library component alone, and a
// twelve-component mixture with the strongest k_ij(T) overrides NewMixture
// accepts (|k0| near 1, |k1| = 0.01 1/K, so k_ij reaches ±10⁴ at 10⁶ K),
// on a logarithmic grid spanning the accepted domain, corners included,
// with every root choice: ln φ, its derivatives and the properties must be
// finite everywhere. (The grid complements FuzzFugacity, whose raw inputs
// rarely land inside the domain but outside the server's ranges.)
func TestDomainCornersFinite(t *testing.T) {
	var fluids []*Mixture
	for _, m := range Models() {
		for i := range fuzzLibrary {
			mx, err := NewMixture(m, fuzzLibrary[i:i+1], Options{VolumeTranslation: i%2 == 0})
			if err != nil {
				t.Fatal(err)
			}
			fluids = append(fluids, mx)
		}
		var kij []KijOverride
		for i := range 12 {
			for j := i + 1; j < 12; j++ {
				s := float64(1 - 2*((i+j)%2))
				kij = append(kij, KijOverride{I: i, J: j, K0: 0.999 * s, K1: 0.01 * s})
			}
		}
		mx, err := NewMixture(m, fuzzLibrary[len(fuzzLibrary)-12:], Options{Kij: kij, VolumeTranslation: true})
		if err != nil {
			t.Fatal(err)
		}
		fluids = append(fluids, mx)
	}
	const steps = 12
	for _, mx := range fluids {
		ws, fug := mx.NewWorkspace(), mx.NewFugacity()
		x := make([]float64, mx.N())
		for i := range x {
			x[i] = float64(i + 1)
		}
		for a := 0; a <= steps; a++ {
			T := logBetween(minT, maxT, float64(a)/steps)
			for b := 0; b <= steps; b++ {
				P := logBetween(minP, maxP, float64(b)/steps)
				for root := range RootChoice(3) {
					what := fmt.Sprintf("%v %s… (%d comps) at %g K, %g Pa, root %v", mx.Model(), mx.Component(0).ID, mx.N(), T, P, root)
					if err := mx.Fugacity(ws, T, P, x, root, WantAll, fug); err != nil {
						t.Fatalf("%s: %v", what, err)
					}
					vals := map[string]float64{"Z": fug.Z, "V": fug.V}
					for k := range fug.LnPhi {
						vals[fmt.Sprintf("lnφ[%d]", k)] = fug.LnPhi[k]
						vals[fmt.Sprintf("∂lnφ/∂T[%d]", k)] = fug.DT[k]
						vals[fmt.Sprintf("∂lnφ/∂P[%d]", k)] = fug.DP[k]
					}
					for k, v := range fug.DN {
						vals[fmt.Sprintf("∂lnφ/∂n[%d]", k)] = v
					}
					p, err := mx.Properties(ws, T, P, x, root)
					if err != nil {
						t.Fatalf("%s: %v", what, err)
					}
					for name, v := range map[string]float64{"H": p.H, "S": p.S, "G": p.G, "U": p.U, "A": p.A, "Cp": p.Cp, "Cv": p.Cv,
						"SpeedOfSound": p.SpeedOfSound, "JouleThomson": p.JouleThomson, "Compressivity": p.Compressivity,
						"MassDensity": p.MassDensity, "DPDV": p.DPDV, "DPDT": p.DPDT, "HRes": p.HRes, "SRes": p.SRes} {
						vals[name] = v
					}
					checkAllFinite(t, what, vals)
				}
			}
		}
	}
}
