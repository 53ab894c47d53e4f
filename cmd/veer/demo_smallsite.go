package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"text/tabwriter"

	rulesexamples "veer/examples/rules"
	"veer/examples/smallsite"
	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/published"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/internal/atomicfile"
	"veer/internal/flagged"
	"veer/internal/report"
	"veer/internal/table"
)

// DefaultSmallSiteTarget is the demo's target for the small site, in
// years: with 60 workers followed for about seven years each, a 20-year
// target would flag about 20 healthy workers over that time; a small site
// usually prefers fewer reviews.
const DefaultSmallSiteTarget = 50

// smallSiteMarker is one marker of the small site.
type smallSiteMarker struct {
	name, title, column, unit string
	side                      chart.Side
	reference                 string // file name in smallsite's data
	covariates                covariateList
	rules                     string // file in the rule library with its trade thresholds
}

func smallSiteMarkers() []smallSiteMarker {
	return []smallSiteMarker{
		{name: "sbp", title: "Systolic blood pressure", column: "sbp", unit: "mmHg", side: chart.Up,
			reference: smallsite.SBPTableFile, rules: "blood-pressure.rules"},
		{name: "fev1", title: "Forced expiratory volume in 1 second (FEV1)", column: "fev1", unit: "litres", side: chart.Down,
			reference: smallsite.FEV1EquationsFile, covariates: covariateList{{"height", "height"}}, rules: "lung.rules"},
	}
}

// smallSiteResult is one marker's screening of the small site.
type smallSiteResult struct {
	marker smallSiteMarker
	sec    report.Section
	rows   []demoRow
}

// runSmallSiteDemo screens the 60-worker site of examples/smallsite, which
// has no reference cohort, against the synthetic published references, and
// writes into out what an officer would get: the models, the screened CSV
// files with the trade thresholds as rule columns, and a report.
func runSmallSiteDemo(e *env, out string, target float64) error {
	if err := os.MkdirAll(out, 0o755); err != nil {
		return fmt.Errorf("cannot create the output folder: %v", err)
	}
	files := smallsite.Files()
	for name, b := range files {
		if err := atomicfile.WriteFile(filepath.Join(out, name), b, outputPerm); err != nil {
			return err
		}
	}
	work, err := tableFromBytes(files[smallsite.ExamsFile], smallsite.ExamsFile)
	if err != nil {
		return err
	}
	truthTab, err := tableFromBytes(files[smallsite.TruthFile], smallsite.TruthFile)
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "\nsmall site: %d exams of 60 workers, no reference cohort, screened against published references (synthetic)\n", len(work.Rows))
	var all []*smallSiteResult
	for _, mk := range smallSiteMarkers() {
		r, err := smallSiteOne(e, mk, work, truthTab, files, target, out)
		if err != nil {
			return fmt.Errorf("small site, %s: %v", mk.name, err)
		}
		all = append(all, r)
	}
	var secs []report.Section
	for _, r := range all {
		secs = append(secs, r.sec)
	}
	if err := writeReport(filepath.Join(out, "report.html"), smallsite.ExamsFile+" (synthetic small-site data)", panelChoice{}, secs); err != nil {
		return err
	}
	printSmallSiteSummary(e.stdout, all, target)
	return nil
}

func smallSiteOne(e *env, mk smallSiteMarker, work, truthTab *table.Table, files map[string][]byte, target float64, out string) (*smallSiteResult, error) {
	var ref *published.Reference
	var err error
	if strings.HasSuffix(mk.reference, ".json") {
		ref, err = published.DecodeEquations(files[mk.reference])
	} else {
		ref, err = readLMSTable(filepath.Join(out, mk.reference), published.Linear)
	}
	if err != nil {
		return nil, err
	}
	cols := examColumns{id: "worker", time: "age", value: mk.column, group: "sex"}
	x, err := readExamsCov(work, smallsite.ExamsFile, cols, mk.covariates, ref.Covariates())
	if err != nil {
		return nil, err
	}
	if pr := x.problems(); pr.Len() > 0 || x.missing() > 0 {
		return nil, fmt.Errorf("%s: the embedded exams are not whole: %v", smallsite.ExamsFile, pr)
	}
	exams := x.exams
	spec := chart.DefaultSpec()
	spec.Side = mk.side
	fp := published.DefaultFirstPass(spec, monitor.DefaultMode)
	m, err := screening.FitPublished(context.Background(), ref, exams, screening.PublishedOptions{Name: mk.name, FirstPass: &fp})
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
	set.Chart = spec
	lim, err := m.Limit(set, screening.LimitOptions{}, target)
	if err != nil {
		return nil, err
	}
	res, err := m.Screen(exams, set, lim.H)
	if err != nil {
		return nil, err
	}
	ruleText, err := fs.ReadFile(rulesexamples.FS(), mk.rules)
	if err != nil {
		return nil, err
	}
	rs, err := rules.ParseRuleSet(append([]byte("# The chart.\nchart_over_limit [high] = chart > limit\n"), ruleText...))
	if err != nil {
		return nil, err
	}
	names, ruleCols, err := evalRules(context.Background(), rs, exams, res, lim.H)
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if err := (screenTable{input: work, results: res, limit: lim.H, ruleNames: names, ruleCols: ruleCols}).write(&buf); err != nil {
		return nil, err
	}
	if err := atomicfile.WriteFile(filepath.Join(out, mk.name+".screened.csv"), buf.Bytes(), outputPerm); err != nil {
		return nil, err
	}
	r := &smallSiteResult{marker: mk}
	r.sec = report.Section{Marker: mk.title, Short: strings.ToUpper(mk.name), Unit: mk.unit, Model: m, Settings: set,
		Limit: lim, Target: target, Exams: exams, Results: res}
	truth, err := smallSiteTruth(truthTab, mk.name)
	if err != nil {
		return nil, err
	}
	var frs []flagged.Rule
	for k, rule := range rs.Rules {
		f := fired(ruleCols[k])
		frs = append(frs, flagged.Rule{Name: rule.Name, Severity: rule.Severity, Fired: f})
		r.sec.Rules = append(r.sec.Rules, report.Rule{Name: rule.Name, Expr: rule.Expr, Severity: rule.Severity, Fired: f})
	}
	// The chart's row counts the flagged workers of the report (package
	// flagged); each trade threshold is scored on its own after it.
	r.rows = append(r.rows, demoRow{fmt.Sprintf("chart, %g-year target", target), screening.Evaluate(exams, flagged.Exams(res, frs), truth)})
	for _, fr := range frs {
		if fr.Name != "chart_over_limit" {
			r.rows = append(r.rows, demoRow{"rule " + fr.Name, screening.Evaluate(exams, fr.Fired, truth)})
		}
	}
	fmt.Fprintf(e.stderr, "  %s: %s; limit %.3f for %g years\n", mk.name, m.Summary(), lim.H, target)
	return r, nil
}

// smallSiteTruth reads which workers drift in marker and from when.
func smallSiteTruth(t *table.Table, marker string) (map[string]screening.Truth, error) {
	wc, err := t.Column("worker")
	if err != nil {
		return nil, err
	}
	ac, err := t.Column("affected_" + marker)
	if err != nil {
		return nil, err
	}
	oc, err := t.Column("onset_" + marker)
	if err != nil {
		return nil, err
	}
	out := map[string]screening.Truth{}
	for i, r := range t.Rows {
		if r[ac] != "1" {
			continue
		}
		v, err := table.ParseNumber(r[oc], false)
		if err != nil {
			return nil, fmt.Errorf("%s data row %d: %v", smallsite.TruthFile, i+1, err)
		}
		out[r[wc]] = screening.Truth{Affected: true, Onset: v}
	}
	return out, nil
}

func printSmallSiteSummary(w io.Writer, all []*smallSiteResult, target float64) {
	fmt.Fprintf(w, "\nSmall site: 60 workers, no reference cohort; published references (synthetic), the serial model estimated from the workforce itself.\n")
	fmt.Fprintln(w)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, strings.Join(demoColumns, "\t"))
	for _, r := range all {
		for _, row := range r.rows {
			demoTableRow(tw, r.marker.name, r.marker.side, row)
		}
	}
	tw.Flush()
	fmt.Fprintln(w)
	fmt.Fprintf(w, "With so few workers every figure here is noisy. A %g-year target means a healthy worker is flagged on average once in %g years of exams.\n", target, target)
}
