package cell

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"reflect"
	"strings"
	"testing"
)

func TestNormalizeCode(t *testing.T) {
	tests := []struct {
		in    string
		want  Code
		known bool
	}{
		{"#N/A", CodeNA, true},
		{"#n/a", CodeNA, true},
		{"#VALUE!", CodeValue, true},
		{"#div/0!", CodeDiv0, true},
		{"#SPILL!", "#SPILL!", true},
		{"ERR:532", CodeDiv0, true},
		{"#WHAT", CodeValue, false},
		{"", CodeValue, false},
	}
	for _, tt := range tests {
		got, known := NormalizeCode(tt.in)
		if got != tt.want || known != tt.known {
			t.Errorf("NormalizeCode(%q) = %q, %v; want %q, %v", tt.in, got, known, tt.want, tt.known)
		}
	}
}

func TestAsError(t *testing.T) {
	na := BlankInput.Errorf("time 90 is outside the reference range")
	tests := []struct {
		name     string
		in       error
		wantCode Code
		wantMsg  string
	}{
		{"nil", nil, "", ""},
		{"cell error", na, CodeNA, "time 90 is outside the reference range"},
		{"wrapped cell error", fmt.Errorf("fitting: %w", na), CodeNA, "time 90"},
		{"deadline", context.DeadlineExceeded, CodeBusy, "time limit"},
		{"wrapped cancel", fmt.Errorf("x: %w", context.Canceled), CodeBusy, "cancelled"},
		{"plain", errors.New("singular matrix"), CodeValue, "singular matrix"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := AsError(tt.in)
			if tt.in == nil {
				if got != nil {
					t.Fatalf("AsError(nil) = %v", got)
				}
				return
			}
			if got.Code != tt.wantCode || !strings.Contains(got.Message, tt.wantMsg) {
				t.Errorf("AsError(%v) = %q %q; want code %q and message containing %q", tt.in, got.Code, got.Message, tt.wantCode, tt.wantMsg)
			}
		})
	}
	if e := OutOfRange.Errorf("x %d", 3); e.Error() != "#NUM!: x 3" {
		t.Errorf("Error() = %q", e.Error())
	}
}

func TestValueUnmarshalJSON(t *testing.T) {
	num, text := NumberCell, TextCell
	tests := []struct {
		in       string
		wantRows [][]Cell // nil for error
		scalar   bool
		errPart  string
	}{
		{`3.5`, [][]Cell{{num(3.5)}}, true, ""},
		{`"abc"`, [][]Cell{{text("abc")}}, true, ""},
		{`true`, [][]Cell{{BoolCell(true)}}, true, ""},
		{`null`, [][]Cell{{{}}}, true, ""},
		{`{"error":"#N/A"}`, [][]Cell{{ErrorCell("#N/A")}}, true, ""},
		{`{"error":"#n/a","message":"x"}`, [][]Cell{{ErrorCell("#N/A")}}, true, ""},
		{`{"error":"#FOO"}`, [][]Cell{{ErrorCell(string(CodeValue))}}, true, ""},
		{`{"error":5}`, nil, false, "error value"},
		{`{"code":"#N/A"}`, nil, false, "error value"},
		{`{"error":"#N/A","x":1}`, nil, false, `not "x"`},
		{`[1,2,null]`, [][]Cell{{num(1)}, {num(2)}, {{}}}, false, ""},
		{`[[1,"a"],[true,null]]`, [][]Cell{{num(1), text("a")}, {BoolCell(true), {}}}, false, ""},
		{`[]`, [][]Cell{}, false, ""},
		{`[[]]`, [][]Cell{}, false, ""},
		{`[[1,2],[3]]`, nil, false, "not rectangular"},
		{`[1,[2]]`, nil, false, "mixes"},
		{`[[1],2]`, nil, false, "mixes"},
		{`[[[1]]]`, nil, false, "nest"},
		{`1e400`, nil, false, ""},
		{`[1,`, nil, false, ""},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			var v Value
			err := json.Unmarshal([]byte(tt.in), &v)
			if tt.wantRows == nil {
				if err == nil {
					t.Fatalf("no error; got %v", v.Rows())
				}
				if !strings.Contains(err.Error(), tt.errPart) {
					t.Errorf("error %q does not mention %q", err, tt.errPart)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if v.IsScalar() != tt.scalar {
				t.Errorf("IsScalar = %v; want %v", v.IsScalar(), tt.scalar)
			}
			if got := v.Rows(); !reflect.DeepEqual(got, tt.wantRows) {
				t.Errorf("rows = %v; want %v", got, tt.wantRows)
			}
			// Round trip through MarshalJSON.
			b, _ := json.Marshal(v)
			var back Value
			if err := json.Unmarshal(b, &back); err != nil {
				t.Fatalf("re-decoding %s: %v", b, err)
			}
			if !reflect.DeepEqual(back.Rows(), v.Rows()) {
				t.Errorf("round trip %s gave %v", b, back.Rows())
			}
		})
	}
}

func TestValueOf(t *testing.T) {
	tests := []struct {
		in         any
		rows, cols int
		absent     bool
	}{
		{nil, 0, 0, true},
		{2.5, 1, 1, false},
		{7, 1, 1, false},
		{"x", 1, 1, false},
		{[]float64{1, 2, 3}, 3, 1, false},
		{[]string{"a", "b"}, 2, 1, false},
		{[][]float64{{1, 2}, {3, 4}, {5, 6}}, 3, 2, false},
		{[]any{1.0, "a", nil}, 3, 1, false},
		{[]any{[]any{1.0, 2.0}}, 1, 2, false},
		{[][]any{{1, "a"}}, 1, 2, false},
		{BlankInput.Errorf("x"), 1, 1, false},
	}
	for _, tt := range tests {
		v, err := ValueOf(tt.in)
		if err != nil {
			t.Errorf("ValueOf(%v): %v", tt.in, err)
			continue
		}
		r, c := v.Dims()
		if r != tt.rows || c != tt.cols || v.IsAbsent() != tt.absent {
			t.Errorf("ValueOf(%v) dims %dx%d absent %v; want %dx%d %v", tt.in, r, c, v.IsAbsent(), tt.rows, tt.cols, tt.absent)
		}
	}
	if _, err := ValueOf(struct{}{}); err == nil {
		t.Error("ValueOf(struct{}{}) did not fail")
	}
	if _, err := ValueOf([][]float64{{1, 2}, {3}}); err == nil {
		t.Error("ragged [][]float64 did not fail")
	}
}

func TestCellString(t *testing.T) {
	tests := []struct {
		c    Cell
		want string
	}{
		{Cell{}, "a blank cell"},
		{NumberCell(1001), "the number 1001"},
		{NumberCell(0.25), "the number 0.25"},
		{TextCell("abc"), `text "abc"`},
		{TextCell(strings.Repeat("x", 50)), `text "` + strings.Repeat("x", 40) + `…"`},
		{BoolCell(false), "FALSE"},
		{ErrorCell("#N/A"), "the error #N/A"},
	}
	for _, tt := range tests {
		if got := tt.c.String(); got != tt.want {
			t.Errorf("%#v.String() = %q; want %q", tt.c, got, tt.want)
		}
	}
}

// TestEncodeResult checks the result encoder against encoding/json: every
// output must be valid JSON and decode to the expected document.
func TestEncodeResult(t *testing.T) {
	tests := []struct {
		name string
		in   any
		want string // JSON the output must be equal to after decoding
		code Code   // or the error code
	}{
		{"nil", nil, `null`, ""},
		{"number", 2.5, `2.5`, ""},
		{"int", 42, `42`, ""},
		{"text", "a\"b\n", `"a\"b\n"`, ""},
		{"bool", true, `true`, ""},
		{"NaN", math.NaN(), "", CodeNum},
		{"Inf", math.Inf(1), "", CodeNum},
		{"error", BlankInput.Errorf("gone"), "", CodeNA},
		{"error cell", ErrorCell("#DIV/0!"), "", CodeDiv0},
		{"column", []float64{1, 2.5, math.NaN()}, `[[1],[2.5],[{"error":"#NUM!","message":"not a finite number"}]]`, ""},
		{"text column", []string{"a", "b"}, `[["a"],["b"]]`, ""},
		{"any column", []any{1.0, "x", nil, BlankInput.Errorf("row 3 is blank")}, `[[1],["x"],[null],[{"error":"#N/A","message":"row 3 is blank"}]]`, ""},
		{"table", [][]any{{"id", "z"}, {"w1", 0.5}}, `[["id","z"],["w1",0.5]]`, ""},
		{"float table", [][]float64{{1, 2}, {3, 4}}, `[[1,2],[3,4]]`, ""},
		{"rows as []any", []any{[]any{1.0, 2.0}, []float64{3, 4}}, `[[1,2],[3,4]]`, ""},
		{"empty column", []float64{}, `[]`, ""},
		{"unsupported", struct{}{}, "", CodeValue},
		{"too deep", [][]any{{[]any{1}}}, "", CodeValue},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b, e := EncodeResult(nil, "", tt.in)
			if tt.code != "" {
				if e == nil || e.Code != tt.code {
					t.Fatalf("EncodeResult = %s, %v; want error %s", b, e, tt.code)
				}
				return
			}
			if e != nil {
				t.Fatal(e)
			}
			var got, want any
			if err := json.Unmarshal(b, &got); err != nil {
				t.Fatalf("output %s is not JSON: %v", b, err)
			}
			json.Unmarshal([]byte(tt.want), &want)
			if !reflect.DeepEqual(got, want) {
				t.Errorf("got %s; want %s", b, tt.want)
			}
		})
	}
}

// TestNumberFormatMatchesEncodingJSON compares number formatting with the
// standard library's encoding/json (the outside reference).
func TestNumberFormatMatchesEncodingJSON(t *testing.T) {
	for _, f := range []float64{0, math.Copysign(0, -1), 1, -1, 0.1, 1.0 / 3, 123456.789, 1e-6, 9.99e-7, 1e-7, 1e20, 1e21, 1.5e300, -2.5e-300, 5e-324, math.MaxFloat64} {
		want, _ := json.Marshal(f)
		got := appendNumber(nil, f)
		if string(got) != string(want) {
			t.Errorf("appendNumber(%v) = %s; encoding/json gives %s", f, got, want)
		}
	}
}

func TestAppendStringMatchesEncodingJSON(t *testing.T) {
	for _, s := range []string{"", "plain", "quote\" back\\slash", "ctl\x00\x01\x1f", "tab\tnl\nrt\r", "é ü 漢字 🎉", "bad\xffutf8", "\u2028\u2029", "<&>"} {
		b := appendString(nil, s)
		var back string
		if err := json.Unmarshal(b, &back); err != nil {
			t.Errorf("appendString(%q) = %s, not JSON: %v", s, b, err)
			continue
		}
		// encoding/json turns invalid UTF-8 into U+FFFD as well.
		want, _ := json.Marshal(s)
		var wantBack string
		json.Unmarshal(want, &wantBack)
		if back != wantBack {
			t.Errorf("appendString(%q) decodes to %q; encoding/json round trip gives %q", s, back, wantBack)
		}
	}
}
