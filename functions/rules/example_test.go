package rules_test

import (
	"context"
	"errors"
	"fmt"
	"math"

	"veer/functions/rules"
)

func ExampleCompile() {
	r, err := rules.Compile(`chart > limit ? "high" : (z > 2.0 ? "watch" : "none")`, rules.String)
	if err != nil {
		fmt.Println(err)
		return
	}
	v, err := r.Eval(context.Background(), &rules.Exam{Worker: "W1", Z: 2.4, Chart: 1.2, Limit: 4.0})
	fmt.Println(v, err)
	// Output: watch <nil>
}

func ExampleCompile_typo() {
	_, err := rules.Compile("prevZ > 1.0", rules.Bool)
	fmt.Println(err)
	// Output:
	// column 1: unknown name "prevZ"; did you mean "prev_z"?
	//   prevZ > 1.0
	//   ^
}

func ExampleCompile_wrongKind() {
	_, err := rules.Compile("z * 2.0", rules.Bool)
	var ce *rules.CompileError
	if errors.As(err, &ce) {
		fmt.Println(ce.Short())
	}
	// Output: this rule must give true/false, but it gives a number (compare it, for example z > 2.0)
}

func ExampleEvalAll() {
	// Two workers' exams, in any order; Link fills exam numbers, gaps and
	// histories.
	exams := []rules.Exam{
		{Worker: "A", Time: 41, Z: 2.3},
		{Worker: "B", Time: 50, Z: 0.1},
		{Worker: "A", Time: 40, Z: 2.1},
		{Worker: "A", Time: 43, Z: 1.2},
		{Worker: "A", Time: 44, Z: 2.6},
	}
	if err := rules.Link(exams); err != nil {
		fmt.Println(err)
		return
	}
	r, err := rules.Compile("last(zs, 4).count(v, v > 2.0) >= 3", rules.Bool)
	if err != nil {
		fmt.Println(err)
		return
	}
	out := make([]rules.Value, len(exams))
	if err := rules.EvalAll(context.Background(), r, exams, out); err != nil {
		fmt.Println(err)
		return
	}
	for i, e := range exams {
		fmt.Printf("%s exam %d at %v: %v\n", e.Worker, e.Exam, e.Time, out[i])
	}
	// Output:
	// A exam 2 at 41: FALSE
	// B exam 1 at 50: FALSE
	// A exam 1 at 40: FALSE
	// A exam 3 at 43: FALSE
	// A exam 4 at 44: TRUE
}

func ExampleLink() {
	exams := []rules.Exam{
		{Worker: "A", Time: 40.0, Z: 0.5, Signal: false},
		{Worker: "A", Time: 42.5, Z: 2.5, Signal: true},
		{Worker: "A", Time: 45.0, Z: 1.5, Signal: false},
	}
	if err := rules.Link(exams); err != nil {
		fmt.Println(err)
		return
	}
	for _, e := range exams {
		fmt.Printf("exam %d of %d: gap %v, prev_z %v, years since first signal %v, zs %v\n",
			e.Exam, e.Exams, e.Gap, e.PrevZ, e.YearsSinceFirstSignal, e.Zs)
	}
	// Output:
	// exam 1 of 3: gap 0, prev_z NaN, years since first signal NaN, zs [0.5]
	// exam 2 of 3: gap 2.5, prev_z 0.5, years since first signal 0, zs [0.5 2.5]
	// exam 3 of 3: gap 2.5, prev_z 2.5, years since first signal 2.5, zs [0.5 2.5 1.5]
}

func ExampleCache() {
	cache := rules.NewCache(128, rules.Limits{})
	for range 3 {
		if _, err := cache.Compile("chart > limit", rules.Bool); err != nil {
			fmt.Println(err)
		}
	}
	fmt.Println("compilations:", cache.Compilations())
	// Output: compilations: 1
}

func ExampleCompileColumns() {
	headers := []string{"Systolic BP", "Diastolic BP"}
	r, err := rules.CompileColumns("systolic_bp >= 140 || diastolic_bp >= 90", headers, rules.Bool)
	if err != nil {
		fmt.Println(err)
		return
	}
	rows := [][]rules.Value{
		{rules.NumberValue(150), rules.NumberValue(85)},
		{rules.NumberValue(125), rules.NumberValue(80)},
		{rules.NumberValue(118), rules.NumberValue(math.NaN())},
	}
	out := make([]rules.Value, len(rows))
	err = rules.EvalRows(context.Background(), r, rows, out)
	fmt.Println(out, err)
	// Output: [TRUE FALSE FALSE] <nil>
}

func ExampleSanitizeNames() {
	fmt.Println(rules.SanitizeNames([]string{"Systolic BP", "FEV1 (L)", "% predicted", "2nd reading", "BP", "bp"}))
	// Output: [systolic_bp fev1_l pct_predicted col_2nd_reading bp bp_2]
}

func ExampleParseRuleSet() {
	src := `# Chart over its limit.
chart_over_limit [high] = chart > limit

# 3 of the last 4 z above 2.
three_of_four = last(zs, 4).count(v, v > 2.0) >= 3
`
	rs, err := rules.ParseRuleSet([]byte(src))
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, r := range rs.Rules {
		fmt.Printf("%s [%s] line %d: %s\n", r.Name, r.Severity, r.Line, r.Expr)
	}
	compiled, err := rules.NewCache(0, rules.Limits{}).CompileSet(rs)
	fmt.Println(len(compiled), err)
	// Output:
	// chart_over_limit [high] line 2: chart > limit
	// three_of_four [] line 5: last(zs, 4).count(v, v > 2.0) >= 3
	// 2 <nil>
}
