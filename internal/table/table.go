package table

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode/utf8"

	"veer/internal/numeric"
)

// MaxFieldBytes bounds one cell, so a damaged file cannot exhaust memory.
const MaxFieldBytes = 1 << 16

// Table is a CSV file or a workbook sheet held in memory: a header and data
// rows of text cells. Row i of Rows is data row i+1 (the header is row 0);
// messages name a row as the user sees it: the file line of a CSV file, the
// sheet row of a workbook (see Where).
type Table struct {
	Header []string
	Rows   [][]string
	// Line holds, for each data row, where it starts as the user sees it:
	// the line of a CSV file, the row of a workbook sheet (both counting
	// from 1 and the header included). Nil means a table without blank
	// lines: data row i is at line i+2.
	Line []int
	// Sheet is the name of the workbook sheet the table was read from; ""
	// for a CSV file.
	Sheet string
	// Comma is the delimiter found in the file (',', ';' or tab).
	Comma rune
	// DecimalComma is true when the delimiter is ';' and numbers use a
	// comma as the decimal mark, as spreadsheets in many locales write
	// them (a ';' file whose numbers all use a point has it false).
	DecimalComma bool
	// BOM: the file began with a UTF-8 byte-order mark. CRLF: its lines end
	// in carriage return and line feed.
	BOM, CRLF bool
}

// Read reads a whole CSV table. The delimiter is detected from the header
// line (comma, semicolon or tab); a UTF-8 byte-order mark is skipped (and
// noted in Table.BOM). Every data row must have as many cells as the
// header. Blank lines are skipped; Table.Line keeps each row's line.
func Read(r io.Reader) (*Table, error) {
	br := bufio.NewReaderSize(r, 1<<20)
	bom := false
	if b, err := br.Peek(3); err == nil && bytes.Equal(b, []byte{0xEF, 0xBB, 0xBF}) {
		_, _ = br.Discard(3)
		bom = true
	}
	first, _ := br.Peek(4096)
	comma := sniff(first)
	crlf := false
	if i := bytes.IndexByte(first, '\n'); i > 0 && first[i-1] == '\r' {
		crlf = true
	}
	cr := csv.NewReader(br)
	cr.Comma = comma
	cr.FieldsPerRecord = 0
	cr.ReuseRecord = false
	header, err := cr.Read()
	if err == io.EOF {
		return nil, errors.New("the file is empty: expected a header row naming the columns")
	}
	if err != nil {
		return nil, csvError(err)
	}
	for i := range header {
		header[i] = strings.TrimSpace(header[i])
	}
	t := &Table{Header: header, Comma: comma, BOM: bom, CRLF: crlf}
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, csvError(err)
		}
		if len(rec) == 1 && rec[0] == "" {
			continue
		}
		line, _ := cr.FieldPos(0)
		for _, f := range rec {
			if len(f) > MaxFieldBytes {
				return nil, fmt.Errorf("line %d: a cell is longer than %d bytes", line, MaxFieldBytes)
			}
		}
		t.Rows = append(t.Rows, rec)
		t.Line = append(t.Line, line)
	}
	t.DecimalComma = comma == ';' && decimalComma(t.Rows)
	return t, nil
}

// decimalComma reports whether the numbers of a ';' file use a decimal
// comma: yes when any cell is written like 12,5; no when none is and some
// cell is written like 12.5; yes otherwise (whole numbers only: the
// convention of the locales that write ';').
func decimalComma(rows [][]string) bool {
	point := false
	for _, r := range rows {
		for _, c := range r {
			switch decimalMark(c) {
			case ',':
				return true
			case '.':
				point = true
			}
		}
	}
	return !point
}

// decimalMark returns ',' or '.' when s is a number written with that
// decimal mark (digits, the mark, digits; a sign allowed), else 0.
func decimalMark(s string) byte {
	s = strings.TrimSpace(s)
	if s != "" && (s[0] == '-' || s[0] == '+') {
		s = s[1:]
	}
	mark, digitsBefore, digitsAfter := byte(0), false, false
	for i := 0; i < len(s); i++ {
		switch c := s[i]; {
		case c >= '0' && c <= '9':
			if mark == 0 {
				digitsBefore = true
			} else {
				digitsAfter = true
			}
		case (c == ',' || c == '.') && mark == 0:
			mark = c
		default:
			return 0
		}
	}
	if digitsBefore && digitsAfter {
		return mark
	}
	return 0
}

func csvError(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		if errors.Is(pe.Err, csv.ErrFieldCount) {
			return fmt.Errorf("line %d has a different number of cells than the header row", pe.Line)
		}
		return fmt.Errorf("line %d, column %d: %v", pe.Line, pe.Column, pe.Err)
	}
	return err
}

// sniff picks the delimiter that occurs most often in the first line.
func sniff(b []byte) rune {
	if i := bytes.IndexByte(b, '\n'); i >= 0 {
		b = b[:i]
	}
	best, n := ',', bytes.Count(b, []byte{','})
	for _, c := range []rune{';', '\t'} {
		if k := bytes.Count(b, []byte(string(c))); k > n {
			best, n = c, k
		}
	}
	return best
}

// Column returns the index of the column called name (case and surrounding
// spaces ignored). A missing column is an error that lists the columns there are.
func (t *Table) Column(name string) (int, error) {
	want := strings.ToLower(strings.TrimSpace(name))
	for i, h := range t.Header {
		if strings.ToLower(h) == want {
			return i, nil
		}
	}
	return -1, fmt.Errorf("there is no column %q; the columns are: %s", name, strings.Join(quoteAll(t.Header), ", "))
}

func quoteAll(s []string) []string {
	out := make([]string, len(s))
	for i, v := range s {
		out[i] = strconv.Quote(v)
	}
	return out
}

// Strings returns column c as text, surrounding spaces trimmed.
func (t *Table) Strings(c int) []string {
	out := make([]string, len(t.Rows))
	for i, r := range t.Rows {
		out[i] = strings.TrimSpace(r[c])
	}
	return out
}

// Floats returns column c as numbers. An empty cell, text, NaN or an
// infinity is a *CellError naming the cell as the user sees it.
func (t *Table) Floats(c int) ([]float64, error) {
	out := make([]float64, len(t.Rows))
	for i, r := range t.Rows {
		v, err := ParseNumber(r[c], t.DecimalComma)
		if err != nil {
			return nil, t.CellError(i, c, err)
		}
		out[i] = v
	}
	return out, nil
}

// LineOf returns where data row i starts as the user sees it: its CSV line
// or sheet row.
func (t *Table) LineOf(i int) int {
	if i >= 0 && i < len(t.Line) {
		return t.Line[i]
	}
	return i + 2
}

// Where names data row i, and column c when c >= 0, as the user sees them:
// in a CSV file `line 12` and `line 12, column "age"`; in a workbook sheet
// `row 12` and `cell C12 (column "age")`.
func (t *Table) Where(i, c int) string {
	return t.CellError(i, c, nil).where()
}

// CellError returns err placed at data row i and column c (c < 0: the row
// as a whole).
func (t *Table) CellError(i, c int, err error) *CellError {
	e := &CellError{Row: i, Col: c, Line: t.LineOf(i), Sheet: t.Sheet != "", Err: err}
	if c >= 0 && c < len(t.Header) {
		e.Column = t.Header[c]
	}
	return e
}

// ErrEmptyCell is the failure of ParseNumber for an empty cell.
var ErrEmptyCell = errors.New("the cell is empty; a number is needed")

// ParseNumber reads one numeric cell. With decimalComma a single comma is
// taken as the decimal mark ("12,5" is 12.5). An empty cell is
// ErrEmptyCell.
func ParseNumber(s string, decimalComma bool) (float64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, ErrEmptyCell
	}
	if decimalComma && strings.Count(s, ",") == 1 && !strings.Contains(s, ".") {
		s = strings.Replace(s, ",", ".", 1)
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		if !utf8.ValidString(s) {
			return 0, errors.New("the cell is not valid text; a number is needed")
		}
		if len(s) > 40 {
			s = s[:40] + "…"
		}
		return 0, fmt.Errorf("%q is not a number", s)
	}
	if !numeric.Finite(v) {
		return 0, fmt.Errorf("%q is not a finite number", s)
	}
	return v, nil
}

// Format is how a CSV file is written: its delimiter, decimal mark,
// byte-order mark and line ending. The zero Format is the default: comma,
// decimal point, no mark, LF.
type Format struct {
	Comma        rune // ',' (also the zero value), ';' or '\t'
	DecimalComma bool // numbers written with a decimal comma (needs Comma ';' or tab)
	BOM          bool // begin with a UTF-8 byte-order mark
	CRLF         bool // end lines with CR LF
}

// Format returns the format of the file the table was read from, so that
// what is written from it opens the same way. A table read from a workbook
// sheet has the default format.
func (t *Table) Format() Format {
	if t.Sheet != "" {
		return Format{Comma: ','}
	}
	return Format{Comma: t.Comma, DecimalComma: t.DecimalComma, BOM: t.BOM, CRLF: t.CRLF}
}

// Writer writes CSV quickly: fields are quoted only when they need it. It
// keeps track of its place in the row, so a field is just appended
// (Text, Float) and EndRow starts the next row.
type Writer struct {
	w            *bufio.Writer
	comma        byte
	decimalComma bool
	eol          string
	buf          []byte
	fields       int // fields written to the current row
	bom          bool
	started      bool
}

// NewWriter returns a CSV writer with a comma delimiter.
func NewWriter(w io.Writer) *Writer { return NewFormatWriter(w, Format{}) }

// NewFormatWriter returns a CSV writer in format f. A decimal comma with a
// comma delimiter is a programmer error (the numbers could not be read
// back) and panics.
func NewFormatWriter(w io.Writer, f Format) *Writer {
	comma := f.Comma
	if comma == 0 {
		comma = ','
	}
	if comma != ',' && comma != ';' && comma != '\t' {
		panic("table: the delimiter must be ',', ';' or tab")
	}
	if f.DecimalComma && comma == ',' {
		panic("table: a decimal comma needs a ';' or tab delimiter")
	}
	eol := "\n"
	if f.CRLF {
		eol = "\r\n"
	}
	return &Writer{w: bufio.NewWriterSize(w, 1<<20), comma: byte(comma), decimalComma: f.DecimalComma, eol: eol, bom: f.BOM}
}

// sep starts a field: after the row's first field, with the delimiter.
func (w *Writer) sep() {
	if w.fields > 0 {
		w.buf = append(w.buf, w.comma)
	}
	w.fields++
}

// Text appends a text field to the current row.
func (w *Writer) Text(s string) {
	w.sep()
	if strings.ContainsAny(s, "\"\r\n") || strings.IndexByte(s, w.comma) >= 0 || (s != "" && (s[0] == ' ' || s[len(s)-1] == ' ')) {
		w.buf = append(w.buf, '"')
		w.buf = append(w.buf, strings.ReplaceAll(s, `"`, `""`)...)
		w.buf = append(w.buf, '"')
		return
	}
	w.buf = append(w.buf, s...)
}

// Float appends a number with the shortest representation that reads back
// exactly, or with prec decimals when prec >= 0, in the writer's decimal
// mark. NaN is written as an empty cell.
func (w *Writer) Float(v float64, prec int) {
	w.sep()
	if math.IsNaN(v) {
		return
	}
	start := len(w.buf)
	w.buf = strconv.AppendFloat(w.buf, v, 'f', prec, 64)
	if w.decimalComma {
		if k := bytes.IndexByte(w.buf[start:], '.'); k >= 0 {
			w.buf[start+k] = ','
		}
	}
}

// EndRow finishes the current row; the next field starts a new one.
func (w *Writer) EndRow() error {
	w.buf = append(w.buf, w.eol...)
	w.fields = 0
	if !w.started {
		w.started = true
		if w.bom {
			if _, err := w.w.WriteString("\xEF\xBB\xBF"); err != nil {
				return err
			}
		}
	}
	_, err := w.w.Write(w.buf)
	w.buf = w.buf[:0]
	return err
}

// Flush writes buffered rows.
func (w *Writer) Flush() error { return w.w.Flush() }
