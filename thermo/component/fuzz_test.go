package component

import (
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
	"unicode/utf8"
)

// checkComponentFinite fails t unless every number of c is finite, the
// constants the equations of state need are positive, ω lies in the range
// Define documents ([-1, 3]), the ideal-gas Cp is at least 3R/2 (the
// ideal-gas minimum, a monatomic gas) at the ends of the fitted range,
// and Cp, H and S are finite there, at the reference temperature and at
// the extremes an equation of state evaluates (10⁻³ and 10⁶ K, where the
// polynomial is extrapolated).
func checkComponentFinite(t *testing.T, c Component) {
	t.Helper()
	nums := map[string]float64{
		"MolarMass": c.MolarMass, "Tc": c.Tc, "Pc": c.Pc, "Omega": c.Omega, "Vc": c.Vc,
		"ZRA": c.ZRA, "Tb": c.Tb, "SG": c.SG, "Hf": c.Hf, "Cp.Tmin": c.Cp.Tmin, "Cp.Tmax": c.Cp.Tmax,
	}
	for i, a := range c.Cp.A {
		nums["Cp.A["+string(rune('0'+i))+"]"] = a
	}
	for name, v := range nums {
		if !finite(v) {
			t.Fatalf("%s: %s = %v, not finite", c.ID, name, v)
		}
	}
	if !(c.MolarMass > 0 && c.Tc > 0 && c.Pc > 0) {
		t.Fatalf("%s: MolarMass %g, Tc %g, Pc %g: all must be positive", c.ID, c.MolarMass, c.Tc, c.Pc)
	}
	if c.Omega < -1 || c.Omega > 3 {
		t.Fatalf("%s: ω = %g outside [-1, 3]", c.ID, c.Omega)
	}
	if c.Tb != 0 && !(c.Tb < c.Tc) {
		t.Fatalf("%s: Tb = %g not below Tc = %g", c.ID, c.Tb, c.Tc)
	}
	if !(c.Cp.Tmin > 0 && c.Cp.Tmax > c.Cp.Tmin) {
		t.Fatalf("%s: Cp range [%g, %g] K", c.ID, c.Cp.Tmin, c.Cp.Tmax)
	}
	for _, T := range []float64{c.Cp.Tmin, c.Cp.Tmax, TRef, 1e-3, 1, 1e4, 1e6} {
		cp, h, s := c.CpIG(T), c.HIG(T), c.SIG(T)
		if !finite(cp) || !finite(h) || !finite(s) {
			t.Fatalf("%s at %g K: Cp %v, H %v, S %v; want finite", c.ID, T, cp, h, s)
		}
		if (T == c.Cp.Tmin || T == c.Cp.Tmax) && cp < 1.5*R*(1-1e-12) {
			t.Fatalf("%s at %g K: Cp = %g J/(mol·K), below the ideal-gas minimum 3R/2", c.ID, T, cp)
		}
	}
}

// wantInputError fails t unless err is a *InputError naming a field, with
// a reason.
func wantInputError(t *testing.T, err error) {
	t.Helper()
	var ie *InputError
	if !errors.As(err, &ie) {
		t.Fatalf("error %T %v, want *InputError", err, err)
	}
	if ie.Field == "" || ie.Reason == "" {
		t.Fatalf("InputError %+v: field and reason must be set", ie)
	}
	if ie.Error() == "" {
		t.Fatal("empty error text")
	}
}

// FuzzLookup checks Lookup on arbitrary strings: it never panics, fails
// only with *UnknownError or *AmbiguousError, answers the same twice,
// suggests at most five distinct library ids that themselves resolve,
// and a found component is resolvable by its own id to the same
// constants.
func FuzzLookup(f *testing.F) {
	for _, s := range []string{
		"methane", "Methane", " CH4 ", "nC4", "106-97-8", "Carbon Dioxide", "carbon_dioxide", "C4H10", "C8H10",
		"", " ", "\t", "-", "methan", "ethanee", "n-butane\x00", "\xff\xfe", "метан", strings.Repeat("a", 300),
		"h2o", "water", "MEG", "n-dodecane", "i-C5", "nitrogen;methane", "#", "|",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, name string) {
		c, err := Lookup(name)
		c2, err2 := Lookup(name)
		if (err == nil) != (err2 == nil) || !reflect.DeepEqual(c, c2) || (err != nil && err.Error() != err2.Error()) {
			t.Fatalf("Lookup(%q) differs between calls: %v / %v", name, err, err2)
		}
		if err != nil {
			var ue *UnknownError
			var ae *AmbiguousError
			switch {
			case errors.As(err, &ue):
				if len(ue.Suggestions) > 5 {
					t.Fatalf("%d suggestions, at most 5 documented", len(ue.Suggestions))
				}
				seen := map[string]bool{}
				for _, s := range ue.Suggestions {
					if seen[s] {
						t.Fatalf("suggestion %q repeated in %q", s, ue.Suggestions)
					}
					seen[s] = true
					if _, err := Lookup(s); err != nil {
						t.Fatalf("suggestion %q does not resolve: %v", s, err)
					}
				}
			case errors.As(err, &ae):
				if len(ae.Matches) < 2 {
					t.Fatalf("ambiguous %q with matches %q", name, ae.Matches)
				}
			default:
				t.Fatalf("Lookup(%q): error %T %v, want *UnknownError or *AmbiguousError", name, err, err)
			}
			if err.Error() == "" {
				t.Fatal("empty error text")
			}
			return
		}
		checkComponentFinite(t, c)
		again, err := Lookup(c.ID)
		if err != nil || !reflect.DeepEqual(again, c) {
			t.Fatalf("Lookup(%q) found %s, but its id resolves to %v (%v)", name, c.ID, again.ID, err)
		}
		if !utf8.ValidString(c.ID) || c.ID != strings.ToLower(c.ID) {
			t.Fatalf("id %q is not lower-case UTF-8", c.ID)
		}
	})
}

// FuzzPseudoFromBoilingPoint checks PseudoFromBoilingPoint on arbitrary
// numbers: no panic, only *InputError, and a returned component inside
// the documented input window with finite, physical constants
// (Tc > Tb, Pc > 1 atm, ω in (−0.5, 2.5)).
func FuzzPseudoFromBoilingPoint(f *testing.F) {
	seeds := []struct {
		id     string
		tb, sg float64
	}{
		{"c7-cut", 371.6, 0.688}, {"heavy", 700, 0.95}, {"edge-lo", 250, 0.55}, {"edge-hi", 1000, 1.30},
		{"k-low", 250, 1.3}, {"k-high", 1000, 0.55}, {"nan", math.NaN(), 0.7}, {"inf", math.Inf(1), 0.7},
		{"neg", -300, 0.7}, {"zero", 0, 0}, {"", 400, 0.75}, {"methane", 400, 0.75}, {"sub", 5e-324, 0.7},
		{"max", math.MaxFloat64, math.MaxFloat64}, {"Upper", 400, 0.75}, {"c4h10", 400, 0.75},
	}
	for _, s := range seeds {
		f.Add(s.id, s.tb, s.sg)
	}
	f.Fuzz(func(t *testing.T, id string, tb, sg float64) {
		c, err := PseudoFromBoilingPoint(id, tb, sg)
		if err != nil {
			wantInputError(t, err)
			return
		}
		if !(tb >= 250 && tb <= 1000 && sg >= 0.55 && sg <= 1.30) {
			t.Fatalf("accepted Tb = %g K, SG = %g outside [250, 1000] K × [0.55, 1.30]", tb, sg)
		}
		if k := WatsonK(tb, sg); k < 8.5 || k > 14 {
			t.Fatalf("accepted Watson K = %g outside [8.5, 14]", k)
		}
		checkComponentFinite(t, c)
		if !(c.Tc > tb) || !(c.Pc > PRef) || !(c.Omega > -0.5 && c.Omega < 2.5) || c.Family != FamilyPseudo {
			t.Fatalf("unphysical pseudo-component: Tc %g K (Tb %g K), Pc %g Pa, ω %g, family %v", c.Tc, tb, c.Pc, c.Omega, c.Family)
		}
	})
}

// FuzzPseudoFromMolarMass checks PseudoFromMolarMass the same way; the
// molar mass must lie in [0.060, 0.800] kg/mol and is kept as given.
func FuzzPseudoFromMolarMass(f *testing.F) {
	seeds := []struct {
		id     string
		mw, sg float64
	}{
		{"c7-cut", 0.100, 0.72}, {"c20", 0.282, 0.86}, {"edge-lo", 0.060, 0.55}, {"edge-hi", 0.800, 1.30},
		{"nan", math.NaN(), 0.8}, {"inf", 0.1, math.Inf(-1)}, {"neg", -0.1, 0.8}, {"zero", 0, 0},
		{"grams", 100, 0.8}, {"Bad ID", 0.1, 0.8}, {"water", 0.1, 0.8},
	}
	for _, s := range seeds {
		f.Add(s.id, s.mw, s.sg)
	}
	f.Fuzz(func(t *testing.T, id string, mw, sg float64) {
		c, err := PseudoFromMolarMass(id, mw, sg)
		if err != nil {
			wantInputError(t, err)
			return
		}
		if !(mw >= 0.060 && mw <= 0.800 && sg >= 0.55 && sg <= 1.30) {
			t.Fatalf("accepted M = %g kg/mol, SG = %g outside the documented window", mw, sg)
		}
		checkComponentFinite(t, c)
		if c.MolarMass != mw {
			t.Fatalf("molar mass %g, want the given %g", c.MolarMass, mw)
		}
		if !(c.Tb >= 250 && c.Tb <= 1000) || !(c.Tc > c.Tb) || !(c.Pc > PRef) {
			t.Fatalf("unphysical pseudo-component: Tb %g K, Tc %g K, Pc %g Pa", c.Tb, c.Tc, c.Pc)
		}
	})
}

// FuzzDefine checks Define on arbitrary constants, with and without Cp
// coefficients: no panic, only *InputError, and an accepted component
// within the documented ranges with finite values.
func FuzzDefine(f *testing.F) {
	type seed struct {
		id                                 string
		mw, tc, pc, omega, vc, zra, tb, sg float64
		hf                                 float64
		family                             int
		withCp                             bool
		a0, a1, a2, a3, a4, tmin, tmax     float64
	}
	seeds := []seed{
		// Constants of a fictional heavy cut used in the demo scenario.
		{"cut-a", 0.150, 620, 2.2e6, 0.45, 0, 0, 450, 0.78, 0, 10, false, 0, 0, 0, 0, 0, 0, 0},
		{"cut-b", 0.150, 620, 2.2e6, 0.45, 5e-4, 0.26, 450, 0.78, -2e5, 10, true, 4, 0.02, 0, 0, 0, 200, 1000},
		{"gas-x", 0.028, 130, 3.4e6, 0.04, 0, 0, 0, 0, 0, 5, false, 0, 0, 0, 0, 0, 0, 0},
		{"gas-y", 0.028, 130, 3.4e6, 0.04, 0, 0, 0, 0, 0, 5, true, 3.5, 0, 0, 0, 0, 50, 1500},
		{"edge", 5, 2000, 1e8, 3, 0.1, 0.35, 1999, 2, 1e7, 0, true, 1.5, 0, 0, 0, 0, 1, 10000},
		{"edge2", 5e-324, 5e-324, 5e-324, -1, 0, 0.15, 0, 0.3, -1e7, 0, true, 1.5, 0, 0, 0, 0, 5e-324, 10000},
		{"nan", math.NaN(), 300, 1e6, 0.1, 0, 0, 0, 0, 0, 0, false, 0, 0, 0, 0, 0, 0, 0},
		{"inf", 0.1, math.Inf(1), 1e6, 0.1, 0, 0, 0, 0, 0, 0, true, math.Inf(1), 0, 0, 0, 0, 200, 1000},
		{"neg-cp", 0.1, 400, 3e6, 0.2, 0, 0, 0, 0, 0, 0, true, -10, 0, 0, 0, 0, 200, 1000},
		{"big-cp", 0.1, 400, 3e6, 0.2, 0, 0, 0, 0, 0, 0, true, 1e300, 0, 0, 0, 0, 200, 1000},
		{"big-a4", 0.1, 400, 3e6, 0.2, 0, 0, 0, 0, 0, 0, true, 4, 0, 0, 0, 1e-10, 200, 1000},
		{"tb-above", 0.1, 400, 3e6, 0.2, 0, 0, 500, 0, 0, 0, false, 0, 0, 0, 0, 0, 0, 0},
		{"fam", 0.1, 400, 3e6, 0.2, 0, 0, 0, 0, 0, 99, false, 0, 0, 0, 0, 0, 0, 0},
		{"methane", 0.016, 190.6, 4.6e6, 0.011, 0, 0, 0, 0, 0, 0, true, 4, 0, 0, 0, 0, 50, 1000},
		{"", 0.1, 400, 3e6, 0.2, 0, 0, 0, 0, 0, 0, false, 0, 0, 0, 0, 0, 0, 0},
	}
	for _, s := range seeds {
		f.Add(s.id, s.mw, s.tc, s.pc, s.omega, s.vc, s.zra, s.tb, s.sg, s.hf, s.family, s.withCp, s.a0, s.a1, s.a2, s.a3, s.a4, s.tmin, s.tmax)
	}
	f.Fuzz(func(t *testing.T, id string, mw, tc, pc, omega, vc, zra, tb, sg, hf float64, family int, withCp bool, a0, a1, a2, a3, a4, tmin, tmax float64) {
		d := Definition{ID: id, MolarMass: mw, Tc: tc, Pc: pc, Omega: omega, Vc: vc, ZRA: zra, Tb: tb, SG: sg, Hf: hf, Family: Family(family)}
		if withCp {
			d.Cp = &IdealGasCp{A: [5]float64{a0, a1, a2, a3, a4}, Tmin: tmin, Tmax: tmax}
		}
		c, err := Define(d)
		if err != nil {
			wantInputError(t, err)
			return
		}
		if !(mw > 0 && mw <= 5 && tc > 0 && tc <= 2000 && pc > 0 && pc <= 1e8 && omega >= -1 && omega <= 3) {
			t.Fatalf("accepted M %g, Tc %g, Pc %g, ω %g outside the documented ranges", mw, tc, pc, omega)
		}
		checkComponentFinite(t, c)
		if withCp && c.Cp != *d.Cp {
			t.Fatalf("Cp %+v, want the given %+v", c.Cp, *d.Cp)
		}
	})
}
