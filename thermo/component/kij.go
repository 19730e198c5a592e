package component

import (
	_ "embed"
	"fmt"
	"math"
	"strings"
)

//go:embed data/kij.txt
var kijFile string

// Kij is a binary interaction parameter of the van der Waals one-fluid
// mixing rule a_ij = √(a_i·a_j)·(1 − k_ij) with the linear temperature form
//
//	k_ij(T) = K0 + K1·T,   K1 in 1/K,
//
// and the citation it comes from.
type Kij struct {
	K0, K1 float64
	Source string
}

// At returns k_ij at temperature T in K.
func (k Kij) At(T float64) float64 { return k.K0 + k.K1*T }

type kijKey struct{ model, a, b string }

func orderedKey(model, a, b string) kijKey {
	if b < a {
		a, b = b, a
	}
	return kijKey{model, a, b}
}

var kijTable = mustLoadKij()

func mustLoadKij() map[kijKey]Kij {
	m, err := parseKij("kij.txt", kijFile, func(id string) bool {
		_, ok := library.byKey[id]
		return ok && library.comps[library.byKey[id]].ID == id
	})
	if err != nil {
		panic(err.Error())
	}
	return m
}

// kijModels are the model families the table distinguishes. PR serves both
// Peng–Robinson 1976 and 1978 (they share a(T_c), b and the mixing rule).
var kijModels = map[string]bool{"PR": true, "SRK": true}

// parseKij reads the interaction-parameter format described in doc.go.
// known reports whether an ID names a library component.
func parseKij(file, text string, known func(string) bool) (map[kijKey]Kij, error) {
	s := newLineScanner(file, text)
	srcs := map[string]string{}
	out := map[kijKey]Kij{}
	for {
		l, ln, ok := s.next()
		if !ok {
			break
		}
		if strings.HasPrefix(l, "source ") {
			if err := parseSourceLine(s, ln, l, srcs); err != nil {
				return nil, err
			}
			continue
		}
		f := splitFields(l)
		if len(f) != 7 {
			return nil, s.errf(ln, "", "row has %d fields, want 7 (models | a | b | k0 | k1 | source | flag)", len(f))
		}
		var models []string
		for _, m := range strings.Split(f[0], ",") {
			m = strings.TrimSpace(m)
			if !kijModels[m] {
				return nil, s.errf(ln, "models", "unknown model %q (want PR or SRK)", m)
			}
			models = append(models, m)
		}
		a, b := f[1], f[2]
		if !known(a) {
			return nil, s.errf(ln, "a", "%q is not a library component ID", a)
		}
		if !known(b) {
			return nil, s.errf(ln, "b", "%q is not a library component ID", b)
		}
		if a == b {
			return nil, s.errf(ln, "b", "a component has no interaction parameter with itself")
		}
		k0, err := parseNumber(s, ln, "k0", f[3], false)
		if err != nil {
			return nil, err
		}
		if err := checkRange(s, ln, "k0", k0, -0.2, 0.6, false); err != nil {
			return nil, err
		}
		k1, err := parseNumber(s, ln, "k1", f[4], false)
		if err != nil {
			return nil, err
		}
		if math.Abs(k1) > 0.01 {
			return nil, s.errf(ln, "k1", "|k1| = %g 1/K exceeds 0.01", k1)
		}
		src, err := resolveSources(s, ln, "source", f[5], srcs)
		if err != nil {
			return nil, err
		}
		rec, err := parseFlag(s, ln, f[6])
		if err != nil {
			return nil, err
		}
		if rec {
			src += " (from memory)"
		}
		for _, m := range models {
			key := orderedKey(m, a, b)
			if _, dup := out[key]; dup {
				return nil, s.errf(ln, "b", "pair %s/%s listed twice for %s", a, b, m)
			}
			out[key] = Kij{K0: k0, K1: k1, Source: src}
		}
	}
	if len(out) == 0 {
		return nil, &ParseError{File: file, Line: s.n, Reason: "no interaction parameters"}
	}
	return out, nil
}

// DefaultKij returns the default interaction parameter of the pair (a, b)
// for model "PR" (used for both PR76 and PR78) or "SRK"; a and b are
// library component IDs and the order does not matter.
//
// Pairs absent from the table — all hydrocarbon–hydrocarbon pairs, for
// which zero is the customary default with these models, pairs involving
// user-defined components, and unknown models — give the zero Kij and
// ok = false, so callers can tell "zero by default" from "tabulated".
func DefaultKij(model, a, b string) (k Kij, ok bool) {
	k, ok = kijTable[orderedKey(model, a, b)]
	return k, ok
}

// KijPairs returns every tabulated pair for model as "a/b" with a < b, in
// sorted order; it exists for discovery listings and tests.
func KijPairs(model string) []string {
	var out []string
	for k := range kijTable {
		if k.model == model {
			out = append(out, fmt.Sprintf("%s/%s", k.a, k.b))
		}
	}
	sortStrings(out)
	return out
}
