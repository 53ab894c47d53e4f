package rules

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"
)

// "Did you mean": the known names closest to an unknown one.

// unknownName builds the message for a name the rule does not know.
func unknownName(name string, known []string, describe func(string) string) string {
	sugg := suggest(name, known, 3)
	if len(sugg) == 0 {
		return fmt.Sprintf("unknown name %q; the names you can use are: %s", name, strings.Join(known, ", ")) +
			`; text needs quotes, as in group == "F"`
	}
	return fmt.Sprintf("unknown name %q; did you mean %s?", name, quoteOr(sugg, describe))
}

// quoteOr formats names as `"a", "b" or "c"`, each followed by its
// description when describe gives one.
func quoteOr(names []string, describe func(string) string) string {
	q := make([]string, len(names))
	for i, s := range names {
		q[i] = strconv.Quote(s)
		if describe != nil {
			if d := describe(s); d != "" {
				q[i] += " (" + d + ")"
			}
		}
	}
	if len(q) == 1 {
		return q[0]
	}
	return strings.Join(q[:len(q)-1], ", ") + " or " + q[len(q)-1]
}

// suggest returns up to max known names closest to name: the same name up
// to case and underscores first, then by edit distance, then names that
// start with it or contain all of its words.
func suggest(name string, known []string, max int) []string {
	norm := func(s string) string { return strings.ReplaceAll(strings.ToLower(s), "_", "") }
	n := norm(name)
	limit := 1
	switch l := utf8.RuneCountInString(n); {
	case l > 6:
		limit = 3
	case l > 3:
		limit = 2
	}
	type cand struct {
		name string
		rank int
	}
	var cs []cand
	for _, k := range known {
		kn := norm(k)
		switch d := editDistance(n, kn); {
		case kn == n:
			cs = append(cs, cand{k, 0})
		case d <= limit:
			cs = append(cs, cand{k, d})
		case len(n) >= 3 && strings.HasPrefix(kn, n), containsWords(k, name):
			cs = append(cs, cand{k, limit + 1})
		}
	}
	slices.SortStableFunc(cs, func(a, b cand) int {
		if a.rank != b.rank {
			return a.rank - b.rank
		}
		return strings.Compare(a.name, b.name)
	})
	var out []string
	for _, c := range cs {
		if len(out) == max {
			break
		}
		if !slices.Contains(out, c.name) {
			out = append(out, c.name)
		}
	}
	return out
}

// containsWords reports whether every word of name (split at "_") is a
// word of known, for names with at least two words: years_since_signal
// finds years_since_first_signal.
func containsWords(known, name string) bool {
	words := strings.FieldsFunc(strings.ToLower(name), func(r rune) bool { return r == '_' })
	if len(words) < 2 {
		return false
	}
	have := strings.Split(strings.ToLower(known), "_")
	for _, w := range words {
		if !slices.Contains(have, w) {
			return false
		}
	}
	return true
}

// editDistance is the optimal-string-alignment distance between a and b,
// in runes: insertions, deletions, substitutions and swaps of neighbours
// each count 1, so "maen" is 1 from "mean". Levenshtein (1966), "Binary
// codes capable of correcting deletions, insertions, and reversals",
// Soviet Physics Doklady 10(8); swaps as in Damerau (1964), "A technique
// for computer detection and correction of spelling errors", CACM 7(3).
// Hand-written: three rows of dynamic programming, nothing to import.
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	prev2 := make([]int, len(rb)+1)
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
			if i > 1 && j > 1 && ra[i-1] == rb[j-2] && ra[i-2] == rb[j-1] {
				cur[j] = min(cur[j], prev2[j-2]+1)
			}
		}
		prev2, prev, cur = prev, cur, prev2
	}
	return prev[len(rb)]
}

// unknownFunction builds the message for a function the rule does not know.
func unknownFunction(name string) string {
	fns := functionNames()
	if sugg := suggest(name, fns, 2); len(sugg) > 0 {
		return fmt.Sprintf("unknown function %q; did you mean %s?", name, quoteOr(sugg, nil))
	}
	return fmt.Sprintf("unknown function %q; the functions you can use are: %s", name, strings.Join(fns, ", "))
}

// functionNames lists the functions a rule may call: the helpers and the
// standard CEL functions most rules need.
func functionNames() []string {
	var out []string
	for _, h := range Helpers() {
		out = append(out, h.Name)
	}
	return append(out, "size", "contains", "startsWith", "endsWith", "matches", "int", "double", "string")
}

// isMacroName reports the list functions written after a list.
func isMacroName(s string) bool {
	switch s {
	case "all", "exists", "exists_one", "filter", "map", "count":
		return true
	}
	return false
}
