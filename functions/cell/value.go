package cell

import (
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// Kind is the kind of a spreadsheet cell value.
type Kind uint8

// The kinds of cell values a spreadsheet sends.
const (
	KindBlank  Kind = iota // an empty cell or omitted argument (JSON null)
	KindNumber             // a number (JSON number); dates arrive as serial numbers
	KindText               // text (JSON string)
	KindBool               // TRUE or FALSE (JSON true/false)
	KindError              // an error value such as #N/A (JSON {"error": "#N/A"})
)

// String returns the kind's name as used in messages.
func (k Kind) String() string {
	switch k {
	case KindBlank:
		return "blank"
	case KindNumber:
		return "number"
	case KindText:
		return "text"
	case KindBool:
		return "boolean"
	case KindError:
		return "error"
	}
	return "Kind(" + strconv.Itoa(int(k)) + ")"
}

// Cell is one spreadsheet cell value. Num holds a number, B a boolean and Str
// a text or, for KindError, the error code (#N/A, ...). The zero Cell is blank.
type Cell struct {
	Kind Kind
	B    bool
	Num  float64
	Str  string
}

// NumberCell returns a number cell.
func NumberCell(f float64) Cell { return Cell{Kind: KindNumber, Num: f} }

// TextCell returns a text cell.
func TextCell(s string) Cell { return Cell{Kind: KindText, Str: s} }

// BoolCell returns a boolean cell.
func BoolCell(b bool) Cell { return Cell{Kind: KindBool, B: b} }

// ErrorCell returns an error cell with the code normalised by NormalizeCode.
func ErrorCell(code string) Cell {
	c, _ := NormalizeCode(code)
	return Cell{Kind: KindError, Str: string(c)}
}

// IsBlank reports whether c is blank.
func (c Cell) IsBlank() bool { return c.Kind == KindBlank }

// String describes the cell for messages, e.g. `text "abc"`, `the number 3`.
func (c Cell) String() string {
	switch c.Kind {
	case KindBlank:
		return "a blank cell"
	case KindNumber:
		return "the number " + FormatNumber(c.Num)
	case KindText:
		return "text " + quoteShort(c.Str)
	case KindBool:
		if c.B {
			return "TRUE"
		}
		return "FALSE"
	case KindError:
		return "the error " + c.Str
	}
	return "a cell of unknown kind"
}

// FormatNumber formats a number the way it is shown in messages and when a
// number is used as text (an id typed as 1001 becomes "1001").
func FormatNumber(f float64) string {
	if math.Abs(f) < 1e15 {
		return strconv.FormatFloat(f, 'f', -1, 64)
	}
	return strconv.FormatFloat(f, 'g', -1, 64)
}

// quoteShort quotes s for a message, cutting it to 40 runes.
func quoteShort(s string) string {
	if utf8.RuneCountInString(s) > 40 {
		r := []rune(s)
		s = string(r[:40]) + "…"
	}
	return strconv.Quote(s)
}

type valueKind uint8

const (
	valueAbsent valueKind = iota
	valueScalar
	valueRange
)

// Value is one argument of a cell call: a single cell or a rectangular range
// (rows of cells, stored row by row in one slice). The zero Value is an
// absent (omitted) argument.
type Value struct {
	kind  valueKind
	c     Cell
	flat  []Cell // range cells, row by row
	nrows int
	cols  int
}

// ScalarValue returns a single-cell argument.
func ScalarValue(c Cell) Value { return Value{kind: valueScalar, c: c} }

// ColumnValue returns a range with one column holding cells top to bottom.
// The Value keeps cells (no copy).
func ColumnValue(cells []Cell) Value {
	if len(cells) == 0 {
		return Value{kind: valueRange}
	}
	return Value{kind: valueRange, flat: cells, nrows: len(cells), cols: 1}
}

// BlockValue returns a range of rows x cols cells stored row by row in flat
// (len(flat) must be rows*cols). The Value keeps flat (no copy).
func BlockValue(flat []Cell, rows, cols int) (Value, error) {
	if rows < 0 || cols < 0 || len(flat) != rows*cols {
		return Value{}, WrongArgument.Errorf("a %dx%d range needs %d cells; got %d", rows, cols, rows*cols, len(flat))
	}
	if rows == 0 || cols == 0 {
		return Value{kind: valueRange}, nil
	}
	return Value{kind: valueRange, flat: flat, nrows: rows, cols: cols}, nil
}

// RangeValue returns a range argument from rows of cells (copied). Rows must
// all have the same number of cells (spreadsheet ranges are rectangular); a
// range whose rows are all empty is the empty range.
func RangeValue(rows [][]Cell) (Value, error) {
	cols := -1
	n := 0
	for i, r := range rows {
		if cols < 0 {
			cols = len(r)
		} else if len(r) != cols {
			return Value{}, WrongArgument.Errorf("the range is not rectangular: row %d has %d cells but row 1 has %d", i+1, len(r), cols)
		}
		n += len(r)
	}
	if n == 0 {
		return Value{kind: valueRange}, nil
	}
	flat := make([]Cell, 0, n)
	for _, r := range rows {
		flat = append(flat, r...)
	}
	return Value{kind: valueRange, flat: flat, nrows: len(rows), cols: cols}, nil
}

// IsAbsent reports whether the argument was not given at all.
func (v Value) IsAbsent() bool { return v.kind == valueAbsent }

// IsScalar reports whether the argument is a single cell (not a range).
func (v Value) IsScalar() bool { return v.kind == valueScalar }

// IsRange reports whether the argument is a range (possibly 1x1 or empty).
func (v Value) IsRange() bool { return v.kind == valueRange }

// IsMissing reports whether the argument is absent or a single blank cell:
// this is how spreadsheets pass an omitted optional argument.
func (v Value) IsMissing() bool {
	switch v.kind {
	case valueAbsent:
		return true
	case valueScalar:
		return v.c.Kind == KindBlank
	}
	return false
}

// Cell returns the single cell of a scalar argument or of a 1x1 range.
func (v Value) Cell() (Cell, bool) {
	switch v.kind {
	case valueScalar:
		return v.c, true
	case valueRange:
		if len(v.flat) == 1 {
			return v.flat[0], true
		}
	case valueAbsent:
		return Cell{}, true
	}
	return Cell{}, false
}

// Dims returns the number of rows and columns (1x1 for a scalar, 0x0 when
// absent or empty).
func (v Value) Dims() (rows, cols int) {
	switch v.kind {
	case valueScalar:
		return 1, 1
	case valueRange:
		return v.nrows, v.cols
	}
	return 0, 0
}

// Len returns the number of cells.
func (v Value) Len() int {
	r, c := v.Dims()
	return r * c
}

// At returns cell (r, c), 0-based; it panics when out of range.
func (v Value) At(r, c int) Cell {
	if v.kind == valueScalar && r == 0 && c == 0 {
		return v.c
	}
	if r < 0 || r >= v.nrows || c < 0 || c >= v.cols {
		panic("cell: Value.At out of range")
	}
	return v.flat[r*v.cols+c]
}

// Flat returns all cells row by row (a scalar is one cell). The slice is
// shared with the Value: do not modify it.
func (v Value) Flat() []Cell {
	switch v.kind {
	case valueScalar:
		return []Cell{v.c}
	case valueRange:
		return v.flat
	}
	return nil
}

// Rows returns the cells row by row; a scalar is one row of one cell. Each
// call builds the row slices (sharing the cells, which must not be
// modified); prefer Flat, At or the Args helpers for large ranges.
func (v Value) Rows() [][]Cell {
	switch v.kind {
	case valueScalar:
		return [][]Cell{{v.c}}
	case valueRange:
		rows := make([][]Cell, v.nrows)
		for i := range rows {
			rows[i] = v.flat[i*v.cols : (i+1)*v.cols : (i+1)*v.cols]
		}
		return rows
	}
	return nil
}

// ValueOf converts a Go value to an argument: nil (absent), Cell, Value,
// numbers, string, bool, *Error (an error cell), 1-D slices ([]float64,
// []string, []bool, []Cell, []any: one column) and 2-D slices ([][]float64,
// [][]string, [][]Cell, [][]any, []any of slices: rows). JSON-decoded values
// (map[string]any{"error": "#N/A"}) are accepted too.
func ValueOf(x any) (Value, error) {
	switch t := x.(type) {
	case nil:
		return Value{}, nil
	case Value:
		return t, nil
	case []float64:
		cells := make([]Cell, len(t))
		for i, f := range t {
			cells[i] = NumberCell(f)
		}
		return ColumnValue(cells), nil
	case []string:
		cells := make([]Cell, len(t))
		for i, s := range t {
			cells[i] = TextCell(s)
		}
		return ColumnValue(cells), nil
	case []bool:
		cells := make([]Cell, len(t))
		for i, b := range t {
			cells[i] = BoolCell(b)
		}
		return ColumnValue(cells), nil
	case []Cell:
		return ColumnValue(append([]Cell(nil), t...)), nil
	case [][]Cell:
		return RangeValue(t)
	case [][]float64:
		rows := make([][]Cell, len(t))
		for i, r := range t {
			rows[i] = make([]Cell, len(r))
			for j, f := range r {
				rows[i][j] = NumberCell(f)
			}
		}
		return RangeValue(rows)
	case [][]string:
		rows := make([][]Cell, len(t))
		for i, r := range t {
			rows[i] = make([]Cell, len(r))
			for j, s := range r {
				rows[i][j] = TextCell(s)
			}
		}
		return RangeValue(rows)
	case [][]any:
		rows := make([][]Cell, len(t))
		for i, r := range t {
			rows[i] = make([]Cell, len(r))
			for j, e := range r {
				c, err := cellOf(e)
				if err != nil {
					return Value{}, WrongArgument.Errorf("row %d, column %d: %s", i+1, j+1, err.Message)
				}
				rows[i][j] = c
			}
		}
		return RangeValue(rows)
	case []any:
		return sliceValue(t)
	}
	c, err := cellOf(x)
	if err != nil {
		return Value{}, err
	}
	return ScalarValue(c), nil
}

// sliceValue converts a decoded JSON array: an array of arrays is rows, an
// array of single cells is one column; mixing both is an error.
func sliceValue(t []any) (Value, error) {
	if len(t) == 0 {
		return RangeValue(nil)
	}
	_, nested := t[0].([]any)
	if !nested {
		cells := make([]Cell, len(t))
		for i, e := range t {
			if _, ok := e.([]any); ok {
				return Value{}, WrongArgument.Errorf("the array mixes single cells and rows (element %d is a row, element 1 is a cell)", i+1)
			}
			c, err := cellOf(e)
			if err != nil {
				return Value{}, WrongArgument.Errorf("row %d: %s", i+1, err.Message)
			}
			cells[i] = c
		}
		return ColumnValue(cells), nil
	}
	rows := make([][]Cell, len(t))
	for i, e := range t {
		r, ok := e.([]any)
		if !ok {
			return Value{}, WrongArgument.Errorf("the array mixes rows and single cells (element %d is a cell, element 1 is a row)", i+1)
		}
		rows[i] = make([]Cell, len(r))
		for j, x := range r {
			if _, deep := x.([]any); deep {
				return Value{}, WrongArgument.Errorf("row %d, column %d: arrays nest at most two deep (rows of cells)", i+1, j+1)
			}
			c, err := cellOf(x)
			if err != nil {
				return Value{}, WrongArgument.Errorf("row %d, column %d: %s", i+1, j+1, err.Message)
			}
			rows[i][j] = c
		}
	}
	return RangeValue(rows)
}

// cellOf converts a single Go value to a cell.
func cellOf(x any) (Cell, *Error) {
	switch t := x.(type) {
	case nil:
		return Cell{}, nil
	case Cell:
		return t, nil
	case float64:
		return NumberCell(t), nil
	case float32:
		return NumberCell(float64(t)), nil
	case int:
		return NumberCell(float64(t)), nil
	case int64:
		return NumberCell(float64(t)), nil
	case int32:
		return NumberCell(float64(t)), nil
	case uint:
		return NumberCell(float64(t)), nil
	case uint64:
		return NumberCell(float64(t)), nil
	case uint32:
		return NumberCell(float64(t)), nil
	case json.Number:
		f, err := strconv.ParseFloat(string(t), 64)
		if err != nil || math.IsInf(f, 0) {
			return Cell{}, WrongArgument.Errorf("%s is not a number a spreadsheet can hold", string(t))
		}
		return NumberCell(f), nil
	case string:
		return TextCell(t), nil
	case bool:
		return BoolCell(t), nil
	case *Error:
		if t == nil {
			return Cell{}, nil
		}
		return ErrorCell(string(t.Code)), nil
	case Error:
		return ErrorCell(string(t.Code)), nil
	case map[string]any:
		return errorObjectCell(t)
	}
	return Cell{}, WrongArgument.Errorf("a cell cannot hold a Go %T", x)
}

// errorObjectCell converts {"error": "#N/A"} (with an optional "message").
func errorObjectCell(m map[string]any) (Cell, *Error) {
	code, ok := m["error"].(string)
	if !ok {
		return Cell{}, WrongArgument.Errorf(`an object in a cell must be an error value like {"error": "#N/A"}`)
	}
	for k, v := range m {
		switch k {
		case "error":
		case "message":
			if _, ok := v.(string); !ok {
				return Cell{}, WrongArgument.Errorf(`the "message" of an error value must be text`)
			}
		default:
			return Cell{}, WrongArgument.Errorf(`an error value has only "error" and "message" fields, not %q`, k)
		}
	}
	return ErrorCell(code), nil
}

// MarshalJSON encodes the cell as a spreadsheet sends it: number, text,
// boolean, null or {"error": code}. NaN and infinities encode as #NUM!.
func (c Cell) MarshalJSON() ([]byte, error) {
	return appendCell(nil, c), nil
}

// UnmarshalJSON decodes a cell from a number, text, boolean, null or an
// error value {"error": "#N/A"}.
func (c *Cell) UnmarshalJSON(data []byte) error {
	var x any
	if err := json.Unmarshal(data, &x); err != nil {
		return err
	}
	if _, ok := x.([]any); ok {
		return WrongArgument.Errorf("a cell cannot hold an array")
	}
	v, err := cellOf(x)
	if err != nil {
		return err
	}
	*c = v
	return nil
}

// MarshalJSON encodes the value: a scalar as a cell, a range as an array of
// rows, an absent value as null.
func (v Value) MarshalJSON() ([]byte, error) {
	switch v.kind {
	case valueScalar:
		return appendCell(nil, v.c), nil
	case valueRange:
		b := make([]byte, 0, 2+8*len(v.flat))
		b = append(b, '[')
		for i, c := range v.flat {
			switch {
			case i == 0:
				b = append(b, '[')
			case i%v.cols == 0:
				b = append(b, ']', ',', '[')
			default:
				b = append(b, ',')
			}
			b = appendCell(b, c)
		}
		if len(v.flat) > 0 {
			b = append(b, ']')
		}
		return append(b, ']'), nil
	}
	return []byte("null"), nil
}

// UnmarshalJSON decodes an argument: a cell, an array of rows of cells, or a
// flat array of cells (taken as one column). This is the reference decoder;
// the server has a faster one that must agree with it.
func (v *Value) UnmarshalJSON(data []byte) error {
	var x any
	if err := json.Unmarshal(data, &x); err != nil {
		return err
	}
	if x == nil {
		*v = ScalarValue(Cell{})
		return nil
	}
	nv, err := ValueOf(x)
	if err != nil {
		return err
	}
	*v = nv
	return nil
}

// describeRange names the size of a range for messages, e.g. "a 3x2 range".
func describeRange(rows, cols int) string {
	if rows == 0 || cols == 0 {
		return "an empty range"
	}
	return fmt.Sprintf("a %dx%d range", rows, cols)
}

// position names a cell inside an argument for messages: "row 5" in a
// column, "column 3" in a row, "row 2, column 3" in a block.
func position(rows, cols, r, c int) string {
	switch {
	case cols == 1:
		return "row " + strconv.Itoa(r+1)
	case rows == 1:
		return "column " + strconv.Itoa(c+1)
	}
	return "row " + strconv.Itoa(r+1) + ", column " + strconv.Itoa(c+1)
}
