package cell

import (
	"math"
	"strconv"
	"strings"
)

// Args are the arguments of one call, bound to the function's parameters.
// The helpers convert spreadsheet cells to Go values; every error they return
// is an *Error whose message names the argument and, inside a range, the
// cell position (1-based, relative to the range); the dispatcher adds the
// function's name (Error.In).
type Args struct {
	f    *Func
	vals []Value
}

// Bind checks vals against f's parameters and returns the arguments.
//
// Rules: trailing missing arguments (absent or blank, as spreadsheets send an
// omitted argument) are dropped; there must be at least as many arguments as
// required parameters and no more than parameters; a required argument must
// not be missing. Scalar parameters (number, text, bool) must be a single cell
// of that type (a 1x1 range counts as a single cell); an error value passed to
// such a parameter fails the call with that error's code. Range and any
// parameters accept anything.
func Bind(f *Func, vals []Value) (Args, error) {
	required, total := f.Arity()
	n := len(vals)
	for n > required && vals[n-1].IsMissing() {
		n--
	}
	if n > total || n < required {
		return Args{}, WrongArgument.Errorf("the function takes %s; got %d", arityText(f, required, total), len(vals))
	}
	a := Args{f: f, vals: vals[:n:n]}
	for i, p := range f.Params {
		v := a.Value(i)
		if v.IsMissing() {
			if !p.Optional {
				return Args{}, WrongArgument.Errorf("argument '%s' is required but blank", p.Name)
			}
			continue
		}
		var err error
		switch p.Type {
		case TypeNumber:
			_, err = a.Number(i)
		case TypeText:
			_, err = a.Text(i)
		case TypeBool:
			_, err = a.Bool(i)
		}
		if err != nil {
			return Args{}, err
		}
	}
	return a, nil
}

// NewArgs binds vals to f without checks (for tests of a Call function).
func NewArgs(f *Func, vals ...Value) Args { return Args{f: f, vals: vals} }

func arityText(f *Func, required, total int) string {
	var names []string
	for i, p := range f.Params {
		if i >= required {
			names = append(names, "["+p.Name+"]")
		} else {
			names = append(names, p.Name)
		}
	}
	count := strconv.Itoa(total) + " arguments"
	switch {
	case total == 0:
		count = "no arguments"
	case required != total:
		count = strconv.Itoa(required) + " to " + strconv.Itoa(total) + " arguments"
	case total == 1:
		count = "1 argument"
	}
	if len(names) == 0 {
		return count
	}
	return count + " (" + strings.Join(names, ", ") + ")"
}

// Func returns the function the arguments are bound to.
func (a Args) Func() *Func { return a.f }

// Len returns the number of arguments given (trailing omitted ones dropped).
func (a Args) Len() int { return len(a.vals) }

// Value returns argument i as given; past the end it is absent.
func (a Args) Value(i int) Value {
	if i < 0 || i >= len(a.vals) {
		return Value{}
	}
	return a.vals[i]
}

// Values returns all arguments given.
func (a Args) Values() []Value { return a.vals }

// Missing reports whether argument i was omitted or blank.
func (a Args) Missing(i int) bool { return a.Value(i).IsMissing() }

func (a Args) argName(i int) string {
	if a.f == nil {
		return strconv.Itoa(i + 1)
	}
	return a.f.ArgName(i)
}

func (a Args) name(i int) string { return "argument " + a.argName(i) }

// single returns argument i as one cell.
func (a Args) single(i int, want string) (Cell, error) {
	v := a.Value(i)
	c, ok := v.Cell()
	if !ok {
		r, cols := v.Dims()
		return Cell{}, WrongArgument.Errorf("%s must be a single %s; got %s", a.name(i), want, describeRange(r, cols))
	}
	if c.Kind == KindError {
		return Cell{}, Errorf(Code(c.Str), "%s is the error %s", a.name(i), c.Str)
	}
	return c, nil
}

// Number returns argument i as a number. Blank, text and booleans are errors.
func (a Args) Number(i int) (float64, error) {
	c, err := a.single(i, "number")
	if err != nil {
		return 0, err
	}
	if c.Kind != KindNumber {
		return 0, WrongArgument.Errorf("%s must be a number; got %s", a.name(i), c)
	}
	return c.Num, nil
}

// OptNumber returns argument i as a number, or def when omitted or blank.
func (a Args) OptNumber(i int, def float64) (float64, error) {
	if a.Missing(i) {
		return def, nil
	}
	return a.Number(i)
}

// Int returns argument i as a whole number in [min, max].
func (a Args) Int(i int, min, max int) (int, error) {
	f, err := a.Number(i)
	if err != nil {
		return 0, err
	}
	if f != math.Trunc(f) || f < float64(min) || f > float64(max) {
		return 0, OutOfRange.Errorf("%s must be a whole number from %d to %d; got %s", a.name(i), min, max, FormatNumber(f))
	}
	return int(f), nil
}

// Text returns argument i as text; a number is formatted (1001 gives
// "1001"). Blank, booleans and error values are errors.
func (a Args) Text(i int) (string, error) {
	c, err := a.single(i, "text")
	if err != nil {
		return "", err
	}
	switch c.Kind {
	case KindText:
		return c.Str, nil
	case KindNumber:
		return FormatNumber(c.Num), nil
	}
	return "", WrongArgument.Errorf("%s must be text; got %s", a.name(i), c)
}

// OptText returns argument i as text, or def when omitted or blank.
func (a Args) OptText(i int, def string) (string, error) {
	if a.Missing(i) {
		return def, nil
	}
	return a.Text(i)
}

// Bool returns argument i as a boolean: TRUE/FALSE, 1/0, or the texts
// on/off, yes/no, true/false.
func (a Args) Bool(i int) (bool, error) {
	c, err := a.single(i, "TRUE or FALSE")
	if err != nil {
		return false, err
	}
	if b, ok := boolOf(c); ok {
		return b, nil
	}
	return false, WrongArgument.Errorf("%s must be TRUE or FALSE; got %s", a.name(i), c)
}

// OptBool returns argument i as a boolean, or def when omitted or blank.
func (a Args) OptBool(i int, def bool) (bool, error) {
	if a.Missing(i) {
		return def, nil
	}
	return a.Bool(i)
}

// Range returns argument i as rows of cells (a single cell is a 1x1 range).
// The cells are shared with the request: do not modify them. For large
// ranges Value(i).Flat or At avoid building the row slices.
func (a Args) Range(i int) [][]Cell { return a.Value(i).Rows() }

// Options parses argument i as options of the function (see ParseOptions).
func (a Args) Options(i int) (Options, error) {
	if a.f == nil {
		return ParseOptions("", nil, a.Value(i), "argument "+strconv.Itoa(i+1))
	}
	return ParseOptions(a.f.Name, a.f.Options, a.Value(i), a.f.ArgName(i))
}

// Policy says what a numeric or text column does with cells that are not of
// the wanted kind. Each function chooses and documents its policy per
// argument.
//
//	cell        PolicyError          PolicyMissing        PolicySkip
//	number      kept                 kept                 kept
//	blank       #VALUE! naming cell  NaN ("" for text)    dropped
//	text        #VALUE! naming cell  #VALUE! naming cell  dropped
//	boolean     #VALUE! naming cell  #VALUE! naming cell  dropped
//	error       its code, naming it  NaN ("" for text)    its code, naming it
//
// In a text column (Texts) numbers are formatted as text and text is kept.
// PolicyMissing keeps rows aligned with the other columns of a table: the
// function answers #N/A for the rows whose value is NaN. PolicySkip suits a
// stand-alone sample (like spreadsheet AVERAGE) and must not be used for
// columns that are aligned with others.
type Policy uint8

// Column policies.
const (
	PolicyError Policy = iota
	PolicyMissing
	PolicySkip
)

// column returns the cells of a one-column or one-row argument in order.
func (a Args) column(i int) ([]Cell, int, int, error) {
	v := a.Value(i)
	if v.IsAbsent() {
		return nil, 0, 0, nil
	}
	rows, cols := v.Dims()
	if rows > 1 && cols > 1 {
		return nil, rows, cols, WrongArgument.Errorf("%s must be one column or one row; got %s", a.name(i), describeRange(rows, cols))
	}
	return v.Flat(), rows, cols, nil
}

// Numbers returns argument i, a column or row, as numbers under policy p.
// An absent argument gives no numbers; a single cell is a column of one.
func (a Args) Numbers(i int, p Policy) ([]float64, error) {
	cells, rows, cols, err := a.column(i)
	if err != nil {
		return nil, err
	}
	out := make([]float64, 0, len(cells))
	for k, c := range cells {
		switch c.Kind {
		case KindNumber:
			out = append(out, c.Num)
			continue
		case KindBlank:
			switch p {
			case PolicyMissing:
				out = append(out, math.NaN())
				continue
			case PolicySkip:
				continue
			}
		case KindText, KindBool:
			if p == PolicySkip {
				continue
			}
		case KindError:
			if p == PolicyMissing {
				out = append(out, math.NaN())
				continue
			}
			return nil, Errorf(Code(c.Str), "%s, %s: the error %s", a.name(i), a.pos(rows, cols, k), c.Str)
		}
		return nil, WrongArgument.Errorf("%s, %s: expected a number; got %s%s", a.name(i), a.pos(rows, cols, k), c, policyHint(p))
	}
	return out, nil
}

// Matrix returns argument i, a range of one or more columns, as numbers
// row by row (cols numbers per row) under policy p, which must keep rows
// aligned (PolicyError or PolicyMissing). An absent argument gives no rows.
func (a Args) Matrix(i int, p Policy) (vals []float64, rows, cols int, err error) {
	if p == PolicySkip {
		panic("cell.Args.Matrix: PolicySkip would misalign the rows")
	}
	v := a.Value(i)
	if v.IsAbsent() {
		return nil, 0, 0, nil
	}
	rows, cols = v.Dims()
	vals = make([]float64, 0, rows*cols)
	for k, c := range v.Flat() {
		switch c.Kind {
		case KindNumber:
			vals = append(vals, c.Num)
			continue
		case KindBlank:
			if p == PolicyMissing {
				vals = append(vals, math.NaN())
				continue
			}
		case KindError:
			if p == PolicyMissing {
				vals = append(vals, math.NaN())
				continue
			}
			return nil, rows, cols, Errorf(Code(c.Str), "%s, %s: the error %s", a.name(i), a.pos(rows, cols, k), c.Str)
		}
		return nil, rows, cols, WrongArgument.Errorf("%s, %s: expected a number; got %s%s", a.name(i), a.pos(rows, cols, k), c, policyHint(p))
	}
	return vals, rows, cols, nil
}

// Texts returns argument i, a column or row, as texts under policy p
// (numbers formatted as text, as ids often are numbers).
func (a Args) Texts(i int, p Policy) ([]string, error) {
	cells, rows, cols, err := a.column(i)
	if err != nil {
		return nil, err
	}
	out := make([]string, 0, len(cells))
	for k, c := range cells {
		switch c.Kind {
		case KindText:
			out = append(out, c.Str)
			continue
		case KindNumber:
			out = append(out, FormatNumber(c.Num))
			continue
		case KindBlank:
			switch p {
			case PolicyMissing:
				out = append(out, "")
				continue
			case PolicySkip:
				continue
			}
		case KindBool:
			if p == PolicySkip {
				continue
			}
		case KindError:
			if p == PolicyMissing {
				out = append(out, "")
				continue
			}
			return nil, Errorf(Code(c.Str), "%s, %s: the error %s", a.name(i), a.pos(rows, cols, k), c.Str)
		}
		return nil, WrongArgument.Errorf("%s, %s: expected text or a number; got %s%s", a.name(i), a.pos(rows, cols, k), c, policyHint(p))
	}
	return out, nil
}

func (a Args) pos(rows, cols, k int) string {
	if cols <= 1 {
		return position(rows, 1, k, 0)
	}
	return position(1, cols, 0, k)
}

func policyHint(p Policy) string {
	switch p {
	case PolicyError:
		return " (blank, text and TRUE/FALSE cells are not allowed here)"
	case PolicyMissing:
		return " (blank cells are allowed and give #N/A for their row; text and TRUE/FALSE are not)"
	}
	return ""
}

// Rows returns the number of cells of a one-column or one-row argument (1
// for a single cell, 0 when absent), or of rows for a 2-D range.
func (a Args) Rows(i int) int {
	v := a.Value(i)
	r, c := v.Dims()
	if r == 1 && c > 1 {
		return c
	}
	return r
}

// SameRows checks that the given arguments (omitted ones are skipped) have
// the same number of rows, as aligned columns of one table must.
func (a Args) SameRows(idx ...int) error {
	first := -1
	for _, i := range idx {
		if a.Value(i).IsAbsent() || a.Missing(i) {
			continue
		}
		if first < 0 {
			first = i
			continue
		}
		if a.Rows(i) != a.Rows(first) {
			return WrongArgument.Errorf("argument %s has %d rows but argument %s has %d; they must be columns of the same table", a.argName(i), a.Rows(i), a.argName(first), a.Rows(first))
		}
	}
	return nil
}
