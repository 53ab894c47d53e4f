package workbook

import (
	"bytes"
	"context"
	"path/filepath"
	"strconv"
	"sync"
	"testing"

	"github.com/xuri/excelize/v2"

	"veer/examples"
	"veer/functions/refcurve"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/internal/table"
)

var (
	modelOnce sync.Once
	modelVal  *screening.Model
	modelErr  error
)

// sbpModel fits the SBP screening model on the committed reference cohort,
// once per test binary.
func sbpModel(t testing.TB) *screening.Model {
	t.Helper()
	modelOnce.Do(func() {
		ref, err := table.Read(bytes.NewReader(examples.ReferenceCSV()))
		if err != nil {
			modelErr = err
			return
		}
		ex, err := examsFrom(ref, "sbp")
		if err != nil {
			modelErr = err
			return
		}
		rows := make([]refcurve.Row, len(ex))
		for i, e := range ex {
			rows[i] = refcurve.Row{Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value}
		}
		modelVal, modelErr = screening.Fit(context.Background(), rows, screening.FitOptions{Name: "sbp"})
	})
	if modelErr != nil {
		t.Fatal(modelErr)
	}
	return modelVal
}

// examsFrom turns a worker,group,age,<marker> table into exams.
func examsFrom(t *table.Table, marker string) ([]screening.Exam, error) {
	wc, err := t.Column("worker")
	if err != nil {
		return nil, err
	}
	gc, err := t.Column("group")
	if err != nil {
		return nil, err
	}
	ac, err := t.Column("age")
	if err != nil {
		return nil, err
	}
	vc, err := t.Column(marker)
	if err != nil {
		return nil, err
	}
	ages, err := t.Floats(ac)
	if err != nil {
		return nil, err
	}
	vals, err := t.Floats(vc)
	if err != nil {
		return nil, err
	}
	ids, groups := t.Strings(wc), t.Strings(gc)
	out := make([]screening.Exam, len(ages))
	for i := range out {
		out[i] = screening.Exam{Worker: ids[i], Group: groups[i], Time: ages[i], Value: vals[i]}
	}
	return out, nil
}

func settings() screening.Settings {
	s := screening.DefaultSettings()
	s.Extrapolate = screening.DefaultExtrapolation
	return s
}

// screenTable screens the SBP column of an exams table and evaluates one
// alert rule, as veer screen does.
func screenTable(t testing.TB, in *table.Table) ResultsData {
	t.Helper()
	m := sbpModel(t)
	set := settings()
	lim, err := m.Limit(set, screening.LimitOptions{}, 20)
	if err != nil {
		t.Fatal(err)
	}
	ex, err := examsFrom(in, "sbp")
	if err != nil {
		t.Fatal(err)
	}
	res, err := m.Screen(ex, set, lim.H)
	if err != nil {
		t.Fatal(err)
	}
	fired := evalRule(t, "centile > 99.0", ex, res, lim.H)
	return ResultsData{Input: in, Markers: []MarkerResults{{
		Name: "sbp", Exams: ex, Results: res, Limit: lim.H,
		Rules: []RuleColumn{{Name: "very high", Fired: fired}},
	}}}
}

func evalRule(t testing.TB, expr string, exams []screening.Exam, res []screening.Result, h float64) []bool {
	t.Helper()
	r, err := rules.Compile(expr, rules.Bool)
	if err != nil {
		t.Fatal(err)
	}
	re, err := screening.RuleExams(exams, res, h)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]rules.Value, len(re))
	if err := rules.EvalAll(context.Background(), r, re, out); err != nil {
		t.Fatal(err)
	}
	fired := make([]bool, len(out))
	for i, v := range out {
		fired[i], _ = v.Bool()
	}
	return fired
}

// workforceRows returns the first n data rows of the committed workforce.
func workforceRows(t testing.TB, n int) *table.Table {
	t.Helper()
	wf, err := table.Read(bytes.NewReader(examples.WorkforceCSV()))
	if err != nil {
		t.Fatal(err)
	}
	if n < len(wf.Rows) {
		wf.Rows = wf.Rows[:n]
	}
	return wf
}

func cell(c, r int) string {
	s, err := excelize.CoordinatesToCellName(c, r)
	if err != nil {
		panic(err)
	}
	return s
}

// writeExamsSheet writes a table into a sheet, numbers as numbers.
func writeExamsSheet(t testing.TB, f *excelize.File, sheet string, in *table.Table) {
	t.Helper()
	for c, h := range in.Header {
		if err := f.SetCellValue(sheet, cell(c+1, 1), h); err != nil {
			t.Fatal(err)
		}
	}
	for i, row := range in.Rows {
		vals := make([]any, len(row))
		for c, s := range row {
			if x, err := strconv.ParseFloat(s, 64); err == nil {
				vals[c] = x
			} else {
				vals[c] = s
			}
		}
		if err := f.SetSheetRow(sheet, cell(1, i+2), &vals); err != nil {
			t.Fatal(err)
		}
	}
}

// userWorkbook writes an officer's workbook: a cover sheet with merged,
// styled cells and formulas, the exams, and a budget sheet with formulas
// over the exams, a defined name and column widths. It returns its path.
func userWorkbook(t testing.TB, dir string, in *table.Table) string {
	t.Helper()
	f := excelize.NewFile()
	defer f.Close()
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	must(f.SetSheetName("Sheet1", "Cover"))
	_, err := f.NewSheet("Exams")
	must(err)
	_, err = f.NewSheet("Budget")
	must(err)
	n := strconv.Itoa(len(in.Rows) + 1)
	title, err := f.NewStyle(&excelize.Style{Font: &excelize.Font{Bold: true, Size: 16, Color: "1F4E79"},
		Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"FFF2CC"}}, Alignment: &excelize.Alignment{Horizontal: "center"}})
	must(err)
	pct, err := f.NewStyle(&excelize.Style{NumFmt: 10})
	must(err)
	money, err := f.NewStyle(&excelize.Style{CustomNumFmt: ptr(`#,##0.00 "EUR"`), Border: []excelize.Border{{Type: "bottom", Color: "000000", Style: 1}}})
	must(err)
	must(f.SetCellValue("Cover", "A1", "Occupational health — periodic exams"))
	must(f.MergeCell("Cover", "A1", "D1"))
	must(f.SetCellStyle("Cover", "A1", "D1", title))
	must(f.SetCellValue("Cover", "A3", "exams"))
	must(f.SetCellFormula("Cover", "B3", "COUNTA(Exams!A2:A"+n+")"))
	must(f.SetCellValue("Cover", "A4", "mean SBP"))
	must(f.SetCellFormula("Cover", "B4", "AVERAGE(Exams!D2:D"+n+")"))
	must(f.SetCellValue("Cover", "A5", "share tower"))
	must(f.SetCellFormula("Cover", "B5", `COUNTIF(Exams!B2:B`+n+`,"tower")/B3`))
	must(f.SetCellStyle("Cover", "B5", "B5", pct))
	must(f.SetColWidth("Cover", "A", "A", 24))
	must(f.MergeCell("Cover", "A7", "C9"))
	must(f.SetCellValue("Cover", "A7", "Notes kept by the officer; merged block."))
	writeExamsSheet(t, f, "Exams", in)
	must(f.SetCellValue("Budget", "A1", "item"))
	must(f.SetCellValue("Budget", "B1", "cost"))
	for i, it := range []string{"spirometer", "cuffs", "clinic hours"} {
		must(f.SetCellValue("Budget", cell(1, i+2), it))
		must(f.SetCellValue("Budget", cell(2, i+2), float64(100*(i+1))+0.5))
		must(f.SetCellStyle("Budget", cell(2, i+2), cell(2, i+2), money))
	}
	must(f.SetCellFormula("Budget", "B5", "SUM(B2:B4)"))
	must(f.SetCellStyle("Budget", "B5", "B5", money))
	must(f.SetCellFormula("Budget", "C2", "B2/$B$5"))
	must(f.SetCellFormula("Budget", "C3", "B3/$B$5"))
	must(f.SetDefinedName(&excelize.DefinedName{Name: "total_cost", RefersTo: "Budget!$B$5"}))
	must(f.SetColWidth("Budget", "A", "A", 18))
	f.SetActiveSheet(1)
	path := filepath.Join(dir, "exams.xlsx")
	must(f.SaveAs(path))
	return path
}

func ptr[T any](v T) *T { return &v }
