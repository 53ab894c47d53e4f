package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"veer/functions/monitor"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/internal/atomicfile"
	"veer/internal/flagged"
	"veer/internal/report"
	"veer/internal/table"
	"veer/internal/workbook"
)

// screenFlags are the inputs of screen and report.
type screenFlags struct {
	cols       examColumns
	chart      chartFlags
	model      string
	in, sheet  string
	target     float64
	limit      float64
	extrap     bool
	rules      ruleList
	rulesFile  string
	covariates covariateList
}

func (f *screenFlags) register(fs *flag.FlagSet) {
	f.cols.register(fs.StringVar)
	f.chart.register(fs)
	fs.StringVar(&f.model, "model", "", "model file written by veer fit (required)")
	fs.StringVar(&f.in, "in", "", "CSV file or .xlsx workbook of exams to screen, one row per exam, any order (required)")
	fs.StringVar(&f.sheet, "sheet", "", "sheet of the .xlsx workbook holding the exams (default: the first sheet)")
	fs.Float64Var(&f.target, "target", 0, "average years to a false signal for a healthy worker; the limit is computed from the model")
	fs.Float64Var(&f.limit, "limit", 0, "control limit to use instead of --target")
	fs.BoolVar(&f.extrap, "extrapolate", false, "allow exams at ages outside the reference range (curves held at their ends)")
	fs.Var(&f.rules, "rule", "alert rule NAME=EXPRESSION in CEL, adds a column NAME (repeatable), e.g. --rule 'high=chart > limit || centile > 99.0'")
	fs.StringVar(&f.rulesFile, "rules", "", "file of alert rules, one 'name = expression' per line, each adds a column")
	fs.Var(&f.covariates, "covariate", "for a model on reference equations: NAME=COLUMN, the column holding a covariate the equations use, e.g. height=height (repeatable)")
}

// screenJob is a screened sheet with everything needed to write it out.
type screenJob struct {
	input     *table.Table
	isXLSX    bool
	model     *screening.Model
	settings  screening.Settings
	limit     monitor.LimitResult
	target    float64
	exams     []screening.Exam
	results   []screening.Result
	ruleSet   rules.RuleSet
	ruleNames []string
	ruleCols  [][]string
}

func isXLSX(path string) bool { return strings.EqualFold(filepath.Ext(path), ".xlsx") }

// readInput reads a table given on the command line: a CSV file, or a
// sheet of an .xlsx workbook (the first when sheet is empty; sheetFlag
// names the flag that chooses it). Screen, report and evaluate read their
// exams, and evaluate its outcomes, this one way.
func readInput(path, sheet, sheetFlag string) (*table.Table, error) {
	if !isXLSX(path) {
		if sheet != "" {
			return nil, usagef("%s goes with an .xlsx workbook", sheetFlag)
		}
		return loadTable(path)
	}
	if _, err := os.Stat(path); err != nil {
		return nil, fmt.Errorf("cannot find the workbook %s", path)
	}
	t, err := workbook.ReadSheet(path, sheet)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return t, nil
}

// runScreenJob reads the exams, computes the limit, screens and evaluates
// the rules.
func runScreenJob(e *env, f *screenFlags) (*screenJob, error) {
	if err := required("model", f.model, "in", f.in); err != nil {
		return nil, err
	}
	if (f.limit > 0) == (f.target > 0) {
		return nil, usagef("give exactly one of --target (years) and --limit")
	}
	s, err := f.chart.settings()
	if err != nil {
		return nil, err
	}
	s.Extrapolate = f.extrap
	rs, err := collectRules(f.rules, f.rulesFile)
	if err != nil {
		return nil, err
	}
	m, err := loadModel(f.model)
	if err != nil {
		return nil, err
	}
	covCols, err := f.covariates.match(m.Reference().Covariates())
	if err != nil {
		return nil, err
	}
	j := &screenJob{model: m, settings: s, ruleSet: rs, isXLSX: isXLSX(f.in), target: f.target}
	if j.input, err = readInput(f.in, f.sheet, "--sheet"); err != nil {
		return nil, err
	}
	rows, err := readRows(j.input, f.in, f.cols)
	if err != nil {
		return nil, err
	}
	cov, err := readCovariates(j.input, f.in, covCols)
	if err != nil {
		return nil, err
	}
	h := f.limit
	j.limit = monitor.LimitResult{H: h}
	if f.target > 0 {
		prog, done := mcProgress(e)
		j.limit, err = m.Limit(s, f.chart.limitOptions(prog), f.target)
		done()
		if err != nil {
			return nil, err
		}
		describeLimit(e, j.limit, f.target)
		h = j.limit.H
	}
	j.exams = make([]screening.Exam, len(rows))
	for i, r := range rows {
		j.exams[i] = screening.Exam{Worker: r.Worker, Group: r.Group, Time: r.Time, Value: r.Value}
		if cov != nil {
			j.exams[i].Covariates = cov[i]
		}
	}
	if j.results, err = m.Screen(j.exams, s, h); err != nil {
		return nil, rowsError(err, f.in, f.cols, covCols, m.Reference().Covariates())
	}
	if j.ruleNames, j.ruleCols, err = evalRules(context.Background(), rs, j.exams, j.results, h); err != nil {
		return nil, err
	}
	return j, nil
}

// flaggedRules are the job's rules for package flagged.
func (j *screenJob) flaggedRules() []flagged.Rule {
	rs := make([]flagged.Rule, len(j.ruleNames))
	for k, n := range j.ruleNames {
		rs[k] = flagged.Rule{Name: n, Severity: j.ruleSet.Rules[k].Severity, Fired: fired(j.ruleCols[k])}
	}
	return rs
}

// summary prints what was screened on stderr, each count labelled with
// what it counts (the same counts as the workbook's summary and the
// report).
func (j *screenJob) summary(e *env) {
	rs := j.flaggedRules()
	c := flagged.Count(flagged.Workers(j.exams, j.results, rs, j.limit.H), rs)
	fmt.Fprintf(e.stderr, "screened %d exams of %d workers at limit %.4f\n", len(j.results), c.Workers, j.limit.H)
	printCounts(e, c, rs)
	fmt.Fprintln(e.stderr, screening.Caution)
}

// printCounts prints the flagged workers, those with a chart signal and,
// per rule, those for whom it fired.
func printCounts(e *env, c flagged.Counts, rs []flagged.Rule) {
	fmt.Fprintf(e.stderr, "  %d of %d workers flagged (%s)\n", c.Flagged, c.Workers, flagged.Definition)
	fmt.Fprintf(e.stderr, "  %d of %d workers with a chart signal\n", c.Signalled, c.Workers)
	for k, r := range rs {
		sev := ""
		if r.Severity != "" {
			sev = " [" + r.Severity + "]"
		}
		fmt.Fprintf(e.stderr, "  %d of %d workers for whom rule %s%s fired\n", c.Rules[k], c.Workers, r.Name, sev)
	}
}

// fired turns a rule column into true/false per row (a label counts as
// fired unless it is empty, "none", "0" or "false").
func fired(col []string) []bool {
	out := make([]bool, len(col))
	for i, v := range col {
		switch strings.ToLower(strings.TrimSpace(v)) {
		case "", "0", "false", "none", "#value!":
		default:
			out[i] = true
		}
	}
	return out
}

func (j *screenJob) markerResults(name string) workbook.MarkerResults {
	return workbook.MarkerResults{Name: name, Exams: j.exams, Results: j.results, Limit: j.limit.H, Rules: j.flaggedRules()}
}

func (j *screenJob) reportSection(marker, unit string) report.Section {
	sec := report.Section{
		Marker: marker, Short: strings.ToUpper(j.model.Name), Unit: unit, Model: j.model, Settings: j.settings, Limit: j.limit,
		Target: j.target, Exams: j.exams, Results: j.results,
	}
	for k, n := range j.ruleNames {
		r := j.ruleSet.Rules[k]
		sec.Rules = append(sec.Rules, report.Rule{Name: n, Expr: r.Expr, Severity: r.Severity, Fired: fired(j.ruleCols[k])})
	}
	return sec
}

func runScreen(e *env, args []string) error {
	fs := newFlags(e, "screen", "--model M.json --in F.csv|F.xlsx --id C --time C --value C [--group C] (--target YEARS | --limit H) [--out O.csv|O.xlsx] [--report R.html]")
	var sf screenFlags
	sf.register(fs)
	out := fs.String("out", "", "file to write: a CSV file (default: standard output), or for an .xlsx input the workbook to write (default: the input workbook itself, with a backup)")
	rep := fs.String("report", "", "also write an HTML report to this file")
	var panels panelChoice
	panels.register(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if jm, ok, err := jointModelFile(sf.model); err != nil || ok {
		if err != nil {
			return err
		}
		if *rep != "" {
			return usagef("--report with a model of several markers: use veer report")
		}
		job, err := runJointScreen(e, &sf, jm, *out)
		if err != nil {
			return err
		}
		job.summary(e)
		return nil
	}
	j, err := runScreenJob(e, &sf)
	if err != nil {
		return err
	}
	switch {
	case j.isXLSX:
		dst := sf.in
		if *out != "" && *out != sf.in {
			if !isXLSX(*out) {
				return usagef("with an .xlsx input, --out must name an .xlsx workbook")
			}
			b, err := os.ReadFile(sf.in)
			if err != nil {
				return err
			}
			if err := atomicfile.WriteFile(*out, b, outputPerm); err != nil {
				return err
			}
			dst = *out
		}
		data := workbook.ResultsData{Input: j.input, Markers: []workbook.MarkerResults{j.markerResults(j.model.Name)}}
		if err := workbook.Refresh(dst, workbook.RefreshOptions{}, data); err != nil {
			return fmt.Errorf("%s: %v", dst, err)
		}
		fmt.Fprintf(e.stderr, "wrote the sheets %q and %q into %s (previous file kept as %s)\n", workbook.DefaultResultsSheet, workbook.DefaultSummarySheet, dst, workbook.BackupPath(dst))
	case *out == "":
		if err := j.table().write(e.stdout); err != nil {
			return err
		}
	default:
		f, err := atomicfile.New(*out, outputPerm)
		if err != nil {
			return err
		}
		defer f.Abort()
		if err := j.table().write(f); err != nil {
			return fmt.Errorf("cannot write %s: %v", *out, err)
		}
		if err := f.Commit(); err != nil {
			return err
		}
	}
	if *rep != "" {
		if err := writeReport(*rep, sf.in, panels, []report.Section{j.reportSection(j.model.Name, "")}); err != nil {
			return err
		}
		fmt.Fprintf(e.stderr, "report written to %s\n", *rep)
	}
	j.summary(e)
	return nil
}

func runReport(e *env, args []string) error {
	fs := newFlags(e, "report", "--model M.json --in F.csv|F.xlsx --id C --time C --value C [--group C] (--target YEARS | --limit H) --out R.html [--marker NAME] [--value-unit U] [--outcomes O.csv|O.xlsx ...]")
	var sf screenFlags
	sf.register(fs)
	var of outcomeFlags
	of.register(fs)
	out := fs.String("out", "", "HTML file to write (required)")
	marker := fs.String("marker", "", "name of the marker shown in the report (default: the model's name)")
	unit := fs.String("value-unit", "", "unit of the readings shown in the report, e.g. mmHg")
	var panels panelChoice
	panels.register(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := required("out", *out); err != nil {
		return err
	}
	if of.outcomes != "" && !(sf.target > 0) {
		return usagef("--outcomes evaluates the chart at targets: give --target (and --targets), not --limit")
	}
	j, err := runScreenJob(e, &sf)
	if err != nil {
		return err
	}
	name := *marker
	if name == "" {
		name = j.model.Name
	}
	sec := j.reportSection(name, *unit)
	var ev *evaluateJob
	if of.outcomes != "" {
		ev, err = runEvaluation(e, &of, j.model, j.settings, sf.chart.limitOptions(nil), sf.target, j.exams, sf.cols.id, sf.in, sf.cols.time, j.ruleSet.Rules)
		if err != nil {
			return err
		}
		sec.Evaluation = &report.Evaluation{Source: filepath.Base(of.outcomes), Condition: of.diagnosed, History: ev.history, Target: sf.target}
	}
	if err := writeReport(*out, sf.in, panels, []report.Section{sec}); err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "report written to %s\n", *out)
	j.summary(e)
	if ev != nil {
		ev.describe(e.stderr)
	}
	return nil
}

// panelChoice is --workers: how many flagged workers get a panel in the
// report, or which workers.
type panelChoice struct {
	max int      // 0: the report's default; -1: none
	ids []string // chosen workers, in order
}

func (p *panelChoice) register(fs *flag.FlagSet) {
	fs.Func("workers", fmt.Sprintf("report panels: how many flagged workers (default %d, the largest chart relative to its limit at the latest exam first; 0 for none; all), "+
		"or which workers, by id, comma-separated (W017,W102; to name one worker whose id is a whole number, end with a comma: 1234,)", report.DefaultMaxPanels), p.set)
}

func (p *panelChoice) set(v string) error {
	v = strings.TrimSpace(v)
	switch {
	case v == "":
		return errors.New("give a number of workers, all, or worker ids")
	case strings.EqualFold(v, "all"):
		p.max, p.ids = math.MaxInt32, nil
		return nil
	case !strings.Contains(v, ","):
		if n, err := strconv.Atoi(v); err == nil {
			if n < 0 {
				return errors.New("the number of workers must not be negative")
			}
			p.max, p.ids = n, nil
			if n == 0 {
				p.max = -1
			}
			return nil
		}
	}
	p.ids = nil
	for _, id := range strings.Split(v, ",") {
		if id = strings.TrimSpace(id); id != "" {
			p.ids = append(p.ids, id)
		}
	}
	if len(p.ids) == 0 {
		return errors.New("give a number of workers, all, or worker ids")
	}
	return nil
}

func writeReport(path, source string, panels panelChoice, secs []report.Section) error {
	var buf bytes.Buffer
	d := report.Data{
		Title:     "Health surveillance screening",
		Generated: time.Now().Format("2 January 2006"),
		Source:    filepath.Base(source),
		Sections:  secs,
		MaxPanels: panels.max,
		Workers:   panels.ids,
	}
	if err := report.Render(&buf, d); err != nil {
		return err
	}
	return atomicfile.WriteFile(path, buf.Bytes(), outputPerm)
}

// screenColumns are the columns screen adds to the input's.
var screenColumns = []string{"mean", "sd", "z", "centile", "innovation", "chart_up", "chart_down", "chart", "limit", "signal", "exam", "first_signal"}

// screenTable is what screen writes: every input column, the screening
// columns at limit h, and one column per rule.
type screenTable struct {
	input     *table.Table
	results   []screening.Result
	limit     float64
	ruleNames []string
	ruleCols  [][]string
}

// table is the job's output table.
func (j *screenJob) table() screenTable {
	return screenTable{input: j.input, results: j.results, limit: j.limit.H, ruleNames: j.ruleNames, ruleCols: j.ruleCols}
}

// write writes the table as CSV to out.
func (st screenTable) write(out io.Writer) error {
	t, res, h, ruleNames, ruleCols := st.input, st.results, st.limit, st.ruleNames, st.ruleCols
	w := table.NewWriter(out)
	for _, hd := range t.Header {
		w.Text(hd)
	}
	for _, hd := range screenColumns {
		w.Text(hd)
	}
	for _, hd := range ruleNames {
		w.Text(hd)
	}
	if err := w.EndRow(); err != nil {
		return err
	}
	for i, r := range res {
		for _, c := range t.Rows[i] {
			w.Text(c)
		}
		w.Float(r.Mean, 6)
		w.Float(r.SD, 6)
		w.Float(r.Z, 4)
		w.Float(r.Centile, 2)
		w.Float(r.Innovation, 4)
		w.Float(r.Up, 4)
		w.Float(r.Down, 4)
		w.Float(r.Stat, 4)
		w.Float(h, 4)
		if r.Signal {
			w.Text("1")
		} else {
			w.Text("0")
		}
		w.Float(float64(r.Exam), 0)
		if math.IsNaN(r.FirstSignal) {
			w.Text("")
		} else {
			w.Float(r.FirstSignal, -1)
		}
		for _, col := range ruleCols {
			w.Text(col[i])
		}
		if err := w.EndRow(); err != nil {
			return err
		}
	}
	return w.Flush()
}
