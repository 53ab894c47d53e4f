package main

import (
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"veer/examples"
	"veer/examples/workbooks"
	"veer/internal/flagged"
	"veer/internal/workbook"
	"veer/internal/workbook/workbooktest"
)

// reportCounts reads "N of M workers flagged" per section from a report's
// contents list, in section order.
func reportCounts(t *testing.T, path string) [][2]int {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var out [][2]int
	for _, m := range regexp.MustCompile(`</a>: (\d+) of (\d+) workers flagged</li>`).FindAllStringSubmatch(string(b), -1) {
		n, _ := strconv.Atoi(m[1])
		of, _ := strconv.Atoi(m[2])
		out = append(out, [2]int{n, of})
	}
	if !strings.Contains(string(b), "Workers flagged ("+flagged.Definition+")") {
		t.Errorf("%s: the flagged count is not labelled with what it counts", path)
	}
	return out
}

// summaryFlagged counts the workers marked flagged on a workbook's summary
// sheet and returns the sheet's text.
func summaryFlagged(t *testing.T, path string) (int, string) {
	t.Helper()
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := f.GetRows(workbook.DefaultSummarySheet, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	col := slices.Index(rows[0], "flagged")
	if col < 0 {
		t.Fatalf("the summary sheet has no flagged column: %q", rows[0])
	}
	n := 0
	var text []string
	for _, r := range rows {
		if len(r) > col && r[col] == "1" {
			n++
		}
		text = append(text, r...)
	}
	return n, strings.Join(text, "\n")
}

// TestScreenWorkbookCountsAgree screens the example workbook with veer
// screen, with a rule of severity high that flags workers the chart does
// not and a rule of severity medium that does not flag, and checks in one
// run that the terminal, the workbook's summary sheet and the report give
// the same number of flagged workers, each labelled with what it counts,
// and that the summary sheet holds numbers where numbers belong.
func TestScreenWorkbookCountsAgree(t *testing.T) {
	dir := t.TempDir()
	ref := writeFile(t, filepath.Join(dir, "reference.csv"), examples.ReferenceCSV())
	model := filepath.Join(dir, "sbp.json")
	if code, _, stderr := cli("fit", "--in", ref, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--name", "sbp", "--out", model); code != 0 {
		t.Fatalf("veer fit exited %d: %s", code, stderr)
	}
	book := writeFile(t, filepath.Join(dir, "book.xlsx"), workbooks.XLSX())
	rules := writeFile(t, filepath.Join(dir, "r.rules"), []byte(
		"over [high] = chart > limit\nfast_rise [HIGH] = has_previous && z - prev_z > 1.8\nhigh_z [medium] = z > 2.0\n"))
	rep := filepath.Join(dir, "r.html")
	code, _, stderr := cli("screen", "--model", model, "--in", book, "--sheet", workbooks.ExamsSheet, "--id", "worker", "--time", "age",
		"--value", "sbp", "--group", "group", "--target", "20", "--extrapolate", "--rules", rules,
		"--rule", "very_high [low]=centile > 99.5", "--report", rep, "--workers", "5")
	if code != 0 {
		t.Fatalf("veer screen exited %d: %s", code, stderr)
	}
	m := regexp.MustCompile(`(\d+) of (\d+) workers flagged \(` + regexp.QuoteMeta(flagged.Definition) + `\)`).FindStringSubmatch(stderr)
	if m == nil {
		t.Fatalf("the terminal gives no labelled flagged count:\n%s", stderr)
	}
	term, _ := strconv.Atoi(m[1])
	workers, _ := strconv.Atoi(m[2])
	sig := regexp.MustCompile(`(\d+) of \d+ workers with a chart signal`).FindStringSubmatch(stderr)
	if sig == nil {
		t.Fatalf("the terminal gives no labelled chart-signal count:\n%s", stderr)
	}
	signalled, _ := strconv.Atoi(sig[1])
	if !(term > signalled) {
		t.Fatalf("the rule of severity high should flag workers beyond the %d with a chart signal, flagged %d", signalled, term)
	}
	for _, want := range []string{"workers for whom rule fast_rise [HIGH] fired", "workers for whom rule high_z [medium] fired", "workers for whom rule very_high [low] fired"} {
		if !strings.Contains(stderr, want) {
			t.Errorf("the terminal lacks %q:\n%s", want, stderr)
		}
	}
	sheet, text := summaryFlagged(t, book)
	if sheet != term {
		t.Errorf("the workbook's summary marks %d workers flagged, the terminal says %d", sheet, term)
	}
	if want := fmt.Sprintf("%d of %d workers flagged (flagged: %s", term, workers, flagged.Definition); !strings.Contains(text, want) {
		t.Errorf("the summary sheet lacks %q", want)
	}
	rc := reportCounts(t, rep)
	if len(rc) != 1 || rc[0] != [2]int{term, workers} {
		t.Errorf("the report counts %v flagged workers, the terminal %d of %d", rc, term, workers)
	}
	b, _ := os.ReadFile(rep)
	if n := strings.Count(string(b), `<div class="panel"`); n != 5 {
		t.Errorf("--workers 5: %d panels", n)
	}
	workbooktest.SummaryNumbers(t, book, workbook.DefaultSummarySheet)
}

// TestDemoCountsAgree checks that the demo's target run, its report and its
// screened workbook count the same flagged workers per marker, that its
// comparison table leads with equal false-flag rates, and that the
// workbook's summary sheet holds numbers where numbers belong.
func TestDemoCountsAgree(t *testing.T) {
	d := demoOutput(t)
	out := d.stdout.String()
	if i, j := strings.Index(out, "At equal false-flag rates"), strings.Index(out, "The 20-year run"); i < 0 || j < 0 || i > j {
		t.Errorf("the demo's table should lead with equal false-flag rates, then the 20-year run:\n%s", out)
	}
	rows := parseDemoTable(t, out)
	var target []demoRowFigures
	for _, r := range rows {
		if r.method == "chart, 20-year target" {
			target = append(target, r)
		}
	}
	if len(target) != 2 {
		t.Fatalf("want one 20-year row per marker: %+v", rows)
	}
	for i, r := range rows {
		if r.method == "chart, 20-year target" {
			break
		}
		if !strings.HasPrefix(r.method, "any reading beyond") && !strings.HasPrefix(r.method, "chart at the cut-off's") {
			t.Errorf("row %d (%s) before the 20-year run is not a comparison at equal false-flag rates", i+1, r.method)
		}
	}
	rc := reportCounts(t, filepath.Join(d.dir, "report.html"))
	book := filepath.Join(d.dir, "screening.xlsx")
	_, text := summaryFlagged(t, book)
	for k, r := range target {
		if rc[k] != [2]int{r.flagged, r.workers} {
			t.Errorf("%s: the report counts %v flagged workers, the table %d of %d", r.marker, rc[k], r.flagged, r.workers)
		}
		name := strings.Fields(r.marker)[0]
		if want := fmt.Sprintf("%s: control limit h = ", name); !strings.Contains(text, want) {
			t.Errorf("the summary sheet lacks %q", want)
		}
		re := regexp.MustCompile(regexp.QuoteMeta(name) + `: control limit h = [0-9.]+; (\d+) of (\d+) workers flagged`)
		m := re.FindStringSubmatch(text)
		if m == nil || m[1] != strconv.Itoa(r.flagged) || m[2] != strconv.Itoa(r.workers) {
			t.Errorf("%s: the summary sheet says %v, the table %d of %d", name, m, r.flagged, r.workers)
		}
	}
	workbooktest.SummaryNumbers(t, book, workbook.DefaultSummarySheet)
}

// TestPanelChoice reads --workers: a count, all, none, or worker ids.
func TestPanelChoice(t *testing.T) {
	cases := []struct {
		in      string
		max     int
		ids     []string
		wantErr bool
	}{
		{"12", 12, nil, false},
		{"0", -1, nil, false},
		{"all", 1<<31 - 1, nil, false},
		{"W017,W102", 0, []string{"W017", "W102"}, false},
		{" W017 , W102 ,", 0, []string{"W017", "W102"}, false},
		{"W017", 0, []string{"W017"}, false},
		{"1234,", 0, []string{"1234"}, false},
		{"-3", 0, nil, true},
		{"", 0, nil, true},
		{",,", 0, nil, true},
	}
	for _, c := range cases {
		var p panelChoice
		err := p.set(c.in)
		if (err != nil) != c.wantErr {
			t.Errorf("--workers %q: error %v, want error %v", c.in, err, c.wantErr)
			continue
		}
		if err == nil && (p.max != c.max || !slices.Equal(p.ids, c.ids)) {
			t.Errorf("--workers %q: %d %q, want %d %q", c.in, p.max, p.ids, c.max, c.ids)
		}
	}
}

// TestRuleFlagSeverity reads --rule NAME [SEVERITY]=EXPRESSION.
func TestRuleFlagSeverity(t *testing.T) {
	cases := []struct {
		in, name, sev, expr string
		wantErr             bool
	}{
		{"over=chart > limit", "over", "", "chart > limit", false},
		{"over [high]=chart > limit", "over", "high", "chart > limit", false},
		{" over[ High ] = z > 2.0 == true", "over", "High", "z > 2.0 == true", false},
		{"over [high=chart > limit", "", "", "", true},
		{"over [high] x=chart > limit", "", "", "", true},
	}
	for _, c := range cases {
		var r ruleList
		err := r.Set(c.in)
		if (err != nil) != c.wantErr {
			t.Errorf("--rule %q: error %v, want error %v", c.in, err, c.wantErr)
			continue
		}
		if err == nil && (r[0].Name != c.name || r[0].Severity != c.sev || r[0].Expr != c.expr) {
			t.Errorf("--rule %q: %+v", c.in, r[0])
		}
	}
}

// TestReportWorkersUnknown: --workers naming a worker without exams fails
// with a message naming it, and writes no report.
func TestReportWorkersUnknown(t *testing.T) {
	f := fixture(t)
	out := filepath.Join(t.TempDir(), "r.html")
	code, _, stderr := cli("report", "--model", f.model, "--in", f.workCSV, "--id", "worker", "--time", "age", "--value", "sbp",
		"--group", "group", "--target", "20", "--out", out, "--workers", "W00001,nobody")
	if code != 1 || !strings.Contains(stderr, `worker "nobody" has no exams`) {
		t.Errorf("exit %d, stderr %q", code, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("a report was written")
	}
}
