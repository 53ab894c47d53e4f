package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"

	"veer/functions/chart"
	"veer/functions/joint"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/functions/transform"
	"veer/internal/atomicfile"
	"veer/internal/flagged"
	"veer/internal/table"
)

// splitList splits a comma-separated flag value into trimmed items.
func splitList(s string) []string {
	var out []string
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

// valueColumns returns the markers --value names, refusing one named twice.
func valueColumns(value string) ([]string, error) {
	cols := splitList(value)
	if err := joint.CheckMarkers(cols); err != nil {
		var de *joint.DuplicateError
		if errors.As(err, &de) {
			return nil, usagef("--value names the column %q twice; list each marker once", de.Marker)
		}
		return nil, usageError{"--value: " + err.Error()}
	}
	return cols, nil
}

// jointRows reads exam rows of several markers: a blank reading is a
// marker not measured at that exam; a row with none of them is an error
// naming it.
func jointRows(t *table.Table, path string, c examColumns, markers []string) ([]screening.JointRow, error) {
	if err := required("id", c.id, "time", c.time); err != nil {
		return nil, err
	}
	idc, err := t.Column(c.id)
	if err != nil {
		return nil, fmt.Errorf("%s: --id: %v", path, err)
	}
	tc, err := t.Column(c.time)
	if err != nil {
		return nil, fmt.Errorf("%s: --time: %v", path, err)
	}
	vcs := make([]int, len(markers))
	for k, m := range markers {
		if vcs[k], err = t.Column(m); err != nil {
			return nil, fmt.Errorf("%s: --value: %v", path, err)
		}
	}
	gc := -1
	if c.group != "" {
		if gc, err = t.Column(c.group); err != nil {
			return nil, fmt.Errorf("%s: --group: %v", path, err)
		}
	}
	times, err := t.Floats(tc)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	rows := make([]screening.JointRow, len(t.Rows))
	values := make([]float64, len(t.Rows)*len(markers))
	for i, r := range t.Rows {
		id := strings.TrimSpace(r[idc])
		if id == "" {
			return nil, fmt.Errorf("%s: data row %d (line %d), column %q: the worker id is empty", path, i+1, i+2, c.id)
		}
		v := values[i*len(markers) : (i+1)*len(markers)]
		measured := false
		for k, col := range vcs {
			v[k] = math.NaN()
			cell := strings.TrimSpace(r[col])
			if cell == "" {
				continue
			}
			x, err := table.ParseNumber(cell, t.DecimalComma)
			if err != nil {
				return nil, fmt.Errorf("%s: data row %d (line %d), column %q: %v", path, i+1, i+2, t.Header[col], err)
			}
			v[k], measured = x, true
		}
		if !measured {
			return nil, fmt.Errorf("%s: data row %d (line %d): none of the columns %s has a reading", path, i+1, i+2, strings.Join(markers, ", "))
		}
		rows[i] = screening.JointRow{Worker: id, Time: times[i], Values: v}
		if gc >= 0 {
			rows[i].Group = r[gc]
		}
	}
	return rows, nil
}

// fitJoint is veer fit with several value columns.
func fitJoint(e *env, t *table.Table, in, name, out string, cols examColumns, markers []string, transforms string, bw float64, minWorkers int) error {
	tr := splitList(transforms)
	if len(tr) != 1 && len(tr) != len(markers) {
		return usagef("--transform takes one transform for every marker or one per marker (%d), got %d", len(markers), len(tr))
	}
	p := newProgress(e)
	curves := make([]refcurve.Options, len(tr))
	for k, name := range tr {
		switch transform.Name(name) {
		case transform.None, transform.Log, transform.BoxCox:
		default:
			return usagef("--transform must be none, log or boxcox, not %q", name)
		}
		curves[k] = refcurve.Options{Transform: transform.Name(name), Bandwidth: bw, MinWorkers: minWorkers, Progress: p.report}
	}
	rows, err := jointRows(t, in, cols, markers)
	if err != nil {
		return err
	}
	j, err := screening.FitJoint(context.Background(), rows, screening.JointFitOptions{Name: name, Markers: markers, Curves: curves})
	p.finish()
	if err != nil {
		return fmt.Errorf("%s: %v", in, err)
	}
	doc, err := j.Encode()
	if err != nil {
		return err
	}
	if err := atomicfile.WriteFile(out, doc, outputPerm); err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "fitted %q from %d exams of %d markers: %s\n", name, len(rows), len(markers), j.Summary())
	for _, m := range j.Markers {
		fmt.Fprintf(e.stderr, "  %s: %s\n", m.Name, m.Summary())
	}
	fmt.Fprintf(e.stderr, "model written to %s\n", out)
	return nil
}

// loadAnyModel reads a model file of one marker or of several.
func loadAnyModel(path string) (*screening.Model, *screening.Joint, error) {
	if path == "" {
		return nil, nil, usagef("--model is required")
	}
	b, err := os.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, nil, fmt.Errorf("cannot find the model file %s", path)
		}
		return nil, nil, err
	}
	if screening.IsJoint(b) {
		j, err := screening.DecodeJoint(b)
		if err != nil {
			return nil, nil, fmt.Errorf("%s: %v", path, err)
		}
		return nil, j, nil
	}
	m, err := screening.Decode(b)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %v", path, err)
	}
	return m, nil, nil
}

// jointSettings reads the chart flags for p markers. Without --chart the
// joint default is used; without --side every marker of a one-way chart
// watches a rise (as one marker does), and MEWMA and MCUSUM watch every
// direction.
func (c *chartFlags) jointSettings(p int) (screening.JointSettings, error) {
	s := screening.JointSettings{Serial: screening.Serial(c.serial)}
	d := joint.DefaultSpec(p)
	s.Chart = joint.Spec{Kind: d.Kind, Lambda: c.lambda, Unit: c.unit, Allowance: c.allowance, Restart: c.restart}
	if c.given("chart") {
		s.Chart.Kind = chart.Kind(c.kind)
	}
	if c.headStart != 0 {
		return s, usagef("--head-start is for a chart of one marker; charts of several markers start at 0")
	}
	switch {
	case c.given("side"):
		for _, side := range splitList(c.side) {
			s.Chart.Sides = append(s.Chart.Sides, chart.Side(side))
		}
		if len(s.Chart.Sides) != p {
			return s, usageError{"--side: " + (&joint.SidesError{Got: len(s.Chart.Sides), Want: p}).Error()}
		}
	case s.Chart.Kind == joint.MEWMA || s.Chart.Kind == joint.MCUSUM:
	default:
		s.Chart.Sides = d.Sides
	}
	if err := s.Chart.Validate(p); err != nil {
		return s, usageError{err.Error()}
	}
	if err := c.settingsCommon(); err != nil {
		return s, err
	}
	return s, nil
}

// jointCalibrationWithoutModel is the textbook case of p markers: i.i.d.
// N(0, I) vectors at a fixed gap, method normal, the long horizon.
func (c *chartFlags) jointCalibrationWithoutModel(s screening.JointSettings, p int) (joint.Calibration, error) {
	if !c.gap.set {
		return joint.Calibration{}, usagef("without --model, give the planned years between exams with --gap")
	}
	if c.method != string(monitor.Normal) {
		return joint.Calibration{}, usagef("--method bootstrap needs --model (it resamples the reference workers)")
	}
	return joint.Calibration{
		Settings: joint.Settings{Chart: s.Chart, Mode: monitor.Whiten, Model: joint.Independent(p)},
		Method:   monitor.Normal, Gap: c.gap.v, Seed: c.seed, Paths: c.paths,
	}, nil
}

// jointLimit is veer limit for several markers: with a joint model, or
// without one for --markers N i.i.d. N(0, I) vectors.
func jointLimit(e *env, cf *chartFlags, j *screening.Joint, markers int, target float64) (monitor.LimitResult, error) {
	p := markers
	if j != nil {
		p = len(j.Markers)
	}
	s, err := cf.jointSettings(p)
	if err != nil {
		return monitor.LimitResult{}, err
	}
	prog, done := mcProgress(e)
	defer done()
	if j != nil {
		return j.Limit(s, cf.limitOptions(prog), target)
	}
	c, err := cf.jointCalibrationWithoutModel(s, p)
	if err != nil {
		return monitor.LimitResult{}, err
	}
	c.Progress = prog
	return joint.Limit(c, target)
}

// jointDelay is veer delay for several markers.
func jointDelay(e *env, cf *chartFlags, j *screening.Joint, markers int, limitH, target float64, shifts string, onset float64) error {
	p := markers
	if j != nil {
		p = len(j.Markers)
	}
	s, err := cf.jointSettings(p)
	if err != nil {
		return err
	}
	shift, err := parseList("shift", shifts)
	if err != nil {
		return err
	}
	if len(shift) == 1 && p > 1 {
		return usagef("--shift needs one shift per marker (%d), comma-separated in the markers' order, e.g. 0.5,0.5,0", p)
	}
	if len(shift) != p {
		return usagef("--shift needs one shift per marker (%d), got %d", p, len(shift))
	}
	prog, done := mcProgress(e)
	defer done()
	var c joint.Calibration
	if j != nil {
		if c, err = j.Calibration(s, cf.limitOptions(prog)); err != nil {
			return err
		}
	} else {
		if c, err = cf.jointCalibrationWithoutModel(s, p); err != nil {
			return err
		}
		c.Progress = prog
	}
	h := limitH
	if target > 0 {
		r, err := joint.Limit(c, target)
		if err != nil {
			return err
		}
		describeLimit(e, r, target, c.Method)
		h = r.H
	}
	d, err := joint.Delay(c, h, shift, onset)
	if err != nil {
		return err
	}
	how := fmt.Sprintf("%d paths, standard error %.2f years", d.Paths, d.SE)
	if d.Paths == 0 {
		how = "exact (integral equation, i.i.d. normal readings)"
	}
	fmt.Fprintf(e.stderr, "limit %.4f, shifts %s SD from %g years after the first exam: %s\n", h, shifts, onset, how)
	fmt.Fprintf(e.stdout, "%.4f\n", d.Years)
	return nil
}

// jointScreenJob is a sheet screened with a model of several markers.
type jointScreenJob struct {
	input    *table.Table
	model    *screening.Joint
	cols     []string // the value columns, in the model's marker order
	settings screening.JointSettings
	limit    monitor.LimitResult
	target   float64
	exams    []screening.JointExam
	results  []screening.JointResult
	// flagRules are the screen's rules, for the flagged count.
	flagRules []flagged.Rule
}

// jointScreen screens a CSV sheet with a joint model: --value names the
// model's markers (any order), --side follows --value.
func jointScreen(e *env, f *screenFlags, j *screening.Joint, t *table.Table) (*jointScreenJob, error) {
	cols, err := valueColumns(f.cols.value)
	if err != nil {
		return nil, err
	}
	names := j.MarkerNames()
	if len(cols) != len(names) {
		return nil, usagef("the model %s holds %d markers (%s); --value names %d columns", j.Name, len(names), strings.Join(names, ", "), len(cols))
	}
	order := make([]int, len(cols)) // order[k]: position in --value of the model's marker k
	for k, n := range names {
		order[k] = -1
		for i, c := range cols {
			if c == n {
				order[k] = i
			}
		}
		if order[k] < 0 {
			return nil, usagef("the model %s holds the markers %s; --value does not name %q (name the value columns as in the reference)", j.Name, strings.Join(names, ", "), n)
		}
	}
	s, err := f.chart.jointSettings(len(cols))
	if err != nil {
		return nil, err
	}
	if s.Chart.Sides != nil { // --side follows --value; the model has its own order
		sides := make([]chart.Side, len(names))
		for k := range names {
			sides[k] = s.Chart.Sides[order[k]]
		}
		s.Chart.Sides = sides
	}
	if s.Extrapolate, err = f.reach.value(); err != nil {
		return nil, err
	}
	rows, err := jointRows(t, f.in, f.cols, names)
	if err != nil {
		return nil, err
	}
	job := &jointScreenJob{input: t, model: j, cols: names, settings: s, target: f.target}
	h := f.limit
	job.limit = monitor.LimitResult{H: h}
	if f.target > 0 {
		prog, done := mcProgress(e)
		job.limit, err = j.Limit(s, f.chart.limitOptions(prog), f.target)
		done()
		if err != nil {
			return nil, err
		}
		describeLimit(e, job.limit, f.target, monitor.Method(f.chart.method))
		h = job.limit.H
	}
	job.exams = make([]screening.JointExam, len(rows))
	for i, r := range rows {
		job.exams[i] = screening.JointExam{Worker: r.Worker, Group: r.Group, Time: r.Time, Values: r.Values}
	}
	if job.results, err = j.Screen(job.exams, s, h); err != nil {
		return nil, fmt.Errorf("%s: %v", f.in, err)
	}
	return job, nil
}

// jointMarkerColumns are the columns written per marker, suffixed _<marker>.
var jointMarkerColumns = []string{"mean", "sd", "z", "centile", "innovation"}

// jointColumns are the joint columns written after the markers'.
var jointColumns = []string{"chart", "limit", "signal", "leading_marker", "exam", "first_signal"}

func (job *jointScreenJob) write(out io.Writer, ruleNames []string, ruleCols [][]string) error {
	t := job.input
	w := table.NewWriter(out)
	for _, hd := range t.Header {
		w.Text(hd)
	}
	for _, m := range job.cols {
		for _, c := range jointMarkerColumns {
			w.Text(c + "_" + m)
		}
	}
	for _, hd := range jointColumns {
		w.Text(hd)
	}
	for _, hd := range ruleNames {
		w.Text(hd)
	}
	if err := w.EndRow(); err != nil {
		return err
	}
	for i, r := range job.results {
		for _, c := range t.Rows[i] {
			w.Text(c)
		}
		for k := range job.cols {
			w.Float(r.Mean[k], 6)
			w.Float(r.SD[k], 6)
			w.Float(r.Z[k], 4)
			w.Float(r.Centile[k], 2)
			w.Float(r.Innovation[k], 4)
		}
		w.Float(r.Stat, 4)
		w.Float(job.limit.H, 4)
		if r.Signal {
			w.Text("1")
		} else {
			w.Text("0")
		}
		if r.Leading >= 0 {
			w.Text(job.cols[r.Leading])
		} else {
			w.Text("")
		}
		w.Float(float64(r.Exam), 0)
		w.Float(r.FirstSignal, -1)
		for _, col := range ruleCols {
			w.Text(col[i])
		}
		if err := w.EndRow(); err != nil {
			return err
		}
	}
	return w.Flush()
}

func (job *jointScreenJob) summary(e *env) {
	lead := map[string]int{}
	// The joint chart in the shape package flagged counts.
	exams := make([]screening.Exam, len(job.results))
	res := make([]screening.Result, len(job.results))
	for i, r := range job.results {
		exams[i] = screening.Exam{Worker: job.exams[i].Worker, Group: job.exams[i].Group, Time: job.exams[i].Time}
		res[i] = screening.Result{Stat: r.Stat, Signal: r.Signal}
		if r.Signal && r.Leading >= 0 {
			lead[job.cols[r.Leading]]++
		}
	}
	c := flagged.Count(flagged.Workers(exams, res, job.flagRules, job.limit.H), job.flagRules)
	fmt.Fprintf(e.stderr, "screened %d exams of %d workers on %s together at limit %.4f\n",
		len(job.results), c.Workers, strings.Join(job.cols, ", "), job.limit.H)
	printCounts(e, c, job.flagRules)
	if len(lead) > 0 {
		var parts []string
		for _, m := range job.cols {
			if lead[m] > 0 {
				parts = append(parts, fmt.Sprintf("%s %d", m, lead[m]))
			}
		}
		fmt.Fprintf(e.stderr, "marker leading the chart at signals: %s\n", strings.Join(parts, ", "))
	}
	fmt.Fprintln(e.stderr, screening.Caution)
}

// runJointScreen is veer screen with a model of several markers.
func runJointScreen(e *env, sf *screenFlags, j *screening.Joint, out string) (*jointScreenJob, error) {
	if err := required("in", sf.in); err != nil {
		return nil, err
	}
	if (sf.limit > 0) == (sf.target > 0) {
		return nil, usagef("give exactly one of --target (years) and --limit")
	}
	if isXLSX(sf.in) || isXLSX(out) {
		return nil, usagef("a model of several markers screens CSV files; save the exams sheet as CSV (the spreadsheet functions chart several markers in a workbook)")
	}
	if sf.sheet != "" {
		return nil, usagef("--sheet goes with an .xlsx workbook")
	}
	t, err := loadTable(sf.in)
	if err != nil {
		return nil, err
	}
	rs, err := collectJointRules(sf.rules, sf.rulesFile, j.MarkerNames())
	if err != nil {
		return nil, err
	}
	job, err := jointScreen(e, sf, j, t)
	if err != nil {
		return nil, err
	}
	ruleNames, ruleCols, err := job.rules(rs)
	if err != nil {
		return nil, err
	}
	for k, n := range ruleNames {
		job.flagRules = append(job.flagRules, flagged.Rule{Name: n, Severity: rs.Rules[k].Severity, Fired: fired(ruleCols[k])})
	}
	write := func(w io.Writer) error { return job.write(w, ruleNames, ruleCols) }
	if out == "" {
		if err := write(e.stdout); err != nil {
			return nil, err
		}
		return job, nil
	}
	f, err := atomicfile.New(out, outputPerm)
	if err != nil {
		return nil, err
	}
	defer f.Abort()
	if err := write(f); err != nil {
		return nil, fmt.Errorf("cannot write %s: %v", out, err)
	}
	return job, f.Commit()
}

// collectJointRules is collectRules for a model of several markers: the
// rules are checked against the markers' variables before data are read.
func collectJointRules(flags ruleList, file string, markers []string) (rules.RuleSet, error) {
	rs, err := collectRulesUnchecked(flags, file)
	if err != nil {
		return rs, err
	}
	c := rules.NewCache(len(rs.Rules)+1, rules.DefaultLimits())
	for _, r := range rs.Rules {
		if _, err := c.CompileJoint(r.Expr, markers, rules.Any); err != nil {
			return rs, usageError{fmt.Sprintf("rule %q: %v", r.Name, err)}
		}
	}
	return rs, nil
}

// rules evaluates the screen's rules over the joint results.
func (job *jointScreenJob) rules(rs rules.RuleSet) ([]string, [][]string, error) {
	if len(rs.Rules) == 0 {
		return nil, nil, nil
	}
	p := len(job.cols)
	vars := make([]rules.JointExam, len(job.results))
	for i, r := range job.results {
		e := job.exams[i]
		v := rules.JointExam{Worker: e.Worker, Group: e.Group, Time: e.Time, Chart: r.Stat, Limit: job.limit.H,
			Signal: r.Signal, InRange: r.InRange, Markers: make([]rules.MarkerExam, p)}
		if r.Leading >= 0 {
			v.Leading = job.cols[r.Leading]
		}
		for k := range p {
			v.Markers[k] = rules.MarkerExam{Value: e.Values[k], Mean: r.Mean[k], SD: r.SD[k], Z: r.Z[k], Centile: r.Centile[k], Innovation: r.Innovation[k]}
		}
		vars[i] = v
	}
	if err := rules.LinkJoint(vars); err != nil {
		return nil, nil, err
	}
	cache := rules.NewCache(len(rs.Rules), rules.DefaultLimits())
	names := make([]string, len(rs.Rules))
	cols := make([][]string, len(rs.Rules))
	vals := make([]rules.Value, len(vars))
	for k, nr := range rs.Rules {
		names[k] = nr.Name
		r, err := cache.CompileJoint(nr.Expr, job.cols, rules.Any)
		if err != nil {
			return nil, nil, fmt.Errorf("rule %q: %v", nr.Name, err)
		}
		err = rules.EvalJoint(context.Background(), r, vars, vals)
		var rowErrs *rules.RowErrors
		if err != nil && !errors.As(err, &rowErrs) {
			return nil, nil, fmt.Errorf("rule %q: %v", nr.Name, err)
		}
		col := make([]string, len(vals))
		for i, v := range vals {
			col[i] = ruleCell(v)
		}
		if rowErrs != nil {
			for _, e := range rowErrs.Rows {
				if e.Row >= 1 && e.Row <= len(col) {
					col[e.Row-1] = "#VALUE!"
				}
			}
		}
		cols[k] = col
	}
	return names, cols, nil
}

// jointModelFile reads path when it holds a model of several markers.
func jointModelFile(path string) (*screening.Joint, bool, error) {
	if path == "" {
		return nil, false, nil
	}
	b, err := os.ReadFile(path)
	if err != nil || !screening.IsJoint(b) {
		return nil, false, nil // the model of one marker is read as before
	}
	_, j, err := loadAnyModel(path)
	return j, err == nil, err
}
