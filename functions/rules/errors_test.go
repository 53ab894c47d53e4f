package rules

import (
	"errors"
	"strings"
	"testing"
	"unicode/utf8"
)

func TestCompileErrorMessages(t *testing.T) {
	tests := []struct {
		name      string
		rule      string
		want      ResultKind
		line, col int    // expected position of the first problem; 0 for none
		msg       string // expected part of the first problem's message
	}{
		{"typo", "zz > 2.0", Bool, 1, 1, `unknown name "zz"; did you mean "z" or "zs"?`},
		{"camel case", "prevZ > 1.0", Bool, 1, 1, `did you mean "prev_z"?`},
		{"missing underscore", "chartup > 1.0", Bool, 1, 1, `did you mean "chart_up" or "chart"?`},
		{"capital", "Z > 2.0", Bool, 1, 1, `did you mean "z"`},
		{"no close name", "qqqq > 1.0", Bool, 1, 1, `the names you can use are: value, time,`},
		{"unknown function", "sqrt(z) > 1.0", Bool, 1, 1, `unknown function "sqrt"`},
		{"function typo", "maen(zs) > 1.0", Bool, 1, 1, `unknown function "maen"; did you mean "mean"`},
		{"macro as function", "exists(zs, v, v > 2.0)", Bool, 1, 1, `exists(...) is written after the list, as in zs.exists(v, v > 2.0)`},
		{"single equals", "z = 2", Bool, 1, 3, `use "==" (two equals signs)`},
		{"word and", "z > 2 and exam > 1", Bool, 1, 7, `write "&&" instead of "and"`},
		{"word OR", "z > 2 OR exam > 1", Bool, 1, 7, `write "||" instead of "or"`},
		{"single ampersand", "z > 2 & exam > 1", Bool, 1, 7, `write "&&" for and`},
		{"unfinished", "z > 2 &&", Bool, 1, 9, "the rule ends too early"},
		{"open bracket", "(z > 2", Bool, 1, 7, `a closing ")" is missing`},
		{"open quote", `group == "F`, Bool, 1, 10, "text in quotes is not closed"},
		{"decimal comma", "z >= 2,5", Bool, 1, 7, "decimals use a point (2.5, not 2,5)"},
		{"if then else", "if z > 2.0 then 1 else 0", Number, 1, 4, "condition ? answer_if_true : answer_if_false"},
		{"text vs number", "z > 'a'", Bool, 1, 3, `cannot use ">" on a number and text`},
		{"whole and decimal", "value - 2 > 1.0", Bool, 1, 7, `write 2.0 instead of 2`},
		{"choice kinds", `z > 2.0 ? "high" : 1`, Any, 1, 9, "both answers of a ? : choice must be the same kind, but one is text and the other a whole number"},
		{"choice condition", "z ? 1 : 2", Number, 1, 3, "the part before ? must be true/false, but it is a number"},
		{"not a condition", "z > 2.0 || exam", Bool, 1, 12, "expected true/false here, but found a whole number"},
		{"helper misuse", "size(last(zs)) > 1", Bool, 1, 10, "use it as last(list, n)"},
		{"field of number", "z.high", Bool, 1, 2, "a number has no parts to pick with a dot"},
		{"wants bool gets number", "z", Bool, 0, 0, "this rule must give true/false, but it gives a number (compare it, for example z > 2.0)"},
		{"wants text gets bool", "z > 2.0", String, 0, 0, `this rule must give text, but it gives true/false (choose labels with ? :`},
		{"wants number gets text", `"high"`, Number, 0, 0, "this rule must give a number, but it gives text"},
		{"list result", "zs", Any, 0, 0, "a rule must give true/false, a number or text, but this one gives a list of numbers"},
		{"empty", "   ", Bool, 0, 0, "the rule is empty"},
		{"too long", "z > 1.0" + strings.Repeat(" ", 4000), Bool, 0, 0, "the rule is 4,007 characters long; the longest allowed is 4,000"},
		{"open quote across lines", "group == \"F\n  && z > 1.0", Bool, 1, 10, "text in quotes is not closed"},
		{"second line", "z > 2.0\n  && zs.exists(q, q > qq)", Bool, 2, 23, `unknown name "qq"`},
		{"count needs a name", "zs.count(1, true) > 1", Bool, 1, 10, "the first argument of count must be a simple name"},
		{"helper after a value", "zs.mean() > 1.0", Bool, 1, 4, "mean is not written after a value; use it as mean(list)"},
		{"method as plain call", `contains(group, "F")`, Bool, 1, 1, `contains(...) is written after the value it works on: value.contains(...)`},
		{"space before bracket", "sqrt (z) > 1.0", Bool, 1, 1, `unknown function "sqrt"`},
		{"method typo", "zs.sizee() > 1", Bool, 1, 4, `unknown function "sizee"; did you mean "size"?`},
		{"loop variable outside its loop", "zs.all(v, v > 1.0) && v > 1.0", Bool, 1, 23, `unknown name "v"`},
		{"loop variable in its range", "[v].exists(v, v > 1.0)", Bool, 1, 2, `unknown name "v"`},
		{"nested loops", "zs.exists(v, zs.exists(w, v > w + q))", Bool, 1, 35, `unknown name "q"`},
		{"type name is a name", "z > 2.0 || int", Bool, 1, 12, "expected true/false here, but found a type name int"},
		{"unknown message type", "a.b{c: 1} == 1", Bool, 1, 4, `unknown name "a.b"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Compile(tc.rule, tc.want)
			var ce *CompileError
			if !errors.As(err, &ce) {
				t.Fatalf("want *CompileError, got %v", err)
			}
			p := ce.Problems[0]
			if p.Line != tc.line || p.Column != tc.col {
				t.Errorf("position %d:%d, want %d:%d (%s)", p.Line, p.Column, tc.line, tc.col, p.Message)
			}
			if !strings.Contains(p.Message, tc.msg) {
				t.Errorf("message %q\nwant it to contain %q", p.Message, tc.msg)
			}
			if !strings.Contains(ce.Short(), tc.msg) || strings.Contains(ce.Short(), "\n") {
				t.Errorf("Short() = %q", ce.Short())
			}
			if tc.line > 0 {
				// the caret sits under the named column of the named line
				lines := strings.Split(p.Excerpt, "\n")
				if len(lines) != 2 {
					t.Fatalf("excerpt %q", p.Excerpt)
				}
				src := []rune(strings.Split(tc.rule, "\n")[tc.line-1])
				caret := strings.IndexRune(lines[1], '^') - 2
				text := []rune(lines[0][2:])
				if caret < 0 || caret >= len(text)+1 || (caret < len(text) && caret < len(src) && text[caret] != src[tc.col-1]) {
					t.Errorf("caret at %d under %q, want under column %d of %q", caret, lines[0], tc.col, string(src))
				}
				pos := "column "
				if strings.Contains(tc.rule, "\n") {
					pos = "line "
				}
				if !strings.HasPrefix(ce.Error(), pos) {
					t.Errorf("Error() = %q should start with %q", ce.Error(), pos)
				}
			}
		})
	}
}

// TestMacroAsFunctionAlone: the loop variable of a list function written
// as a plain call is not reported again as an unknown name.
func TestMacroAsFunctionAlone(t *testing.T) {
	_, err := Compile("exists(zs, v, v > 2.0) && zz > 1.0", Bool)
	var ce *CompileError
	if !errors.As(err, &ce) {
		t.Fatal(err)
	}
	if len(ce.Problems) != 2 || !strings.Contains(ce.Problems[0].Message, "exists(...) is written after the list") ||
		!strings.Contains(ce.Problems[1].Message, `unknown name "zz"`) {
		t.Errorf("problems %+v", ce.Problems)
	}
}

func TestExcerptWindow(t *testing.T) {
	long := strings.Repeat("z > 1.0 && ", 20) + "zz > 1.0"
	_, err := Compile(long, Bool)
	var ce *CompileError
	if !errors.As(err, &ce) {
		t.Fatal(err)
	}
	p := ce.Problems[0]
	lines := strings.Split(p.Excerpt, "\n")
	if !strings.HasPrefix(lines[0], "  …") || len([]rune(lines[0])) > 80 {
		t.Errorf("long line not cut around the mistake: %q", lines[0])
	}
	caret := []rune(lines[1])
	text := []rune(lines[0])
	if i := len(caret) - 1; text[i] != 'z' || text[i+1] != 'z' {
		t.Errorf("caret not under the mistake:\n%s", p.Excerpt)
	}
}

func TestSeveralProblems(t *testing.T) {
	_, err := Compile("zz > 1.0 && qq > 2.0", Bool)
	var ce *CompileError
	if !errors.As(err, &ce) {
		t.Fatal(err)
	}
	if len(ce.Problems) != 2 || !strings.Contains(ce.Short(), "(and 1 more problem)") {
		t.Errorf("problems %+v, short %q", ce.Problems, ce.Short())
	}
	if !strings.Contains(ce.Error(), `"qq"`) {
		t.Errorf("Error() should list every problem: %s", ce.Error())
	}
}

// FuzzCompile: any text either compiles or gives a *CompileError whose
// problems are placed inside the text, with a caret excerpt, in words of
// our own: cel-go's "undeclared reference" never reaches a rule writer,
// since unknown names are found in the expression itself.
func FuzzCompile(f *testing.F) {
	for _, s := range []string{"zz > 2.0", "exists(zs, v, v > 2.0)", "zs.mean() > 1.0", `contains(group, "F")`,
		"z = 2", "(z > 2", "a.b{c: 1} == 1", "zs.all(v, v > 1.0) && v > 1.0", "z > 2.0\n  && zs.exists(q, q > qq)",
		"sqrt (z) > 1.0", "[v].exists(v, v > 1.0)", "é > 1.0", "\tzz"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, src string) {
		_, err := Compile(src, Any)
		if err == nil {
			return
		}
		var ce *CompileError
		if !errors.As(err, &ce) {
			t.Fatalf("%q: %T %v", src, err, err)
		}
		if len(ce.Problems) == 0 || len(ce.Problems) > maxProblems {
			t.Fatalf("%q: %d problems", src, len(ce.Problems))
		}
		lines := strings.Split(src, "\n")
		for _, p := range ce.Problems {
			if p.Message == "" || strings.Contains(p.Message, "undeclared reference") {
				t.Errorf("%q: message %q", src, p.Message)
			}
			if p.Line == 0 {
				continue
			}
			if p.Line > len(lines) || p.Column < 1 || p.Column > utf8.RuneCountInString(lines[p.Line-1])+1 {
				t.Errorf("%q: position %d:%d outside the text", src, p.Line, p.Column)
			}
			if !strings.Contains(p.Excerpt, "^") {
				t.Errorf("%q: excerpt %q", src, p.Excerpt)
			}
		}
		if s := ce.Short(); s == "" || strings.Contains(s, "\n") {
			t.Errorf("%q: Short() = %q", src, s)
		}
	})
}
