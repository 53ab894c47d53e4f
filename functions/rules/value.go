package rules

import (
	"encoding/json"
	"math"
	"strconv"
)

// ResultKind is the kind of value a rule gives: true/false, text or a number.
// Any accepts whichever of the three the rule gives.
type ResultKind uint8

const (
	// Any accepts a rule giving true/false, text or a number.
	Any ResultKind = iota
	// Bool is a true/false result (an alert).
	Bool
	// String is a text result (for example a severity label).
	String
	// Number is a numeric result; whole numbers are returned as float64.
	Number
)

// String describes the kind in words a spreadsheet user knows.
func (k ResultKind) String() string {
	switch k {
	case Any:
		return "any value"
	case Bool:
		return "true/false"
	case String:
		return "text"
	case Number:
		return "a number"
	}
	return "kind(" + strconv.Itoa(int(k)) + ")"
}

// ParseResultKind reads "bool", "string", "number" or "any" (also the
// spreadsheet words "true/false", "text", "logical", "boolean").
func ParseResultKind(s string) (ResultKind, bool) {
	switch s {
	case "", "any", "Any", "ANY":
		return Any, true
	case "bool", "boolean", "logical", "true/false", "Bool", "BOOL":
		return Bool, true
	case "string", "text", "String", "STRING", "TEXT":
		return String, true
	case "number", "numeric", "Number", "NUMBER", "double":
		return Number, true
	}
	return Any, false
}

// Value is one rule result or one cell of input for column rules.
// The zero Value is empty (an empty cell); otherwise it holds exactly one of
// a bool, a float64 or a string.
type Value struct {
	kind ResultKind // Any means empty
	b    bool
	n    float64
	s    string
}

// BoolValue returns a true/false value.
func BoolValue(b bool) Value { return Value{kind: Bool, b: b} }

// NumberValue returns a numeric value. NaN is allowed and stands for
// "not available".
func NumberValue(f float64) Value { return Value{kind: Number, n: f} }

// StringValue returns a text value.
func StringValue(s string) Value { return Value{kind: String, s: s} }

// Kind reports Bool, String or Number; an empty value reports Any.
func (v Value) Kind() ResultKind { return v.kind }

// IsEmpty reports whether v is the empty value.
func (v Value) IsEmpty() bool { return v.kind == Any }

// Bool returns the value as a bool and whether it is one.
func (v Value) Bool() (bool, bool) { return v.b, v.kind == Bool }

// Number returns the value as a float64 and whether it is one.
func (v Value) Number() (float64, bool) {
	if v.kind != Number {
		return math.NaN(), false
	}
	return v.n, true
}

// Text returns the value as a string and whether it is one.
func (v Value) Text() (string, bool) { return v.s, v.kind == String }

// Interface returns nil (empty), bool, float64 or string, ready for JSON or
// a spreadsheet cell.
func (v Value) Interface() any {
	switch v.kind {
	case Bool:
		return v.b
	case Number:
		return v.n
	case String:
		return v.s
	}
	return nil
}

// String formats the value for display: TRUE/FALSE like a spreadsheet,
// numbers in shortest form, text as is, empty as "".
func (v Value) String() string {
	switch v.kind {
	case Bool:
		if v.b {
			return "TRUE"
		}
		return "FALSE"
	case Number:
		return strconv.FormatFloat(v.n, 'g', -1, 64)
	case String:
		return v.s
	}
	return ""
}

// MarshalJSON writes null, true/false, a number or a string. A NaN or
// infinite number is written as null, since JSON has no such numbers.
func (v Value) MarshalJSON() ([]byte, error) {
	if v.kind == Number && (math.IsNaN(v.n) || math.IsInf(v.n, 0)) {
		return []byte("null"), nil
	}
	return json.Marshal(v.Interface())
}
