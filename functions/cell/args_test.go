package cell

import (
	"math"
	"reflect"
	"strings"
	"testing"
)

func mustValue(t *testing.T, x any) Value {
	t.Helper()
	v, err := ValueOf(x)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

func argFunc() *Func {
	return &Func{
		Name: "VEER.TEST.ARGS", Summary: "t", Result: ShapeColumn, Call: nop,
		Params: []Param{
			{Name: "values", Type: TypeRange},
			{Name: "target", Type: TypeNumber},
			{Name: "label", Type: TypeText, Optional: true},
			{Name: "flag", Type: TypeBool, Optional: true},
			{Name: "options", Type: TypeAny, Optional: true},
		},
		Options: []string{OptionSide, OptionLambda, OptionSerial},
	}
}

func TestBind(t *testing.T) {
	f := argFunc()
	tests := []struct {
		name string
		args []any
		code Code
		part string
	}{
		{"ok minimal", []any{[]float64{1}, 2.0}, "", ""},
		{"ok full", []any{[]float64{1}, 2.0, "x", true, "side=up"}, "", ""},
		{"trailing blanks dropped", []any{[]float64{1}, 2.0, nil, nil, nil, nil}, "", ""},
		{"too few", []any{[]float64{1}}, CodeValue, "takes 2 to 5 arguments (values, target, [label], [flag], [options]); got 1"},
		{"too many", []any{1.0, 2.0, "x", true, "", 7.0}, CodeValue, "got 6"},
		{"required blank", []any{nil, 2.0}, CodeValue, "argument 'values' is required but blank"},
		{"number is text", []any{1.0, "abc"}, CodeValue, `argument 'target' must be a number; got text "abc"`},
		{"number is bool", []any{1.0, true}, CodeValue, "must be a number; got TRUE"},
		{"number is range", []any{1.0, []float64{1, 2}}, CodeValue, "must be a single number; got a 2x1 range"},
		{"number 1x1 range", []any{1.0, []float64{3}}, "", ""},
		{"error propagates", []any{1.0, BlankInput.Errorf("")}, CodeNA, "argument 'target' is the error #N/A"},
		{"text from number", []any{1.0, 2.0, 1001.0}, "", ""},
		{"text is bool", []any{1.0, 2.0, false}, CodeValue, "argument 'label' must be text; got FALSE"},
		{"bool from text", []any{1.0, 2.0, "a", "yes"}, "", ""},
		{"bool bad", []any{1.0, 2.0, "a", "maybe"}, CodeValue, `must be TRUE or FALSE; got text "maybe"`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var vals []Value
			for _, a := range tt.args {
				vals = append(vals, mustValue(t, a))
			}
			_, err := Bind(f, vals)
			if tt.code == "" {
				if err != nil {
					t.Fatalf("Bind: %v", err)
				}
				return
			}
			e := AsError(err)
			if e == nil || e.Code != tt.code || !strings.Contains(e.Message, tt.part) {
				t.Errorf("Bind error = %v; want %s containing %q", err, tt.code, tt.part)
			}
		})
	}
}

func TestScalarGetters(t *testing.T) {
	f := argFunc()
	a := NewArgs(f, mustValue(t, []float64{1}), mustValue(t, 2.5), mustValue(t, 42.0), mustValue(t, 1.0))
	if x, err := a.Number(1); err != nil || x != 2.5 {
		t.Errorf("Number = %v, %v", x, err)
	}
	if x, err := a.OptNumber(7, 9); err != nil || x != 9 {
		t.Errorf("OptNumber past end = %v, %v", x, err)
	}
	if s, err := a.Text(2); err != nil || s != "42" {
		t.Errorf("Text(number) = %q, %v", s, err)
	}
	if s, err := a.OptText(4, "def"); err != nil || s != "def" {
		t.Errorf("OptText = %q, %v", s, err)
	}
	if b, err := a.Bool(3); err != nil || !b {
		t.Errorf("Bool(1) = %v, %v", b, err)
	}
	if n, err := a.Int(2, 0, 100); err != nil || n != 42 {
		t.Errorf("Int = %v, %v", n, err)
	}
	if _, err := a.Int(1, 0, 100); AsError(err).Code != CodeNum {
		t.Errorf("Int(2.5) error = %v; want #NUM!", err)
	}
	if _, err := a.Int(2, 0, 10); AsError(err).Code != CodeNum || !strings.Contains(err.Error(), "from 0 to 10; got 42") {
		t.Errorf("Int out of range error = %v", err)
	}
}

func TestNumbersPolicies(t *testing.T) {
	f := argFunc()
	nan := math.NaN()
	col := []any{1.0, nil, "x", true, BlankInput.Errorf(""), 2.0}
	tests := []struct {
		name   string
		in     any
		policy Policy
		want   []float64
		code   Code
		part   string
	}{
		{"clean column", []float64{1, 2, 3}, PolicyError, []float64{1, 2, 3}, "", ""},
		{"one row", [][]float64{{1, 2, 3}}, PolicyError, []float64{1, 2, 3}, "", ""},
		{"single cell", 4.0, PolicyError, []float64{4}, "", ""},
		{"blank strict", []any{1.0, nil}, PolicyError, nil, CodeValue, "argument 'values', row 2: expected a number; got a blank cell (blank, text and TRUE/FALSE cells are not allowed here)"},
		{"text strict in a row", [][]any{{1.0, "x"}}, PolicyError, nil, CodeValue, "column 2: expected a number; got text \"x\""},
		{"error strict", []any{1.0, 2.0, BlankInput.Errorf("")}, PolicyError, nil, CodeNA, "row 3: the error #N/A"},
		{"blank missing", []any{1.0, nil, BlankInput.Errorf(""), 2.0}, PolicyMissing, []float64{1, nan, nan, 2}, "", ""},
		{"text missing", []any{1.0, "n/a"}, PolicyMissing, nil, CodeValue, `row 2: expected a number; got text "n/a" (blank cells are allowed and give #N/A for their row`},
		{"skip", col[:4], PolicySkip, []float64{1}, "", ""},
		{"skip keeps errors", col, PolicySkip, nil, CodeNA, "row 5"},
		{"2-D rejected", [][]float64{{1, 2}, {3, 4}}, PolicyError, nil, CodeValue, "must be one column or one row; got a 2x2 range"},
		{"empty", []float64{}, PolicyError, []float64{}, "", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			a := NewArgs(f, mustValue(t, tt.in))
			got, err := a.Numbers(0, tt.policy)
			if tt.code != "" {
				e := AsError(err)
				if e == nil || e.Code != tt.code || !strings.Contains(e.Message, tt.part) {
					t.Fatalf("error = %v; want %s containing %q", err, tt.code, tt.part)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(tt.want) {
				t.Fatalf("got %v; want %v", got, tt.want)
			}
			for i := range got {
				if got[i] != tt.want[i] && !(math.IsNaN(got[i]) && math.IsNaN(tt.want[i])) {
					t.Fatalf("got %v; want %v", got, tt.want)
				}
			}
		})
	}
}

func TestTexts(t *testing.T) {
	f := argFunc()
	tests := []struct {
		in     []any
		policy Policy
		want   []string
		code   Code
	}{
		{[]any{"w1", 1001.0, 2.5}, PolicyError, []string{"w1", "1001", "2.5"}, ""},
		{[]any{"w1", nil}, PolicyError, nil, CodeValue},
		{[]any{"w1", nil, BlankInput.Errorf("")}, PolicyMissing, []string{"w1", "", ""}, ""},
		{[]any{"w1", nil, true}, PolicySkip, []string{"w1"}, ""},
		{[]any{"w1", true}, PolicyMissing, nil, CodeValue},
	}
	for i, tt := range tests {
		got, err := NewArgs(f, mustValue(t, tt.in)).Texts(0, tt.policy)
		if tt.code != "" {
			if AsError(err) == nil || AsError(err).Code != tt.code {
				t.Errorf("case %d: error = %v; want %s", i, err, tt.code)
			}
			continue
		}
		if err != nil || !reflect.DeepEqual(got, tt.want) {
			t.Errorf("case %d: got %q, %v; want %q", i, got, err, tt.want)
		}
	}
}

func TestSameRows(t *testing.T) {
	f := argFunc()
	a := NewArgs(f, mustValue(t, []float64{1, 2, 3}), mustValue(t, []float64{1, 2}), mustValue(t, [][]float64{{1, 2, 3}}))
	err := a.SameRows(0, 1)
	if e := AsError(err); e == nil || e.Code != CodeValue || !strings.Contains(e.Message, "argument 'target' has 2 rows but argument 'values' has 3") {
		t.Errorf("SameRows error = %v", err)
	}
	if err := a.SameRows(0, 2, 4); err != nil {
		t.Errorf("a 1x3 row and a 3x1 column should match, absent skipped: %v", err)
	}
}
