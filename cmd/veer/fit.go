package main

import (
	"context"
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

// loadTable reads a CSV file given on the command line.
func loadTable(path string) (*table.Table, error) {
	f, err := os.Open(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("cannot find the file %s", path)
		}
		return nil, fmt.Errorf("cannot open %s: %v", path, err)
	}
	defer f.Close()
	t, err := table.Read(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return t, nil
}

// examColumns names the columns of an exam table.
type examColumns struct {
	id, time, value, group string
}

func (c *examColumns) register(fsAdd func(p *string, name, def, usage string)) {
	fsAdd(&c.id, "id", "", "column holding the worker id (required)")
	fsAdd(&c.time, "time", "", "column holding the time of the exam: the worker's age in years (required)")
	fsAdd(&c.value, "value", "", "column holding the marker's value (required); several markers screened together: their columns, comma-separated, e.g. sbp,chol,fev1")
	fsAdd(&c.group, "group", "", "column holding the reference group, e.g. sex or job group (optional)")
}

// readRows turns a table into exam rows using the named columns.
func readRows(t *table.Table, path string, c examColumns) ([]refcurve.Row, error) {
	if err := required("id", c.id, "time", c.time, "value", c.value); err != nil {
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
	vc, err := t.Column(c.value)
	if err != nil {
		return nil, fmt.Errorf("%s: --value: %v", path, err)
	}
	gc := -1
	if c.group != "" {
		if gc, err = t.Column(c.group); err != nil {
			return nil, fmt.Errorf("%s: --group: %v", path, err)
		}
	}
	ids := t.Strings(idc)
	times, err := t.Floats(tc)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	values, err := t.Floats(vc)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	var groups []string
	if gc >= 0 {
		groups = t.Strings(gc)
	}
	rows := make([]refcurve.Row, len(ids))
	for i := range rows {
		if ids[i] == "" {
			return nil, fmt.Errorf("%s: data row %d (line %d), column %q: the worker id is empty", path, i+1, i+2, c.id)
		}
		rows[i] = refcurve.Row{Worker: ids[i], Time: times[i], Value: values[i]}
		if groups != nil {
			rows[i].Group = groups[i]
		}
	}
	return rows, nil
}

// progress prints a fit's progress on stderr once it has run for a second.
type progress struct {
	e       *env
	start   time.Time
	last    time.Time
	printed bool
}

func newProgress(e *env) *progress { return &progress{e: e, start: time.Now()} }

func (p *progress) report(stage string, done float64) {
	now := time.Now()
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
	fs := newFlags(e, "fit", "--in F.csv --id C --time C --value C [--group C] --name N --out M.json\n       veer fit (--lms-table T.csv | --equations E.json) [--in F.csv --id C --time C --value C [--group C] [--covariate NAME=COL]] [--serial-phi P --serial-c C] --name N --out M.json")
	var cols examColumns
	cols.register(fs.StringVar)
	in := fs.String("in", "", "CSV file of healthy reference workers' exams, one row per exam (required); with a published reference, the exams of the workforce to be screened")
	var pub publishedFlags
	pub.register(fs)
	name := fs.String("name", "", "name of the model, e.g. sbp (required)")
	out := fs.String("out", "", "file to write the model to (required)")
	tr := fs.String("transform", string(transform.None), "value transform: none, log or boxcox (lambda by maximum likelihood); with several markers one for all or one per marker, e.g. none,log,none")
	bw := fs.Float64("bandwidth", 0, "bandwidth of the mean curve in years (0: chosen by leave-one-worker-out cross-validation)")
	minWorkers := fs.Int("min-workers", 0, "fewest workers a group needs (0: the default)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	set := map[string]bool{}
	fs.Visit(func(f *flag.Flag) { set[f.Name] = true })
	if pub.wanted() {
		for _, n := range []string{"transform", "bandwidth", "min-workers"} {
			if set[n] {
				return usagef("--%s is for curves fitted from a reference cohort; a published reference gives its own", n)
			}
		}
		return runFitPublished(e, &pub, *in, *name, *out, cols)
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
	markers, err := valueColumns(cols.value)
	if err != nil {
		return err
	}
	if len(markers) > 1 {
		t, err := loadTable(*in)
		if err != nil {
			return err
		}
		return fitJoint(e, t, *in, *name, *out, cols, markers, *tr, *bw, *minWorkers)
	}
	switch transform.Name(*tr) {
	case transform.None, transform.Log, transform.BoxCox:
	default:
		return usagef("--transform must be none, log or boxcox, not %q", *tr)
	}
	t, err := loadTable(*in)
	if err != nil {
		return err
	}
	rows, err := readRows(t, *in, cols)
	if err != nil {
		return err
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
		return fmt.Errorf("%s: %v", *in, err)
	}
	doc, err := m.Encode()
	if err != nil {
		return err
	}
	if err := atomicfile.WriteFile(*out, doc, outputPerm); err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "fitted %q from %d exams: %s\n", *name, len(rows), m.Summary())
	fmt.Fprintf(e.stderr, "model written to %s\n", *out)
	return nil
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
	extrap := fs.Bool("extrapolate", false, "allow ages outside the reference range (the curve is held at its end)")
	var covs covariateList
	fs.Var(&covs, "covariate", "for a model on reference equations: NAME=VALUE, the covariate value to look the reference up at, e.g. height=170 (repeatable)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := required("model", *model, "at", *at); err != nil {
		return err
	}
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
	w := table.NewWriter(e.stdout)
	w.Text("time")
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
			mean, sd, err := ref.MeanSD(g, t, cov, *extrap)
			if err != nil {
				return err
			}
			w.Float(t, -1)
			w.Text(g)
			w.Float(mean, 6)
			w.Float(sd, 6)
			for _, c := range cents {
				v, err := ref.Centile(g, t, cov, c, *extrap)
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
