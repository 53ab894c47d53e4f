package report

import (
	"bytes"
	"context"
	"fmt"
	"sync"
	"testing"

	"veer/examples"
	"veer/functions/chart"
	"veer/functions/refcurve"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/functions/transform"
	"veer/internal/table"
)

// demoMarker describes one marker of the committed demo data.
type demoMarker struct {
	column, marker, short, unit string
	transform                   transform.Name
	side                        chart.Side
	rule, severity              string
}

var demoMarkers = []demoMarker{
	{"sbp", "Systolic blood pressure", "SBP", "mmHg", "none", chart.Up, "chart > limit || centile > 99.0", "high"},
	{"fev1", "FEV1", "FEV1", "L", "log", chart.Down, "chart > limit || centile < 1.0", ""},
}

var (
	demoOnce sync.Once
	demoVal  Data
	demoErr  error
)

// demoData fits, limits and screens the committed demo scenario (the same
// steps veer demo takes), once per test binary.
func demoData(t testing.TB) Data {
	t.Helper()
	demoOnce.Do(func() { demoVal, demoErr = buildDemo() })
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demoVal
}

func readCSV(b []byte) (*table.Table, error) { return table.Read(bytes.NewReader(b)) }

func buildDemo() (Data, error) {
	ref, err := readCSV(examples.ReferenceCSV())
	if err != nil {
		return Data{}, err
	}
	wf, err := readCSV(examples.WorkforceCSV())
	if err != nil {
		return Data{}, err
	}
	d := Data{Title: "Health surveillance screening — Morvandel Offshore Rotorworks (synthetic demo)", Generated: "2026-12-01", Source: "workforce.csv"}
	for _, mk := range demoMarkers {
		sec, err := screenMarker(ref, wf, mk)
		if err != nil {
			return Data{}, fmt.Errorf("%s: %v", mk.column, err)
		}
		d.Sections = append(d.Sections, sec)
	}
	return d, nil
}

func examsOf(t *table.Table, column string) ([]screening.Exam, error) {
	vc, err := t.Column(column)
	if err != nil {
		return nil, err
	}
	ac, _ := t.Column("age")
	vals, err := t.Floats(vc)
	if err != nil {
		return nil, err
	}
	ages, err := t.Floats(ac)
	if err != nil {
		return nil, err
	}
	out := make([]screening.Exam, len(vals))
	for i := range out {
		out[i] = screening.Exam{Worker: t.Rows[i][0], Group: t.Rows[i][1], Time: ages[i], Value: vals[i]}
	}
	return out, nil
}

func screenMarker(ref, wf *table.Table, mk demoMarker) (Section, error) {
	re, err := examsOf(ref, mk.column)
	if err != nil {
		return Section{}, err
	}
	rows := make([]refcurve.Row, len(re))
	for i, e := range re {
		rows[i] = refcurve.Row{Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value}
	}
	m, err := screening.Fit(context.Background(), rows, screening.FitOptions{Name: "demo-" + mk.column, Curves: refcurve.Options{Transform: mk.transform}})
	if err != nil {
		return Section{}, err
	}
	set := screening.DefaultSettings()
	set.Extrapolate = screening.DefaultExtrapolation
	set.Chart.Side = mk.side
	const target = 20
	lim, err := m.Limit(set, screening.LimitOptions{}, target)
	if err != nil {
		return Section{}, err
	}
	exams, err := examsOf(wf, mk.column)
	if err != nil {
		return Section{}, err
	}
	res, err := m.Screen(exams, set, lim.H)
	if err != nil {
		return Section{}, err
	}
	fired, err := evalRule(mk.rule, exams, res, set, lim.H)
	if err != nil {
		return Section{}, err
	}
	return Section{
		Marker: mk.marker, Short: mk.short, Unit: mk.unit, Model: m, Settings: set, Limit: lim, Target: target,
		Exams: exams, Results: res, Rules: []Rule{{Name: "chart or centile", Expr: mk.rule, Severity: mk.severity, Fired: fired}},
	}, nil
}

// evalRule evaluates a true/false alert rule on screened exams, with the
// variables the engine gives rules (screening.RuleExams).
func evalRule(expr string, exams []screening.Exam, res []screening.Result, set screening.Settings, h float64) ([]bool, error) {
	r, err := rules.Compile(expr, rules.Bool)
	if err != nil {
		return nil, err
	}
	re, err := screening.RuleExams(exams, res, h)
	if err != nil {
		return nil, err
	}
	out := make([]rules.Value, len(re))
	if err := rules.EvalAll(context.Background(), r, re, out); err != nil {
		return nil, err
	}
	fired := make([]bool, len(out))
	for i, v := range out {
		fired[i], _ = v.Bool()
	}
	return fired, nil
}
