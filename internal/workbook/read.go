package workbook

import (
	"archive/zip"
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/xuri/excelize/v2"

	"veer/internal/table"
)

// Limits of what veer opens, so a damaged or hostile file cannot exhaust
// memory or disk.
const (
	// MaxUnzippedBytes bounds the total unzipped size of a workbook.
	MaxUnzippedBytes = 1 << 30
	// maxRatio bounds the declared unzipped size of a part against its
	// zipped size: deflate cannot compress better than about 1032:1, so a
	// larger claim is a damaged or hostile file (which would otherwise make
	// the reader reserve memory for the claimed size).
	maxRatio = 1100
	// maxXMLInMemory is the worksheet size above which excelize streams the
	// sheet through a temporary file instead of memory.
	maxXMLInMemory = 64 << 20
)

func openOptions() excelize.Options {
	return excelize.Options{UnzipSizeLimit: MaxUnzippedBytes, UnzipXMLSizeLimit: maxXMLInMemory}
}

// checkFile gives a clear error for a missing file and for the formats veer
// cannot read as a workbook.
func checkFile(path string) error {
	f, err := os.Open(path)
	if err != nil {
		switch {
		case errors.Is(err, fs.ErrNotExist):
			return fmt.Errorf("cannot find the workbook %s", path)
		case errors.Is(err, fs.ErrPermission):
			return fmt.Errorf("cannot open the workbook %s: permission denied", path)
		}
		return fmt.Errorf("cannot open the workbook %s: %v", path, err)
	}
	defer f.Close()
	if fi, err := f.Stat(); err == nil && fi.IsDir() {
		return fmt.Errorf("%s is a folder, not a workbook", path)
	}
	head := make([]byte, 8)
	n, _ := io.ReadFull(f, head)
	head = head[:n]
	ext := strings.ToLower(filepath.Ext(path))
	switch {
	case n == 0:
		return fmt.Errorf("%s is empty (0 bytes), not a workbook", path)
	case ext == ".ods" || ext == ".fods":
		return fmt.Errorf("%s is an OpenDocument spreadsheet; veer reads .xlsx workbooks: save it as .xlsx (File > Save As > Excel 2007-365)", path)
	case bytes.HasPrefix(head, []byte{0xD0, 0xCF, 0x11, 0xE0}):
		return fmt.Errorf("%s is an old-format (.xls) or password-protected workbook; veer reads unprotected .xlsx workbooks: save it as .xlsx without a password", path)
	case ext == ".csv" || ext == ".txt" || ext == ".tsv":
		return fmt.Errorf("%s is a text file; read it as CSV, not as a workbook", path)
	case !bytes.HasPrefix(head, []byte("PK")):
		return fmt.Errorf("%s is not an .xlsx workbook (it is not a zip package)", path)
	}
	return checkZip(f, path)
}

// checkZip checks the zip directory's declared sizes before the workbook
// reader trusts them.
func checkZip(f *os.File, path string) error {
	fi, err := f.Stat()
	if err != nil {
		return fmt.Errorf("cannot read the workbook %s: %v", path, err)
	}
	zr, err := zip.NewReader(f, fi.Size())
	if err != nil {
		return fmt.Errorf("the workbook %s cannot be read: it is not a valid zip package (%v)", path, err)
	}
	var total uint64
	for _, e := range zr.File {
		total += e.UncompressedSize64
		if total > MaxUnzippedBytes {
			return fmt.Errorf("the workbook %s is too large: it unpacks to more than %d MiB", path, MaxUnzippedBytes>>20)
		}
		if e.UncompressedSize64 > 1<<20 && e.UncompressedSize64/maxRatio > e.CompressedSize64 {
			return fmt.Errorf("the workbook %s is damaged: part %q claims an impossible size", path, e.Name)
		}
	}
	return nil
}

// open opens a workbook, turning a panic of the decoder on a damaged file
// into an error (a damaged file is outside input, not a programmer error).
func open(path string) (f *excelize.File, err error) {
	if err := checkFile(path); err != nil {
		return nil, err
	}
	defer func() {
		if r := recover(); r != nil {
			f, err = nil, fmt.Errorf("the workbook %s is damaged and cannot be read", path)
		}
	}()
	f, err = excelize.OpenFile(path, openOptions())
	if err != nil {
		return nil, fmt.Errorf("the workbook %s cannot be read: %v", path, describeOpenError(err))
	}
	return f, nil
}

func describeOpenError(err error) string {
	switch {
	case errors.Is(err, excelize.ErrWorkbookFileFormat):
		return "it is not an .xlsx, .xlsm, .xltx or .xltm workbook"
	case errors.Is(err, excelize.ErrWorkbookPassword):
		return "it is password-protected; remove the password and save it again"
	}
	return err.Error()
}

// SheetNames returns the names of the sheets of a workbook, in order.
func SheetNames(path string) ([]string, error) {
	f, err := open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return f.GetSheetList(), nil
}

// findSheet returns the workbook's name of sheet (matched without regard to
// case, as spreadsheet programs do), or an error listing the sheets.
func findSheet(f *excelize.File, path, sheet string) (string, error) {
	list := f.GetSheetList()
	if len(list) == 0 {
		return "", fmt.Errorf("the workbook %s has no sheets", path)
	}
	if sheet == "" {
		return list[0], nil
	}
	for _, s := range list {
		if s == sheet {
			return s, nil
		}
	}
	for _, s := range list {
		if strings.EqualFold(s, sheet) {
			return s, nil
		}
	}
	q := make([]string, len(list))
	for i, s := range list {
		q[i] = strconv.Quote(s)
	}
	return "", fmt.Errorf("the workbook %s has no sheet %q; its sheets are: %s", path, sheet, strings.Join(q, ", "))
}

// ReadSheet reads one sheet of an .xlsx workbook into a table: the first
// non-empty row is the header naming the columns, every later non-empty row
// is a data row. An empty sheet name means the first sheet. The table's
// Sheet is the sheet's name and its Line the sheet row of each data row, so
// messages name rows and cells as the spreadsheet shows them.
//
// Cells are read as stored, not as displayed: a number is given in its
// shortest text form that reads back exactly (37.01, not "37" under a
// "0" number format), a formula cell gives its last computed value, text is
// kept as it is. Data rows are padded with empty cells to the header's
// width; cells to the right of the last header cell are ignored, since no
// column name can select them.
func ReadSheet(path, sheet string) (t *table.Table, err error) {
	f, err := open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	defer func() {
		if r := recover(); r != nil {
			t, err = nil, fmt.Errorf("the workbook %s is damaged and cannot be read", path)
		}
	}()
	name, err := findSheet(f, path, sheet)
	if err != nil {
		return nil, err
	}
	rows, err := f.Rows(name)
	if err != nil {
		return nil, fmt.Errorf("the workbook %s, sheet %q cannot be read: %v", path, name, err)
	}
	defer rows.Close()
	raw := excelize.Options{RawCellValue: true}
	t = &table.Table{Comma: ',', Sheet: name}
	rowNo := 0
	for rows.Next() {
		rowNo++
		cells, err := rows.Columns(raw)
		if err != nil {
			return nil, fmt.Errorf("%s, sheet %q, row %d: %v", path, name, rowNo, err)
		}
		if blank(cells) {
			continue
		}
		for c, v := range cells {
			if len(v) > table.MaxFieldBytes {
				return nil, fmt.Errorf("%s, sheet %q, cell %s: the cell is longer than %d bytes", path, name, cellName(c, rowNo), table.MaxFieldBytes)
			}
			cells[c] = numberText(f, name, c, rowNo, v)
		}
		if t.Header == nil {
			t.Header = make([]string, len(cells))
			for i, h := range cells {
				t.Header[i] = strings.TrimSpace(h)
			}
			continue
		}
		row := make([]string, len(t.Header))
		copy(row, cells)
		t.Rows = append(t.Rows, row)
		t.Line = append(t.Line, rowNo)
	}
	if err := rows.Error(); err != nil {
		return nil, fmt.Errorf("%s, sheet %q: %v", path, name, err)
	}
	if t.Header == nil {
		return nil, fmt.Errorf("the sheet %q of %s is empty: expected a header row naming the columns, then one row per exam", name, path)
	}
	return t, nil
}

func blank(cells []string) bool {
	for _, c := range cells {
		if strings.TrimSpace(c) != "" {
			return false
		}
	}
	return true
}

func cellName(col, row int) string {
	s, err := excelize.CoordinatesToCellName(col+1, row)
	if err != nil {
		return fmt.Sprintf("R%dC%d", row, col+1)
	}
	return s
}

// numberText returns a numeric cell's stored value in its shortest exact
// form. Stored numbers are usually already in that form; only when the
// text parses as a number but is written differently (17 digits, an
// exponent) is the cell's type looked up, so text cells such as "007" or
// "1e3" stay as typed.
func numberText(f *excelize.File, sheet string, col, row int, v string) string {
	x, err := strconv.ParseFloat(v, 64)
	if err != nil {
		return v
	}
	short := strconv.FormatFloat(x, 'g', -1, 64)
	if short == v {
		return v
	}
	typ, err := f.GetCellType(sheet, cellName(col, row))
	if err != nil || (typ != excelize.CellTypeNumber && typ != excelize.CellTypeUnset) {
		return v
	}
	if x == 0 {
		return "0"
	}
	return short
}
