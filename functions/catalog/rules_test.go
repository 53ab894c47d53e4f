package catalog_test

import (
	"context"
	"fmt"
	"strings"
	"testing"
	"time"

	"veer/functions/cell"
	"veer/functions/rules"
	"veer/functions/screening"
)

// ruleOf runs VEER.RULE over a sheet and returns its column.
func ruleOf(t *testing.T, env cell.Env, rule string, e exams, opts any) []any {
	t.Helper()
	col := column(t, mustCall(t, env, "VEER.RULE", rule, "sbp", anyCol(e.ids), anyCol(e.ages), anyCol(e.vals), anyCol(e.groups), opts))
	if len(col) != e.len() {
		t.Fatalf("VEER.RULE spilled %d rows for %d exams", len(col), e.len())
	}
	return col
}

func TestRule(t *testing.T) {
	env, m := newEnv(t)
	sheet := inRange(m, synth(21, 40, 120, 2.5)).shuffled(5)
	lim, err := m.Limit(screening.DefaultSettings(), screening.LimitOptions{}, 20)
	if err != nil {
		t.Fatal(err)
	}
	res, err := m.Screen(sheet.screening(), screening.DefaultSettings(), lim.H)
	if err != nil {
		t.Fatal(err)
	}
	vars, err := screening.RuleExams(sheet.screening(), res, lim.H)
	if err != nil {
		t.Fatal(err)
	}
	chartTab := chartOf(t, env, sheet, "target=20")
	// Exam numbers by hand: the rank of the exam's age among its worker's.
	examNo := make([]float64, sheet.len())
	for i := range sheet.ids {
		for j := range sheet.ids {
			if sheet.ids[j] == sheet.ids[i] && sheet.ages[j] <= sheet.ages[i] {
				examNo[i]++
			}
		}
	}
	cache := rules.NewCache(0, rules.DefaultLimits())
	for _, c := range []struct {
		rule string
		hand func(i int) any // an independent expectation, or nil
	}{
		{"chart > limit", func(i int) any { return chartTab[i][4] }},
		{"z", func(i int) any { return chartTab[i][0] }},
		{"double(exam)", func(i int) any { return examNo[i] }},
		{"value", func(i int) any { return sheet.vals[i] }},
		{`signal ? "review" : (z > 2.0 ? "watch" : "")`, nil},
		{"exam >= 3 && last(zs, 3).count(v, v > 1.0) >= 2", nil},
		{"has_previous && value - prev_value > 15.0", nil},
		{"years_since_first_signal > 1.0", nil},
		{"centile > 97.5 || signal", nil},
	} {
		col := ruleOf(t, env, c.rule, sheet, "target=20")
		r, err := cache.Compile(c.rule, rules.Any)
		if err != nil {
			t.Fatal(err)
		}
		want := make([]rules.Value, len(vars))
		if err := rules.EvalAll(context.Background(), r, vars, want); err != nil {
			t.Fatal(err)
		}
		for i := range col {
			var w any
			if !want[i].IsEmpty() {
				w = want[i].Interface()
			}
			if fmt.Sprint(col[i]) != fmt.Sprint(w) {
				t.Fatalf("rule %q row %d = %v; the rules engine gives %v", c.rule, i+1, col[i], w)
			}
			if c.hand != nil && fmt.Sprint(col[i]) != fmt.Sprint(c.hand(i)) {
				t.Fatalf("rule %q row %d = %v; by hand %v", c.rule, i+1, col[i], c.hand(i))
			}
		}
	}
	// Blank rows are #N/A in their row; the rest are evaluated.
	ids := anyCol(sheet.ids)
	ids[3] = nil
	col := column(t, mustCall(t, env, "VEER.RULE", "z > 0.0", "sbp", ids, anyCol(sheet.ages), anyCol(sheet.vals), anyCol(sheet.groups), "limit=4"))
	wantErr(t, cellErr(t, col[3]), cell.CodeNA, "row 4", "id is blank")
	if _, ok := col[0].(bool); !ok {
		t.Errorf("row 1 = %v (%T); want true or false", col[0], col[0])
	}
	// A rule that fails on some rows only (list index past the history)
	// gives #VALUE! there and answers the others.
	col = ruleOf(t, env, "zs[1] > 0.0", sheet, "limit=4")
	for i, v := range col {
		if examNo[i] == 1 {
			wantErr(t, cellErr(t, v), cell.CodeValue, "outside the list")
		} else if _, ok := v.(bool); !ok {
			t.Errorf("row %d (exam %v) = %v; want true or false", i+1, examNo[i], v)
		}
	}
}

func TestRuleErrors(t *testing.T) {
	env, _ := newEnv(t)
	s := synth(22, 6, 120, 0)
	for _, c := range []struct {
		name  string
		rule  string
		opts  any
		code  cell.Code
		parts []string
	}{
		{"typo in a name", "chrt > limit", "target=20", cell.CodeValue, []string{"column 1", `"chrt"`, `"chart"`}},
		{"typo later in the rule", "z > 2.0 && signl", "target=20", cell.CodeValue, []string{"column 12", `"signl"`, `"signal"`}},
		{"unknown function", "zs.size() > 2 && maxx(zs) > 3.0", "target=20", cell.CodeValue, []string{"maxx", "max"}},
		{"type mistake", `group > 2.0`, "target=20", cell.CodeValue, []string{"column 7", "text", "number"}},
		{"syntax error", "z > ", "target=20", cell.CodeValue, []string{"column"}},
		{"empty rule", "  ", "target=20", cell.CodeValue, []string{"rule"}},
		{"a list result", "zs", "target=20", cell.CodeValue, []string{"true/false, a number or text"}},
		{"no target or limit", "z > 2.0", nil, cell.CodeValue, []string{"target"}},
		{"unknown option", "z > 2.0", "target=20; sidee=up", cell.CodeValue, []string{`unknown option "sidee"`}},
		{"too long", strings.Repeat("z > 1.0 || ", 500) + "true", "target=20", cell.CodeValue, []string{"4,000"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			args := []any{c.rule, "sbp", s.ids, s.ages, s.vals, s.groups}
			if c.opts != nil {
				args = append(args, c.opts)
			}
			_, e := call(t, env, "VEER.RULE", args...)
			wantErr(t, e, c.code, c.parts...)
		})
	}
}

// TestRuleRunaway: a rule with comprehensions nested over a long history
// is stopped by the cost limit with a clear error, and the next call works.
func TestRuleRunaway(t *testing.T) {
	env, m := newEnv(t)
	lo, hi, _ := m.Curves.Range("office")
	var e exams
	for k := 0; k < 400; k++ { // one worker seen 400 times
		e.ids = append(e.ids, "W1")
		e.groups = append(e.groups, "office")
		e.ages = append(e.ages, lo+(hi-lo)*float64(k)/400)
		e.vals = append(e.vals, 125)
	}
	start := time.Now()
	_, ce := call(t, env, "VEER.RULE", "zs.all(a, zs.all(b, zs.all(c, a + b + c < 100.0)))", "sbp", e.ids, e.ages, e.vals, e.groups, "limit=5")
	wantErr(t, ce, cell.CodeNum, "was stopped", "simplify") // by the cost limit, or the time limit on a slow machine
	if d := time.Since(start); d > 5*time.Second {
		t.Errorf("the runaway rule took %v to stop", d)
	}
	// A cancelled request stops too.
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, ce := callCtx(ctx, t, env, "VEER.RULE", "zs.all(a, zs.all(b, a + b < 100.0))", "sbp", e.ids, e.ages, e.vals, e.groups, "limit=5"); ce == nil {
		t.Errorf("a rule under a cancelled context answered")
	}
	// The catalogue keeps serving.
	col := ruleOf(t, env, "exam == exams", e, "limit=5")
	if col[len(col)-1] != true || col[0] != false {
		t.Errorf("after the runaway rule: %v ... %v", col[0], col[len(col)-1])
	}
}

func TestStoredRules(t *testing.T) {
	env, _ := newEnv(t)
	s := synth(23, 20, 120, 3)
	lines := []any{"# blood pressure rules", "high [high] = chart > limit", nil, "# a jump since the previous exam", "jump = has_previous && value - prev_value > 15.0"}
	h := mustCall(t, env, "VEER.SAVERULES", "bp-rules", lines)
	if h != "bp-rules@v1" {
		t.Fatalf("SAVERULES = %v; want bp-rules@v1", h)
	}
	// Saving the same rules again keeps the handle; one text works as well as lines.
	if h := mustCall(t, env, "VEER.SAVERULES", "bp-rules", "# blood pressure rules\nhigh [high] = chart > limit\n# a jump since the previous exam\njump = has_previous && value - prev_value > 15.0"); h != "bp-rules@v1" {
		t.Errorf("saving the same rules = %v; want bp-rules@v1", h)
	}
	for _, c := range []struct{ stored, text string }{
		{"@bp-rules/high", "chart > limit"},
		{"@bp-rules/jump", "has_previous && value - prev_value > 15.0"},
		{" @bp-rules@v1/high ", "chart > limit"},
	} {
		got := ruleOf(t, env, c.stored, s, "target=20")
		want := ruleOf(t, env, c.text, s, "target=20")
		if fmt.Sprint(got) != fmt.Sprint(want) {
			t.Errorf("%s gives %v; its text gives %v", c.stored, got, want)
		}
	}
	for _, c := range []struct {
		name  string
		fn    string
		args  []any
		code  cell.Code
		parts []string
	}{
		{"unknown rule in a set", "VEER.RULE", []any{"@bp-rules/low", "sbp", s.ids, s.ages, s.vals, s.groups, "limit=4"}, cell.CodeNA, []string{`"low"`, "high, jump"}},
		{"unknown set", "VEER.RULE", []any{"@nosuch/high", "sbp", s.ids, s.ages, s.vals, s.groups, "limit=4"}, cell.CodeRef, []string{"nosuch"}},
		{"a model is not a rule set", "VEER.RULE", []any{"@sbp/high", "sbp", s.ids, s.ages, s.vals, s.groups, "limit=4"}, cell.CodeRef, []string{"sbp@v1", "not a rule set"}},
		{"no rule name", "VEER.RULE", []any{"@bp-rules", "sbp", s.ids, s.ages, s.vals, s.groups, "limit=4"}, cell.CodeValue, []string{"@set/name"}},
		{"a rule set is not a model", "VEER.RULE", []any{"z > 1.0", "bp-rules", s.ids, s.ages, s.vals, s.groups, "limit=4"}, cell.CodeRef, []string{"bp-rules@v1", "rule set"}},
		{"bad rule in a set", "VEER.SAVERULES", []any{"more", "a = z > 2.0\nb = zz > 1.0"}, cell.CodeValue, []string{`"zz"`, "b"}},
		{"bad line in a set", "VEER.SAVERULES", []any{"more", "just text"}, cell.CodeValue, []string{"line 1"}},
		{"rule set named like a model", "VEER.SAVERULES", []any{"sbp", "a = z > 2.0"}, cell.CodeValue, []string{"sbp", "model"}},
		{"model named like a rule set", "VEER.FIT", []any{"bp-rules", s.ids, s.ages, s.vals, s.groups}, cell.CodeValue, []string{"bp-rules", "rule set"}},
		{"blank rule set name", "VEER.SAVERULES", []any{" ", "a = z > 2.0"}, cell.CodeValue, []string{"name"}},
		{"rule set name with /", "VEER.SAVERULES", []any{"a/b", "a = z > 2.0"}, cell.CodeValue, []string{"/"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, e := call(t, env, c.fn, c.args...)
			wantErr(t, e, c.code, c.parts...)
		})
	}
	// A new version of the set changes what "@bp-rules/high" means.
	mustCall(t, env, "VEER.SAVERULES", "bp-rules", "high = z > 100.0")
	for i, v := range ruleOf(t, env, "@bp-rules/high", s, "limit=4") {
		if v != false {
			t.Fatalf("row %d = %v after the set changed to z > 100", i+1, v)
		}
	}
}

func TestRuleCols(t *testing.T) {
	env := &cell.MemoryEnv{}
	data := [][]any{
		{"Systolic BP", "Age", "Site", "Smoker"},
		{150.0, 52.0, "north", true},
		{128.0, 61.0, "south", false},
		{nil, 45.0, "north", false},
		{141.0, 38.0, nil, true},
	}
	for _, c := range []struct {
		rule string
		want []any
	}{
		{"systolic_bp > 140.0", []any{true, false, false, true}}, // a blank number is NaN: comparisons are false
		{"systolic_bp > 140.0 && age > 50.0", []any{true, false, false, false}},
		{`site == "north" ? "N" : "other"`, []any{"N", "other", "N", "other"}},
		{"smoker || age >= 60.0", []any{true, true, false, true}},
		{"age * 2.0", []any{104.0, 122.0, 90.0, 76.0}},
	} {
		got := column(t, mustCall(t, env, "VEER.RULECOLS", c.rule, data))
		if fmt.Sprint(got) != fmt.Sprint(c.want) {
			t.Errorf("RULECOLS(%q) = %v; want %v", c.rule, got, c.want)
		}
	}
	for _, c := range []struct {
		name  string
		rule  string
		data  any
		code  cell.Code
		parts []string
	}{
		{"typo in a column name", "systolic > 140.0", data, cell.CodeValue, []string{"column 1", `"systolic"`, "systolic_bp"}},
		{"header only", "age > 1.0", data[:1], cell.CodeValue, []string{"header row"}},
		{"number in the header", "age > 1.0", [][]any{{"age", 3.0}, {1.0, 2.0}}, cell.CodeValue, []string{"header cell 2"}},
		{"runaway", "[1,2,3,4,5,6,7,8,9,10].all(a, [1,2,3,4,5,6,7,8,9,10].all(b, [1,2,3,4,5,6,7,8,9,10].all(c, [1,2,3,4,5,6,7,8,9,10].all(d, [1,2,3,4,5,6,7,8,9,10].all(e, age > 0.0)))))", data, cell.CodeNum, []string{"was stopped", "simplify"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, e := call(t, env, "VEER.RULECOLS", c.rule, c.data)
			wantErr(t, e, c.code, c.parts...)
		})
	}
}

// FuzzCellInput: whatever text a cell holds as a rule, a stored-rule
// reference or options, the catalogue answers a value or a spreadsheet
// error of a known code, and never panics.
func FuzzCellInput(f *testing.F) {
	for _, s := range []string{"z > 2.0", "@bp/high", "@/", "@x@v1/y", "target=20; side=both", "limit=3;;", "seed=-1", "reps=1e9", "a=b=c", "chart > limit || centile > 99.0", "zs.all(a, zs.all(b, a < b))", "", "\x00", "extrapolate=on"} {
		f.Add(s)
	}
	env, _ := newEnv(f)
	mustCall(f, env, "VEER.SAVERULES", "bp", "high = z > 2.0")
	s := synth(24, 4, 120, 0)
	codes := cell.CodeMeanings()
	check := func(t *testing.T, what string, e *cell.Error) {
		if e == nil {
			return
		}
		if _, ok := codes[e.Code]; !ok || e.Message == "" {
			t.Fatalf("%s: error %q with code %q", what, e.Message, e.Code)
		}
	}
	f.Fuzz(func(t *testing.T, text string) {
		_, e := call(t, env, "VEER.RULE", text, "sbp", s.ids, s.ages, s.vals, s.groups, "limit=4")
		check(t, "rule", e)
		_, e = call(t, env, "VEER.CHART", "sbp", s.ids, s.ages, s.vals, s.groups, "limit=4;"+text)
		check(t, "chart options", e)
		_, e = call(t, env, "VEER.REFMEAN", "sbp", 40, "office", text)
		check(t, "lookup options", e)
		_, e = call(t, env, "VEER.RULECOLS", text, [][]any{{"Age", "Site"}, {40.0, "north"}})
		check(t, "column rule", e)
	})
}
