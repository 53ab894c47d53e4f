package workbook

import (
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/xuri/excelize/v2"

	"veer/examples/scenario"
	"veer/functions/screening"
)

// bigWorkbook writes a workbook with n exam rows of a generated workforce
// (the demo scenario with more workers) on sheet "Exams".
func bigWorkbook(b *testing.B, dir string, n int) string {
	b.Helper()
	cfg := scenario.DefaultConfig()
	cfg.WorkforceWorkers = n/6 + 500
	cfg.ReferenceWorkers = 1
	s, err := scenario.Generate(cfg)
	if err != nil {
		b.Fatal(err)
	}
	if len(s.Workforce) < n {
		b.Fatalf("only %d exams generated", len(s.Workforce))
	}
	f := excelize.NewFile()
	defer f.Close()
	if err := f.SetSheetName("Sheet1", "Exams"); err != nil {
		b.Fatal(err)
	}
	sw, err := f.NewStreamWriter("Exams")
	if err != nil {
		b.Fatal(err)
	}
	if err := sw.SetRow("A1", []any{"worker", "group", "age", "sbp", "fev1"}); err != nil {
		b.Fatal(err)
	}
	for i, e := range s.Workforce[:n] {
		if err := sw.SetRow(cell(1, i+2), []any{e.Worker, e.Group, e.Age, e.SBP, e.FEV1}); err != nil {
			b.Fatal(err)
		}
	}
	if err := sw.Flush(); err != nil {
		b.Fatal(err)
	}
	p := filepath.Join(dir, "big.xlsx")
	if err := f.SaveAs(p); err != nil {
		b.Fatal(err)
	}
	return p
}

func copyFile(b *testing.B, from, to string) {
	b.Helper()
	src, err := os.Open(from)
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	dst, err := os.Create(to)
	if err != nil {
		b.Fatal(err)
	}
	if _, err := io.Copy(dst, src); err != nil {
		b.Fatal(err)
	}
	if err := dst.Close(); err != nil {
		b.Fatal(err)
	}
}

// BenchmarkRefresh100k times a whole workbook refresh of 100,000 exam rows:
// read the sheet, compute the limit for a 20-year target, screen, evaluate
// one alert rule and write the results and summary sheets (the model is
// fitted once on examples/data/reference.csv beforehand). Target: <= 10 s.
func BenchmarkRefresh100k(b *testing.B) {
	const n = 100000
	dir := b.TempDir()
	orig := bigWorkbook(b, dir, n)
	m := sbpModel(b)
	path := filepath.Join(dir, "work.xlsx")
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		b.StopTimer()
		copyFile(b, orig, path)
		b.StartTimer()
		in, err := ReadSheet(path, "Exams")
		if err != nil {
			b.Fatal(err)
		}
		ex, err := examsFrom(in, "sbp")
		if err != nil {
			b.Fatal(err)
		}
		set := settings()
		lim, err := m.Limit(set, screening.LimitOptions{}, 20)
		if err != nil {
			b.Fatal(err)
		}
		res, err := m.Screen(ex, set, lim.H)
		if err != nil {
			b.Fatal(err)
		}
		fired := evalRule(b, "chart > limit || centile > 99.0", ex, res, lim.H)
		err = Refresh(path, RefreshOptions{}, ResultsData{Input: in, Markers: []MarkerResults{{
			Name: "sbp", Exams: ex, Results: res, Limit: lim.H, Rules: []RuleColumn{{Name: "alert", Fired: fired}},
		}}})
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(n), "rows")
}
