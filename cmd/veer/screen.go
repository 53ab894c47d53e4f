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
	"slices"
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
	"veer/internal/version"
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
	reach      reachFlags
	strict     bool
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
	f.reach.register(fs)
	fs.BoolVar(&f.strict, "strict", false, "all or nothing: when any exam row cannot be screened (outside the reference ages, unknown or blank group, a cell that is not a number, a repeated exam), write nothing and list the rows; without it such rows get a status saying why and the rest is screened")
	fs.Var(&f.rules, "rule", "alert rule NAME=EXPRESSION in CEL, adds a column NAME (repeatable), e.g. --rule 'high=chart > limit || centile > 99.0'")
	fs.StringVar(&f.rulesFile, "rules", "", "file of alert rules, one 'name = expression' per line, each adds a column")
	fs.Var(&f.covariates, "covariate", "for a model on reference equations: NAME=COLUMN, the column holding a covariate the equations use, e.g. height=height (repeatable)")
}

// screenJob is a screened sheet with everything needed to write it out.
type screenJob struct {
	input    *table.Table
	isXLSX   bool
	model    *screening.Model
	settings screening.Settings
	limit    monitor.LimitResult
	target   float64
	x        *examTable
	// all holds one result per data row of input (Skipped set for the rows
	// not screened) and status the row's status.
	all    []screening.Result
	status []rowStatus
	counts statusCounts
	// exams and results are the screened rows only, in input order; rowOf
	// gives each one's data row.
	exams   []screening.Exam
	results []screening.Result
	rowOf   []int
	// problems are the rows not screened for a fault, placed and worded.
	problems *table.Problems
	ruleSet  rules.RuleSet
	// ruleNames and ruleCols: one column per rule, one cell per data row
	// of input ("" where the row was not screened).
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

// runScreenJob reads the exams, computes the limit, screens every row that
// can be screened and evaluates the rules.
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
	if s.Extrapolate, err = f.reach.value(); err != nil {
		return nil, err
	}
	rs, err := collectRules(f.rules, f.rulesFile)
	if err != nil {
		return nil, err
	}
	for _, r := range rs.Rules {
		if slices.Contains(screenColumns, strings.ToLower(r.Name)) {
			return nil, usagef("a rule cannot be called %q: veer screen writes a column of that name; give the rule another name", r.Name)
		}
	}
	m, err := loadModel(f.model)
	if err != nil {
		return nil, err
	}
	covNames := m.Reference().Covariates()
	covCols, err := f.covariates.match(covNames)
	if err != nil {
		return nil, err
	}
	j := &screenJob{model: m, settings: s, ruleSet: rs, isXLSX: isXLSX(f.in), target: f.target}
	if j.input, err = readInput(f.in, f.sheet, "--sheet"); err != nil {
		return nil, err
	}
	if err := refuseOwnSheet(j.input); err != nil {
		return nil, err
	}
	if !j.isXLSX {
		// A clash of the input's columns with the output's is known now.
		names := make([]string, len(rs.Rules))
		for k, r := range rs.Rules {
			names[k] = r.Name
		}
		if _, err := keptColumns(j.input, names); err != nil {
			return nil, fmt.Errorf("%s: %v", f.in, err)
		}
	}
	if groups := m.Reference().Groups(); f.cols.group == "" && !(len(groups) == 1 && groups[0] == "") {
		return nil, usagef("the model has groups %s: name the column holding each exam's group with --group", quoteList(groups))
	}
	if j.x, err = readExamTableCov(j.input, f.in, f.cols, covCols, covNames); err != nil {
		return nil, err
	}
	if len(j.x.exams) == 0 {
		return nil, j.nothingScreened(f.in)
	}
	if f.strict {
		// Find every row that cannot be screened before the limit is
		// computed (which rows can does not depend on the limit).
		res, err := m.ScreenEach(j.x.exams, s, 1)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", f.in, err)
		}
		j.sort(res)
		if j.problems.Len() > 0 {
			return nil, strictError(f.in, j.problems)
		}
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
		describeLimit(e, j.limit, f.target, monitor.Method(f.chart.method))
		h = j.limit.H
	}
	res, err := m.ScreenEach(j.x.exams, s, h)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", f.in, err)
	}
	j.sort(res)
	if j.problems.Len() > 0 && f.strict {
		return nil, strictError(f.in, j.problems)
	}
	if len(j.exams) == 0 {
		return nil, j.nothingScreened(f.in)
	}
	ruleNames, ruleCols, err := evalRules(context.Background(), rs, j.exams, j.results, h)
	if err != nil {
		return nil, err
	}
	j.ruleNames = ruleNames
	for _, col := range ruleCols {
		full := make([]string, len(j.all))
		for k, v := range col {
			full[j.rowOf[k]] = v
		}
		j.ruleCols = append(j.ruleCols, full)
	}
	return j, nil
}

// flaggedRules are the job's rules for package flagged, over the rows
// screened (compact) or over every input row (!compact).
func (j *screenJob) flaggedRules(compact bool) []flagged.Rule {
	rs := make([]flagged.Rule, len(j.ruleNames))
	for k, n := range j.ruleNames {
		col := j.ruleCols[k]
		if compact {
			col = j.screenedCol(k)
		}
		rs[k] = flagged.Rule{Name: n, Severity: j.ruleSet.Rules[k].Severity, Fired: fired(col)}
	}
	return rs
}

// screenedCol is rule k's column over the rows screened only.
func (j *screenJob) screenedCol(k int) []string {
	col := make([]string, len(j.rowOf))
	for s, i := range j.rowOf {
		col[s] = j.ruleCols[k][i]
	}
	return col
}

// summary prints what was screened on stderr, each count labelled with
// what it counts (the same counts as the workbook's summary and the
// report).
func (j *screenJob) summary(e *env) {
	rs := j.flaggedRules(true)
	c := flagged.Count(flagged.Workers(j.exams, j.results, rs, j.limit.H), rs)
	fmt.Fprintf(e.stderr, "screened %s of %s rows (%s) at limit %.4f\n",
		plural(len(j.results), "exam", "exams"), fmtInt(len(j.all)), plural(c.Workers, "worker", "workers"), j.limit.H)
	printCounts(e, c, rs)
	j.rowSummary(e)
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

// quoteList writes names quoted, comma-separated.
func quoteList(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = strconv.Quote(n)
	}
	return strings.Join(q, ", ")
}

// strictError is the failure of --strict when rows cannot be screened.
func strictError(path string, p *table.Problems) error {
	return fmt.Errorf("%s: %v\nnothing was written (--strict); without --strict these rows are set aside with a status saying why and the rest is screened", path, p)
}

// nothingScreened is the error when no row of the sheet can be screened.
func (j *screenJob) nothingScreened(path string) error {
	p := j.x.problems()
	if j.problems != nil {
		p = j.problems
	}
	if p.Len() == 0 {
		return fmt.Errorf("%s: no row has a reading for --value %q, so there is nothing to screen", path, j.x.cols.value)
	}
	return fmt.Errorf("%s: no exam row can be screened:\n%v", path, p)
}

// sort spreads the results of the rows screened over the rows of the
// input, and gives every row its status.
func (j *screenJob) sort(res []screening.Result) {
	x := j.x
	n := len(x.t.Rows)
	j.all = make([]screening.Result, n)
	j.status = make([]rowStatus, n)
	j.counts = statusCounts{}
	j.problems = &table.Problems{}
	why := make([]error, n)
	copy(why, x.why)
	nan := math.NaN()
	for i := range j.all {
		j.all[i] = screening.Result{Mean: nan, SD: nan, Z: nan, Centile: nan, Innovation: nan, Up: nan, Down: nan, Stat: nan, Gap: nan, FirstSignal: nan}
	}
	extrap := map[int]string{}
	j.exams = make([]screening.Exam, 0, len(res))
	j.results = make([]screening.Result, 0, len(res))
	j.rowOf = make([]int, 0, len(res))
	for k, r := range res {
		i := x.rowOf[k]
		j.all[i] = r
		if r.Skipped != nil {
			why[i] = r.Skipped
			continue
		}
		if r.Extrapolated() {
			extrap[i] = j.extrapolatedNote(x.exams[k])
		}
		j.exams = append(j.exams, x.exams[k])
		j.results = append(j.results, r)
		j.rowOf = append(j.rowOf, i)
	}
	for i := range j.all {
		if why[i] != nil {
			j.all[i].Skipped = why[i]
		}
		r := &j.all[i]
		st := rowStatus{status: statusOf(why[i], r.Extrapolated())}
		switch {
		case why[i] != nil:
			placed := x.placed(i, why[i])
			st.note = placed.Err.Error()
			if isFault(st.status) {
				j.problems.Add(placed)
			}
		case st.status == statusExtrapolated:
			st.note = extrap[i]
		}
		j.status[i] = st
		j.counts[st.status]++
	}
}

// extrapolatedNote says how far outside the reference range the age of an
// extrapolated exam lies.
func (j *screenJob) extrapolatedNote(e screening.Exam) string {
	lo, hi, err := j.model.Curves.Range(e.Group)
	if err != nil {
		return ""
	}
	g := "the reference data"
	if e.Group != "" {
		g = fmt.Sprintf("group %q", e.Group)
	}
	side, d := "above", e.Time-hi
	if e.Time < lo {
		side, d = "below", lo-e.Time
	}
	return fmt.Sprintf("age %s is %s years %s the reference range %s–%s of %s; screened against the curves' end values",
		fmtNum(e.Time), fmtYears(d), side, fmtNum(round2(lo)), fmtNum(round2(hi)), g)
}

// rowSummary prints on stderr the rows extrapolated, without a reading,
// and not screened, with the first problems at their places.
func (j *screenJob) rowSummary(e *env) {
	if n := j.counts[statusExtrapolated]; n > 0 {
		fmt.Fprintf(e.stderr, "  %s extrapolated: at ages up to %g years outside the reference range, against the curves' end values (status %q)\n",
			plural(n, "exam", "exams"), j.settings.Extrapolate, statusExtrapolated)
	}
	if n := j.counts[statusNoReading]; n > 0 {
		fmt.Fprintf(e.stderr, "  %s without a reading: missing exams, left out of the charts (status %q)\n", plural(n, "row", "rows"), statusNoReading)
	}
	if n := j.counts.faults(); n > 0 {
		fmt.Fprintf(e.stderr, "  %s not screened (the status column says why): %s\n", plural(n, "row", "rows"), j.counts.describe(statusScreened, statusExtrapolated, statusNoReading))
		for k, p := range j.problems.List() {
			if k == table.MaxListed {
				fmt.Fprintf(e.stderr, "    and %d more\n", j.problems.Len()-table.MaxListed)
				break
			}
			fmt.Fprintf(e.stderr, "    %v\n", p)
		}
	}
}

// done is what a command that screened returns: nil, or rowsSkipped when
// some rows could not be screened (exit code exitSkipped).
func (j *screenJob) done() error {
	if n := j.counts.faults(); n > 0 {
		return rowsSkipped{n}
	}
	return nil
}

// plural writes n with the singular or plural noun.
func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmtInt(n) + " " + many
}

func fmtInt(n int) string { return fmt.Sprint(n) }

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
	exams := make([]screening.Exam, len(j.all))
	for k, i := range j.x.rowOf {
		exams[i] = j.x.exams[k]
	}
	mr := workbook.MarkerResults{Name: name, Exams: exams, Results: j.all, Limit: j.limit.H}
	for _, st := range j.status {
		mr.Status = append(mr.Status, st.status)
		mr.Notes = append(mr.Notes, st.note)
	}
	mr.Rules = j.flaggedRules(false)
	return mr
}

func (j *screenJob) reportSection(marker, unit string) report.Section {
	sec := report.Section{
		Marker: marker, Short: strings.ToUpper(j.model.Name), Unit: unit, Model: j.model, Settings: j.settings, Limit: j.limit,
		Target: j.target, Exams: j.exams, Results: j.results,
	}
	for k, n := range j.ruleNames {
		r := j.ruleSet.Rules[k]
		sec.Rules = append(sec.Rules, report.Rule{Name: n, Expr: r.Expr, Severity: r.Severity, Fired: fired(j.screenedCol(k))})
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
	var cf csvFormatFlags
	cf.register(fs)
	fs.Usage = screenUsage(e, fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	format, err := cf.format()
	if err != nil {
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
	default:
		st, err := j.table(format(j.input))
		if err != nil {
			return err
		}
		if *out == "" {
			if err := st.write(e.stdout); err != nil {
				return err
			}
			break
		}
		f, err := atomicfile.New(*out, outputPerm)
		if err != nil {
			return err
		}
		defer f.Abort()
		if err := st.write(f); err != nil {
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
	return j.done()
}

// screenUsage is screen's --help: the flags, then the output columns, the
// row statuses and the exit codes.
func screenUsage(e *env, fs *flag.FlagSet) func() {
	base := fs.Usage
	return func() {
		base()
		fmt.Fprintf(e.stderr, "\nOutput: every input column, then %s, then one column per rule.\n", strings.Join(screenColumns, ", "))
		fmt.Fprintf(e.stderr, "\nThe status column says what happened to each exam row:\n%s", statusLegend())
		fmt.Fprintf(e.stderr, "\nExit codes: 0 every row with a reading was screened; %d the output was written but some rows could not be screened (their status says why); 1 the work failed (nothing written); 2 a wrong command line.\n", exitSkipped)
		fmt.Fprintln(e.stderr, screening.Caution)
	}
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
	return j.done()
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
		Version:   version.String(),
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
var screenColumns = []string{"mean", "sd", "z", "centile", "innovation", "chart_up", "chart_down", "chart", "limit", "signal", "exam", "first_signal", "status", "status_note"}

// screenTable is what screen writes: the input columns it keeps, the
// screening columns at limit h, and one column per rule.
type screenTable struct {
	input *table.Table
	// keep lists the input columns copied (nil: all).
	keep      []int
	results   []screening.Result
	status    []rowStatus
	limit     float64
	ruleNames []string
	ruleCols  [][]string
	format    table.Format
}

// table is the job's output table in format f. The input's own columns
// that bear the name of a column screen writes are replaced when the input
// is a screened file, and refused otherwise (see resultColumns).
func (j *screenJob) table(f table.Format) (screenTable, error) {
	keep, err := keptColumns(j.input, j.ruleNames)
	if err != nil {
		return screenTable{}, err
	}
	return screenTable{input: j.input, keep: keep, results: j.all, status: j.status, limit: j.limit.H,
		ruleNames: j.ruleNames, ruleCols: j.ruleCols, format: f}, nil
}

// keptColumns returns the input columns screen copies to its output. An
// input that holds every column screen writes is a screened file: its
// result columns and the columns named like this run's rules are left out,
// to be written afresh. Otherwise an input column named like a column
// screen writes is an error, as the output would hold two columns of that
// name.
func keptColumns(t *table.Table, ruleNames []string) ([]int, error) {
	ours := map[string]bool{}
	for _, c := range screenColumns {
		ours[c] = true
	}
	screened := true
	for _, c := range screenColumns {
		if c == "status" || c == "status_note" {
			continue // files screened before these columns existed
		}
		if _, err := t.Column(c); err != nil {
			screened = false
			break
		}
	}
	rulesLower := map[string]bool{}
	for _, r := range ruleNames {
		rulesLower[strings.ToLower(r)] = true
	}
	var keep []int
	for c, h := range t.Header {
		name := strings.ToLower(strings.TrimSpace(h))
		clash := ours[name] || rulesLower[name]
		switch {
		case clash && screened:
			continue
		case ours[name]:
			return nil, fmt.Errorf("the input has a column %q, the name of a column veer screen writes; rename that column", h)
		case rulesLower[name]:
			return nil, fmt.Errorf("the input has a column %q, the name of a rule; give the rule another name or rename the column", h)
		}
		keep = append(keep, c)
	}
	return keep, nil
}

// write writes the table as CSV to out.
func (st screenTable) write(out io.Writer) error {
	t, res, h := st.input, st.results, st.limit
	keep := st.keep
	if keep == nil {
		keep = make([]int, len(t.Header))
		for c := range keep {
			keep[c] = c
		}
	}
	w := table.NewFormatWriter(out, st.format)
	text, num, endRow := w.Text, w.Float, w.EndRow
	for _, c := range keep {
		text(t.Header[c])
	}
	for _, hd := range screenColumns {
		text(hd)
	}
	for _, hd := range st.ruleNames {
		text(hd)
	}
	if err := endRow(); err != nil {
		return err
	}
	nan := math.NaN()
	for i, r := range res {
		for _, c := range keep {
			text(t.Rows[i][c])
		}
		screened := r.Skipped == nil
		num(r.Mean, 6)
		num(r.SD, 6)
		num(r.Z, 4)
		num(r.Centile, 2)
		num(r.Innovation, 4)
		num(r.Up, 4)
		num(r.Down, 4)
		num(r.Stat, 4)
		switch {
		case !screened:
			num(nan, 4)
			text("")
			text("")
		case r.Signal:
			num(h, 4)
			text("1")
			num(float64(r.Exam), 0)
		default:
			num(h, 4)
			text("0")
			num(float64(r.Exam), 0)
		}
		num(r.FirstSignal, -1)
		var st2 rowStatus
		if i < len(st.status) {
			st2 = st.status[i]
		}
		text(st2.status)
		text(st2.note)
		for _, col := range st.ruleCols {
			text(col[i])
		}
		if err := endRow(); err != nil {
			return err
		}
	}
	return w.Flush()
}

// csvFormatFlags choose how screen writes CSV: by default as the input
// file is written (delimiter, decimal mark, byte-order mark, line ends).
type csvFormatFlags struct {
	separator, decimal string
}

func (c *csvFormatFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&c.separator, "separator", "", "delimiter of the CSV written: comma, semicolon or tab (default: the input file's)")
	fs.StringVar(&c.decimal, "decimal", "", "decimal mark of the numbers written: point or comma (default: the input file's; comma needs a semicolon or tab delimiter)")
}

// format returns a function giving the output format for an input table.
func (c *csvFormatFlags) format() (func(*table.Table) table.Format, error) {
	var comma rune
	switch strings.ToLower(c.separator) {
	case "":
	case "comma", ",":
		comma = ','
	case "semicolon", ";":
		comma = ';'
	case "tab", "\t":
		comma = '\t'
	default:
		return nil, usagef("--separator must be comma, semicolon or tab, not %q", c.separator)
	}
	dec := 0
	switch strings.ToLower(c.decimal) {
	case "":
	case "point", ".":
		dec = 1
	case "comma", ",":
		dec = 2
	default:
		return nil, usagef("--decimal must be point or comma, not %q", c.decimal)
	}
	if comma == ',' && dec == 2 {
		return nil, usagef("--decimal comma needs --separator semicolon or tab (a comma cannot be both)")
	}
	return func(t *table.Table) table.Format {
		f := t.Format()
		if comma != 0 {
			f.Comma = comma
		}
		switch dec {
		case 1:
			f.DecimalComma = false
		case 2:
			f.DecimalComma = true
		}
		if f.DecimalComma && f.Comma == ',' {
			// The input's decimal commas with a comma delimiter asked
			// for: numbers with a point, or they could not be read back.
			f.DecimalComma = false
		}
		return f
	}, nil
}
