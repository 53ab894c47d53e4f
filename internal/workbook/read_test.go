package workbook

import (
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"
)

// readFixture writes a workbook exercising what ReadSheet must handle.
func readFixture(t *testing.T, dir string) string {
	t.Helper()
	f := excelize.NewFile()
	defer f.Close()
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	must(f.SetSheetName("Sheet1", "Exams"))
	for _, s := range []string{"Empty", "Other"} {
		_, err := f.NewSheet(s)
		must(err)
	}
	// Row 1 is blank; the header is on row 2, with spaces to trim.
	must(f.SetSheetRow("Exams", "A2", &[]any{" worker ", "age", "sbp", "note"}))
	// A number shown with no decimals is still read in full.
	whole, err := f.NewStyle(&excelize.Style{NumFmt: 1})
	must(err)
	must(f.SetSheetRow("Exams", "A3", &[]any{"007", 37.01, 120, "1e3"}))
	must(f.SetCellStyle("Exams", "B3", "B3", whole))
	// Stored numbers written with 17 digits or an exponent.
	must(f.SetCellValue("Exams", "A4", "W2"))
	must(f.SetCellDefault("Exams", "B4", "3.7009999999999998E1"))
	must(f.SetCellDefault("Exams", "C4", "0.30000000000000004"))
	must(f.SetCellValue("Exams", "D4", true))
	// A blank row is skipped; a short row is padded; a cell beyond the
	// header is ignored.
	must(f.SetSheetRow("Exams", "A6", &[]any{"W3", 1e-7}))
	must(f.SetCellValue("Exams", "F6", "beyond the header"))
	must(f.SetCellFormula("Exams", "C6", "1+1"))
	must(f.SetCellValue("Other", "A1", "x"))
	path := filepath.Join(dir, "read.xlsx")
	must(f.SaveAs(path))
	return path
}

func TestReadSheet(t *testing.T) {
	dir := t.TempDir()
	path := readFixture(t, dir)
	wantHeader := []string{"worker", "age", "sbp", "note"}
	wantRows := [][]string{
		{"007", "37.01", "120", "1e3"},
		{"W2", "37.01", "0.30000000000000004", "1"},
		{"W3", "1e-07", "", ""},
	}
	for _, sheet := range []string{"", "Exams", "exams", "EXAMS"} {
		tab, err := ReadSheet(path, sheet)
		if err != nil {
			t.Fatalf("sheet %q: %v", sheet, err)
		}
		if !reflect.DeepEqual(tab.Header, wantHeader) {
			t.Errorf("sheet %q: header %q, want %q", sheet, tab.Header, wantHeader)
		}
		if !reflect.DeepEqual(tab.Rows, wantRows) {
			t.Errorf("sheet %q: rows %q, want %q", sheet, tab.Rows, wantRows)
		}
	}
	// The table works with the CSV table's column helpers.
	tab, _ := ReadSheet(path, "")
	c, err := tab.Column("AGE")
	if err != nil {
		t.Fatal(err)
	}
	if ages, err := tab.Floats(c); err != nil || ages[0] != 37.01 {
		t.Errorf("ages %v, %v", ages, err)
	}
}

func TestReadSheetErrors(t *testing.T) {
	dir := t.TempDir()
	path := readFixture(t, dir)
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	cases := []struct {
		name, path, sheet, want string
	}{
		{"missing sheet", path, "Results", `has no sheet "Results"; its sheets are: "Exams", "Empty", "Other"`},
		{"empty sheet", path, "Empty", `sheet "Empty"`},
		{"missing file", filepath.Join(dir, "nope.xlsx"), "", "cannot find the workbook"},
		{"folder", dir, "", "is a folder"},
		{"empty file", write("zero.xlsx", nil), "", "is empty"},
		{"not a zip", write("text.xlsx", []byte("worker,age\nW1,30\n")), "", "not an .xlsx workbook"},
		{"csv", write("exams.csv", []byte("worker,age\n")), "", "read it as CSV"},
		{"ods", write("exams.ods", []byte("PK\x03\x04")), "", "OpenDocument"},
		{"xls", write("old.xls", []byte{0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1}), "", "old-format (.xls)"},
		{"broken zip", write("broken.xlsx", []byte("PK\x03\x04garbage")), "", "cannot be read"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ReadSheet(c.path, c.sheet)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want one containing %q", err, c.want)
			}
		})
	}
}

func TestSheetNames(t *testing.T) {
	path := readFixture(t, t.TempDir())
	got, err := SheetNames(path)
	if err != nil {
		t.Fatal(err)
	}
	if want := []string{"Exams", "Empty", "Other"}; !reflect.DeepEqual(got, want) {
		t.Errorf("sheets %q, want %q", got, want)
	}
}
