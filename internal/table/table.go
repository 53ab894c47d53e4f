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

// Table is a CSV file held in memory: a header and data rows of text cells.
// Row i of Rows is data row i+1 (the header is row 0); messages count data
// rows from 1 and also give the file line, as a spreadsheet user sees it.
type Table struct {
	Header []string
	Rows   [][]string
	// Comma is the delimiter found in the file (',', ';' or tab).
	Comma rune
	// DecimalComma is true when the delimiter is ';' and numbers may use a
	// comma as the decimal mark, as spreadsheets in many locales write them.
	DecimalComma bool
}

// Read reads a whole CSV table. The delimiter is detected from the header
// line (comma, semicolon or tab); a UTF-8 byte-order mark is skipped. Every
// data row must have as many cells as the header.
func Read(r io.Reader) (*Table, error) {
	br := bufio.NewReaderSize(r, 1<<20)
	if b, err := br.Peek(3); err == nil && bytes.Equal(b, []byte{0xEF, 0xBB, 0xBF}) {
		_, _ = br.Discard(3)
	}
	first, _ := br.Peek(4096)
	comma := sniff(first)
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
	t := &Table{Header: header, Comma: comma, DecimalComma: comma == ';'}
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
		for _, f := range rec {
			if len(f) > MaxFieldBytes {
				line, _ := cr.FieldPos(0)
				return nil, fmt.Errorf("line %d: a cell is longer than %d bytes", line, MaxFieldBytes)
			}
		}
		t.Rows = append(t.Rows, rec)
	}
	return t, nil
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

// Floats returns column c as numbers. An empty cell, text, NaN or an infinity
// is an error naming the data row, the file line and the column.
func (t *Table) Floats(c int) ([]float64, error) {
	out := make([]float64, len(t.Rows))
	for i, r := range t.Rows {
		v, err := ParseNumber(r[c], t.DecimalComma)
		if err != nil {
			return nil, fmt.Errorf("data row %d (line %d), column %q: %v", i+1, i+2, t.Header[c], err)
		}
		out[i] = v
	}
	return out, nil
}

// ParseNumber reads one numeric cell. With decimalComma a single comma is
// taken as the decimal mark ("12,5" is 12.5).
func ParseNumber(s string, decimalComma bool) (float64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, errors.New("the cell is empty; a number is needed")
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

// Writer writes CSV quickly: fields are quoted only when they need it. It
// keeps track of its place in the row, so a field is just appended
// (Text, Float) and EndRow starts the next row.
type Writer struct {
	w      *bufio.Writer
	comma  byte
	buf    []byte
	fields int // fields written to the current row
}

// NewWriter returns a CSV writer with a comma delimiter.
func NewWriter(w io.Writer) *Writer {
	return &Writer{w: bufio.NewWriterSize(w, 1<<20), comma: ','}
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
	if strings.ContainsAny(s, "\",\r\n") || (s != "" && (s[0] == ' ' || s[len(s)-1] == ' ')) {
		w.buf = append(w.buf, '"')
		w.buf = append(w.buf, strings.ReplaceAll(s, `"`, `""`)...)
		w.buf = append(w.buf, '"')
		return
	}
	w.buf = append(w.buf, s...)
}

// Float appends a number with the shortest representation that reads back
// exactly, or with prec decimals when prec >= 0. NaN is written as an empty cell.
func (w *Writer) Float(v float64, prec int) {
	w.sep()
	if math.IsNaN(v) {
		return
	}
	w.buf = strconv.AppendFloat(w.buf, v, 'f', prec, 64)
}

// EndRow finishes the current row; the next field starts a new one.
func (w *Writer) EndRow() error {
	w.buf = append(w.buf, '\n')
	_, err := w.w.Write(w.buf)
	w.buf = w.buf[:0]
	w.fields = 0
	return err
}

// Flush writes buffered rows.
func (w *Writer) Flush() error { return w.w.Flush() }
