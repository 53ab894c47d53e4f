package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"veer/functions/evaluation"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/internal/atomicfile"
	"veer/internal/table"
)

// outcomeFlags are the inputs of an evaluation on a labelled history,
// shared by evaluate and report.
type outcomeFlags struct {
	outcomes, sheet       string
	diagnosed, diagnosedT string
	missing               string
	targets               string
	centile               float64
}

func (f *outcomeFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.outcomes, "outcomes", "", "CSV file or .xlsx workbook of outcomes: one row per worker (the worker column has the --id name) saying whether the condition was later diagnosed and at what age")
	fs.StringVar(&f.sheet, "outcomes-sheet", "", "sheet of the .xlsx outcomes workbook (default: the first sheet)")
	fs.StringVar(&f.diagnosed, "diagnosed", "diagnosed", "outcomes column saying whether the worker was diagnosed: yes or no (true/false and 1/0 are understood)")
	fs.StringVar(&f.diagnosedT, "diagnosed-age", "diagnosed_age", "outcomes column holding the age at diagnosis in years (blank for a worker never diagnosed)")
	fs.StringVar(&f.missing, "missing", "error", "a worker of the exams with no outcome row: error (list a few and stop) or healthy (take them as never diagnosed)")
	fs.StringVar(&f.targets, "targets", "", "more targets in years to evaluate the chart at: a list 5,10,20,50,100 or a range 5-100 (10 targets evenly spaced on a log scale; 5-100/N for N)")
	fs.Float64Var(&f.centile, "centile", screening.DefaultBaselineCentile, "the baseline rule flags a reading beyond this reference centile in the chart's direction (97.5 and 2.5 both mean the outer 2.5%)")
}

// evaluateJob is an evaluation with what is needed to show it.
type evaluateJob struct {
	history  *screening.History
	settings screening.Settings
	target   float64
	source   string
}

// runEvaluation reads the outcomes, checks them against the exams and
// evaluates the chart at each target, the baseline and the rules.
func runEvaluation(e *env, f *outcomeFlags, m *screening.Model, set screening.Settings, lo screening.LimitOptions,
	target float64, exams []screening.Exam, idCol, examsPath, timeCol string, rs []rules.NamedRule) (*evaluateJob, error) {
	sweep, err := evaluation.ParseTargets(f.targets)
	if err != nil {
		return nil, usagef("--targets: %v", err)
	}
	var missingHealthy bool
	switch f.missing {
	case "error":
	case "healthy":
		missingHealthy = true
	default:
		return nil, usagef("--missing must be error or healthy, not %q", f.missing)
	}
	if err := required("diagnosed", f.diagnosed, "diagnosed-age", f.diagnosedT); err != nil {
		return nil, err
	}
	t, err := readInput(f.outcomes, f.sheet, "--outcomes-sheet")
	if err != nil {
		return nil, err
	}
	outs, err := readOutcomes(t, f.outcomes, idCol, f.diagnosed, f.diagnosedT)
	if err != nil {
		return nil, err
	}
	evx := make([]evaluation.Exam, len(exams))
	for i, x := range exams {
		evx[i] = evaluation.Exam{Worker: x.Worker, Age: x.Time}
	}
	ctx := context.Background()
	c, err := evaluation.NewCohort(ctx, evx, outs, evaluation.Options{
		Columns:          evaluation.Columns{Worker: idCol, Time: timeCol, Diagnosed: f.diagnosed, DiagnosedAge: f.diagnosedT},
		MissingAsHealthy: missingHealthy,
	})
	if err != nil {
		var miss *evaluation.MissingOutcomesError
		var exam *evaluation.ExamError
		switch {
		case errors.As(err, &miss):
			return nil, fmt.Errorf("%s: %v (--missing healthy)", f.outcomes, err)
		case errors.As(err, &exam):
			return nil, fmt.Errorf("%s: %v", examsPath, err)
		}
		return nil, fmt.Errorf("%s: %v", f.outcomes, err)
	}
	prog, done := mcProgress(e)
	lo.Progress = prog
	h, err := m.EvaluateHistory(ctx, exams, c, screening.HistoryOptions{
		Settings: set, Limits: lo, Target: target, Sweep: sweep, Centile: f.centile, Rules: rs, MatchBaseline: true,
	})
	done()
	if err != nil {
		return nil, fmt.Errorf("%s: %v", examsPath, err)
	}
	return &evaluateJob{history: h, settings: set, target: target, source: f.outcomes}, nil
}

// readOutcomes picks the outcome columns of a table: the worker id (the
// column named like the exams' --id), the diagnosis flag and the age at
// diagnosis (blank when never diagnosed).
func readOutcomes(t *table.Table, path, idCol, dxCol, ageCol string) ([]evaluation.Outcome, error) {
	cols := make([]int, 3)
	for k, c := range []struct{ name, flag string }{{idCol, "--id"}, {dxCol, "--diagnosed"}, {ageCol, "--diagnosed-age"}} {
		j, err := t.Column(c.name)
		if err != nil {
			return nil, fmt.Errorf("%s: %s: %v", path, c.flag, err)
		}
		cols[k] = j
	}
	out := make([]evaluation.Outcome, len(t.Rows))
	for i, r := range t.Rows {
		age := math.NaN()
		if s := strings.TrimSpace(r[cols[2]]); s != "" {
			v, err := table.ParseNumber(s, t.DecimalComma)
			if err != nil {
				return nil, fmt.Errorf("%s: data row %d (line %d), column %q: %v", path, i+1, i+2, ageCol, err)
			}
			age = v
		}
		out[i] = evaluation.Outcome{Row: i + 1, Worker: r[cols[0]], Diagnosed: r[cols[1]], Age: age}
	}
	return out, nil
}

// writeEvaluation writes the evaluation table as CSV (see
// evaluation.TableColumns).
func writeEvaluation(w io.Writer, h *screening.History) error {
	tw := table.NewWriter(w)
	for _, c := range evaluation.Header() {
		tw.Text(c)
	}
	if err := tw.EndRow(); err != nil {
		return err
	}
	for _, r := range h.Rows {
		for i, c := range r.Cells(h.Cohort) {
			if c.IsText {
				tw.Text(c.Text)
			} else {
				tw.Float(c.Number, evaluation.TableColumns[i].Digits)
			}
		}
		if err := tw.EndRow(); err != nil {
			return err
		}
	}
	return tw.Flush()
}

// describe tells on stderr, in plain words, what the evaluation found.
func (j *evaluateJob) describe(w io.Writer) {
	h := j.history
	s := h.Cohort
	fmt.Fprintf(w, "evaluated on %d workers: %d later diagnosed with an exam before the diagnosis, %d never diagnosed", s.Workers, s.Diagnosed, s.Healthy)
	if s.MissingAsHealthy > 0 {
		fmt.Fprintf(w, " (%d of them with no outcome row)", s.MissingAsHealthy)
	}
	fmt.Fprintln(w)
	if s.AfterDiagnosis > 0 {
		fmt.Fprintf(w, "%d exams of %d workers at or after their diagnosis are left out: they are not screening\n", s.AfterDiagnosis, s.WorkersAfterDiagnosis)
	}
	if s.AtFirstExam > 0 {
		fmt.Fprintf(w, "%d workers diagnosed at their first exam are left out: no exam came before the diagnosis\n", s.AtFirstExam)
	}
	for _, r := range h.Rows {
		x := r.Result
		label := r.Name
		switch r.Method {
		case evaluation.MethodChart:
			label = fmt.Sprintf("%s at %s years", r.Name, strconv.FormatFloat(r.Target, 'f', -1, 64))
		case evaluation.MethodBaseline:
			label = "baseline " + r.Name
		case evaluation.MethodRule:
			label = "rule " + r.Name
		}
		lead := "no one flagged before the diagnosis"
		if x.Flagged > 0 {
			lead = fmt.Sprintf("a median of %.1f years before it", x.Lead.MedianFlagged)
		}
		fmt.Fprintf(w, "  %s: %d of %d diagnosed (%.0f%%) flagged before the diagnosis, %s; %.2f false signals per 100 worker-years\n",
			label, x.Flagged, x.Diagnosed, 100*x.FlaggedShare.Estimate, lead, x.FalsePer100.Estimate)
	}
	base := h.Baseline()
	if !math.IsNaN(h.Matched) {
		fmt.Fprintf(w, "the chart gives the baseline's %.2f false signals per 100 worker-years at a target of about %s years\n",
			base.Result.FalsePer100.Estimate, strconv.FormatFloat(h.Matched, 'f', -1, 64))
	} else {
		fmt.Fprintf(w, "no target of the sweep gives the baseline's %.2f false signals per 100 worker-years; widen --targets to find the one that does\n",
			base.Result.FalsePer100.Estimate)
	}
	for _, r := range h.Rows {
		if r.Method == evaluation.MethodChart && r.Target == j.target {
			fmt.Fprintln(w, evaluation.Describe(r))
		}
	}
	for _, f := range h.Failed {
		fmt.Fprintf(w, "%v\n", f)
	}
	fmt.Fprintln(w, screening.Caution)
}

func runEvaluate(e *env, args []string) error {
	fs := newFlags(e, "evaluate", "--model M.json --in F.csv|F.xlsx --id C --time C --value C [--group C] --outcomes O.csv|O.xlsx [--diagnosed C] [--diagnosed-age C] [--target YEARS] [--targets LIST] [--rule NAME=EXPR]... [--out E.csv]")
	var sf screenFlags
	sf.register(fs)
	var of outcomeFlags
	of.register(fs)
	out := fs.String("out", "", "CSV file to write the evaluation table to (default: standard output)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := required("model", sf.model, "in", sf.in, "outcomes", of.outcomes); err != nil {
		return err
	}
	if sf.limit != 0 {
		return usagef("evaluate computes the limit for each target; give --target (and --targets), not --limit")
	}
	if sf.target == 0 {
		sf.target = 20
	}
	if !(sf.target > 0) {
		return usagef("--target must be a positive number of years")
	}
	if _, joint, err := jointModelFile(sf.model); err != nil || joint {
		if err != nil {
			return err
		}
		return usagef("evaluate scores one marker at a time: give the model of one marker (fit each marker's model with veer fit --value COLUMN)")
	}
	set, err := sf.chart.settings()
	if err != nil {
		return err
	}
	if set.Extrapolate, err = sf.reach.value(); err != nil {
		return err
	}
	rs, err := collectRulesUnchecked(sf.rules, sf.rulesFile)
	if err != nil {
		return err
	}
	m, err := loadModel(sf.model)
	if err != nil {
		return err
	}
	input, err := readInput(sf.in, sf.sheet, "--sheet")
	if err != nil {
		return err
	}
	rows, err := readRows(input, sf.in, sf.cols)
	if err != nil {
		return err
	}
	exams := make([]screening.Exam, len(rows))
	for i, r := range rows {
		exams[i] = screening.Exam{Worker: r.Worker, Group: r.Group, Time: r.Time, Value: r.Value}
	}
	j, err := runEvaluation(e, &of, m, set, sf.chart.limitOptions(nil), sf.target, exams, sf.cols.id, sf.in, sf.cols.time, rs.Rules)
	if err != nil {
		return err
	}
	if *out == "" {
		if err := writeEvaluation(e.stdout, j.history); err != nil {
			return err
		}
	} else {
		f, err := atomicfile.New(*out, outputPerm)
		if err != nil {
			return err
		}
		defer f.Abort()
		if err := writeEvaluation(f, j.history); err != nil {
			return fmt.Errorf("cannot write %s: %v", *out, err)
		}
		if err := f.Commit(); err != nil {
			return err
		}
	}
	j.describe(e.stderr)
	return nil
}
