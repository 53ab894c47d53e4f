package rules

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
)

func TestSanitizeName(t *testing.T) {
	tests := []struct{ in, want string }{
		{"Systolic BP", "systolic_bp"},
		{"FEV1 (L)", "fev1_l"},
		{"% predicted", "pct_predicted"},
		{"FEV1 %pred", "fev1_pct_pred"},
		{"2nd reading", "col_2nd_reading"},
		{"Größe", "grosse"},
		{"Débit expiratoire", "debit_expiratoire"},
		{"  --weight--  ", "weight"},
		{"in", "in_"},
		{"int", "int_"},
		{"Null", "null_"},
		{"max", "max"},
		{"size", "size"},
		{"æble", "aeble"},
		{"体重", ""},
		{"", ""},
		{"a__b", "a_b"},
	}
	for _, tc := range tests {
		if got := SanitizeName(tc.in); got != tc.want {
			t.Errorf("SanitizeName(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
	got := SanitizeNames([]string{"BP", "bp", "", "B.P.", "体重"})
	want := []string{"bp", "bp_2", "column_3", "b_p", "column_5"}
	if strings.Join(got, ",") != strings.Join(want, ",") {
		t.Errorf("SanitizeNames = %v, want %v", got, want)
	}
}

func TestColumnRules(t *testing.T) {
	headers := []string{"Systolic BP", "Diastolic BP", "Smoker", "Site", "max", "size"}
	rows := [][]Value{
		{NumberValue(150), NumberValue(85), BoolValue(false), StringValue("North"), NumberValue(1), NumberValue(2)},
		{NumberValue(120), NumberValue(95), BoolValue(true), StringValue("South"), NumberValue(1), NumberValue(2)},
		{NumberValue(118), NumberValue(70), BoolValue(false), StringValue("North"), NumberValue(1), NumberValue(2)},
	}
	tests := []struct {
		rule string
		want []string
	}{
		{"systolic_bp > 140 || diastolic_bp > 90", []string{"TRUE", "TRUE", "FALSE"}},
		{`smoker && site == "South"`, []string{"FALSE", "TRUE", "FALSE"}},
		{`systolic_bp >= 140 ? "high" : "ok"`, []string{"high", "ok", "ok"}},
		{"max + size", []string{"3", "3", "3"}}, // columns may share a name with functions
		{"max([systolic_bp, diastolic_bp])", []string{"150", "120", "118"}},
	}
	for _, tc := range tests {
		r, err := CompileColumns(tc.rule, headers, Any)
		if err != nil {
			t.Fatalf("%s: %v", tc.rule, err)
		}
		out := make([]Value, len(rows))
		if err := EvalRows(context.Background(), r, rows, out); err != nil {
			t.Fatalf("%s: %v", tc.rule, err)
		}
		for i, v := range out {
			if v.String() != tc.want[i] {
				t.Errorf("%s row %d = %v, want %s", tc.rule, i+1, v, tc.want[i])
			}
		}
	}
	r, err := CompileColumns("smoker", headers, Bool)
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(r.Names(), ","); got != "systolic_bp,diastolic_bp,smoker,site,max,size" {
		t.Errorf("Names() = %s", got)
	}
	if v, err := r.EvalRow(context.Background(), rows[1]); err != nil || v.String() != "TRUE" {
		t.Errorf("EvalRow = %v, %v", v, err)
	}
}

func TestColumnErrors(t *testing.T) {
	headers := []string{"Systolic BP", "Site"}
	_, err := CompileColumns("sistolic_bp > 140", headers, Bool)
	if err == nil || !strings.Contains(err.Error(), `did you mean "systolic_bp" (column "Systolic BP")?`) {
		t.Errorf("typo: %v", err)
	}
	// Declared kinds catch a kind mistake at compile time...
	_, err = CompileColumnsTyped(`site > 140`, []Column{{"Systolic BP", Number}, {"Site", String}}, Bool)
	if err == nil || !strings.Contains(err.Error(), `cannot use ">" on text and a whole number`) {
		t.Errorf("typed: %v", err)
	}
	// ...untyped columns only when run, on the rows concerned.
	r, err := CompileColumns(`site > 140`, headers, Bool)
	if err != nil {
		t.Fatal(err)
	}
	rows := [][]Value{{NumberValue(150), NumberValue(141)}, {NumberValue(150), StringValue("North")}}
	out := make([]Value, 2)
	err = EvalRows(context.Background(), r, rows, out)
	var re *RowErrors
	if !errors.As(err, &re) || len(re.Rows) != 1 || re.Rows[0].Row != 2 || !strings.Contains(err.Error(), "wrong kind") {
		t.Errorf("untyped: %v", err)
	}
	if b, _ := out[0].Bool(); !b {
		t.Errorf("row 1 = %v", out[0])
	}
	// A typed column given a cell of another kind fails on that row.
	tr, err := CompileColumnsTyped("systolic_bp > 140.0", []Column{{"Systolic BP", Number}, {"Site", String}}, Bool)
	if err != nil {
		t.Fatal(err)
	}
	_, err = tr.EvalRow(context.Background(), []Value{StringValue("n/a"), StringValue("x")})
	if err == nil || !strings.Contains(err.Error(), `column "Systolic BP" should hold a number, but this row holds text "n/a"`) {
		t.Errorf("typed row: %v", err)
	}
	if _, err := CompileColumnsTyped("a", []Column{{"A", ResultKind(9)}}, Any); err == nil {
		t.Error("bad kind accepted")
	}
}

func TestEmptyCells(t *testing.T) {
	cols := []Column{{"N", Number}, {"S", String}, {"B", Bool}, {"D", Any}}
	tests := []struct{ rule, want string }{
		{"missing(n)", "TRUE"},
		{"n > 1.0", "FALSE"},
		{`s == ""`, "TRUE"},
		{"b", "FALSE"},
		{"d == null", "TRUE"},
	}
	for _, tc := range tests {
		r, err := CompileColumnsTyped(tc.rule, cols, Bool)
		if err != nil {
			t.Fatalf("%s: %v", tc.rule, err)
		}
		for _, row := range [][]Value{{Value{}, Value{}, Value{}, Value{}}, nil} { // empty cells, then a short row
			v, err := r.EvalRow(context.Background(), row)
			if err != nil || v.String() != tc.want {
				t.Errorf("%s on %v = %v, %v; want %s", tc.rule, row, v, err, tc.want)
			}
		}
	}
}

func TestColumnKinds(t *testing.T) {
	rows := [][]Value{
		{NumberValue(1), StringValue("a"), Value{}, NumberValue(1)},
		{NumberValue(2), Value{}, Value{}, StringValue("x")},
		{NumberValue(math.NaN())},
	}
	got := ColumnKinds(rows, 5)
	want := []ResultKind{Number, String, Any, Any, Any}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("column %d: %v, want %v", i+1, got[i], want[i])
		}
	}
}
