package workbooks

import (
	"bytes"
	"io"

	"github.com/xuri/excelize/v2"
)

func cellName(row, col int) string {
	s, err := excelize.CoordinatesToCellName(col+1, row+1)
	if err != nil {
		panic(err) // rows and columns come from the layout, always in range
	}
	return s
}

// writeXLSX writes the workbook as .xlsx with excelize, through detZip so
// the bytes are reproducible. Formula cells carry no cached value; the
// workbook asks the spreadsheet program to calculate everything on load.
func writeXLSX(wb *workbook) ([]byte, error) {
	f := excelize.NewFile()
	defer f.Close()
	f.SetZipWriter(func(w io.Writer) excelize.ZipWriter {
		return newDetZip(w, []string{"[Content_Types].xml", "_rels/.rels"})
	})
	bold, err := f.NewStyle(&excelize.Style{Font: &excelize.Font{Bold: true}})
	if err != nil {
		return nil, err
	}
	wrap, err := f.NewStyle(&excelize.Style{Font: &excelize.Font{Bold: true, Color: "9C2A00"}, Alignment: &excelize.Alignment{WrapText: true, Vertical: "top"}})
	if err != nil {
		return nil, err
	}
	for i, s := range wb.sheets {
		if i == 0 {
			if err := f.SetSheetName("Sheet1", s.name); err != nil {
				return nil, err
			}
		} else if _, err := f.NewSheet(s.name); err != nil {
			return nil, err
		}
		for c := 0; c < s.ncols; c++ {
			if w, ok := s.widths[c]; ok {
				col := colLetters(c + 1)
				if err := f.SetColWidth(s.name, col, col, w); err != nil {
					return nil, err
				}
			}
		}
		// Plain values row by row (fast), then formulas and styles.
		for r := 0; r < s.nrows; r++ {
			var vals []any
			for c := 0; c < s.ncols; c++ {
				v, ok := s.cells[[2]int{r, c}]
				switch {
				case !ok || v.kind == kFormula:
					vals = append(vals, nil)
				case v.kind == kNumber:
					vals = append(vals, v.num)
				default:
					vals = append(vals, v.text)
				}
			}
			for len(vals) > 0 && vals[len(vals)-1] == nil {
				vals = vals[:len(vals)-1]
			}
			if len(vals) == 0 {
				continue
			}
			if err := f.SetSheetRow(s.name, cellName(r, 0), &vals); err != nil {
				return nil, err
			}
		}
		for r := 0; r < s.nrows; r++ {
			for c := 0; c < s.ncols; c++ {
				v, ok := s.cells[[2]int{r, c}]
				if !ok {
					continue
				}
				at := cellName(r, c)
				if v.kind == kFormula {
					if v.rows > 1 || v.cols > 1 {
						typ, area := "array", at+":"+cellName(r+v.rows-1, c+v.cols-1)
						err = f.SetCellFormula(s.name, at, v.formula.xlsx(), excelize.FormulaOpts{Type: &typ, Ref: &area})
					} else {
						err = f.SetCellFormula(s.name, at, v.formula.xlsx())
					}
					if err != nil {
						return nil, err
					}
				}
				switch {
				case v.wrap:
					err = f.SetCellStyle(s.name, at, at, wrap)
				case v.bold:
					err = f.SetCellStyle(s.name, at, at, bold)
				}
				if err != nil {
					return nil, err
				}
			}
		}
	}
	on := true
	if err := f.SetCalcProps(&excelize.CalcPropsOptions{FullCalcOnLoad: &on}); err != nil {
		return nil, err
	}
	f.SetActiveSheet(0)
	var buf bytes.Buffer
	if err := f.Write(&buf); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}
