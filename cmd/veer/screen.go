package main

import (
	"bytes"
	"fmt"
	"io"
	"math"

	"veer/functions/screening"
	"veer/internal/table"
)

func runScreen(e *env, args []string) error {
	fs := newFlags(e, "screen", "--model M.json --in F.csv --id C --time C --value C [--group C] (--target YEARS | --limit H) [--out O.csv]")
	var cols examColumns
	cols.register(fs.StringVar)
	var cf chartFlags
	cf.register(fs)
	model := fs.String("model", "", "model file written by veer fit (required)")
	in := fs.String("in", "", "CSV file of exams to screen, one row per exam, any order (required)")
	out := fs.String("out", "", "file to write (default: standard output)")
	target := fs.Float64("target", 0, "average years to a false signal for a healthy worker; the limit is computed from the model")
	limitH := fs.Float64("limit", 0, "control limit to use instead of --target")
	extrap := fs.Bool("extrapolate", false, "allow exams at ages outside the reference range (curves held at their ends)")
	var ruleFlags ruleList
	fs.Var(&ruleFlags, "rule", "alert rule NAME=EXPRESSION in CEL, adds a column NAME (repeatable), e.g. --rule 'high=chart > limit || centile > 99.0'")
	rulesFile := fs.String("rules", "", "file of alert rules, one 'name = expression' per line, each adds a column")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := required("model", *model, "in", *in); err != nil {
		return err
	}
	if (*limitH > 0) == (*target > 0) {
		return usagef("give exactly one of --target (years) and --limit")
	}
	s, err := cf.settings()
	if err != nil {
		return err
	}
	s.Extrapolate = *extrap
	rs, err := collectRules(ruleFlags, *rulesFile)
	if err != nil {
		return err
	}
	m, err := loadModel(*model)
	if err != nil {
		return err
	}
	t, err := loadTable(*in)
	if err != nil {
		return err
	}
	rows, err := readRows(t, *in, cols)
	if err != nil {
		return err
	}
	h := *limitH
	if *target > 0 {
		prog, done := mcProgress(e)
		r, err := m.Limit(s, cf.limitOptions(prog), *target)
		done()
		if err != nil {
			return err
		}
		describeLimit(e, r, *target)
		h = r.H
	}
	exams := make([]screening.Exam, len(rows))
	for i, r := range rows {
		exams[i] = screening.Exam{Worker: r.Worker, Group: r.Group, Time: r.Time, Value: r.Value}
	}
	res, err := m.Screen(exams, s, h)
	if err != nil {
		return fmt.Errorf("%s: %v", *in, err)
	}
	ruleNames, ruleCols, err := evalRules(rs, exams, res, s, h)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	var w io.Writer = e.stdout
	if *out != "" {
		w = &buf
	}
	if err := writeScreen(w, t, res, h, ruleNames, ruleCols); err != nil {
		return err
	}
	if *out != "" {
		if err := writeFileAtomic(*out, buf.Bytes()); err != nil {
			return err
		}
	}
	flagged := map[string]bool{}
	workers := map[string]bool{}
	for i, r := range res {
		workers[rows[i].Worker] = true
		if r.Signal {
			flagged[rows[i].Worker] = true
		}
	}
	fmt.Fprintf(e.stderr, "screened %d exams of %d workers at limit %.4f: %d workers signalled\n", len(res), len(workers), h, len(flagged))
	fmt.Fprintln(e.stderr, caution)
	return nil
}

// screenColumns are the columns screen adds to the input's.
var screenColumns = []string{"mean", "sd", "z", "centile", "innovation", "chart_up", "chart_down", "chart", "limit", "signal", "exam", "first_signal"}

func writeScreen(out io.Writer, t *table.Table, res []screening.Result, h float64, ruleNames []string, ruleCols [][]string) error {
	w := table.NewWriter(out)
	for i, hd := range t.Header {
		w.Text(hd, i == 0)
	}
	for _, hd := range screenColumns {
		w.Text(hd, false)
	}
	for _, hd := range ruleNames {
		w.Text(hd, false)
	}
	if err := w.EndRow(); err != nil {
		return err
	}
	for i, r := range res {
		for j, c := range t.Rows[i] {
			w.Text(c, j == 0)
		}
		w.Float(r.Mean, 6, false)
		w.Float(r.SD, 6, false)
		w.Float(r.Z, 4, false)
		w.Float(r.Centile, 2, false)
		w.Float(r.Innovation, 4, false)
		w.Float(r.Up, 4, false)
		w.Float(r.Down, 4, false)
		w.Float(r.Stat, 4, false)
		w.Float(h, 4, false)
		if r.Signal {
			w.Text("1", false)
		} else {
			w.Text("0", false)
		}
		w.Float(float64(r.Exam), 0, false)
		if math.IsNaN(r.FirstSignal) {
			w.Text("", false)
		} else {
			w.Float(r.FirstSignal, -1, false)
		}
		for _, col := range ruleCols {
			w.Text(col[i], false)
		}
		if err := w.EndRow(); err != nil {
			return err
		}
	}
	return w.Flush()
}
