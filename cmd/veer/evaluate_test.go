package main

import (
	"bytes"
	"context"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"veer/functions/evaluation"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/internal/table"
)

// outcomesOf writes the fixture workforce's outcomes: the drifting workers
// (every fifth, drifting from the first exam) diagnosed 3 years after
// their first exam, the others never.
func outcomesOf(work []examRow) [][]string {
	first := map[string]float64{}
	var order []string
	for _, r := range work {
		if _, ok := first[r.worker]; !ok {
			first[r.worker] = r.age
			order = append(order, r.worker)
		}
	}
	rows := [][]string{{"worker", "diagnosed", "diagnosed_age"}}
	for _, w := range order {
		n, _ := strconv.Atoi(strings.TrimPrefix(w, "W"))
		if n%5 == 0 {
			rows = append(rows, []string{w, "yes", strconv.FormatFloat(first[w]+3, 'f', 2, 64)})
		} else {
			rows = append(rows, []string{w, "no", ""})
		}
	}
	return rows
}

func csvText(rows [][]string) []byte {
	var b bytes.Buffer
	for _, r := range rows {
		b.WriteString(strings.Join(r, ",") + "\n")
	}
	return b.Bytes()
}

func evaluateArgs(f fixtureFiles, outcomes string, extra ...string) []string {
	return append([]string{"evaluate", "--model", f.model, "--in", f.workCSV, "--id", "worker", "--time", "age", "--value", "sbp",
		"--group", "group", "--outcomes", outcomes}, extra...)
}

// TestCLIEvaluate runs veer evaluate and checks its table against the
// statistics called directly, its plain words, a rule that cannot be
// evaluated, and that an .xlsx outcomes sheet gives the same table.
func TestCLIEvaluate(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	outRows := outcomesOf(f.work)
	outCSV := writeFile(t, filepath.Join(dir, "outcomes.csv"), csvText(outRows))
	args := evaluateArgs(f, outCSV, "--targets", "5,50", "--rule", "high=centile > 99.0", "--rule", "label=z > 2.0 ? \"high\" : \"none\"")
	code, stdout, stderr := cli(args...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	tab, err := table.Read(strings.NewReader(stdout))
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(tab.Header, evaluation.Header()) {
		t.Fatalf("header %v", tab.Header)
	}
	// Direct computation.
	m, err := loadModel(f.model)
	if err != nil {
		t.Fatal(err)
	}
	var exams []screening.Exam
	var evx []evaluation.Exam
	for _, r := range f.work {
		exams = append(exams, screening.Exam{Worker: r.worker, Group: r.group, Time: r.age, Value: r.sbp})
		evx = append(evx, evaluation.Exam{Worker: r.worker, Age: r.age})
	}
	var outs []evaluation.Outcome
	for _, r := range outRows[1:] {
		age := math.NaN()
		if r[2] != "" {
			age, _ = strconv.ParseFloat(r[2], 64)
		}
		outs = append(outs, evaluation.Outcome{Worker: r[0], Diagnosed: r[1], Age: age})
	}
	c, err := evaluation.NewCohort(context.Background(), evx, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	set := screening.DefaultSettings()
	h, err := m.EvaluateHistory(context.Background(), exams, c, screening.HistoryOptions{
		Settings: set, Target: 20, Sweep: []float64{5, 50}, Rules: []rules.NamedRule{{Name: "high", Expr: "centile > 99.0"}}, MatchBaseline: true,
	})
	if err != nil {
		t.Fatal(err)
	}
	var want bytes.Buffer
	if err := writeEvaluation(&want, h); err != nil {
		t.Fatal(err)
	}
	if stdout != want.String() {
		t.Errorf("veer evaluate wrote\n%s\nthe statistics give\n%s", stdout, want.String())
	}
	methods := map[string]int{}
	for _, r := range tab.Rows {
		methods[r[0]]++
	}
	if methods["chart"] < 3 || methods["baseline"] != 1 || methods["rule"] != 1 {
		t.Errorf("rows per method %v", methods)
	}
	for _, w := range []string{
		"later diagnosed with an exam before the diagnosis", "at or after their diagnosis are left out",
		"cusum up at 20 years:", "baseline centile > 97.5:", "rule high:", "At a 20-year target, of ",
		`rule "label" cannot be evaluated: this rule must give true/false`, screening.Caution,
	} {
		if !strings.Contains(stderr, w) {
			t.Errorf("stderr lacks %q:\n%s", w, stderr)
		}
	}

	// The same outcomes in a workbook, and written to a file.
	xf := excelize.NewFile()
	for i, r := range outRows {
		for j, v := range r {
			cell, _ := excelize.CoordinatesToCellName(j+1, i+1)
			if j == 2 && v != "" && i > 0 {
				x, _ := strconv.ParseFloat(v, 64)
				xf.SetCellValue("Sheet1", cell, x)
			} else {
				xf.SetCellValue("Sheet1", cell, v)
			}
		}
	}
	xlsx := filepath.Join(dir, "outcomes.xlsx")
	if err := xf.SaveAs(xlsx); err != nil {
		t.Fatal(err)
	}
	outFile := filepath.Join(dir, "evaluation.csv")
	code, stdout2, stderr2 := cli(append(evaluateArgs(f, xlsx, "--targets", "5,50", "--rule", "high=centile > 99.0", "--rule", "label=z > 2.0 ? \"high\" : \"none\""), "--out", outFile)...)
	if code != 0 || stdout2 != "" {
		t.Fatalf("with an .xlsx outcomes sheet: exit %d, stdout %q: %s", code, stdout2, stderr2)
	}
	if b, err := os.ReadFile(outFile); err != nil || string(b) != stdout {
		t.Errorf("the .xlsx outcomes gave\n%s\nthe CSV\n%s (%v)", b, stdout, err)
	}
}

// TestCLIEvaluateBadInput checks that bad outcomes and flags are refused
// with the file, row and column, exit 1 (2 for the command line) and
// nothing written.
func TestCLIEvaluateBadInput(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	good := outcomesOf(f.work)
	first := f.work[0].worker // W00000, drifting, diagnosed
	firstAge := f.work[0].age
	edit := func(change func([][]string) [][]string) [][]string {
		rows := make([][]string, len(good))
		for i, r := range good {
			rows[i] = append([]string(nil), r...)
		}
		return change(rows)
	}
	tests := []struct {
		name  string
		rows  [][]string
		extra []string
		code  int
		want  []string
	}{
		{"unknown id", edit(func(r [][]string) [][]string { return append(r, []string{"X999", "no", ""}) }), nil, 1,
			[]string{"outcomes.csv: outcomes data row", `column "worker": worker "X999" has no exams`}},
		{"diagnosed before the first exam", edit(func(r [][]string) [][]string {
			r[1][2] = strconv.FormatFloat(firstAge-1, 'f', 2, 64)
			return r
		}), nil, 1, []string{"outcomes data row 1, column \"diagnosed_age\": worker \"" + first + "\" was diagnosed at age"}},
		{"flag not yes/no", edit(func(r [][]string) [][]string { r[2][1] = "perhaps"; return r }), nil, 1,
			[]string{`outcomes data row 2, column "diagnosed": "perhaps" is not yes or no`}},
		{"duplicate row", edit(func(r [][]string) [][]string { return append(r, r[3]) }), nil, 1,
			[]string{`outcomes data rows 3 and`, "has two outcome rows"}},
		{"age not a number", edit(func(r [][]string) [][]string { r[1][2] = "forty"; return r }), nil, 1,
			[]string{`data row 1 (line 2), column "diagnosed_age": "forty" is not a number`}},
		{"missing workers", edit(func(r [][]string) [][]string { return r[:len(r)-3] }), nil, 1,
			[]string{"3 workers have exams but no row in the outcomes table", "(--missing healthy)"}},
		{"no one diagnosed", edit(func(r [][]string) [][]string {
			for _, x := range r[1:] {
				x[1], x[2] = "no", ""
			}
			return r
		}), nil, 1, []string{"no worker in the outcomes table was diagnosed"}},
		{"everyone diagnosed", edit(func(r [][]string) [][]string {
			for _, x := range r[1:] {
				x[1], x[2] = "yes", "70"
			}
			return r
		}), nil, 1, []string{"every worker was diagnosed"}},
		{"no such column", good, []string{"--diagnosed", "dx"}, 1, []string{"--diagnosed:", `"dx"`}},
		{"bad missing", good, []string{"--missing", "maybe"}, 2, []string{"--missing must be error or healthy"}},
		{"bad targets", good, []string{"--targets", "5,ten"}, 2, []string{`--targets: targets must be a list of years`, `not "5,ten"`}},
		{"limit", good, []string{"--limit", "3"}, 2, []string{"not --limit"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := writeFile(t, filepath.Join(dir, "outcomes.csv"), csvText(tc.rows))
			code, stdout, stderr := cli(evaluateArgs(f, path, tc.extra...)...)
			if code != tc.code || stdout != "" {
				t.Errorf("exit %d, stdout %q; want exit %d and nothing written", code, stdout, tc.code)
			}
			for _, w := range tc.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
		})
	}
	// Missing workers taken as never diagnosed.
	path := writeFile(t, filepath.Join(dir, "outcomes.csv"), csvText(good[:len(good)-3]))
	code, stdout, stderr := cli(evaluateArgs(f, path, "--missing", "healthy")...)
	if code != 0 || stdout == "" || !strings.Contains(stderr, "(3 of them with no outcome row)") {
		t.Errorf("--missing healthy: exit %d: %s", code, stderr)
	}
}

// TestCLIReportOutcomes: veer report --outcomes adds the evaluation section
// and says it in words; the evaluation needs a target, not a limit.
func TestCLIReportOutcomes(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	outCSV := writeFile(t, filepath.Join(dir, "outcomes.csv"), csvText(outcomesOf(f.work)))
	rep := filepath.Join(dir, "report.html")
	args := []string{"report", "--model", f.model, "--in", f.workCSV, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group",
		"--outcomes", outCSV, "--targets", "5,50", "--out", rep}
	code, _, stderr := cli(append(args, "--target", "20")...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	b, err := os.ReadFile(rep)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"Evaluation on later diagnoses", `class="chart tradeoff"`, "At a 20-year target, of "} {
		if !strings.Contains(string(b), want) {
			t.Errorf("the report lacks %q", want)
		}
	}
	if !strings.Contains(stderr, "baseline centile > 97.5:") || !strings.Contains(stderr, "report written to") {
		t.Errorf("stderr: %s", stderr)
	}
	if code, _, stderr := cli(append(args, "--limit", "3")...); code != 2 || !strings.Contains(stderr, "give --target") {
		t.Errorf("--outcomes with --limit: exit %d: %s", code, stderr)
	}
}
