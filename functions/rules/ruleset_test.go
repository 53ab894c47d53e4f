package rules

import (
	"errors"
	"reflect"
	"strconv"
	"strings"
	"testing"
)

const sampleSet = `# Screening rules for blood pressure.

# The chart crossed its limit.
chart_over_limit [high] = chart > limit

# A very high single reading, for workers seen
# at least twice in five years.
very_high = centile > 99.0
    && times.count(t, t >= time - 5.0) >= 2
severity = chart > limit ? "high" : (z > 2.0 ? "watch" : "none")
`

func TestParseRuleSetText(t *testing.T) {
	rs, err := ParseRuleSet([]byte(sampleSet))
	if err != nil {
		t.Fatal(err)
	}
	want := []NamedRule{
		{Name: "chart_over_limit", Expr: "chart > limit", Severity: "high", Doc: "The chart crossed its limit.", Line: 4},
		{Name: "very_high", Expr: "centile > 99.0\n&& times.count(t, t >= time - 5.0) >= 2",
			Doc: "A very high single reading, for workers seen\nat least twice in five years.", Line: 8},
		{Name: "severity", Expr: `chart > limit ? "high" : (z > 2.0 ? "watch" : "none")`, Line: 10},
	}
	if !reflect.DeepEqual(rs.Rules, want) {
		t.Errorf("got  %#v\nwant %#v", rs.Rules, want)
	}
	if r, ok := rs.Lookup("VERY_HIGH"); !ok || r.Name != "very_high" {
		t.Errorf("Lookup: %v %v", r, ok)
	}
	if _, ok := rs.Lookup("nope"); ok {
		t.Error("Lookup found a missing rule")
	}
	rules, err := NewCache(0, Limits{}).CompileSet(rs)
	if err != nil || len(rules) != 3 || rules[2].Kind() != String {
		t.Fatalf("CompileSet: %v %v", rules, err)
	}
}

func TestParseRuleSetJSON(t *testing.T) {
	for _, src := range []string{
		`{"rules": [{"name": "a", "expr": "z > 2.0", "severity": "high"}, {"name": "b", "expr": "  signal\n\n  && exam > 1 ", "doc": "B"}]}`,
		` [{"name": "a", "expr": "z > 2.0", "severity": "high"}, {"name": "b", "expr": "signal\n&& exam > 1", "doc": "B"}]`,
	} {
		rs, err := ParseRuleSet([]byte(src))
		if err != nil {
			t.Fatalf("%s: %v", src, err)
		}
		want := []NamedRule{{Name: "a", Expr: "z > 2.0", Severity: "high"}, {Name: "b", Expr: "signal\n&& exam > 1", Doc: "B"}}
		if !reflect.DeepEqual(rs.Rules, want) {
			t.Errorf("got %#v", rs.Rules)
		}
		back, err := ParseRuleSet(rs.Format())
		if err != nil {
			t.Fatal(err)
		}
		for i := range back.Rules {
			back.Rules[i].Line = 0
		}
		if !reflect.DeepEqual(back.Rules, want) {
			t.Errorf("Format round trip: %#v", back.Rules)
		}
	}
}

func TestParseRuleSetErrors(t *testing.T) {
	tests := []struct{ src, want string }{
		{"z > 2.0", `line 1: rule "z": expected "=" after the name`},
		{"  z > 2.0", "line 1: an indented line continues a rule, but no rule comes before it"},
		{"a = z\nb == z", `line 2: rule "b": expected "=" after the name`},
		{"= z", "line 1: a rule line must look like"},
		{"a [high = z", "line 1: rule \"a\": the severity label has no closing ]"},
		{"a [h!gh] = z", `line 1: rule "a": the severity "h!gh" is not allowed`},
		{"a = z\nA = z", `line 2: the name "A" is used twice (also by rule 1, "a")`},
		{"a =", `line 1: rule "a" has no expression after =`},
		{"_a = z", `line 1: the name "_a" is not allowed`},
		{"1a = z", `line 1: the name "1a" is not allowed`},
		{strings.Repeat("x", 65) + " = z", "is not allowed: use letters, digits and _ (at most 64)"},
		{`{"rules": [{"name": "a", "expression": "z"}]}`, `unknown field "expression"`},
		{`{"rules": [{"name": "a", "expr": "z"}]} {}`, "extra data after the rule set"},
		{`[{"name": "a b", "expr": "z"}]`, `rule 1: the name "a b" is not allowed`},
		{`[{"name": "a", "expr": "z\n#x"}]`, "an expression line cannot start with #"},
		{"\xff = z", "not valid text (UTF-8)"},
		{strings.Repeat("#", MaxRuleSetBytes+1), "the largest allowed is"},
	}
	for _, tc := range tests {
		_, err := ParseRuleSet([]byte(tc.src))
		var pe *ParseError
		if !errors.As(err, &pe) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%.40q: got %v, want %q", tc.src, err, tc.want)
		}
	}
	var many strings.Builder
	for i := range MaxRules + 1 {
		many.WriteString("r" + strconv.Itoa(i) + " = z\n")
	}
	if _, err := ParseRuleSet([]byte(many.String())); err == nil || !strings.Contains(err.Error(), "too many rules") {
		t.Errorf("too many rules: %v", err)
	}
}

func TestCompileSetErrors(t *testing.T) {
	rs, err := ParseRuleSet([]byte("ok = z > 2.0\nbad = zz > 2.0\n\nworse = z >\n"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = NewCache(0, Limits{}).CompileSet(rs)
	if err == nil {
		t.Fatal("no error")
	}
	msg := err.Error()
	for _, want := range []string{`rule "bad" (line 2): column 1: unknown name "zz"`, `rule "worse" (line 4): column 4: the rule ends too early`} {
		if !strings.Contains(msg, want) {
			t.Errorf("%s\nshould contain %q", msg, want)
		}
	}
	var re *RuleError
	var ce *CompileError
	if !errors.As(err, &re) || !errors.As(err, &ce) {
		t.Errorf("error does not unwrap to *RuleError and *CompileError: %T", err)
	}
}

// FuzzParseRuleSet: the parser never panics, what it accepts validates,
// and the text form of an accepted set reads back to the same rules.
func FuzzParseRuleSet(f *testing.F) {
	for _, s := range []string{
		sampleSet,
		"a = z > 2.0\n",
		"a [x] = z\n  && y\n# c\nb = q",
		`{"rules": [{"name": "a", "expr": "z", "doc": " d \n e"}]}`,
		`[{"name": "a", "expr": "#z"}]`,
		"\xef\xbb\xbfa = b\r\n  c\r\n",
		"a=\n\tb\n",
		"#\n#\na = \"#\"\n",
		"a [ ] = b",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		rs, err := ParseRuleSet(data)
		if err != nil {
			var pe *ParseError
			if !errors.As(err, &pe) {
				t.Fatalf("error of type %T: %v", err, err)
			}
			return
		}
		if err := rs.Validate(); err != nil {
			t.Fatalf("accepted set fails Validate: %v", err)
		}
		text := rs.Format()
		back, err := ParseRuleSet(text)
		if err != nil {
			t.Fatalf("Format output rejected: %v\n%s", err, text)
		}
		if len(back.Rules) != len(rs.Rules) {
			t.Fatalf("%d rules became %d\n%s", len(rs.Rules), len(back.Rules), text)
		}
		for i := range rs.Rules {
			a, b := rs.Rules[i], back.Rules[i]
			a.Line, b.Line = 0, 0
			if a != b {
				t.Fatalf("rule %d changed:\n%#v\n%#v\n%s", i, a, b, text)
			}
		}
	})
}
