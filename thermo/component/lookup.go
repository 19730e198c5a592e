package component

import (
	"fmt"
	"sort"
	"strings"
	"unicode/utf8"
)

// library is the parsed, indexed embedded table. It is built once at
// package initialisation and never modified afterwards, so concurrent
// lookups need no locking.
var library = mustLoad()

type index struct {
	comps     []Component      // sorted by ID
	byKey     map[string]int   // normalised ID, alias, CAS or unique formula → index
	ambiguous map[string][]int // normalised formula shared by isomers → indices
	version   string
}

// mustLoad parses the embedded tables. A failure is a defect in the
// embedded files (caught by the package tests), not a run-time condition.
func mustLoad() *index {
	t, err := parseComponents("components.txt", componentsFile)
	if err != nil {
		panic(err.Error())
	}
	if t.version != DataVersion {
		panic(fmt.Sprintf("component: components.txt: version %q differs from DataVersion %q", t.version, DataVersion))
	}
	ix, err := buildIndex(t)
	if err != nil {
		panic("component: components.txt: " + err.Error())
	}
	return ix
}

// normalize is the key form used for lookup: surrounding blanks removed,
// lower case, inner blanks and underscores read as hyphens.
func normalize(s string) string {
	s = strings.ToLower(strings.TrimSpace(s))
	return strings.Map(func(r rune) rune {
		if r == ' ' || r == '_' || r == '\t' {
			return '-'
		}
		return r
	}, s)
}

// buildIndex indexes every component by ID, aliases, CAS number and
// formula. Any name other than a formula must be unique across the
// library; a formula shared by isomers is recorded as ambiguous.
func buildIndex(t *table) (*index, error) {
	ix := &index{
		comps:     t.comps,
		byKey:     map[string]int{},
		ambiguous: map[string][]int{},
		version:   t.version,
	}
	owner := map[string]string{} // key → "id (kind)" for messages
	add := func(i int, name, kind string) error {
		k := normalize(name)
		if k == "" {
			return fmt.Errorf("%s: empty %s", ix.comps[i].ID, kind)
		}
		if j, dup := ix.byKey[k]; dup {
			if j == i {
				return nil // e.g. an alias equal to the ID
			}
			return fmt.Errorf("%s %q of %s is already the %s", kind, name, ix.comps[i].ID, owner[k])
		}
		ix.byKey[k] = i
		owner[k] = kind + " of " + ix.comps[i].ID
		return nil
	}
	for i, c := range ix.comps {
		if err := add(i, c.ID, "ID"); err != nil {
			return nil, err
		}
		if err := add(i, c.CAS, "CAS number"); err != nil {
			return nil, err
		}
		for _, a := range c.Aliases {
			if err := add(i, a, "alias"); err != nil {
				return nil, err
			}
		}
	}
	formulas := map[string][]int{}
	for i, c := range ix.comps {
		k := normalize(c.Formula)
		formulas[k] = append(formulas[k], i)
	}
	for k, is := range formulas {
		if j, taken := ix.byKey[k]; taken {
			if len(is) != 1 || is[0] != j {
				return nil, fmt.Errorf("formula %q is already the %s", ix.comps[is[0]].Formula, owner[k])
			}
			continue
		}
		if len(is) == 1 {
			ix.byKey[k] = is[0]
		} else {
			ix.ambiguous[k] = is
		}
	}
	return ix, nil
}

// UnknownError reports a name that matches no component. Suggestions holds
// up to five IDs of components with a similar name, closest first.
type UnknownError struct {
	Name        string
	Suggestions []string
}

// Error states the name and the suggestions.
func (e *UnknownError) Error() string {
	if len(e.Suggestions) == 0 {
		return fmt.Sprintf("component: unknown component %q", e.Name)
	}
	return fmt.Sprintf("component: unknown component %q (did you mean %s?)", e.Name, strings.Join(e.Suggestions, ", "))
}

// AmbiguousError reports a formula shared by several isomers in the
// library, e.g. "C4H10". Matches holds their IDs in order.
type AmbiguousError struct {
	Name    string
	Matches []string
}

// Error states the formula and the matching IDs.
func (e *AmbiguousError) Error() string {
	return fmt.Sprintf("component: %q is the formula of several components; use one of %s", e.Name, strings.Join(e.Matches, ", "))
}

// Lookup returns a copy of the library component named name, which may be
// its ID, an alias, its formula or its CAS registry number. Matching ignores
// case and surrounding blanks, and reads inner blanks and underscores as
// hyphens ("Carbon Dioxide" finds "carbon-dioxide").
//
// An unknown name gives *UnknownError with suggestions; a formula shared by
// isomers gives *AmbiguousError.
func Lookup(name string) (Component, error) {
	k := normalize(name)
	if i, ok := library.byKey[k]; ok {
		return library.comps[i].clone(), nil
	}
	if is, ok := library.ambiguous[k]; ok {
		ids := make([]string, len(is))
		for n, i := range is {
			ids[n] = library.comps[i].ID
		}
		sort.Strings(ids)
		return Component{}, &AmbiguousError{Name: name, Matches: ids}
	}
	return Component{}, &UnknownError{Name: name, Suggestions: suggest(k, 5)}
}

// All returns copies of every library component, sorted by ID.
func All() []Component {
	out := make([]Component, len(library.comps))
	for i := range library.comps {
		out[i] = library.comps[i].clone()
	}
	return out
}

// clone returns a copy that shares no memory with c.
func (c *Component) clone() Component {
	d := *c
	if c.Aliases != nil {
		d.Aliases = append([]string(nil), c.Aliases...)
	}
	return d
}

// suggest ranks library names against the normalised query k. A name
// qualifies when its Levenshtein distance to k is small for its length
// (≤ 1 up to 3 characters, ≤ 2 up to 6, ≤ 3 beyond) or when one is a
// prefix of the other (at least 3 characters long), which scores as a
// distance of 1. Each component counts once, by its best name; ties are
// broken by ID, so the order is deterministic.
func suggest(k string, max int) []string {
	best := suggestScores(k, true)
	idx := make([]int, 0, len(best))
	for i := range best {
		idx = append(idx, i)
	}
	sort.Slice(idx, func(a, b int) bool {
		da, db := best[idx[a]], best[idx[b]]
		if da != db {
			return da < db
		}
		return library.comps[idx[a]].ID < library.comps[idx[b]].ID
	})
	if len(idx) > max {
		idx = idx[:max]
	}
	out := make([]string, len(idx))
	for n, i := range idx {
		out[n] = library.comps[i].ID
	}
	return out
}

// suggestScores maps each qualifying component (index into library.comps)
// to its best score by suggest's rule. With bounded, a name whose length
// differs from k's by more than the distance limit skips the edit-distance
// table: the distance is at least the difference in length, so such a
// name qualifies only as a prefix, and a long query costs one pass per
// name. Without, every name gets the full table (the rule as written, for
// the test of the bound).
func suggestScores(k string, bounded bool) map[int]int {
	best := map[int]int{}
	if k == "" {
		return best
	}
	rk := []rune(k)
	limit := 3
	switch n := len(rk); {
	case n <= 3:
		limit = 1
	case n <= 6:
		limit = 2
	}
	consider := func(i int, name string) {
		d := limit + 1
		if (len(k) >= 3 && strings.HasPrefix(name, k)) || (len(name) >= 3 && strings.HasPrefix(k, name)) {
			d = 1
		}
		if diff := len(rk) - utf8.RuneCountInString(name); !bounded || (diff <= limit && -diff <= limit) {
			d = min(d, levenshtein(rk, []rune(name)))
		}
		if d > limit {
			return
		}
		if old, ok := best[i]; !ok || d < old {
			best[i] = d
		}
	}
	for key, i := range library.byKey {
		consider(i, key)
	}
	for key, is := range library.ambiguous {
		for _, i := range is {
			consider(i, key)
		}
	}
	return best
}

// levenshtein returns the edit distance (insertions, deletions,
// substitutions) between the rune sequences ra and rb.
func levenshtein(ra, rb []rune) int {
	prev := make([]int, len(rb)+1)
	cur := make([]int, len(rb)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		cur[0] = i
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(rb)]
}

func sortStrings(s []string) { sort.Strings(s) }
