package evaluation_test

import (
	"context"
	"math"
	"testing"

	"veer/functions/evaluation"
)

// TestTable checks the table's header and cells on the hand-worked cohort
// (figures as counted in TestHandCohort) and the plain-words summary.
func TestTable(t *testing.T) {
	exams, outs, flags := build(handCohort())
	c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	r, err := c.Evaluate(context.Background(), flags["m1"])
	if err != nil {
		t.Fatal(err)
	}
	row := evaluation.Row{Method: evaluation.MethodChart, Name: "cusum up", Target: 20, Limit: 4.1, Result: r}
	cells := row.Cells(c.Summary())
	head := evaluation.Header()
	if len(cells) != len(head) || len(head) != len(evaluation.TableColumns) {
		t.Fatalf("%d cells, %d columns", len(cells), len(head))
	}
	got := map[string]evaluation.Cell{}
	for i, h := range head {
		if _, dup := got[h]; dup {
			t.Errorf("column %q twice", h)
		}
		got[h] = cells[i]
		if evaluation.TableColumns[i].Meaning == "" {
			t.Errorf("column %q has no meaning", h)
		}
	}
	for _, must := range []string{"method", "target", "diagnosed", "flagged_before_diagnosis_share", "median_lead_years",
		"false_signals_per_100_worker_years", "healthy_flagged_share"} {
		if _, ok := got[must]; !ok {
			t.Errorf("no column %q", must)
		}
	}
	nan := math.NaN()
	want := map[string]float64{
		"target": 20, "limit": 4.1, "diagnosed": 4, "flagged_before_diagnosis": 2, "flagged_before_diagnosis_share": 0.5,
		"median_lead_years": 1, "lead_q25_years": nan, "lead_q75_years": 3.5, "median_lead_flagged_years": 3.5,
		"healthy": 4, "healthy_flagged": 2, "healthy_flagged_share": 0.5, "healthy_flagged_within_10_years": nan,
		"worker_years_at_risk": 11, "false_signals_per_100_worker_years": 200.0 / 11, "exams_after_diagnosis": 6,
	}
	for k, v := range want {
		if c := got[k]; c.IsText || !same(c.Number, v) {
			t.Errorf("%s = %+v, want %v", k, c, v)
		}
	}
	if c := got["method"]; !c.IsText || c.Text != "chart" || got["name"].Text != "cusum up" {
		t.Errorf("method %+v, name %+v", c, got["name"])
	}
	// Healthy workers are followed at most 10 years (F), so the 10-year
	// share is not estimable and the summary falls back on the whole
	// follow-up.
	wantText := "At a 20-year target, of 4 workers later diagnosed, 2 (50%) were flagged before the diagnosis, a median of 3.5 years before it; " +
		"2 of 4 workers never diagnosed (50%) were flagged at least once over their follow-up (18.18 false signals per 100 worker-years)."
	if s := evaluation.Describe(row); s != wantText {
		t.Errorf("Describe:\n%s\nwant\n%s", s, wantText)
	}
	r2, _ := c.Evaluate(context.Background(), flags["m2"])
	base := evaluation.Row{Method: evaluation.MethodBaseline, Name: "centile > 97.5", Target: nan, Limit: nan, Result: r2}
	wantText = "With the baseline rule (centile > 97.5), of 4 workers later diagnosed, 4 (100%) were flagged before the diagnosis, a median of 2.5 years before it; " +
		"none of the 4 workers never diagnosed was flagged (0.00 false signals per 100 worker-years)."
	if s := evaluation.Describe(base); s != wantText {
		t.Errorf("Describe:\n%s\nwant\n%s", s, wantText)
	}
	rule := evaluation.Row{Method: evaluation.MethodRule, Name: "high_twice", Target: 31.25, Result: r2}
	if s := evaluation.Describe(rule); s[:29] != "With the rule high_twice, of " {
		t.Errorf("Describe(rule) = %q", s)
	}
}

// TestDescribeTenYears checks the 10-year wording: healthy workers a
// (flagged 5 years after the first exam), b and c (followed 11 and 12
// years, never flagged): S(5) = 2/3, so about 33 in 100 are flagged
// within 10 years.
func TestDescribeTenYears(t *testing.T) {
	exams := []evaluation.Exam{{"a", 30}, {"a", 35}, {"a", 42}, {"b", 30}, {"b", 41}, {"c", 40}, {"c", 52}, {"d", 50}, {"d", 51}}
	flags := []bool{false, true, false, false, false, false, false, false, true}
	nan := math.NaN()
	outs := []evaluation.Outcome{{Worker: "a", Diagnosed: "no", Age: nan}, {Worker: "b", Diagnosed: "no", Age: nan},
		{Worker: "c", Diagnosed: "no", Age: nan}, {Worker: "d", Diagnosed: "yes", Age: 51.5}}
	c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	r, err := c.Evaluate(context.Background(), flags)
	if err != nil {
		t.Fatal(err)
	}
	want := "At a 32.5-year target, of 1 worker later diagnosed, 1 (100%) was flagged before the diagnosis, a median of 0.5 years before it; " +
		"about 33 in 100 healthy workers followed for 10 years were flagged at least once (3.57 false signals per 100 worker-years)."
	if s := evaluation.Describe(evaluation.Row{Method: evaluation.MethodChart, Target: 32.47, Result: r}); s != want {
		t.Errorf("Describe:\n%s\nwant\n%s", s, want)
	}
}
