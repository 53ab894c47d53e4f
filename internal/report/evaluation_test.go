package report

import (
	"context"
	"html"
	"math"
	"strconv"
	"strings"
	"testing"

	"veer/examples"
	"veer/functions/evaluation"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/internal/symbols"
)

// evaluated returns the demo's blood-pressure section with its evaluation
// on the committed outcomes (hypertension), swept over five targets with
// one rule.
func evaluated(t *testing.T) Section {
	t.Helper()
	sec := demoData(t).Sections[0]
	out, err := readCSV(examples.OutcomesCSV())
	if err != nil {
		t.Fatal(err)
	}
	wc, _ := out.Column("worker")
	dc, _ := out.Column("hypertension")
	ac, _ := out.Column("hypertension_age")
	var outs []evaluation.Outcome
	for _, r := range out.Rows {
		o := evaluation.Outcome{Worker: r[wc], Diagnosed: r[dc], Age: math.NaN()}
		if r[ac] != "" {
			if o.Age, err = strconv.ParseFloat(r[ac], 64); err != nil {
				t.Fatal(err)
			}
		}
		outs = append(outs, o)
	}
	evx := make([]evaluation.Exam, len(sec.Exams))
	for i, e := range sec.Exams {
		evx[i] = evaluation.Exam{Worker: e.Worker, Age: e.Time}
	}
	c, err := evaluation.NewCohort(context.Background(), evx, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	h, err := sec.Model.EvaluateHistory(context.Background(), sec.Exams, c, screening.HistoryOptions{
		Settings: sec.Settings, Target: 20, Sweep: []float64{5, 10, 50, 100}, MatchBaseline: true,
		Rules: []rules.NamedRule{{Name: "high_twice", Expr: "centile > 99.0 && times.count(t, t >= time - 5.0) >= 2"}, {Name: "label", Expr: `"x"`}},
	})
	if err != nil {
		t.Fatal(err)
	}
	sec.Evaluation = &Evaluation{Source: "outcomes.csv", Condition: "hypertension", History: h, Target: 20}
	return sec
}

// TestRenderEvaluation checks the evaluation section: the plain words with
// the caution, one table row per method, the trade-off charts (a line for
// the chart, a point each for the baseline and the rule, told apart by
// shape as well as colour), and the refused empty evaluation.
func TestRenderEvaluation(t *testing.T) {
	sec := evaluated(t)
	h := sec.Evaluation.History
	out := render(t, Data{Title: "t", Sections: []Section{sec}})
	for _, want := range []string{
		"Evaluation on later diagnoses",
		"The outcomes (outcomes.csv) list 103 workers diagnosed with hypertension who had an exam before the diagnosis and 697 never diagnosed.",
		"exams of 91 workers at or after their diagnosis are left out",
		"At a 20-year target, of 103 workers later diagnosed,",
		"With the baseline rule (centile &gt; 97.5), of 103 workers later diagnosed,",
		"At the baseline&#39;s rate of false signals",
		`rule &#34;label&#34; cannot be evaluated`,
		html.EscapeString(screening.Caution) + " These figures describe how a screening aid",
		"Kaplan–Meier, censored at the diagnosis",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("the report lacks %q", want)
		}
	}
	body := out[strings.Index(out, `<table class="evaluation">`):]
	body = body[:strings.Index(body, "</table>")]
	if n := strings.Count(body, "<tr"); n != len(h.Rows)+1 {
		t.Errorf("%d table rows; want a header and %d methods", n, len(h.Rows))
	}
	for _, want := range []string{"chart (cusum up)", "baseline: centile &gt; 97.5", "rule high_twice", "chart (cusum up, at baseline&#39;s false-signal rate)"} {
		if !strings.Contains(body, want) {
			t.Errorf("the table lacks %q", want)
		}
	}
	svgs := svgRE.FindAllString(out, -1)
	var trade []string
	for _, s := range svgs {
		if strings.Contains(s, `class="chart tradeoff"`) {
			trade = append(trade, s)
			if err := checkXML(s); err != nil {
				t.Errorf("a trade-off chart is not well-formed: %v", err)
			}
		}
	}
	if len(trade) != 2 {
		t.Fatalf("%d trade-off charts; want 2", len(trade))
	}
	for _, s := range trade {
		// One mark, one meaning: no signal diamond stands for a method.
		if strings.Contains(s, `fill="`+symbols.Legend.Signal.Fill+`"`) {
			t.Error("the trade-off chart uses the signal's vermilion")
		}
		for _, want := range []string{symbols.Legend.Statistic.Stroke, `<circle`, `Z" fill="` + symbols.Black, `fill="none" stroke="` + symbols.Legend.Rule.Stroke, ">baseline<", ">high_twice<", ">20 y<", "false signals per 100 worker-years"} {
			if !strings.Contains(s, want) {
				t.Errorf("trade-off chart lacks %q", want)
			}
		}
	}
	bad := sec
	bad.Evaluation = &Evaluation{History: &screening.History{}}
	if err := Render(&strings.Builder{}, Data{Sections: []Section{bad}}); err == nil || !strings.Contains(err.Error(), "the evaluation has no methods") {
		t.Errorf("empty evaluation: %v", err)
	}
}
