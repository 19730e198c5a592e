package component

import (
	"math/rand/v2"
	"reflect"
	"sort"
	"strings"
	"testing"
)

// TestSuggestLengthBound checks that skipping names whose length differs
// from the query's by more than the distance limit changes no score (and
// so no suggestion):
// over every library name with one, two and four edits, over prefixes and
// extensions, and over random strings.
func TestSuggestLengthBound(t *testing.T) {
	r := rand.New(rand.NewPCG(7, 11))
	const letters = "abcdefghijklmnopqrstuvwxyz0123456789-"
	edit := func(s string, n int) string {
		b := []rune(s)
		for range n {
			p := r.IntN(len(b) + 1)
			c := rune(letters[r.IntN(len(letters))])
			switch r.IntN(3) {
			case 0:
				b = append(b[:p], append([]rune{c}, b[p:]...)...)
			case 1:
				if p < len(b) {
					b = append(b[:p], b[p+1:]...)
				}
			default:
				if p < len(b) {
					b[p] = c
				}
			}
		}
		return string(b)
	}
	var queries []string
	for key := range library.byKey {
		queries = append(queries, edit(key, 1), edit(key, 2), edit(key, 4), key+"xyz", key+strings.Repeat("q", 20))
		if len(key) > 4 {
			queries = append(queries, key[:len(key)-2])
		}
	}
	for range 300 {
		n := 1 + r.IntN(12)
		b := make([]byte, n)
		for i := range b {
			b[i] = letters[r.IntN(len(letters))]
		}
		queries = append(queries, string(b))
	}
	queries = append(queries, strings.Repeat("a", 300), "метан", "methane"+strings.Repeat("é", 50))
	sort.Strings(queries)
	differ := 0
	for _, q := range queries {
		k := normalize(q)
		got, want := suggestScores(k, true), suggestScores(k, false)
		if !reflect.DeepEqual(got, want) {
			differ++
			if differ <= 5 {
				t.Errorf("scores of %q: %v with the length bound, %v with the full table", k, got, want)
			}
		}
	}
	t.Logf("%d queries compared", len(queries))
}

// BenchmarkLookupUnknownLong is a 300-character unknown name: one pass
// per library name instead of a 300-row edit-distance table for each.
func BenchmarkLookupUnknownLong(b *testing.B) {
	name := strings.Repeat("ab", 150)
	for b.Loop() {
		if _, err := Lookup(name); err == nil {
			b.Fatal("resolved")
		}
	}
}
