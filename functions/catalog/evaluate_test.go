package catalog_test

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"veer/functions/cell"
	"veer/functions/evaluation"
	"veer/functions/rules"
	"veer/functions/screening"
)

// labelled returns a sheet where a fifth of the workers drift (synth) and
// its outcomes range: a header row, then each drifting worker diagnosed 3
// years after the first exam, the others never.
func labelled(m *screening.Model) (exams, [][]any) {
	sheet := inRange(m, synth(11, 80, 120, 2.5)).shuffled(4)
	first := map[string]float64{}
	for i, id := range sheet.ids {
		if a, ok := first[id]; !ok || sheet.ages[i] < a {
			first[id] = sheet.ages[i]
		}
	}
	outs := [][]any{{"worker", "diagnosed", "age at diagnosis"}}
	for w := 0; w < 80; w++ {
		id := fmt.Sprintf("W%04d", w)
		a, ok := first[id]
		switch {
		case !ok:
		case w%5 == 0:
			outs = append(outs, []any{id, "yes", a + 3})
		default:
			outs = append(outs, []any{id, false, nil})
		}
	}
	return sheet, outs
}

// TestEvaluate checks VEER.EVALUATE against the engine called directly,
// its header, a rule that cannot be evaluated, rules given three ways, and
// that a refitted model changes the answer of a call naming it by bare
// name.
func TestEvaluate(t *testing.T) {
	env, m := newEnv(t)
	sheet, outs := labelled(m)
	ruleRange := [][]any{{"high", "centile > 99.0"}, {"label", `z > 2.0 ? "high" : "none"`}, {"as_chart", "chart > limit"}}
	opts := "target=20; targets=5,50,200"
	tab := table(t, mustCall(t, env, "VEER.EVALUATE", "sbp", outs, anyCol(sheet.ids), anyCol(sheet.ages), anyCol(sheet.vals), anyCol(sheet.groups), ruleRange, opts))

	// The engine, directly.
	var evx []evaluation.Exam
	for i := range sheet.ids {
		evx = append(evx, evaluation.Exam{Worker: sheet.ids[i], Age: sheet.ages[i]})
	}
	var oo []evaluation.Outcome
	for _, r := range outs[1:] {
		o := evaluation.Outcome{Worker: r[0].(string), Diagnosed: fmt.Sprint(r[1]), Age: math.NaN()}
		if r[2] != nil {
			o.Age = r[2].(float64)
		}
		oo = append(oo, o)
	}
	c, err := evaluation.NewCohort(context.Background(), evx, oo, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	h, err := m.EvaluateHistory(context.Background(), sheet.screening(), c, screening.HistoryOptions{
		Settings: screening.DefaultSettings(), Target: 20, Sweep: []float64{5, 50, 200}, MatchBaseline: true,
		Rules: []rules.NamedRule{{Name: "high", Expr: "centile > 99.0"}, {Name: "label", Expr: `z > 2.0 ? "high" : "none"`}, {Name: "as_chart", Expr: "chart > limit"}},
	})
	if err != nil {
		t.Fatal(err)
	}
	head := evaluation.Header()
	if fmt.Sprint(tab[0]) != fmt.Sprint(anyCol(head)) {
		t.Fatalf("header %v", tab[0])
	}
	var want [][]any
	for _, r := range h.Rows {
		if r.Method == evaluation.MethodRule {
			continue
		}
		want = append(want, cellsOf(r, h.Cohort))
	}
	rulesByName := map[string]evaluation.Row{}
	for _, r := range h.Rows {
		rulesByName[r.Name] = r
	}
	want = append(want, cellsOf(rulesByName["high"], h.Cohort), nil, cellsOf(rulesByName["as_chart"], h.Cohort))
	if len(tab) != len(want)+1 {
		t.Fatalf("%d rows; want %d", len(tab)-1, len(want))
	}
	for i, w := range want {
		got := tab[i+1]
		if w == nil { // the rule that gives labels
			if got[0] != "rule" || got[1] != "label" {
				t.Errorf("row %d: %v", i+1, got[:2])
			}
			for _, v := range got[2:] {
				wantErr(t, cellErr(t, v), cell.CodeValue, `rule "label" cannot be evaluated`, "must give true/false")
			}
			continue
		}
		if fmt.Sprint(got) != fmt.Sprint(w) {
			t.Errorf("row %d:\n%v\nwant\n%v", i+1, got, w)
		}
	}
	if tab[1][0] != "chart" || tab[1][2] != 5.0 || math.IsNaN(h.Matched) {
		t.Errorf("first row %v", tab[1][:3])
	}

	// Rules as one column, and as a saved set.
	mustCall(t, env, "VEER.SAVERULES", "bp", "high = centile > 99.0\nas_chart = chart > limit")
	for _, rs := range []any{
		[]any{"centile > 99.0", "@bp/as_chart"},
		"@bp",
	} {
		got := table(t, mustCall(t, env, "VEER.EVALUATE", "sbp", outs, anyCol(sheet.ids), anyCol(sheet.ages), anyCol(sheet.vals), anyCol(sheet.groups), rs, opts))
		n := len(got)
		if got[n-2][0] != "rule" || got[n-1][1] != "as_chart" || fmt.Sprint(got[n-2][2:]) != fmt.Sprint(cellsOf(rulesByName["high"], h.Cohort)[2:]) ||
			fmt.Sprint(got[n-1][2:]) != fmt.Sprint(cellsOf(rulesByName["as_chart"], h.Cohort)[2:]) {
			t.Errorf("rules %v: last rows %v / %v", rs, got[n-2][:4], got[n-1][:4])
		}
	}

	// A refit under the same name changes the answer (the function streams).
	f, _ := cat.Lookup("VEER.EVALUATE")
	if !f.Streaming || !f.Slow {
		t.Errorf("VEER.EVALUATE streaming %v, slow %v", f.Streaming, f.Slow)
	}
	other := synth(2, 160, 124, 0)
	mustCall(t, env, "VEER.FIT", "sbp", other.ids, other.ages, other.vals, other.groups)
	again := table(t, mustCall(t, env, "VEER.EVALUATE", "sbp", outs, anyCol(sheet.ids), anyCol(sheet.ages), anyCol(sheet.vals), anyCol(sheet.groups), ruleRange, opts))
	if again[1][3] == tab[1][3] {
		t.Errorf("the limit %v did not change with the refitted model", again[1][3])
	}
}

// cellsOf is a table row as VEER.EVALUATE gives it: text, numbers, blank
// for a figure not available.
func cellsOf(r evaluation.Row, s evaluation.Summary) []any {
	var out []any
	for _, c := range r.Cells(s) {
		switch {
		case c.IsText:
			out = append(out, c.Text)
		case math.IsNaN(c.Number):
			out = append(out, nil)
		default:
			out = append(out, c.Number)
		}
	}
	return out
}

// TestEvaluateInput checks the outcomes and exams a sheet gives: numbers as
// ids and flags, no header, wholly blank rows skipped, and each kind of
// bad input refused with its code, row and column.
func TestEvaluateInput(t *testing.T) {
	env, m := newEnv(t)
	sheet, outs := labelled(m)
	args := func(o any, ex exams, opts string) []any {
		return []any{"sbp", o, anyCol(ex.ids), anyCol(ex.ages), anyCol(ex.vals), anyCol(ex.groups), blank, opts}
	}
	base := table(t, mustCall(t, env, "VEER.EVALUATE", args(outs, sheet, "")...))
	// No header; flags as 1/0 and TRUE/FALSE; blank rows at the ends of
	// both ranges (whole-column references).
	var plain [][]any
	for i, r := range outs[1:] {
		flag := any(1.0)
		if r[1] == false {
			flag = any(0.0)
			if i%2 == 0 {
				flag = false
			}
		}
		plain = append(plain, []any{r[0], flag, r[2]})
	}
	plain = append(plain, []any{nil, nil, nil}, []any{nil, nil, nil})
	padded := sheet
	padded.ids = append(append([]string(nil), sheet.ids...), "", "")
	padded.ages = append(append([]float64(nil), sheet.ages...), math.NaN(), math.NaN())
	padded.vals = append(append([]float64(nil), sheet.vals...), math.NaN(), math.NaN())
	padded.groups = append(append([]string(nil), sheet.groups...), "", "")
	pa := args(plain, sheet, "")
	pa[2], pa[3], pa[4], pa[5] = blankCol(padded.ids), blankNums(padded.ages), blankNums(padded.vals), blankCol(padded.groups)
	if got := table(t, mustCall(t, env, "VEER.EVALUATE", pa...)); fmt.Sprint(got) != fmt.Sprint(base) {
		t.Errorf("without a header, with numeric flags and blank rows:\n%v\nwant\n%v", got[1], base[1])
	}

	edit := func(change func([][]any) [][]any) [][]any {
		cp := make([][]any, len(outs))
		for i, r := range outs {
			cp[i] = append([]any(nil), r...)
		}
		return change(cp)
	}
	for _, tc := range []struct {
		name   string
		args   []any
		code   cell.Code
		pieces []string
	}{
		{"two columns", args([][]any{{"W0000", "yes"}}, sheet, ""), cell.CodeValue, []string{"must be three columns", "got 2"}},
		{"unknown worker", args(edit(func(r [][]any) [][]any { return append(r, []any{"X1", "no", nil}) }), sheet, ""), cell.CodeValue,
			[]string{`outcomes data row`, `column "worker": worker "X1" has no exams`}},
		{"flag", args(edit(func(r [][]any) [][]any { r[2][1] = "maybe"; return r }), sheet, ""), cell.CodeValue,
			[]string{`outcomes data row 2, column "diagnosed": "maybe" is not yes or no`}},
		{"age text", args(edit(func(r [][]any) [][]any { r[1][2] = "forty"; return r }), sheet, ""), cell.CodeValue,
			[]string{`outcomes row 1, column "age at diagnosis": "forty" is not an age`}},
		{"several problems", args(edit(func(r [][]any) [][]any { r[2][1] = "maybe"; r[3][1] = "?"; return r }), sheet, ""), cell.CodeValue,
			[]string{"(and 1 more problems in the outcomes)"}},
		{"blank id", args(edit(func(r [][]any) [][]any { r[2][0] = nil; return r }), sheet, ""), cell.CodeNA, []string{"the worker id is empty"}},
		{"missing workers", args(edit(func(r [][]any) [][]any { return r[:len(r)-2] }), sheet, ""), cell.CodeValue,
			[]string{"2 workers have exams but no row in the outcomes table"}},
		{"no one diagnosed", args(edit(func(r [][]any) [][]any {
			for _, x := range r[1:] {
				x[1], x[2] = "no", nil
			}
			return r
		}), sheet, ""), cell.CodeValue, []string{"no worker in the outcomes table was diagnosed"}},
		{"limit option", args(outs, sheet, "limit=3"), cell.CodeValue, []string{"limit"}},
		{"bad targets", args(outs, sheet, "targets=5-x"), cell.CodeNum, []string{"targets must be"}},
		{"bad centile", args(outs, sheet, "centile=50"), cell.CodeNum, []string{"centile must be"}},
		{"bad missing", args(outs, sheet, "missing=maybe"), cell.CodeValue, []string{"missing"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, e := call(t, env, "VEER.EVALUATE", tc.args...)
			wantErr(t, e, tc.code, tc.pieces...)
		})
	}
	// Missing workers taken as never diagnosed.
	short := edit(func(r [][]any) [][]any { return r[:len(r)-2] })
	if _, e := call(t, env, "VEER.EVALUATE", args(short, sheet, "missing=healthy")...); e != nil {
		t.Errorf("missing=healthy: %v", e)
	}
	// A partly blank exam row fails the call with its row.
	part := args(outs, sheet, "")
	vals := anyCol(sheet.vals)
	vals[3] = nil
	part[4] = vals
	_, e := call(t, env, "VEER.EVALUATE", part...)
	wantErr(t, e, cell.CodeNA, "row 4: the reading is blank")
}

func blankCol(s []string) []any {
	out := make([]any, len(s))
	for i, x := range s {
		if x != "" {
			out[i] = x
		}
	}
	return out
}

func blankNums(v []float64) []any {
	out := make([]any, len(v))
	for i, x := range v {
		if !math.IsNaN(x) {
			out[i] = x
		}
	}
	return out
}

// TestEvaluateHelp checks that the help names the screening-aid caution
// and every option is a declared one.
func TestEvaluateHelp(t *testing.T) {
	f, ok := cat.Lookup("VEER.EVALUATE")
	if !ok {
		t.Fatal("no VEER.EVALUATE")
	}
	if !strings.Contains(f.Help, screening.Caution) {
		t.Errorf("help lacks the caution: %s", f.Help)
	}
	for _, o := range f.Options {
		if _, ok := cell.LookupOption(o); !ok {
			t.Errorf("option %q is not declared", o)
		}
		if o == cell.OptionLimit {
			t.Error("VEER.EVALUATE takes the limit option")
		}
	}
}
