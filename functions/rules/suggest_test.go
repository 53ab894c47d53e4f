package rules

import (
	"strings"
	"testing"
)

func TestSuggest(t *testing.T) {
	known := []string{"value", "values", "z", "zs", "prev_z", "prev_value", "chart", "chart_down", "years_since_first_signal"}
	tests := []struct {
		name string
		want []string
	}{
		{"valu", []string{"value", "values"}},
		{"PREV_Z", []string{"prev_z"}},
		{"prev", []string{"prev_z", "prev_value"}},
		{"years_since_signal", []string{"years_since_first_signal"}},
		{"chrat", []string{"chart"}},
		{"xyz", nil},
	}
	for _, tc := range tests {
		got := suggest(tc.name, known, 3)
		if strings.Join(got, ",") != strings.Join(tc.want, ",") {
			t.Errorf("suggest(%q) = %v, want %v", tc.name, got, tc.want)
		}
	}
	for _, c := range []struct {
		a, b string
		d    int
	}{{"", "", 0}, {"kitten", "sitting", 3}, {"flaw", "lawn", 2}, {"z", "zs", 1}, {"é", "e", 1},
		{"maen", "mean", 1}, {"ca", "abc", 3}, {"abc", "", 3}} {
		if got := editDistance(c.a, c.b); got != c.d {
			t.Errorf("editDistance(%q, %q) = %d, want %d", c.a, c.b, got, c.d)
		}
	}
}
