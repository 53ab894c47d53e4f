package workbook_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/xuri/excelize/v2"

	"veer/internal/workbook"
)

// ExampleReadSheet reads the exams sheet of a workbook into a table.
func ExampleReadSheet() {
	dir, err := os.MkdirTemp("", "veer-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	f := excelize.NewFile()
	_ = f.SetSheetName("Sheet1", "Exams")
	_ = f.SetSheetRow("Exams", "A1", &[]any{"worker", "age", "sbp"})
	_ = f.SetSheetRow("Exams", "A2", &[]any{"W1", 37.01, 128})
	_ = f.SetSheetRow("Exams", "A3", &[]any{"W1", 38.2, 131})
	path := filepath.Join(dir, "exams.xlsx")
	if err := f.SaveAs(path); err != nil {
		log.Fatal(err)
	}
	t, err := workbook.ReadSheet(path, "exams")
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(t.Header)
	fmt.Println(t.Rows)
	_, err = workbook.ReadSheet(path, "Results")
	fmt.Println(err != nil)
	fmt.Println(filepath.Base(workbook.BackupPath(path)))
	// Output:
	// [worker age sbp]
	// [[W1 37.01 128] [W1 38.2 131]]
	// true
	// exams.bak.xlsx
}
