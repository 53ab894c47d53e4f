package rules

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
)

func jointSheet() []JointExam {
	nan := math.NaN()
	mk := func(w string, t float64, sbp, chol float64, chart float64, signal bool) JointExam {
		e := JointExam{Worker: w, Time: t, Chart: chart, Limit: 3, Signal: signal, InRange: true,
			Markers: []MarkerExam{{Value: sbp, Z: (sbp - 120) / 10}, {Value: chol, Z: (chol - 5) / 1}}}
		if math.IsNaN(chol) {
			e.Markers[1].Z = nan
		}
		if signal {
			e.Leading = "sbp"
		}
		return e
	}
	// Worker A out of order; cholesterol missing at A's second exam.
	return []JointExam{
		mk("A", 42, 150, 7, 3.5, true),
		mk("B", 30, 118, 4.8, 0, false),
		mk("A", 40, 130, 6, 1, false),
		mk("A", 41, 140, nan, 2, false),
	}
}

func TestJointRules(t *testing.T) {
	ex := jointSheet()
	if err := LinkJoint(ex); err != nil {
		t.Fatal(err)
	}
	a3 := ex[0]
	if a3.Exam != 3 || a3.Exams != 3 || a3.Gap != 1 || a3.YearsSinceFirstSignal != 0 ||
		len(a3.Markers[1].Zs) != 2 || a3.Markers[1].PrevValue != 6 || a3.Markers[0].PrevValue != 140 {
		t.Fatalf("linked %+v", a3)
	}
	markers := []string{"sbp", "Chol (mmol/L)"}
	for _, tc := range []struct {
		expr string
		want []string
	}{
		{"z_sbp > 2.0 && zs_chol_mmol_l.size() >= 2", []string{"TRUE", "FALSE", "FALSE", "FALSE"}},
		{"measured_chol_mmol_l", []string{"TRUE", "TRUE", "TRUE", "FALSE"}},
		{"signal ? leading_marker : \"\"", []string{"sbp", "", "", ""}},
		{"values_sbp.filter(v, v > 135.0).size()", []string{"2", "0", "0", "1"}},
		{"prev_value_chol_mmol_l", []string{"6", "NaN", "NaN", "6"}},
		{"chart > limit", []string{"TRUE", "FALSE", "FALSE", "FALSE"}},
	} {
		r, err := CompileJoint(tc.expr, markers, Any)
		if err != nil {
			t.Fatalf("%s: %v", tc.expr, err)
		}
		out := make([]Value, len(ex))
		if err := EvalJoint(context.Background(), r, ex, out); err != nil {
			t.Fatalf("%s: %v", tc.expr, err)
		}
		for i, v := range out {
			if v.String() != tc.want[i] {
				t.Errorf("%s, row %d: %s, want %s", tc.expr, i+1, v.String(), tc.want[i])
			}
		}
	}
	_, err := CompileJoint("z_sbpp > 2.0", markers, Bool)
	var ce *CompileError
	if !errors.As(err, &ce) || !strings.Contains(err.Error(), `"z_sbp"`) {
		t.Errorf("a misspelt marker variable: %v", err)
	}
	if _, err := CompileJoint("z > 2.0", markers, Bool); err == nil {
		t.Error("z alone is not a variable of a joint rule")
	}
	c := NewCache(4, DefaultLimits())
	r1, err1 := c.CompileJoint("z_sbp > 1.0", []string{"sbp", "chol"}, Bool)
	r2, _ := c.CompileJoint("z_sbp > 1.0", []string{"sbp", "chol"}, Bool)
	r3, _ := c.CompileJoint("z_sbp > 1.0", []string{"sbp", "fev1"}, Bool)
	if err1 != nil || r1 != r2 || r1 == r3 || c.Compilations() != 2 {
		t.Errorf("cache: %v %p %p %p %d", err1, r1, r2, r3, c.Compilations())
	}
	names := []string{}
	for _, v := range JointVariables([]string{"sbp"}) {
		names = append(names, v.Name)
	}
	if !strings.Contains(strings.Join(names, " "), "zs_sbp") {
		t.Errorf("variables %v", names)
	}
}
