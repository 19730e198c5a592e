package component

import (
	"errors"
	"strings"
	"testing"
)

func TestKijTable(t *testing.T) {
	gases := map[string]bool{"nitrogen": true, "carbon-dioxide": true, "hydrogen-sulfide": true, "water": true, "hydrogen": true}
	for _, model := range []string{"PR", "SRK"} {
		pairs := KijPairs(model)
		if len(pairs) < 60 {
			t.Errorf("%s: only %d pairs", model, len(pairs))
		}
		for _, p := range pairs {
			a, b, _ := strings.Cut(p, "/")
			ca, errA := Lookup(a)
			cb, errB := Lookup(b)
			if errA != nil || errB != nil || ca.ID != a || cb.ID != b {
				t.Errorf("%s %s: not library IDs (%v, %v)", model, p, errA, errB)
				continue
			}
			k1, ok1 := DefaultKij(model, a, b)
			k2, ok2 := DefaultKij(model, b, a)
			if !ok1 || !ok2 || k1 != k2 {
				t.Errorf("%s %s: not symmetric: %+v %v / %+v %v", model, p, k1, ok1, k2, ok2)
			}
			if k1.K0 < -0.2 || k1.K0 > 0.6 || k1.At(200) < -0.2 || k1.At(600) > 0.6 {
				t.Errorf("%s %s: k = %+v outside [-0.2, 0.6]", model, p, k1)
			}
			if k1.Source == "" || !strings.Contains(k1.Source, "from memory") {
				t.Errorf("%s %s: source %q", model, p, k1.Source)
			}
			if !gases[a] && !gases[b] {
				t.Errorf("%s %s: neither component is N2, CO2, H2S, H2O or H2", model, p)
			}
			if ca.Family.IsHydrocarbon() && cb.Family.IsHydrocarbon() {
				t.Errorf("%s %s: hydrocarbon pair tabulated; the documented default is zero", model, p)
			}
		}
	}
	// Pairs the defaults must cover (the acid-gas and nitrogen pairs with
	// methane drive natural-gas phase behaviour).
	for _, p := range [][2]string{{"nitrogen", "methane"}, {"carbon-dioxide", "methane"}, {"hydrogen-sulfide", "methane"},
		{"water", "methane"}, {"carbon-dioxide", "hydrogen-sulfide"}, {"nitrogen", "carbon-dioxide"}, {"carbon-dioxide", "water"}} {
		for _, model := range []string{"PR", "SRK"} {
			if _, ok := DefaultKij(model, p[0], p[1]); !ok {
				t.Errorf("%s: no default for %s/%s", model, p[0], p[1])
			}
		}
	}
	if k, ok := DefaultKij("PR", "methane", "n-decane"); ok || k != (Kij{}) {
		t.Errorf("hydrocarbon pair: %+v %v, want zero and false", k, ok)
	}
	if _, ok := DefaultKij("PR76", "nitrogen", "methane"); ok {
		t.Error("model names other than PR and SRK must not match")
	}
	if _, ok := DefaultKij("PR", "nitrogen", "nitrogen"); ok {
		t.Error("self pair reported")
	}
}

func TestParseKijErrors(t *testing.T) {
	known := func(id string) bool { return id == "nitrogen" || id == "methane" }
	head := "source S | a source\n"
	good := "PR | nitrogen | methane | 0.03 | 0 | S | recalled\n"
	if m, err := parseKij("k", head+good, known); err != nil || len(m) != 1 {
		t.Fatalf("valid table: %v %v", m, err)
	}
	for _, tc := range []struct {
		name, row, field string
	}{
		{"fields", "PR | nitrogen | methane | 0.03\n", ""},
		{"model", "PR78 | nitrogen | methane | 0.03 | 0 | S | read\n", "models"},
		{"unknown a", "PR | nitrogn | methane | 0.03 | 0 | S | read\n", "a"},
		{"unknown b", "PR | nitrogen | methan | 0.03 | 0 | S | read\n", "b"},
		{"self", "PR | methane | methane | 0.03 | 0 | S | read\n", "b"},
		{"k0 range", "PR | nitrogen | methane | 0.9 | 0 | S | read\n", "k0"},
		{"k0 NaN", "PR | nitrogen | methane | NaN | 0 | S | read\n", "k0"},
		{"k1", "PR | nitrogen | methane | 0.03 | 0.5 | S | read\n", "k1"},
		{"source", "PR | nitrogen | methane | 0.03 | 0 | T | read\n", "source"},
		{"flag", "PR | nitrogen | methane | 0.03 | 0 | S | yes\n", "flag"},
		{"duplicate", good + "PR,SRK | methane | nitrogen | 0.03 | 0 | S | read\n", "b"},
	} {
		_, err := parseKij("k", head+tc.row, known)
		var pe *ParseError
		if !errors.As(err, &pe) || pe.Field != tc.field {
			t.Errorf("%s: %v, want *ParseError on field %q", tc.name, err, tc.field)
		}
	}
}
