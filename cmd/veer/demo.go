package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"text/tabwriter"
	"time"

	"veer/examples"
	"veer/examples/scenario"
	"veer/examples/workbooks"
	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/functions/transform"
	"veer/internal/atomicfile"
	"veer/internal/flagged"
	"veer/internal/report"
	"veer/internal/table"
	"veer/internal/workbook"
)

// demoMarker describes one marker of the embedded demo scenario.
type demoMarker struct {
	name, title, column, unit string
	transform                 transform.Name
	side                      chart.Side
	// cutoff is the reference centile of the fixed cut-off rule.
	cutoff float64
}

func demoMarkers() []demoMarker {
	return []demoMarker{
		{name: "sbp", title: "Systolic blood pressure", column: "sbp", unit: "mmHg", transform: "none", side: chart.Up, cutoff: 97.5},
		{name: "fev1", title: "Forced expiratory volume in 1 second (FEV1)", column: "fev1", unit: "litres", transform: "log", side: chart.Down, cutoff: 2.5},
	}
}

// beyondCutoff flags each exam whose reading lies beyond the marker's
// cut-off centile in the direction of harm (the fixed cut-off rule).
func (mk demoMarker) beyondCutoff(res []screening.Result) []bool {
	out := make([]bool, len(res))
	for i, x := range res {
		if mk.side == chart.Up {
			out[i] = x.Centile > mk.cutoff
		} else {
			out[i] = x.Centile < mk.cutoff
		}
	}
	return out
}

// demoRules are the alert rules the demo adds as columns.
const demoRules = `# Rules the demo adds as columns (see examples/rules for more).
chart_over_limit [high] = chart > limit
three_of_last_four_beyond_2 [medium] = last(zs, 4).count(v, v > 2.0 || v < -2.0) >= 3
`

// demoResult is the screening of one marker in the demo.
type demoResult struct {
	marker    demoMarker
	model     *screening.Model
	settings  screening.Settings
	limit     monitor.LimitResult
	exams     []screening.Exam
	results   []screening.Result
	ruleSet   rules.RuleSet
	ruleCols  [][]string
	equalRate []demoRow
	atTarget  demoRow
}

// demoRow is one line of the demo's summary tables.
type demoRow struct {
	method string
	ev     screening.Evaluation
}

// demoResult's rows: the fixed cut-off rule and the chart at its
// false-flag rate (the like-for-like comparison, led with), then the
// chart at the demo's target (the run whose flags the report and the
// workbook show).

func tableFromBytes(b []byte, name string) (*table.Table, error) {
	t, err := table.Read(bytes.NewReader(b))
	if err != nil {
		return nil, fmt.Errorf("embedded %s: %v", name, err)
	}
	return t, nil
}

func runDemo(e *env, args []string) error {
	fs := newFlags(e, "demo", "[--out DIR] [--target YEARS] [--small-site-target YEARS]")
	out := fs.String("out", "veer-demo", "folder to write the models, screened CSV files and the report to")
	target := fs.Float64("target", 20, "average years to a false signal for a healthy worker")
	smallTarget := fs.Float64("small-site-target", DefaultSmallSiteTarget, "the same for the small site (60 workers, no reference cohort), written to the folder small-site")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if !(*target > 0) || !(*smallTarget > 0) {
		return usagef("--target and --small-site-target must be positive numbers of years")
	}
	start := time.Now()
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return fmt.Errorf("cannot create the output folder: %v", err)
	}
	ref, err := tableFromBytes(examples.ReferenceCSV(), "reference.csv")
	if err != nil {
		return err
	}
	work, err := tableFromBytes(examples.WorkforceCSV(), "workforce.csv")
	if err != nil {
		return err
	}
	truthRows, err := scenario.ParseTruth(examples.TruthCSV())
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "veer demo: a fictional workforce of %d exams screened against a healthy reference cohort of %d exams (synthetic data)\n", len(work.Rows), len(ref.Rows))
	ruleSet, err := rules.ParseRuleSet([]byte(demoRules))
	if err != nil {
		return err
	}
	run := demoRun{e: e, ref: ref, work: work, target: *target, rules: ruleSet, out: *out}
	var all []*demoResult
	for _, mk := range demoMarkers() {
		truth := map[string]screening.Truth{}
		for _, t := range truthRows {
			o := t.SBP
			if mk.name == "fev1" {
				o = t.FEV1
			}
			truth[t.Worker] = screening.Truth{Affected: o.Affected, Onset: o.Age}
		}
		r, err := run.marker(mk, truth)
		if err != nil {
			return fmt.Errorf("%s: %v", mk.name, err)
		}
		all = append(all, r)
	}
	printDemoSummary(e.stdout, all, *target)
	if err := writeDemoExtras(e, *out, all, *target); err != nil {
		return err
	}
	if err := runSmallSiteDemo(e, filepath.Join(*out, "small-site"), *smallTarget); err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "\nwritten to %s/ in %.1f s\n", *out, time.Since(start).Seconds())
	fmt.Fprintln(e.stderr, screening.Caution)
	fmt.Fprintln(e.stderr, "Next: run 'veer serve' and open a workbook with the add-in, or screen your own CSV with 'veer fit' and 'veer screen' (see README).")
	return nil
}

// demoRun is what every marker of the demo shares: the reference and
// workforce tables, the target, the alert rules and the output folder.
type demoRun struct {
	e         *env
	ref, work *table.Table
	target    float64
	rules     rules.RuleSet
	out       string
}

// marker fits, screens and evaluates one marker of the demo against the
// truth about each worker.
func (d demoRun) marker(mk demoMarker, truth map[string]screening.Truth) (*demoResult, error) {
	e, ref, work, target, rs, out := d.e, d.ref, d.work, d.target, d.rules, d.out
	cols := examColumns{id: "worker", time: "age", value: mk.column, group: "group"}
	refRows, err := readRows(ref, "reference.csv", cols)
	if err != nil {
		return nil, err
	}
	m, err := screening.Fit(context.Background(), refRows, screening.FitOptions{Name: mk.name, Curves: refcurve.Options{Transform: mk.transform}})
	if err != nil {
		return nil, err
	}
	doc, err := m.Encode()
	if err != nil {
		return nil, err
	}
	if err := atomicfile.WriteFile(filepath.Join(out, mk.name+".model.json"), doc, outputPerm); err != nil {
		return nil, err
	}
	set := screening.DefaultSettings()
	set.Chart.Side = mk.side
	set.Extrapolate = screening.DefaultExtrapolation
	lim, err := m.Limit(set, screening.LimitOptions{}, target)
	if err != nil {
		return nil, err
	}
	workRows, err := readRows(work, "workforce.csv", cols)
	if err != nil {
		return nil, err
	}
	exams := make([]screening.Exam, len(workRows))
	for i, r := range workRows {
		exams[i] = screening.Exam{Worker: r.Worker, Group: r.Group, Time: r.Time, Value: r.Value}
	}
	res, err := m.Screen(exams, set, lim.H)
	if err != nil {
		return nil, err
	}
	ruleNames, ruleCols, err := evalRules(context.Background(), rs, exams, res, lim.H)
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if err := (screenTable{input: work, results: res, limit: lim.H, ruleNames: ruleNames, ruleCols: ruleCols}).write(&buf); err != nil {
		return nil, err
	}
	if err := atomicfile.WriteFile(filepath.Join(out, mk.name+".screened.csv"), buf.Bytes(), outputPerm); err != nil {
		return nil, err
	}
	r := &demoResult{marker: mk, model: m, settings: set, limit: lim, exams: exams, results: res, ruleSet: rs, ruleCols: ruleCols}

	// The run at the target flags workers as the report and the workbook
	// count them (package flagged): a chart signal, or a rule of severity
	// high.
	r.atTarget = demoRow{fmt.Sprintf("chart, %g-year target", target), screening.Evaluate(exams, flagged.Exams(res, r.flaggedRules()), truth)}

	// The fixed cut-off rule: any reading beyond the reference centile.
	cutEv := screening.Evaluate(exams, mk.beyondCutoff(res), truth)
	r.equalRate = append(r.equalRate, demoRow{fmt.Sprintf("any reading beyond the %gth centile", mk.cutoff), cutEv})

	// veer at the cut-off rule's own false-signal rate on the healthy
	// reference cohort, for a like-for-like comparison.
	refExams := make([]screening.Exam, len(refRows))
	for i, rr := range refRows {
		refExams[i] = screening.Exam{Worker: rr.Worker, Group: rr.Group, Time: rr.Time, Value: rr.Value}
	}
	refRes, err := m.Screen(refExams, set, lim.H)
	if err != nil {
		return nil, err
	}
	refEv := screening.Evaluate(refExams, mk.beyondCutoff(refRes), nil)
	if refEv.FalseSignals > 0 {
		matched := refEv.YearsAtRisk / float64(refEv.FalseSignals)
		limM, err := m.Limit(set, screening.LimitOptions{}, matched)
		if err == nil {
			resM, err := m.Screen(exams, set, limM.H)
			if err != nil {
				return nil, err
			}
			sig := make([]bool, len(resM))
			for i, x := range resM {
				sig[i] = x.Signal
			}
			r.equalRate = append(r.equalRate, demoRow{fmt.Sprintf("chart at the cut-off's false-flag rate (%.0f-year target)", matched), screening.Evaluate(exams, sig, truth)})
		}
	}
	fmt.Fprintf(e.stderr, "  %s: %s; limit %.3f for %g years\n", mk.name, m.Summary(), lim.H, target)
	return r, nil
}

// demoColumns head both tables of the demo's summary; each says what it
// counts.
var demoColumns = []string{
	"marker", "method", "false flags per 100 healthy worker-years", "drifting workers caught after onset",
	"caught within 3 years of onset*", "median years onset→signal*", "median among caught",
	"drifting workers flagged before onset", "workers flagged", "flagged who truly drift",
}

// flaggedRules are the demo's rules over one marker's rows, for package
// flagged.
func (r *demoResult) flaggedRules() []flagged.Rule {
	rs := make([]flagged.Rule, len(r.ruleSet.Rules))
	for k, rule := range r.ruleSet.Rules {
		rs[k] = flagged.Rule{Name: rule.Name, Severity: rule.Severity, Fired: fired(r.ruleCols[k])}
	}
	return rs
}

// demoTableRow writes one row under demoColumns.
func demoTableRow(w io.Writer, marker string, side chart.Side, row demoRow) {
	years := func(v float64) string {
		switch {
		case math.IsNaN(v):
			return "—"
		case math.IsInf(v, 1):
			return "not reached"
		}
		return fmt.Sprintf("%.1f", v)
	}
	ev := row.ev
	fmt.Fprintf(w, "%s (%s)\t%s\t%.2f\t%d of %d\t%.0f%%\t%s\t%s\t%d\t%d of %d\t%d\n",
		marker, side, row.method, ev.FalsePer100, ev.Detected, ev.Cases,
		100*ev.DetectedBy(3), years(ev.MedianDelayKM), years(ev.MedianDelay), ev.EarlySignals,
		ev.Flagged, ev.Workers, ev.TrueFlagged)
}

func printDemoSummary(w io.Writer, all []*demoResult, target float64) {
	table := func(rows func(r *demoResult) []demoRow) {
		tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
		fmt.Fprintln(tw, strings.Join(demoColumns, "\t"))
		for _, r := range all {
			for _, row := range rows(r) {
				demoTableRow(tw, r.marker.name, r.marker.side, row)
			}
		}
		tw.Flush()
	}
	fmt.Fprintln(w, "At equal false-flag rates: the fixed cut-off rule, and the chart with its limit set so that it flags healthy")
	fmt.Fprintln(w, "workers as often as the cut-off does (the two rates matched on the healthy reference cohort).")
	fmt.Fprintln(w)
	table(func(r *demoResult) []demoRow { return r.equalRate })
	fmt.Fprintln(w)
	fmt.Fprintf(w, "The %g-year run: the limit the demo screens with; its flagged workers are those of report.html and screening.xlsx\n", target)
	fmt.Fprintf(w, "(flagged: %s).\n", flagged.Definition)
	fmt.Fprintln(w)
	table(func(r *demoResult) []demoRow { return []demoRow{r.atTarget} })
	fmt.Fprintln(w)
	fmt.Fprintf(w, "A %g-year target means a healthy worker is flagged on average once in %g years of exams.\n", target, target)
	fmt.Fprintln(w, "'drifting workers caught after onset' counts, out of all truly drifting workers of the marker, those flagged at or after the drift's")
	fmt.Fprintln(w, "onset and not before it; a flag before onset is not a detection of the drift and is counted apart.")
	fmt.Fprintln(w, "* Kaplan–Meier over the drifting workers not flagged before onset: one never flagged counts as not yet caught at the last")
	fmt.Fprintln(w, "exam. 'median among caught' leaves those out and flatters a rule that catches only the easy cases.")
}

// writeDemoExtras writes the report and the screened example workbook.
func writeDemoExtras(e *env, out string, all []*demoResult, target float64) error {
	var secs []report.Section
	var markers []workbook.MarkerResults
	for _, r := range all {
		sec := report.Section{
			Marker: r.marker.title, Short: strings.ToUpper(r.marker.name), Unit: r.marker.unit,
			Model: r.model, Settings: r.settings, Limit: r.limit, Target: target,
			Exams: r.exams, Results: r.results,
		}
		mr := workbook.MarkerResults{Name: r.marker.name, Exams: r.exams, Results: r.results, Limit: r.limit.H, Rules: r.flaggedRules()}
		for k, rule := range r.ruleSet.Rules {
			sec.Rules = append(sec.Rules, report.Rule{Name: rule.Name, Expr: rule.Expr, Severity: rule.Severity, Fired: mr.Rules[k].Fired})
		}
		secs = append(secs, sec)
		markers = append(markers, mr)
	}
	rep := filepath.Join(out, "report.html")
	if err := writeReport(rep, "workforce.csv (synthetic demo data)", panelChoice{}, secs); err != nil {
		return err
	}
	wb := filepath.Join(out, "screening.xlsx")
	if err := atomicfile.WriteFile(wb, workbooks.XLSX(), outputPerm); err != nil {
		return err
	}
	input, err := workbook.ReadSheet(wb, workbooks.ExamsSheet)
	if err != nil {
		return err
	}
	if len(input.Rows) != len(all[0].exams) {
		return fmt.Errorf("the example workbook's exams sheet has %d rows but the demo data %d", len(input.Rows), len(all[0].exams))
	}
	if err := workbook.Refresh(wb, workbook.RefreshOptions{}, workbook.ResultsData{Input: input, Markers: markers}); err != nil {
		return err
	}
	_ = os.Remove(workbook.BackupPath(wb))
	fmt.Fprintf(e.stderr, "wrote sbp/fev1 models and screened CSV files, %s and %s\n", filepath.Base(rep), filepath.Base(wb))
	return nil
}
