package report_test

import (
	"bytes"
	"context"
	"fmt"
	"log"
	"strings"

	"veer/examples"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/internal/report"
	"veer/internal/table"
)

func exams(csv []byte) []screening.Exam {
	t, err := table.Read(bytes.NewReader(csv))
	if err != nil {
		log.Fatal(err)
	}
	ages, _ := t.Floats(2)
	sbp, _ := t.Floats(3)
	out := make([]screening.Exam, len(ages))
	for i := range out {
		out[i] = screening.Exam{Worker: t.Rows[i][0], Group: t.Rows[i][1], Time: ages[i], Value: sbp[i]}
	}
	return out
}

// ExampleRender fits a model of systolic blood pressure on the demo
// reference cohort, screens the demo workforce for a 20-year target and
// writes the report.
func ExampleRender() {
	ref := exams(examples.ReferenceCSV())
	rows := make([]refcurve.Row, len(ref))
	for i, e := range ref {
		rows[i] = refcurve.Row{Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value}
	}
	m, err := screening.Fit(context.Background(), rows, screening.FitOptions{Name: "sbp"})
	if err != nil {
		log.Fatal(err)
	}
	set := screening.DefaultSettings()
	set.Extrapolate = screening.DefaultExtrapolation
	lim, err := m.Limit(set, screening.LimitOptions{}, 20)
	if err != nil {
		log.Fatal(err)
	}
	wf := exams(examples.WorkforceCSV())
	res, err := m.Screen(wf, set, lim.H)
	if err != nil {
		log.Fatal(err)
	}
	high := make([]bool, len(res))
	for i, r := range res {
		high[i] = r.Centile > 99
	}
	var out bytes.Buffer
	err = report.Render(&out, report.Data{
		Title: "SBP screening", Generated: "2026-12-01", MaxPanels: 5,
		Sections: []report.Section{{
			Marker: "Systolic blood pressure", Short: "SBP", Unit: "mmHg",
			Model: m, Settings: set, Limit: lim, Target: 20, Exams: wf, Results: res,
			Rules: []report.Rule{{Name: "very high", Expr: "centile > 99", Fired: high}},
		}},
	})
	if err != nil {
		log.Fatal(err)
	}
	html := out.String()
	fmt.Println("panels:", strings.Count(html, `class="panel"`))
	fmt.Println("limit is positive:", lim.H > 0)
	fmt.Println("caution:", strings.Contains(html, "licensed clinician"))
	// Output:
	// panels: 5
	// limit is positive: true
	// caution: true
}
