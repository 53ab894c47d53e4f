package cell

import (
	"strings"
	"testing"
)

func TestParseOptions(t *testing.T) {
	allowed := []string{OptionSide, OptionLambda, OptionRestart, OptionGroup}
	type want struct {
		side    string
		lambda  float64
		restart bool
		group   string
	}
	def := want{"both", 0.2, false, ""}
	tests := []struct {
		name string
		in   any
		want want
		code Code
		part string
	}{
		{"absent", nil, def, "", ""},
		{"text", "side=up; lambda=0.1", want{"up", 0.1, false, ""}, "", ""},
		{"spaces case newlines", " SIDE = Down \n Restart = ON ;", want{"down", 0.2, true, ""}, "", ""},
		{"two-column range", [][]any{{"side", "up"}, {nil, nil}, {"lambda", 0.3}, {"restart", true}}, want{"up", 0.3, true, ""}, "", ""},
		{"column of texts", []any{"side=up", nil, "lambda=0.05"}, want{"up", 0.05, false, ""}, "", ""},
		{"group from number", "group=2", want{"both", 0.2, false, "2"}, "", ""},
		{"unknown", "side=up; alowance=0.5", def, CodeValue, `unknown option "alowance"; known options: side, lambda, restart, group`},
		{"twice", "side=up;side=down", def, CodeValue, `option "side" is given twice`},
		{"bad choice", "side=upward", def, CodeValue, `option "side" must be one of up, down, both, or a comma-separated list of them (one per marker); got text "upward"`},
		{"list of choices", "side=Up, down,both", want{"up,down,both", 0.2, false, ""}, "", ""},
		{"bad choice in a list", "side=up,upward", def, CodeValue, `got text "up,upward"`},
		{"bad number", "lambda=abc", def, CodeValue, `option "lambda" must be a number`},
		{"not finite", "lambda=NaN", def, CodeValue, `option "lambda" must be a number`},
		{"bad bool", "restart=maybe", def, CodeValue, `option "restart" must be on or off`},
		{"no value", "side", def, CodeValue, `"side" has no value`},
		{"empty value", "side=", def, CodeValue, `option "side" has no value`},
		{"range name not text", [][]any{{1.0, "up"}}, def, CodeValue, "row 1: the first column must hold an option name"},
		{"range value error", [][]any{{"side", BlankInput.Errorf("")}}, def, CodeNA, "is the error #N/A"},
		{"scalar number", 3.0, def, CodeValue, "options must be text like"},
		{"3 columns", [][]any{{"a", "b", "c"}, {"a", "b", "c"}}, def, CodeValue, "options must be text like"},
		{"error cell", BlankInput.Errorf(""), def, CodeNA, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			o, err := ParseOptions("VEER.TEST.O", allowed, mustValue(t, tt.in), "'options'")
			if tt.code != "" {
				e := AsError(err)
				if e == nil || e.Code != tt.code || !strings.Contains(e.Message, tt.part) {
					t.Fatalf("error = %v; want %s containing %q", err, tt.code, tt.part)
				}
				if !strings.Contains(e.Message, "argument 'options'") {
					t.Errorf("message %q does not name the argument", e.Message)
				}
				if strings.Contains(e.Message, "VEER.TEST.O") {
					t.Errorf("message %q names the function; the dispatcher adds it", e.Message)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			got := want{o.Text(OptionSide, "both"), o.Number(OptionLambda, 0.2), o.Bool(OptionRestart, false), o.Text(OptionGroup, "")}
			if got != tt.want {
				t.Errorf("got %+v; want %+v", got, tt.want)
			}
		})
	}
}

func TestOptionsNoneAllowed(t *testing.T) {
	_, err := ParseOptions("VEER.TEST.O", nil, mustValue(t, "side=up"), "'options'")
	if e := AsError(err); e == nil || !strings.Contains(e.Message, "the function takes no options") {
		t.Errorf("error = %v", err)
	}
}

func TestOptionsUndeclaredReadPanics(t *testing.T) {
	o, err := ParseOptions("VEER.TEST.O", []string{OptionSide}, mustValue(t, "side=up"), "'options'")
	if err != nil {
		t.Fatal(err)
	}
	if !o.Has(OptionSide) || strings.Join(o.Names(), ",") != "side" {
		t.Errorf("Has/Names wrong: %v", o.Names())
	}
	defer func() {
		if recover() == nil {
			t.Error("reading an option the function does not list did not panic")
		}
	}()
	o.Number(OptionLambda, 0)
}

func TestArgsOptions(t *testing.T) {
	f := argFunc()
	a := NewArgs(f, mustValue(t, 1.0), mustValue(t, 1.0), Value{}, Value{}, mustValue(t, "chart=ewma"))
	_, err := a.Options(4)
	if e := AsError(err); e == nil || !strings.Contains(e.Message, "argument 'options': unknown option \"chart\"; known options: side, lambda, serial") {
		t.Errorf("error = %v", err)
	}
}
