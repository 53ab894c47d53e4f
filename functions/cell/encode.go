package cell

import (
	"math"
	"strconv"
	"unicode/utf8"

	"veer/internal/numeric"
)

// EncodeResult appends the JSON encoding of the result v of the cell
// function fn to b, or returns the spreadsheet error the result stands for.
// Errors are put in fn's context (Error.In): the returned one, and the error
// cells inside a spilled result, whose messages then start with "fn: "
// (fn "" adds no context).
//
// Results and their encodings:
//
//	nil                                 null (a blank cell)
//	float64, float32, ints              a number; NaN or ±Inf is a #NUM! error
//	string, bool                        text, boolean
//	Cell                                the cell (an error cell is an error)
//	*Error, Error                       the error
//	Value                               the argument as given (rows of cells)
//	[]float64, []string, []bool, []Cell,
//	[]*Error, []any of single values    one column: [[x1], [x2], ...]
//	[][]float64, [][]string, [][]Cell,
//	[][]any, []any of slices            rows: [[a, b], [c, d]]
//
// Inside a spilled column or table, an error (or NaN, ±Inf) becomes an error
// cell {"error": "#N/A", "message": "..."} and does not fail the whole call.
func EncodeResult(b []byte, fn string, v any) ([]byte, *Error) {
	b, e := encodeResult(b, fn, v)
	return b, e.In(fn)
}

func encodeResult(b []byte, fn string, v any) ([]byte, *Error) {
	switch t := v.(type) {
	case *Error:
		if t == nil {
			return append(b, "null"...), nil
		}
		return b, t
	case Error:
		return b, &t
	case Cell:
		if t.Kind == KindError {
			return b, &Error{Code: Code(t.Str), Message: "the result is the error " + t.Str}
		}
		if t.Kind == KindNumber && !numeric.Finite(t.Num) {
			return b, OutOfRange.Errorf("the result is not a finite number")
		}
	case float64:
		if !numeric.Finite(t) {
			return b, OutOfRange.Errorf("the result is not a finite number")
		}
	case float32:
		if !numeric.Finite(float64(t)) {
			return b, OutOfRange.Errorf("the result is not a finite number")
		}
	}
	out, ok := appendAny(b, fn, v, 0)
	if !ok {
		return b, WrongArgument.Errorf("internal error: a cell function returned an unsupported result type %T", v)
	}
	return out, nil
}

// appendAny encodes v at nesting depth (0 = top, 1 = column/row element,
// 2 = cell in a row).
func appendAny(b []byte, fn string, v any, depth int) ([]byte, bool) {
	switch t := v.(type) {
	case nil:
		return append(b, "null"...), true
	case float64:
		return appendNumber(b, t), true
	case float32:
		return appendNumber(b, float64(t)), true
	case int:
		return strconv.AppendInt(b, int64(t), 10), true
	case int64:
		return strconv.AppendInt(b, t, 10), true
	case int32:
		return strconv.AppendInt(b, int64(t), 10), true
	case uint64:
		return strconv.AppendUint(b, t, 10), true
	case uint32:
		return strconv.AppendUint(b, uint64(t), 10), true
	case string:
		return appendString(b, t), true
	case bool:
		return strconv.AppendBool(b, t), true
	case Cell:
		return appendCell(b, t), true
	case *Error:
		if t == nil {
			return append(b, "null"...), true
		}
		return appendErrorCell(b, t.Code, t.Func, fn, t.Message), true
	case Error:
		return appendErrorCell(b, t.Code, t.Func, fn, t.Message), true
	case Value:
		out, _ := t.MarshalJSON()
		return append(b, out...), true
	}
	if depth >= 2 {
		return b, false
	}
	// Slices: at depth 0 a 1-D slice is a column and a 2-D slice is rows; at
	// depth 1 (inside []any rows) a slice is one row.
	switch t := v.(type) {
	case []float64:
		return appendSlice(b, len(t), depth, func(b []byte, i int) ([]byte, bool) { return appendNumber(b, t[i]), true }), true
	case []string:
		return appendSlice(b, len(t), depth, func(b []byte, i int) ([]byte, bool) { return appendString(b, t[i]), true }), true
	case []bool:
		return appendSlice(b, len(t), depth, func(b []byte, i int) ([]byte, bool) { return strconv.AppendBool(b, t[i]), true }), true
	case []Cell:
		return appendSlice(b, len(t), depth, func(b []byte, i int) ([]byte, bool) { return appendCell(b, t[i]), true }), true
	case []*Error:
		return appendSlice(b, len(t), depth, func(b []byte, i int) ([]byte, bool) { return appendAny(b, fn, t[i], 2) }), true
	}
	if depth == 1 {
		if t, ok := v.([]any); ok {
			return appendRow(b, len(t), func(b []byte, i int) ([]byte, bool) { return appendAny(b, fn, t[i], 2) })
		}
		return b, false
	}
	switch t := v.(type) {
	case [][]float64:
		return appendRows(b, len(t), func(b []byte, i int) ([]byte, bool) { return appendAny(b, fn, t[i], 1) })
	case [][]string:
		return appendRows(b, len(t), func(b []byte, i int) ([]byte, bool) { return appendAny(b, fn, t[i], 1) })
	case [][]Cell:
		return appendRows(b, len(t), func(b []byte, i int) ([]byte, bool) { return appendAny(b, fn, t[i], 1) })
	case [][]any:
		return appendRows(b, len(t), func(b []byte, i int) ([]byte, bool) { return appendAny(b, fn, t[i], 1) })
	case []any:
		rows := false
		for _, e := range t {
			if isSlice(e) {
				rows = true
				break
			}
		}
		if rows {
			return appendRows(b, len(t), func(b []byte, i int) ([]byte, bool) {
				if !isSlice(t[i]) {
					return appendRow(b, 1, func(b []byte, _ int) ([]byte, bool) { return appendAny(b, fn, t[i], 2) })
				}
				return appendAny(b, fn, t[i], 1)
			})
		}
		return appendRows(b, len(t), func(b []byte, i int) ([]byte, bool) {
			return appendRow(b, 1, func(b []byte, _ int) ([]byte, bool) { return appendAny(b, fn, t[i], 2) })
		})
	}
	return b, false
}

func isSlice(v any) bool {
	switch v.(type) {
	case []float64, []string, []bool, []Cell, []*Error, []any:
		return true
	}
	return false
}

// appendSlice encodes a 1-D slice: as a column at depth 0, as a row at depth 1.
func appendSlice(b []byte, n, depth int, elem func([]byte, int) ([]byte, bool)) []byte {
	if depth == 1 {
		out, _ := appendRow(b, n, elem)
		return out
	}
	b = append(b, '[')
	for i := 0; i < n; i++ {
		if i > 0 {
			b = append(b, ',')
		}
		b = append(b, '[')
		b, _ = elem(b, i)
		b = append(b, ']')
	}
	return append(b, ']')
}

func appendRow(b []byte, n int, elem func([]byte, int) ([]byte, bool)) ([]byte, bool) {
	b = append(b, '[')
	for i := 0; i < n; i++ {
		if i > 0 {
			b = append(b, ',')
		}
		var ok bool
		if b, ok = elem(b, i); !ok {
			return b, false
		}
	}
	return append(b, ']'), true
}

func appendRows(b []byte, n int, row func([]byte, int) ([]byte, bool)) ([]byte, bool) {
	return appendRow(b, n, row)
}

// appendCell encodes one cell; NaN and ±Inf become #NUM! error cells.
func appendCell(b []byte, c Cell) []byte {
	switch c.Kind {
	case KindNumber:
		return appendNumber(b, c.Num)
	case KindText:
		return appendString(b, c.Str)
	case KindBool:
		return strconv.AppendBool(b, c.B)
	case KindError:
		return appendErrorCell(b, Code(c.Str), "", "", "")
	}
	return append(b, "null"...)
}

// appendErrorCell encodes an error cell; its message is put in the context
// of the function fn unless it already names one (own), as Error.In does.
func appendErrorCell(b []byte, code Code, own, fn, msg string) []byte {
	b = append(b, `{"error":`...)
	b = appendString(b, string(code))
	if own != "" {
		fn = ""
	}
	switch {
	case fn != "" && msg != "":
		b = append(b, `,"message":`...)
		b = appendString(b, fn+": "+msg)
	case fn != "":
		b = append(b, `,"message":`...)
		b = appendString(b, fn)
	case msg != "":
		b = append(b, `,"message":`...)
		b = appendString(b, msg)
	}
	return append(b, '}')
}

// appendNumber formats f like encoding/json (shortest representation that
// round-trips; exponent form below 1e-6 and from 1e21). NaN and ±Inf, which
// JSON cannot hold, become a #NUM! error cell.
func appendNumber(b []byte, f float64) []byte {
	if !numeric.Finite(f) {
		return appendErrorCell(b, CodeNum, "", "", "not a finite number")
	}
	abs := math.Abs(f)
	format := byte('f')
	if abs != 0 && (abs < 1e-6 || abs >= 1e21) {
		format = 'e'
	}
	b = strconv.AppendFloat(b, f, format, -1, 64)
	if format == 'e' {
		// Clean up e-09 to e-9, as encoding/json does.
		n := len(b)
		if n >= 4 && b[n-4] == 'e' && b[n-3] == '-' && b[n-2] == '0' {
			b[n-2] = b[n-1]
			b = b[:n-1]
		}
	}
	return b
}

const hexDigits = "0123456789abcdef"

// AppendString appends s as a JSON string. Invalid UTF-8 becomes U+FFFD;
// control characters and U+2028/U+2029 are escaped.
func AppendString(b []byte, s string) []byte { return appendString(b, s) }

func appendString(b []byte, s string) []byte {
	b = append(b, '"')
	start := 0
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' {
				i++
				continue
			}
			b = append(b, s[start:i]...)
			switch c {
			case '"', '\\':
				b = append(b, '\\', c)
			case '\n':
				b = append(b, '\\', 'n')
			case '\r':
				b = append(b, '\\', 'r')
			case '\t':
				b = append(b, '\\', 't')
			default:
				b = append(b, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xF])
			}
			i++
			start = i
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && size == 1 {
			b = append(b, s[start:i]...)
			b = append(b, `\ufffd`...)
			i += size
			start = i
			continue
		}
		if r == '\u2028' || r == '\u2029' {
			b = append(b, s[start:i]...)
			b = append(b, '\\', 'u', '2', '0', '2', hexDigits[r&0xF])
			i += size
			start = i
			continue
		}
		i += size
	}
	b = append(b, s[start:]...)
	return append(b, '"')
}
