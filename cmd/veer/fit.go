package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"os"
	"strconv"
	"strings"
	"time"

	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/functions/transform"
	"veer/internal/atomicfile"
	"veer/internal/table"
)

// progress prints a long computation's progress on stderr once it has run
// for a second. On a terminal one line is rewritten in place; otherwise
// (stderr to a file or a pipe) whole lines are written, at most one every
// progressLineEvery, so a log stays readable.
type progress struct {
	e       *env
	start   time.Time
	last    time.Time
	printed bool
}

// progressLineEvery is the least time between progress lines written to a
// file or pipe.
const progressLineEvery = 15 * time.Second

func newProgress(e *env) *progress { return &progress{e: e, start: time.Now()} }

func (p *progress) report(stage string, done float64) {
	now := time.Now()
	if !p.e.stderrTerminal {
		if now.Sub(p.start) < progressLineEvery || now.Sub(p.last) < progressLineEvery {
			return
		}
		p.last = now
		fmt.Fprintf(p.e.stderr, "%s: %.0f%%\n", stage, 100*done)
		return
	}
	if now.Sub(p.start) < time.Second || now.Sub(p.last) < 250*time.Millisecond {
		return
	}
	p.last = now
	p.printed = true
	fmt.Fprintf(p.e.stderr, "\r%-40s %3.0f%%", stage, 100*done)
}

func (p *progress) finish() {
	if p.printed {
		fmt.Fprintln(p.e.stderr)
	}
}

func runFit(e *env, args []string) error {
	fs := newFlags(e, "fit", "--in F.csv|F.xlsx [--sheet S] --id C --time C --value C [--group C] --name N --out M.json\n       veer fit (--lms-table T.csv | --equations E.json) [--in F.csv --id C --time C --value C [--group C] [--covariate NAME=COL]] [--serial-phi P --serial-c C] --name N --out M.json")
	var cols examColumns
	cols.register(fs.StringVar)
	in := fs.String("in", "", "CSV file or .xlsx workbook of healthy reference workers' exams, one row per exam (required); with a published reference, the exams of the workforce to be screened")
	sheet := fs.String("sheet", "", "sheet of the .xlsx workbook holding the exams (default: the first sheet)")
	var pub publishedFlags
	pub.register(fs)
	name := fs.String("name", "", "name of the model, e.g. sbp (required)")
	out := fs.String("out", "", "file to write the model to (required)")
	tr := fs.String("transform", string(transform.None), "value transform: none, log or boxcox (lambda by maximum likelihood); with several markers one for all or one per marker, e.g. none,log,none")
	bw := fs.Float64("bandwidth", 0, "bandwidth of the mean curve in years (0: chosen by leave-one-worker-out cross-validation)")
	minWorkers := fs.Int("minworkers", 0, fmt.Sprintf("fewest workers a group needs for its own curves (0: the default, %d; at least %d)", refcurve.DefaultMinWorkers, refcurve.LeastMinWorkers))
	alias(fs, "min-workers", "minworkers")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	if pub.wanted() {
		for _, n := range []string{"transform", "bandwidth", "minworkers", "min-workers"} {
			if set[n] {
				return usagef("--%s is for curves fitted from a reference cohort; a published reference gives its own", n)
			}
		}
		return runFitPublished(e, &pub, *in, *sheet, *name, *out, cols)
	}
	for _, n := range []string{"interpolate", "serial-phi", "serial-c", "first-pass-target", "side", "covariate", "extrapolate"} {
		if set[n] {
			return usagef("--%s goes with a published reference (--lms-table or --equations)", n)
		}
	}
	if err := required("in", *in, "name", *name, "out", *out); err != nil {
		return err
	}
	if *bw < 0 {
		return usagef("--bandwidth must be positive (or 0 to choose it)")
	}
	if *minWorkers != 0 && *minWorkers < refcurve.LeastMinWorkers {
		return usagef("--minworkers must be at least %d", refcurve.LeastMinWorkers)
	}
	markers, err := valueColumns(cols.value)
	if err != nil {
		return err
	}
	t, err := readInput(*in, *sheet, "--sheet")
	if err != nil {
		return err
	}
	if err := refuseOwnSheet(t); err != nil {
		return err
	}
	if len(markers) > 1 {
		return fitJoint(e, t, *in, *name, *out, cols, markers, *tr, *bw, *minWorkers)
	}
	switch transform.Name(*tr) {
	case transform.None, transform.Log, transform.BoxCox:
	default:
		return usagef("--transform must be none, log or boxcox, not %q", *tr)
	}
	x, err := readExamTable(t, *in, cols)
	if err != nil {
		return err
	}
	if p := x.problems(); p.Len() > 0 {
		return fmt.Errorf("%s: %v\nnothing was written; every reference row needs a worker id, an age and a reading (or a blank reading, a missing exam)%s", *in, p, groupHint(cols))
	}
	if len(x.exams) == 0 {
		return fmt.Errorf("%s: no row has a reading for --value %q", *in, cols.value)
	}
	rows := make([]refcurve.Row, len(x.exams))
	for i, ex := range x.exams {
		rows[i] = refcurve.Row{Worker: ex.Worker, Group: ex.Group, Time: ex.Time, Value: ex.Value}
	}
	p := newProgress(e)
	m, err := screening.Fit(context.Background(), rows, screening.FitOptions{
		Name: *name,
		Curves: refcurve.Options{
			Transform:  transform.Name(*tr),
			Bandwidth:  *bw,
			MinWorkers: *minWorkers,
			Progress:   p.report,
		},
	})
	p.finish()
	if err != nil {
		return fmt.Errorf("%s: %v\nnothing was written", *in, x.fitError(err))
	}
	doc, err := m.Encode()
	if err != nil {
		return err
	}
	if err := atomicfile.WriteFile(*out, doc, outputPerm); err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "fitted %q from %s: %s\n", *name, plural(len(rows), "exam", "exams"), m.Summary())
	if n := x.missing(); n > 0 {
		fmt.Fprintf(e.stderr, "%s without a reading left out (missing exams)\n", plural(n, "row", "rows"))
	}
	fmt.Fprintf(e.stderr, "model written to %s\n", *out)
	return nil
}

// groupHint reminds that a blank group is not allowed when groups are used.
func groupHint(c examColumns) string {
	if c.group == "" {
		return ""
	}
	return " and, with --group, a group"
}

// fitError words a failed fit for the command line: each problem of the
// rows at its line (or sheet row and cell), a group too small naming
// --minworkers.
func (x *examTable) fitError(err error) error {
	var all *refcurve.RowErrors
	list := []error{err}
	if errors.As(err, &all) {
		list = all.List
	}
	var rowsP table.Problems
	var other []string
	for _, e := range list {
		var (
			re *refcurve.RowError
			de *refcurve.DuplicateError
			ge *refcurve.GroupSizeError
		)
		switch {
		case errors.As(e, &de):
			i := x.rowOf[de.Rows[1]-1]
			rowsP.Add(x.placed(i, e))
		case errors.As(e, &re) && len(re.Rows) > 0:
			i := x.rowOf[re.Rows[0]-1]
			rowsP.Add(x.placed(i, e))
		case errors.As(e, &ge):
			other = append(other, fmt.Sprintf("%v; --minworkers lowers the minimum (down to %d), at the price of less certain curves", e, refcurve.LeastMinWorkers))
		default:
			other = append(other, e.Error())
		}
	}
	if all != nil && all.Count > len(all.List) {
		other = append(other, fmt.Sprintf("and %d more problems", all.Count-len(all.List)))
	}
	var parts []string
	if rowsP.Len() > 0 {
		parts = append(parts, rowsP.Error())
	}
	parts = append(parts, other...)
	return errors.New(strings.Join(parts, "\n"))
}

// loadModel reads a screening model file.
func loadModel(path string) (*screening.Model, error) {
	if path == "" {
		return nil, usagef("--model is required")
	}
	b, err := os.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("cannot find the model file %s", path)
		}
		return nil, err
	}
	m, err := screening.Decode(b)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return m, nil
}

// parseList reads a comma-separated list of numbers.
func parseList(flagName, s string) ([]float64, error) {
	var out []float64
	for _, part := range strings.Split(s, ",") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		v, err := strconv.ParseFloat(part, 64)
		if err != nil {
			return nil, usagef("--%s: %q is not a number", flagName, part)
		}
		out = append(out, v)
	}
	if len(out) == 0 {
		return nil, usagef("--%s needs at least one number", flagName)
	}
	return out, nil
}

func runCurve(e *env, args []string) error {
	fs := newFlags(e, "curve", "--model M.json --at 30,40,50 [--group G] [--centiles 2.5,97.5] [--covariate height=170]")
	model := fs.String("model", "", "model file written by veer fit (required)")
	at := fs.String("at", "", "ages in years, comma-separated (required)")
	group := fs.String("group", "", "reference group (default: every group of the model)")
	centiles := fs.String("centiles", "", "centiles to add as columns, in percent, comma-separated, e.g. 2.5,97.5")
	var reach reachFlags
	reach.register(fs)
	var covs covariateList
	fs.Var(&covs, "covariate", "for a model on reference equations: NAME=VALUE, the covariate value to look the reference up at, e.g. height=170 (repeatable)")
	fs.Usage = func() {
		fmt.Fprintf(e.stderr, "Usage: veer curve --model M.json --at 30,40,50 [--group G] [--centiles 2.5,97.5] [--covariate height=170]\n\nFlags:\n")
		printFlags(fs)
		fmt.Fprintln(e.stderr, "\nOutput: CSV with the columns age, group, mean, sd and c<P> per centile asked for (mean and sd on the model's scale, centiles in the reading's own unit).")
	}
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := required("model", *model, "at", *at); err != nil {
		return err
	}
	years, err := reach.value()
	if err != nil {
		return err
	}
	extrap := years > 0
	ages, err := parseList("at", *at)
	if err != nil {
		return err
	}
	var cents []float64
	if *centiles != "" {
		if cents, err = parseList("centiles", *centiles); err != nil {
			return err
		}
		for _, c := range cents {
			if !(c > 0 && c < 100) {
				return usagef("--centiles: %g is not between 0 and 100", c)
			}
		}
	}
	m, err := loadModel(*model)
	if err != nil {
		return err
	}
	ref := m.Reference()
	covText, err := covs.match(ref.Covariates())
	if err != nil {
		return err
	}
	var cov []float64
	for k, t := range covText {
		v, err := strconv.ParseFloat(t, 64)
		if err != nil {
			return usagef("--covariate %s=%s: give a number", ref.Covariates()[k], t)
		}
		cov = append(cov, v)
	}
	groups := ref.Groups()
	if *group != "" {
		groups = []string{*group}
	}
	// Every age of every group is checked before anything is written.
	var problems []string
	for _, g := range groups {
		lo, hi, err := ref.Range(g)
		if err != nil {
			return err
		}
		for _, t := range ages {
			if err := refcurve.Outside(g, t, lo, hi, years); err != nil {
				var re *refcurve.RangeError
				if errors.As(err, &re) {
					err = reachError{re}
				}
				problems = append(problems, err.Error())
			}
		}
	}
	if len(problems) > 0 {
		return errors.New(strings.Join(problems, "\n"))
	}
	w := table.NewWriter(e.stdout)
	w.Text("age")
	for _, h := range []string{"group", "mean", "sd"} {
		w.Text(h)
	}
	for _, c := range cents {
		w.Text("c" + strconv.FormatFloat(c, 'f', -1, 64))
	}
	if err := w.EndRow(); err != nil {
		return err
	}
	for _, g := range groups {
		for _, t := range ages {
			mean, sd, err := ref.MeanSD(g, t, cov, extrap)
			if err != nil {
				return err
			}
			w.Float(t, -1)
			w.Text(g)
			w.Float(mean, 6)
			w.Float(sd, 6)
			for _, c := range cents {
				v, err := ref.Centile(g, t, cov, c, extrap)
				if err != nil {
					return err
				}
				w.Float(v, 6)
			}
			if err := w.EndRow(); err != nil {
				return err
			}
		}
	}
	return w.Flush()
}
