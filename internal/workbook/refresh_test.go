package workbook

import (
	"archive/zip"
	"bytes"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"veer/functions/screening"
	"veer/internal/flagged"
)

type cellSnap struct {
	Value, Formula string
	Style          int
}

type sheetSnap struct {
	Cells  map[string]cellSnap
	Merged []string
	Widths []float64
	Styles map[int]*excelize.Style
}

// snapshot records every cell value, formula and style (id and definition),
// merged range and column width of the named sheets.
func snapshot(t *testing.T, path string, sheets []string) (map[string]sheetSnap, []excelize.DefinedName) {
	t.Helper()
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	out := map[string]sheetSnap{}
	for _, s := range sheets {
		rows, err := f.GetRows(s, excelize.Options{RawCellValue: true})
		if err != nil {
			t.Fatal(err)
		}
		maxCol := 0
		for _, r := range rows {
			maxCol = max(maxCol, len(r))
		}
		snap := sheetSnap{Cells: map[string]cellSnap{}, Styles: map[int]*excelize.Style{}}
		for r := 1; r <= len(rows)+3; r++ {
			for c := 1; c <= maxCol+3; c++ {
				ref := cell(c, r)
				v, err := f.GetCellValue(s, ref, excelize.Options{RawCellValue: true})
				if err != nil {
					t.Fatal(err)
				}
				fo, err := f.GetCellFormula(s, ref)
				if err != nil {
					t.Fatal(err)
				}
				st, err := f.GetCellStyle(s, ref)
				if err != nil {
					t.Fatal(err)
				}
				snap.Cells[ref] = cellSnap{v, fo, st}
				if _, ok := snap.Styles[st]; !ok {
					if snap.Styles[st], err = f.GetStyle(st); err != nil {
						t.Fatal(err)
					}
				}
			}
		}
		mc, err := f.GetMergeCells(s)
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range mc {
			snap.Merged = append(snap.Merged, m.GetStartAxis()+":"+m.GetEndAxis()+"="+m.GetCellValue())
		}
		for c := 1; c <= maxCol+1; c++ {
			w, err := f.GetColWidth(s, colName(c))
			if err != nil {
				t.Fatal(err)
			}
			snap.Widths = append(snap.Widths, w)
		}
		out[s] = snap
	}
	return out, f.GetDefinedName()
}

// zipParts returns the parts of a zip package.
func zipParts(t *testing.T, path string) map[string][]byte {
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

func readAll(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestRefreshKeepsOtherSheets refreshes a workbook twice and checks, cell by
// cell, that the officer's own sheets keep every value, formula and style,
// their merged cells, widths and defined names, and even their stored XML.
func TestRefreshKeepsOtherSheets(t *testing.T) {
	dir := t.TempDir()
	path := userWorkbook(t, dir, workforceRows(t, 600))
	user := []string{"Cover", "Exams", "Budget"}
	before, namesBefore := snapshot(t, path, user)
	partsBefore := zipParts(t, path)

	in, err := ReadSheet(path, "Exams")
	if err != nil {
		t.Fatal(err)
	}
	data := screenTable(t, in)
	for round := 1; round <= 3; round++ {
		prev := readAll(t, path)
		if err := Refresh(path, RefreshOptions{}, data); err != nil {
			t.Fatalf("refresh %d: %v", round, err)
		}
		if got := readAll(t, BackupPath(path)); !bytes.Equal(got, prev) {
			t.Fatalf("refresh %d: the backup is not the previous workbook", round)
		}
		names, err := SheetNames(path)
		if err != nil {
			t.Fatal(err)
		}
		if want := []string{"Cover", "Exams", "Budget", DefaultResultsSheet, DefaultSummarySheet}; !reflect.DeepEqual(names, want) {
			t.Fatalf("refresh %d: sheets %q, want %q", round, names, want)
		}
		after, namesAfter := snapshot(t, path, user)
		for _, s := range user {
			b, a := before[s], after[s]
			for ref, cb := range b.Cells {
				if ca := a.Cells[ref]; ca != cb {
					t.Errorf("refresh %d: %s!%s changed from %+v to %+v", round, s, ref, cb, ca)
				}
			}
			if !reflect.DeepEqual(a.Merged, b.Merged) {
				t.Errorf("refresh %d: %s merged cells %v, want %v", round, s, a.Merged, b.Merged)
			}
			if !reflect.DeepEqual(a.Widths, b.Widths) {
				t.Errorf("refresh %d: %s column widths %v, want %v", round, s, a.Widths, b.Widths)
			}
			if !reflect.DeepEqual(a.Styles, b.Styles) {
				t.Errorf("refresh %d: %s style definitions changed", round, s)
			}
		}
		// Names scoped to veer's own sheets (their filters) are veer's.
		var kept []excelize.DefinedName
		for _, dn := range namesAfter {
			if dn.Scope != DefaultResultsSheet && dn.Scope != DefaultSummarySheet {
				kept = append(kept, dn)
			}
		}
		namesAfter = kept
		if !reflect.DeepEqual(namesAfter, namesBefore) {
			t.Errorf("refresh %d: defined names %+v, want %+v", round, namesAfter, namesBefore)
		}
		partsAfter := zipParts(t, path)
		// One chart, however often the workbook is refreshed, and every
		// content-type override names a part that exists.
		charts := 0
		for p := range partsAfter {
			if strings.HasPrefix(p, "xl/charts/") || strings.HasPrefix(p, "xl/drawings/drawing") {
				charts++
			}
		}
		if charts != 2 {
			t.Errorf("refresh %d: %d chart and drawing parts, want 1 of each", round, charts)
		}
		for _, m := range regexp.MustCompile(`PartName="/([^"]+)"`).FindAllSubmatch(partsAfter["[Content_Types].xml"], -1) {
			if _, ok := partsAfter[string(m[1])]; !ok {
				t.Errorf("refresh %d: content types list the missing part %s", round, m[1])
			}
		}
		for _, p := range []string{"xl/worksheets/sheet1.xml", "xl/worksheets/sheet2.xml", "xl/worksheets/sheet3.xml", "xl/theme/theme1.xml"} {
			if !bytes.Equal(partsAfter[p], partsBefore[p]) {
				t.Errorf("refresh %d: stored part %s of an untouched sheet changed", round, p)
			}
		}
	}
	checkResults(t, path, data)
	// No temporary files are left behind.
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if strings.Contains(e.Name(), ".tmp") {
			t.Errorf("temporary file %s left behind", e.Name())
		}
	}
}

// checkResults reads the written sheets back and compares them with the data.
func checkResults(t *testing.T, path string, data ResultsData) {
	t.Helper()
	f, err := excelize.OpenFile(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := f.GetRows(DefaultResultsSheet, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	m := data.Markers[0]
	wantHeader := append(append([]string{}, data.Input.Header...), "sbp z", "sbp centile", "sbp chart", "sbp limit", "sbp signal", "sbp first signal", "sbp very high")
	if !reflect.DeepEqual(rows[0], wantHeader) {
		t.Fatalf("results header %q, want %q", rows[0], wantHeader)
	}
	if len(rows) != len(data.Input.Rows)+1 {
		t.Fatalf("results have %d rows, want %d", len(rows)-1, len(data.Input.Rows))
	}
	nin := len(data.Input.Header)
	signals := 0
	for i, r := range m.Results {
		row := rows[i+1]
		for c := 0; c < nin; c++ {
			if row[c] != data.Input.Rows[i][c] {
				t.Fatalf("row %d column %q: %q, want the input's %q", i+2, data.Input.Header[c], row[c], data.Input.Rows[i][c])
			}
		}
		num := func(c int) float64 {
			x, err := strconv.ParseFloat(row[c], 64)
			if err != nil {
				t.Fatalf("row %d column %d: %q is not a number", i+2, c+1, row[c])
			}
			return x
		}
		if z := num(nin); math.Abs(z-r.Z) > 1e-12*math.Max(1, math.Abs(r.Z)) {
			t.Fatalf("row %d: z %v, want %v", i+2, z, r.Z)
		}
		if s := num(nin + 2); math.Abs(s-r.Stat) > 1e-12*math.Max(1, s) {
			t.Fatalf("row %d: chart %v, want %v", i+2, s, r.Stat)
		}
		// Numbers are stored with 15 significant digits, as spreadsheets keep them.
		if h := num(nin + 3); math.Abs(h-m.Limit) > 1e-14*m.Limit {
			t.Fatalf("row %d: limit %v, want %v", i+2, h, m.Limit)
		}
		wantSig := "0"
		if r.Signal {
			wantSig = "1"
			signals++
		}
		if row[nin+4] != wantSig {
			t.Fatalf("row %d: signal %q, want %q", i+2, row[nin+4], wantSig)
		}
	}
	if signals == 0 {
		t.Fatal("the test data should have signals")
	}
	cf, err := f.GetConditionalFormats(DefaultResultsSheet)
	if err != nil || len(cf) == 0 {
		t.Errorf("results sheet has no conditional highlighting (%v)", err)
	}
	cf, err = f.GetConditionalFormats(DefaultSummarySheet)
	if err != nil || len(cf) == 0 {
		t.Errorf("summary sheet has no conditional highlighting (%v)", err)
	}
	// Summary: one row per worker, flagged first.
	srows, err := f.GetRows(DefaultSummarySheet, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	workers := map[string]bool{}
	isFlagged := map[string]bool{}
	for i, e := range m.Exams {
		workers[e.Worker] = true
		// A rule of severity high flags as a signal does (package flagged).
		if m.Results[i].Signal || (flagged.Flags(m.Rules[0].Severity) && m.Rules[0].Fired[i]) {
			isFlagged[e.Worker] = true
		}
	}
	flagCol := -1
	for c, h := range srows[0] {
		if h == "flagged" {
			flagCol = c
		}
	}
	n, seenUnflagged := 0, false
	for _, r := range srows[1:] {
		if len(r) == 0 || r[0] == "" {
			continue
		}
		if !workers[r[0]] {
			continue // notes beside the table are in other columns
		}
		n++
		isF := r[flagCol] == "1"
		if isF != isFlagged[r[0]] {
			t.Errorf("summary: worker %s flagged=%v, want %v", r[0], isF, isFlagged[r[0]])
		}
		if isF && seenUnflagged {
			t.Errorf("summary: flagged worker %s listed after unflagged ones", r[0])
		}
		seenUnflagged = seenUnflagged || !isF
	}
	if n != len(workers) {
		t.Errorf("summary lists %d workers, want %d", n, len(workers))
	}
	// A native chart is present.
	parts := zipParts(t, path)
	charts := 0
	for p := range parts {
		if strings.HasPrefix(p, "xl/charts/chart") {
			charts++
		}
	}
	if charts == 0 {
		t.Error("no chart part in the refreshed workbook")
	}
	if !strings.Contains(strings.Join(flatten(srows), "\n"), screening.Caution) {
		t.Error("summary sheet lacks the screening-aid caution")
	}
}

func flatten(rows [][]string) []string {
	var out []string
	for _, r := range rows {
		out = append(out, r...)
	}
	return out
}

// TestRefreshRefused checks that a workbook open elsewhere, read-only or
// missing is refused before anything is written.
func TestRefreshRefused(t *testing.T) {
	in := workforceRows(t, 200)
	cases := []struct {
		name    string
		prepare func(t *testing.T, path string)
		want    string
	}{
		{"LibreOffice lock", func(t *testing.T, path string) {
			os.WriteFile(filepath.Join(filepath.Dir(path), ".~lock."+filepath.Base(path)+"#"), []byte("user,host"), 0o644)
		}, "open in a spreadsheet program"},
		{"Excel owner file", func(t *testing.T, path string) {
			os.WriteFile(filepath.Join(filepath.Dir(path), "~$"+filepath.Base(path)), []byte{0}, 0o644)
		}, "open in a spreadsheet program"},
		{"read-only", func(t *testing.T, path string) { os.Chmod(path, 0o444) }, "read-only"},
		{"missing", func(t *testing.T, path string) { os.Remove(path) }, "cannot find"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			path := userWorkbook(t, dir, in)
			tab, err := ReadSheet(path, "Exams")
			if err != nil {
				t.Fatal(err)
			}
			data := screenTable(t, tab)
			orig := readAll(t, path)
			c.prepare(t, path)
			listBefore, _ := os.ReadDir(dir)
			err = Refresh(path, RefreshOptions{}, data)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want one saying %q", err, c.want)
			}
			if c.name != "missing" {
				if got := readAll(t, path); !bytes.Equal(got, orig) {
					t.Error("the workbook changed")
				}
			}
			listAfter, _ := os.ReadDir(dir)
			if len(listAfter) != len(listBefore) {
				t.Errorf("files in the folder changed from %d to %d: something was written", len(listBefore), len(listAfter))
			}
		})
	}
}

func TestRefreshInvalidData(t *testing.T) {
	dir := t.TempDir()
	in := workforceRows(t, 100)
	path := userWorkbook(t, dir, in)
	good := screenTable(t, in)
	short := good
	short.Markers = []MarkerResults{good.Markers[0]}
	short.Markers[0].Results = short.Markers[0].Results[:5]
	twice := good
	twice.Markers = []MarkerResults{good.Markers[0], good.Markers[0]}
	badRule := good
	badRule.Markers = []MarkerResults{good.Markers[0]}
	badRule.Markers[0].Rules = []RuleColumn{{Name: "r", Fired: []bool{true}}}
	cases := []struct {
		name string
		opt  RefreshOptions
		d    ResultsData
		want string
	}{
		{"no input", RefreshOptions{}, ResultsData{Markers: good.Markers}, "no input"},
		{"no markers", RefreshOptions{}, ResultsData{Input: in}, "no screening results"},
		{"short results", RefreshOptions{}, short, "screen every input row"},
		{"same marker twice", RefreshOptions{}, twice, "both called"},
		{"rule length", RefreshOptions{}, badRule, `rule "r"`},
		{"same sheet names", RefreshOptions{ResultsSheet: "x", SummarySheet: "X"}, good, "different names"},
		{"bad sheet name", RefreshOptions{ResultsSheet: "a/b"}, good, "cannot be a sheet name"},
	}
	orig := readAll(t, path)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := Refresh(path, c.opt, c.d)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want one saying %q", err, c.want)
			}
			if !bytes.Equal(readAll(t, path), orig) {
				t.Fatal("the workbook changed")
			}
		})
	}
}

func TestBackupPath(t *testing.T) {
	cases := []struct{ in, want string }{
		{"/a/screening.xlsx", "/a/screening.bak.xlsx"},
		{"book.xlsm", "book.bak.xlsm"},
		{"noext", "noext.bak"},
	}
	for _, c := range cases {
		if got := BackupPath(c.in); got != c.want {
			t.Errorf("BackupPath(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}
