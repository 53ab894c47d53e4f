package rules

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common/types"
)

// celTrigger makes cel-go itself produce the message one translation
// relies on.
type celTrigger struct {
	table string // "parse", "check" or "runtime"
	name  string // the translation's name
	rule  string
}

var celTriggers = []celTrigger{
	{"parse", "token recognition", "z = 2"},
	{"parse", "token recognition", `group == "F`},
	{"parse", "token recognition", "z > 2 & exam > 1"},
	{"parse", "unexpected input", "z > 2 and exam > 1"},
	{"parse", "unexpected input", "z > 2)"},
	{"parse", "unexpected input", "z > 2 &&"},
	{"parse", "missing token", "(z > 2"},
	{"parse", "no viable alternative", "z."},
	{"parse", "recursion limit", strings.Repeat("(", 120) + "z" + strings.Repeat(")", 120) + " > 1.0"},
	{"parse", "size limit", "z > 1.0 && z < 9.0"}, // parsed with a 10-character limit below
	{"check", "no matching overload", "z > 'a'"},
	{"check", "no matching overload", "value - 2 > 1.0"},
	{"check", "no matching overload", `z > 2.0 ? "high" : 1`},
	{"check", "expected type", "z > 2.0 || exam"},
	{"check", "no field selection", "z.high"},
	{"runtime", "no such overload", "x > 1.0"}, // x is the text "a"
	{"runtime", "division by zero", "exam / (exam - 3) > 0"},
	{"runtime", "modulus by zero", "exam % (exam - 3) > 0"},
	{"runtime", "overflow", "exam * 9223372036854775807 > 0"},
	{"runtime", "index out of bounds", "zs[exam] > 0.0"},
	{"runtime", "index out of bounds", "[1.0][exam] > 0.0"},
}

var celTables = map[string][]translation{"parse": parseMessages, "check": checkMessages, "runtime": runtimeMessages}

// TestCelGoMessages makes cel-go produce every message messages.go
// translates, straight from cel-go (no translation on the way), and checks
// that the translation meant for it is the one that takes it. When a
// cel-go release rewords a message this fails, naming the translation to
// update, instead of letting a rule writer see cel-go's raw English.
func TestCelGoMessages(t *testing.T) {
	env, err := newExamEnv(DefaultLimits())
	if err != nil {
		t.Fatal(err)
	}
	small, err := cel.NewEnv(cel.ParserExpressionSizeLimit(10), cel.Variable("z", cel.DoubleType))
	if err != nil {
		t.Fatal(err)
	}
	dyn, err := cel.NewEnv(append(baseEnvOptions(DefaultLimits()), cel.Variable("x", cel.DynType))...)
	if err != nil {
		t.Fatal(err)
	}
	covered := map[string]bool{}
	for _, tr := range celTriggers {
		var msgs []string
		switch {
		case tr.name == "size limit":
			_, iss := small.Parse(tr.rule)
			msgs = issueMessages(iss)
		case tr.table == "parse":
			_, iss := env.Parse(tr.rule)
			msgs = issueMessages(iss)
		case tr.table == "check":
			_, iss := env.Compile(tr.rule)
			msgs = issueMessages(iss)
		case tr.name == "no such overload":
			msgs = []string{evalMessage(t, dyn, tr.rule, map[string]any{"x": "a"})}
		default:
			e := boundExam()
			msgs = []string{evalMessage(t, env, tr.rule, &examActivation{e: &e})}
		}
		if len(msgs) == 0 || msgs[0] == "" {
			t.Errorf("cel-go %s: %q no longer fails; translation %q (%s) needs another trigger", celGoVersion, tr.rule, tr.name, tr.table)
			continue
		}
		got := firstMatch(celTables[tr.table], msgs[0])
		if got != tr.name {
			t.Errorf("cel-go's wording changed: %q now gives %q, which the %s translation %q (written against cel-go %s) "+
				"does not take (taken by: %q); update messages.go", tr.rule, msgs[0], tr.table, tr.name, celGoVersion, got)
		}
		covered[tr.table+"/"+tr.name] = true
	}
	for table, ts := range celTables {
		for _, x := range ts {
			if !covered[table+"/"+x.name] {
				t.Errorf("the %s translation %q has no trigger in celTriggers", table, x.name)
			}
		}
	}
}

// TestCelGoVersion keeps celGoVersion true: moving go.mod to another
// cel-go release fails here until TestCelGoMessages has been run against
// it and celGoVersion updated. (A test binary carries no dependency list,
// so go.mod is read.)
func TestCelGoVersion(t *testing.T) {
	mod, err := os.ReadFile(filepath.Join("..", "..", "go.mod"))
	if err != nil {
		t.Fatal(err)
	}
	var versions []string
	for _, line := range strings.Split(string(mod), "\n") {
		f := strings.Fields(strings.TrimPrefix(strings.TrimSpace(line), "require "))
		for i := 0; i+1 < len(f); i++ {
			if f[i] == "github.com/google/cel-go" && strings.HasPrefix(f[i+1], "v") {
				versions = append(versions, f[i+1])
			}
		}
	}
	switch {
	case len(versions) == 0:
		t.Fatal("go.mod does not require github.com/google/cel-go")
	case len(versions) > 1 || versions[0] != celGoVersion:
		t.Fatalf("go.mod names cel-go %s but messages.go's translations were written against %s: "+
			"check that TestCelGoMessages passes, then set celGoVersion", strings.Join(versions, ", "), celGoVersion)
	}
}

// TestHistoryListIndex: our own lists answer a position they do not have
// with the message the interpreter gives, so the rule writer reads the
// same words.
func TestHistoryListIndex(t *testing.T) {
	for _, v := range []any{(&floatList{v: []float64{1, 2}}).Get(types.Int(5)), (&boolList{v: []bool{true}}).Get(types.Int(-1))} {
		err, ok := v.(*types.Err)
		if !ok {
			t.Fatalf("got %v, want an error", v)
		}
		if msg := runtimeMessage(err.Error()); !strings.Contains(msg, "is outside the list") {
			t.Errorf("%q reads %q", err.Error(), msg)
		}
	}
}

func issueMessages(iss *cel.Issues) []string {
	if iss == nil || iss.Err() == nil {
		return nil
	}
	var out []string
	for _, e := range iss.Errors() {
		out = append(out, e.Message)
	}
	return out
}

// evalMessage runs rule on vars with cel-go and returns its error's message.
func evalMessage(t *testing.T, env *cel.Env, rule string, vars any) string {
	t.Helper()
	a, iss := env.Compile(rule)
	if iss.Err() != nil {
		t.Fatalf("%s: %v", rule, iss.Err())
	}
	prg, err := env.Program(a)
	if err != nil {
		t.Fatal(err)
	}
	_, _, err = prg.ContextEval(context.Background(), vars)
	if err == nil {
		return ""
	}
	return err.Error()
}

// firstMatch names the translation of table that takes msg, or "".
func firstMatch(table []translation, msg string) string {
	for _, x := range table {
		if x.re.MatchString(msg) {
			return x.name
		}
	}
	return ""
}
