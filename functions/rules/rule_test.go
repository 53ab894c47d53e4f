package rules

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common/types"
)

// boundExam is an exam whose every field has a distinct value, so a
// variable bound to the wrong field shows.
func boundExam() Exam {
	return Exam{
		Worker: "W7", Group: "F", Time: 44.25, Value: 141.5,
		Mean: 121, SD: 14.5, Z: 1.41, Centile: 92.1, Innovation: 1.2,
		ChartUp: 3.25, ChartDown: 0.4, Chart: 3.3, Limit: 4.1, Signal: true, InRange: true,
		Exam: 3, Exams: 5, Gap: 1.75, PrevZ: 0.9, PrevValue: 134.0, YearsSinceFirstSignal: 0.5,
		Zs: []float64{0.2, 0.9, 1.41}, Values: []float64{124, 134, 141.5},
		Times: []float64{40.5, 42.5, 44.25}, Signals: []bool{false, true, true},
	}
}

func TestEveryVariableBound(t *testing.T) {
	e := boundExam()
	num, flag, text := NumberValue, BoolValue, StringValue
	want := map[string]Value{
		"value": num(141.5), "time": num(44.25), "group": text("F"), "worker": text("W7"),
		"z": num(1.41), "mean": num(121), "sd": num(14.5), "centile": num(92.1),
		"innovation": num(1.2), "chart_up": num(3.25), "chart_down": num(0.4), "chart": num(3.3), "limit": num(4.1),
		"signal": flag(true), "in_range": flag(true), "exam": num(3), "exams": num(5),
		"has_previous": flag(true), "gap": num(1.75), "prev_z": num(0.9), "prev_value": num(134),
		"has_signalled": flag(true), "years_since_first_signal": num(0.5),
		// lists: checked through an expression over them
		"zs": num(0.2 + 0.9 + 1.41), "values": num(124 + 134 + 141.5),
		"times": num(40.5 + 42.5 + 44.25), "signals": num(2),
	}
	listRule := map[string]string{
		"zs": "zs[0] + zs[1] + zs[2]", "values": "values[0] + values[1] + values[2]",
		"times": "times[0] + times[1] + times[2]", "signals": "signals.count(s, s)",
	}
	for _, v := range Variables() {
		w, ok := want[v.Name]
		if !ok {
			t.Errorf("variable %s has no expectation in this test", v.Name)
			continue
		}
		expr := v.Name
		if r, ok := listRule[v.Name]; ok {
			expr = r
		}
		r, err := Compile(expr, Any)
		if err != nil {
			t.Fatalf("%s: %v", expr, err)
		}
		got, err := r.Eval(context.Background(), &e)
		if err != nil {
			t.Fatalf("%s: %v", expr, err)
		}
		if got.Kind() != w.Kind() || got.String() != w.String() {
			if gn, ok := got.Number(); !ok || !sameFloat(gn, w.n) {
				t.Errorf("%s = %v (%v), want %v (%v)", expr, got, got.Kind(), w, w.Kind())
			}
		}
		if v.Doc == "" || v.Type == "" {
			t.Errorf("variable %s lacks documentation", v.Name)
		}
	}
	if len(want) != len(Variables()) {
		t.Errorf("%d expectations for %d variables", len(want), len(Variables()))
	}
}

func TestFirstExamNotAvailable(t *testing.T) {
	exams := handSheet()
	if err := Link(exams); err != nil {
		t.Fatal(err)
	}
	first := &exams[2] // W1 at 40: first exam, no signal yet
	tests := []struct {
		rule string
		want bool
	}{
		{"has_previous", false},
		{"has_signalled", false},
		{"missing(prev_z) && missing(prev_value) && missing(years_since_first_signal)", true},
		{"gap == 0.0", true},
		{"z - prev_z > 1.0", false},    // NaN compares false
		{"!(z - prev_z <= 1.0)", true}, // ... both ways
		{"years_since_first_signal < 2.0", false},
		{"exam == 1 && exams == 4", true},
	}
	for _, tc := range tests {
		r, err := Compile(tc.rule, Bool)
		if err != nil {
			t.Fatalf("%s: %v", tc.rule, err)
		}
		v, err := r.Eval(context.Background(), first)
		if b, _ := v.Bool(); err != nil || b != tc.want {
			t.Errorf("%s = %v, %v; want %v", tc.rule, v, err, tc.want)
		}
	}
}

func TestHelpers(t *testing.T) {
	e := boundExam()
	tests := []struct {
		rule string
		want string // Value.String()
	}{
		{"size(last(zs, 2))", "2"},
		{"last(zs, 2)[0]", "0.9"},
		{"size(last(zs, 10))", "3"},
		{"size(last(zs, 0))", "0"},
		{"last(signals, 1)[0]", "TRUE"},
		{"last([1, 2, 3], 2)[1]", "3"},
		{"abs(-2.5)", "2.5"},
		{"abs(-3)", "3"},
		{"min(zs)", "0.2"},
		{"max(values)", "141.5"},
		{"mean([1.0, 2.0, 4.5])", "2.5"},
		{"missing(0.0 / 0.0)", "TRUE"},
		{"missing(z)", "FALSE"},
		{"zs.count(v, v > 0.5)", "2"},
		{"[].count(v, v > 0.5)", "0"},
		{"zs.exists(v, v > 1.4) && zs.all(v, v < 2.0)", "TRUE"},
		{`chart > limit ? "high" : (z > 1.0 ? "watch" : "none")`, "watch"},
		{"exam + 1", "4"},
		{`group == "F" && worker.startsWith("W")`, "TRUE"},
	}
	for _, tc := range tests {
		r, err := Compile(tc.rule, Any)
		if err != nil {
			t.Errorf("%s: %v", tc.rule, err)
			continue
		}
		v, err := r.Eval(context.Background(), &e)
		if err != nil || v.String() != tc.want {
			t.Errorf("%s = %v, %v; want %s", tc.rule, v, err, tc.want)
		}
	}
	if len(Helpers()) != 7 {
		t.Errorf("%d helpers documented; the tests above cover 7", len(Helpers()))
	}
}

func TestResultKinds(t *testing.T) {
	e := boundExam()
	tests := []struct {
		rule string
		want ResultKind
		kind ResultKind // of the value
		text string
	}{
		{"chart > limit", Bool, Bool, "FALSE"},
		{"exam", Number, Number, "3"}, // a whole number comes back as float64
		{"z * 2.0", Number, Number, "2.82"},
		{`signal ? "review" : ""`, String, String, "review"},
		{"value", Any, Number, "141.5"},
		{"dyn(value) > 100.0", Bool, Bool, "TRUE"}, // dyn output, checked when run
	}
	for _, tc := range tests {
		r, err := Compile(tc.rule, tc.want)
		if err != nil {
			t.Fatalf("%s: %v", tc.rule, err)
		}
		v, err := r.Eval(context.Background(), &e)
		if err != nil || v.Kind() != tc.kind || v.String() != tc.text {
			t.Errorf("%s = %v (%v), %v; want %s (%v)", tc.rule, v, v.Kind(), err, tc.text, tc.kind)
		}
		if r.Expr() != tc.rule || r.Want() != tc.want {
			t.Errorf("%s: Expr/Want = %q/%v", tc.rule, r.Expr(), r.Want())
		}
	}
	// A dyn result of the wrong kind is caught when run.
	r, err := Compile("dyn(value)", Bool)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := r.Eval(context.Background(), &e); err == nil || !strings.Contains(err.Error(), "must give true/false, but here it gives a number") {
		t.Errorf("dyn kind mismatch: %v", err)
	}
}

func TestValue(t *testing.T) {
	tests := []struct {
		v    Value
		str  string
		json string
		ifc  any
	}{
		{BoolValue(true), "TRUE", "true", true},
		{NumberValue(2.5), "2.5", "2.5", 2.5},
		{NumberValue(math.NaN()), "NaN", "null", nil},
		{StringValue("high"), "high", `"high"`, "high"},
		{Value{}, "", "null", nil},
	}
	for _, tc := range tests {
		b, err := json.Marshal(tc.v)
		if err != nil || string(b) != tc.json || tc.v.String() != tc.str {
			t.Errorf("%#v: json %s %v, string %q", tc.v, b, err, tc.v.String())
		}
		if got := tc.v.Interface(); tc.ifc != nil && got != tc.ifc {
			t.Errorf("%#v: Interface() = %v", tc.v, got)
		}
	}
	if !(Value{}).IsEmpty() || BoolValue(false).IsEmpty() {
		t.Error("IsEmpty")
	}
	for _, s := range []string{"bool", "text", "number", "any"} {
		if _, ok := ParseResultKind(s); !ok {
			t.Errorf("ParseResultKind(%q) failed", s)
		}
	}
	if _, ok := ParseResultKind("date"); ok {
		t.Error(`ParseResultKind("date") should fail`)
	}
}

func TestEvalAllRowErrors(t *testing.T) {
	exams := handSheet()
	if err := Link(exams); err != nil {
		t.Fatal(err)
	}
	r, err := Compile("values[exam - 2] < value", Bool) // no previous value on a first exam
	if err != nil {
		t.Fatal(err)
	}
	out := make([]Value, len(exams))
	err = EvalAll(context.Background(), r, exams, out)
	var re *RowErrors
	if !errors.As(err, &re) {
		t.Fatalf("want *RowErrors, got %v", err)
	}
	// First exams are rows 3 (W1) and 2 (W2).
	if len(re.Rows) != 2 || re.Rows[0].Row != 2 || re.Rows[1].Row != 3 || re.Total != 7 {
		t.Fatalf("failed rows %+v", re.Rows)
	}
	if !strings.Contains(re.Error(), `row 2 (worker "W2"): position -1 is outside the list`) {
		t.Errorf("message: %s", re.Error())
	}
	for i, v := range out {
		failed := i+1 == 2 || i+1 == 3
		if v.IsEmpty() != failed {
			t.Errorf("row %d: %v", i+1, v)
		}
	}
	if b, _ := out[0].Bool(); !b { // W1 at 42: 125 < 130
		t.Errorf("row 1 = %v", out[0])
	}
	if err := EvalAll(context.Background(), r, exams, out[:2]); err == nil {
		t.Error("short out slice accepted")
	}
}

func TestEvalErrorsMessages(t *testing.T) {
	e := boundExam()
	tests := []struct{ rule, want string }{
		{"1 / (exam - 3) > 0", "division by zero"},
		{"min(last(zs, 0)) > 0.0", "min of an empty list"},
		{"size(last(zs, -1)) > 0", "last(list, n) needs n of 0 or more"},
		{"zs[5] > 0.0", "position 5 is outside the list here (positions start at 0)"},
		{"last(zs, 2)[exam] > 0.0", "position 3 is outside the list here"},
		{"[1.0, 2.0][exam - 4] > 0.0", "position -1 is outside the list here"},
		{"exam % (exam - 3) > 0", "remainder (%) by zero"},
		{"exam * 9223372036854775807 > 0", "a whole-number result is too large: integer overflow"},
	}
	for _, tc := range tests {
		r, err := Compile(tc.rule, Bool)
		if err != nil {
			t.Fatalf("%s: %v", tc.rule, err)
		}
		_, err = r.Eval(context.Background(), &e)
		var ee *EvalError
		if !errors.As(err, &ee) || ee.Limit || !strings.Contains(err.Error(), tc.want) || ee.Worker != "W7" {
			t.Errorf("%s: %v; want an *EvalError containing %q", tc.rule, err, tc.want)
		}
	}
}

// longHistory is one worker with n exams.
func longHistory(t *testing.T, n int) []Exam {
	return syntheticExams(t, 1, n, 3)
}

const runaway = `zs.all(a, zs.all(b, zs.all(c, a + b + c > -100.0)))`

func TestCostLimitStopsRunaway(t *testing.T) {
	exams := longHistory(t, 400)
	cache := NewCache(8, Limits{})
	r, err := cache.Compile(runaway, Bool)
	if err != nil {
		t.Fatal(err)
	}
	start := time.Now()
	_, err = r.Eval(context.Background(), &exams[len(exams)-1])
	var ee *EvalError
	if !errors.As(err, &ee) || !ee.Limit {
		t.Fatalf("want a limit error, got %v", err)
	}
	// Which of the two guards fires first depends on machine load; both
	// must say what to do.
	if msg := err.Error(); !strings.Contains(msg, "cost limit 100,000 reached") && !strings.Contains(msg, "took longer than") {
		t.Errorf("message: %s", msg)
	}
	if d := time.Since(start); d > 5*time.Second {
		t.Errorf("runaway ran %v", d)
	}

	// In a batch the run stops at the first row that hits the limit.
	out := make([]Value, len(exams))
	err = EvalAll(context.Background(), r, exams, out)
	if !errors.As(err, &ee) || !ee.Limit || ee.Row < 2 || ee.Row >= len(exams) {
		t.Fatalf("batch: %v", err)
	}
	if !out[len(out)-1].IsEmpty() {
		t.Error("rows after the stop were evaluated")
	}
	if _, ok := out[0].Bool(); !ok {
		t.Error("rows before the stop were not evaluated")
	}

	// The cache and other rules keep working afterwards.
	ok, err := cache.Compile("chart >= 0.0", Bool)
	if err != nil {
		t.Fatal(err)
	}
	if err := EvalAll(context.Background(), ok, exams, out); err != nil {
		t.Fatalf("after a runaway: %v", err)
	}
}

func TestCostLimitDeterministic(t *testing.T) {
	// With a generous time limit only the cost limit can stop the rule.
	cache := NewCache(8, Limits{MaxTime: time.Minute})
	r, err := cache.Compile(runaway, Bool)
	if err != nil {
		t.Fatal(err)
	}
	exams := longHistory(t, 100) // 100³ steps: far over 100,000
	_, err = r.Eval(context.Background(), &exams[99])
	if err == nil || !strings.Contains(err.Error(), "too much work for one exam (cost limit 100,000 reached)") {
		t.Errorf("got %v", err)
	}
	// 10 exams (1,000 steps) fit.
	if v, err := r.Eval(context.Background(), &exams[9]); err != nil || v.String() != "TRUE" {
		t.Errorf("short history: %v, %v", v, err)
	}
}

func TestTimeLimit(t *testing.T) {
	cache := NewCache(8, Limits{MaxCost: math.MaxUint64 / 4, MaxTime: 30 * time.Millisecond})
	r, err := cache.Compile(runaway, Bool)
	if err != nil {
		t.Fatal(err)
	}
	exams := longHistory(t, 600)
	start := time.Now()
	_, err = r.Eval(context.Background(), &exams[599])
	if err == nil || !strings.Contains(err.Error(), "took longer than 30ms for one exam") {
		t.Errorf("single: %v", err)
	}
	out := make([]Value, len(exams))
	err = EvalAll(context.Background(), r, exams, out)
	var ee *EvalError
	if !errors.As(err, &ee) || !ee.Limit || !strings.Contains(err.Error(), "took longer than 30ms") {
		t.Errorf("batch: %v", err)
	}
	if d := time.Since(start); d > 10*time.Second {
		t.Errorf("took %v", d)
	}
}

func TestCancelledContext(t *testing.T) {
	exams := syntheticExams(t, 50, 4, 9)
	r, err := Compile("chart > limit", Bool)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancelCause(context.Background())
	cancel(errors.New("the client went away"))
	err = EvalAll(ctx, r, exams, make([]Value, len(exams)))
	var ee *EvalError
	if !errors.As(err, &ee) || !ee.Limit || !strings.Contains(err.Error(), "cancelled (the client went away)") {
		t.Errorf("got %v", err)
	}
	if _, err := r.Eval(ctx, &exams[0]); err == nil {
		t.Error("single evaluation ignored a cancelled context")
	}
}

// TestFastPathMatchesGuarded checks the plain program against the guarded
// one: same results, and the guarded program's measured cost never above
// the static bound that admitted the plain one.
func TestFastPathMatchesGuarded(t *testing.T) {
	exams := syntheticExams(t, 30, 25, 11)
	rules := []string{
		typicalRule,
		"last(zs, 4).count(v, v > 1.0) >= 3",
		"last(zs, 4).filter(v, v > 1.0).size() >= 3",
		"mean(last(zs, 3)) > 0.5 || max(values) > 150.0",
		"zs.exists(a, zs.exists(b, a - b > 3.0))",
		`worker.startsWith("W1") ? "one" : group`,
		"has_previous && (value - prev_value) / gap > 10.0",
	}
	env, err := newExamEnv(DefaultLimits())
	if err != nil {
		t.Fatal(err)
	}
	for _, expr := range rules {
		r, err := Compile(expr, Any)
		if err != nil {
			t.Fatalf("%s: %v", expr, err)
		}
		if r.p.fast == nil {
			t.Errorf("%s: no plain program", expr)
			continue
		}
		ast, _ := env.Compile(expr)
		est, err := env.EstimateCost(ast, sizeBound{vars: examSized(), maxList: uint64(r.p.maxList), maxStr: maxStrFast})
		if err != nil || est.Max > DefaultMaxCost {
			t.Fatalf("%s: estimate %+v, %v", expr, est, err)
		}
		act := &examActivation{}
		for i := range exams {
			act.e = &exams[i]
			fast, _, ferr := r.p.fast.Eval(act)
			slow, det, serr := r.p.guarded.ContextEval(context.Background(), act)
			if (ferr == nil) != (serr == nil) || (ferr == nil && fast.Equal(slow) != types.True) {
				t.Fatalf("%s row %d: plain %v %v, guarded %v %v", expr, i+1, fast, ferr, slow, serr)
			}
			if c := det.ActualCost(); c == nil || *c > est.Max {
				t.Fatalf("%s row %d: actual cost %v above the static bound %d", expr, i+1, c, est.Max)
			}
		}
	}
	// The runaway has no bound, so it always runs guarded.
	r, err := Compile(runaway, Bool)
	if err != nil {
		t.Fatal(err)
	}
	if r.p.fast != nil && r.p.maxList > 50 {
		t.Errorf("runaway admitted to the plain program for histories up to %d", r.p.maxList)
	}
}

func TestCache(t *testing.T) {
	c := NewCache(2, Limits{})
	r1, err := c.Compile("chart > limit", Bool)
	if err != nil {
		t.Fatal(err)
	}
	r2, err := c.Compile("chart > limit", Bool)
	if err != nil {
		t.Fatal(err)
	}
	if r1 != r2 || c.Compilations() != 1 {
		t.Errorf("second call compiled again: %d compilations", c.Compilations())
	}
	// The wanted kind is part of the key.
	if _, err := c.Compile("chart > limit", Any); err != nil || c.Compilations() != 2 {
		t.Errorf("kind not in key: %v, %d", err, c.Compilations())
	}
	// Failures are cached too.
	_, e1 := c.Compile("chrat > limit", Bool)
	_, e2 := c.Compile("chrat > limit", Bool)
	if e1 == nil || e1 != e2 || c.Compilations() != 3 {
		t.Errorf("typo compiled twice or not failed: %v %v %d", e1, e2, c.Compilations())
	}
	// Bounded: size 2 keeps the two most recent.
	if c.Len() != 2 {
		t.Errorf("Len = %d", c.Len())
	}
	if _, err := c.Compile("chart > limit", Bool); err != nil || c.Compilations() != 4 {
		t.Errorf("evicted rule not recompiled: %d", c.Compilations())
	}
	// Column rules: the columns are part of the key.
	if _, err := c.CompileColumns("a > 1.0", []string{"A"}, Bool); err != nil {
		t.Fatal(err)
	}
	if _, err := c.CompileColumns("a > 1.0", []string{"A"}, Bool); err != nil || c.Compilations() != 5 {
		t.Errorf("column rule recompiled: %d", c.Compilations())
	}
	if _, err := c.CompileColumns("a > 1.0", []string{"A", "B"}, Bool); err != nil || c.Compilations() != 6 {
		t.Errorf("different columns share an entry: %d", c.Compilations())
	}
}

func TestCacheConcurrent(t *testing.T) {
	c := NewCache(16, Limits{})
	var wg sync.WaitGroup
	rules := make([]*Rule, 16)
	for i := range rules {
		wg.Add(1)
		go func() {
			defer wg.Done()
			r, err := c.Compile(typicalRule, Bool)
			if err != nil {
				t.Error(err)
			}
			rules[i] = r
		}()
	}
	wg.Wait()
	if c.Compilations() != 1 {
		t.Errorf("%d compilations for one text", c.Compilations())
	}
	for _, r := range rules {
		if r != rules[0] {
			t.Error("callers got different rules")
		}
	}
	// One rule evaluated from several goroutines.
	exams := syntheticExams(t, 200, 5, 5)
	want := make([]Value, len(exams))
	if err := EvalAll(context.Background(), rules[0], exams, want); err != nil {
		t.Fatal(err)
	}
	for range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			out := make([]Value, len(exams))
			if err := EvalAll(context.Background(), rules[0], exams, out); err != nil {
				t.Error(err)
			}
			for i := range out {
				if out[i] != want[i] {
					t.Errorf("row %d differs between goroutines", i+1)
					return
				}
			}
		}()
	}
	wg.Wait()
}

// TestOnlyDeclaredFunctions: the rule environment holds the standard CEL
// functions and the documented helpers, nothing else.
func TestOnlyDeclaredFunctions(t *testing.T) {
	std, err := cel.NewEnv()
	if err != nil {
		t.Fatal(err)
	}
	env, err := newExamEnv(DefaultLimits())
	if err != nil {
		t.Fatal(err)
	}
	helpers := map[string]bool{}
	for _, h := range Helpers() {
		helpers[h.Name] = true
	}
	for name := range env.Functions() {
		if _, ok := std.Functions()[name]; !ok && !helpers[name] {
			t.Errorf("function %q is neither standard CEL nor a documented helper", name)
		}
	}
	for _, rule := range []string{`math.greatest([1.0]) > 0.0`, `base64.encode(b"x") == ""`, `"a".lowerAscii() == "a"`, `now() > 0`} {
		if _, err := Compile(rule, Bool); err == nil {
			t.Errorf("%s compiled: an extension function is reachable", rule)
		}
	}
}
