package workbook

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/xuri/excelize/v2"
)

// FuzzReadSheet feeds arbitrary bytes to ReadSheet as a workbook file: it
// must return a table or an error, never panic, and a table it returns must
// be rectangular.
func FuzzReadSheet(f *testing.F) {
	wb := excelize.NewFile()
	_ = wb.SetSheetRow("Sheet1", "A1", &[]any{"worker", "age", "sbp"})
	_ = wb.SetSheetRow("Sheet1", "A2", &[]any{"W1", 30.5, 120})
	_ = wb.SetCellDefault("Sheet1", "B3", "3.7009999999999998E1")
	buf, err := wb.WriteToBuffer()
	if err != nil {
		f.Fatal(err)
	}
	wb.Close()
	valid := buf.Bytes()
	f.Add(valid)
	f.Add([]byte{})
	f.Add([]byte("PK\x03\x04"))
	f.Add([]byte("worker,age\nW1,30\n"))
	f.Add(valid[:len(valid)/2])
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte) {
		p := filepath.Join(dir, "fuzz.xlsx")
		if err := os.WriteFile(p, data, 0o644); err != nil {
			t.Fatal(err)
		}
		tab, err := ReadSheet(p, "")
		if err != nil {
			if err.Error() == "" {
				t.Fatal("empty error message")
			}
			return
		}
		if len(tab.Header) == 0 {
			t.Fatal("a table without a header")
		}
		for i, r := range tab.Rows {
			if len(r) != len(tab.Header) {
				t.Fatalf("row %d has %d cells for %d columns", i+1, len(r), len(tab.Header))
			}
		}
	})
}
