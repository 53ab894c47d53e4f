// Package workbooktest checks, in tests, what veer writes into a workbook
// by reading it back with the types a spreadsheet program sees.
package workbooktest

import (
	"archive/zip"
	"html"
	"io"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"
)

// SummaryNumbers checks the summary sheet of a screened workbook: the
// columns headed "(age)" or "years" hold number cells (never text such as
// "{5 20.41}") with the two-decimal format, or blanks, at least one a
// number; and each series of the workbook's bar charts refers to a range of
// that sheet that holds numbers and no text.
func SummaryNumbers(t testing.TB, path, sheet string) {
	t.Helper()
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := f.GetRows(sheet, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) == 0 {
		t.Fatalf("%s: the sheet %q is empty", path, sheet)
	}
	numeric := 0
	for c, h := range rows[0] {
		if !strings.Contains(h, "(age)") && !strings.Contains(h, "years") {
			continue
		}
		for r := 2; r <= len(rows); r++ {
			ref := cell(c+1, r)
			v, ok := number(t, f, sheet, ref)
			if !ok {
				continue
			}
			if math.IsNaN(v) {
				t.Fatalf("%s!%s (%s) is not a number cell", sheet, ref, h)
			}
			st, err := f.GetCellStyle(sheet, ref)
			if err != nil {
				t.Fatal(err)
			}
			if s, err := f.GetStyle(st); err != nil || s.CustomNumFmt == nil || *s.CustomNumFmt != "0.00" {
				t.Fatalf("%s!%s (%s): number format %v, want 0.00 (%v)", sheet, ref, h, s, err)
			}
			numeric++
		}
	}
	if numeric == 0 {
		t.Fatalf("%s: no number in the age and years columns", sheet)
	}
	re := regexp.MustCompile(`<(?:c:)?val><(?:c:)?numRef><(?:c:)?f>([^<]+)</`)
	ranges := 0
	for name, b := range zipParts(t, path) {
		if !strings.HasPrefix(name, "xl/charts/chart") {
			continue
		}
		for _, m := range re.FindAllSubmatch(b, -1) {
			ranges++
			rangeNumbers(t, f, sheet, html.UnescapeString(string(m[1])))
		}
	}
	if ranges == 0 {
		t.Fatal("no chart series refers to a range of numbers")
	}
}

// number reads a cell: ok false for a blank; NaN when it is not a number
// cell holding a number.
func number(t testing.TB, f *excelize.File, sheet, ref string) (float64, bool) {
	t.Helper()
	v, err := f.GetCellValue(sheet, ref, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	if v == "" {
		return 0, false
	}
	typ, err := f.GetCellType(sheet, ref)
	if err != nil {
		t.Fatal(err)
	}
	x, err := strconv.ParseFloat(v, 64)
	if err != nil || (typ != excelize.CellTypeUnset && typ != excelize.CellTypeNumber) {
		t.Logf("%s!%s holds %q as cell type %d", sheet, ref, v, typ)
		return math.NaN(), true
	}
	return x, true
}

// rangeNumbers checks that a chart's source range such as
// 'veer summary'!$G$2:$G$41 is on sheet and holds numbers, no text.
func rangeNumbers(t testing.TB, f *excelize.File, sheet, ref string) {
	t.Helper()
	bang := strings.LastIndex(ref, "!")
	if bang < 0 {
		t.Fatalf("chart range %q names no sheet", ref)
	}
	if name := strings.ReplaceAll(strings.Trim(ref[:bang], "'"), "''", "'"); name != sheet {
		t.Fatalf("chart range %q is not on the sheet %q", ref, sheet)
	}
	from, to, ok := strings.Cut(strings.ReplaceAll(ref[bang+1:], "$", ""), ":")
	if !ok {
		t.Fatalf("chart range %q is not a range", ref)
	}
	c1, r1, err1 := excelize.CellNameToCoordinates(from)
	c2, r2, err2 := excelize.CellNameToCoordinates(to)
	if err1 != nil || err2 != nil || c1 != c2 {
		t.Fatalf("chart range %q is not one column", ref)
	}
	nums := 0
	for r := r1; r <= r2; r++ {
		v, ok := number(t, f, sheet, cell(c1, r))
		if !ok {
			continue
		}
		if math.IsNaN(v) {
			t.Fatalf("chart range %q: %s is not a number cell", ref, cell(c1, r))
		}
		nums++
	}
	if nums == 0 {
		t.Fatalf("chart range %q holds no number: the chart has nothing to draw", ref)
	}
}

func cell(c, r int) string {
	s, err := excelize.CoordinatesToCellName(c, r)
	if err != nil {
		panic(err)
	}
	return s
}

func zipParts(t testing.TB, path string) map[string][]byte {
	t.Helper()
	zr, err := zip.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer zr.Close()
	out := map[string][]byte{}
	for _, f := range zr.File {
		rc, err := f.Open()
		if err != nil {
			t.Fatal(err)
		}
		b, err := io.ReadAll(rc)
		rc.Close()
		if err != nil {
			t.Fatal(err)
		}
		out[f.Name] = b
	}
	return out
}
