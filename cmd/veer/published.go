package main

import (
	"context"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/published"
	"veer/functions/screening"
	"veer/internal/atomicfile"
	"veer/internal/table"
)

// covariateList collects --covariate NAME=COLUMN (or NAME=VALUE for
// veer curve) flags.
type covariateList []covariateFlag

type covariateFlag struct{ name, ref string }

func (l *covariateList) String() string {
	parts := make([]string, len(*l))
	for i, c := range *l {
		parts[i] = c.name + "=" + c.ref
	}
	return strings.Join(parts, ",")
}

func (l *covariateList) Set(s string) error {
	name, ref, ok := strings.Cut(s, "=")
	name, ref = strings.ToLower(strings.TrimSpace(name)), strings.TrimSpace(ref)
	if !ok || name == "" || ref == "" {
		return fmt.Errorf("write --covariate NAME=COLUMN, e.g. --covariate height=height_cm, not %q", s)
	}
	for _, c := range *l {
		if c.name == name {
			return fmt.Errorf("the covariate %s is given twice", name)
		}
	}
	*l = append(*l, covariateFlag{name, ref})
	return nil
}

// match pairs the flags with the reference's covariates, in the
// reference's order: every covariate needs a flag and every flag a
// covariate.
func (l covariateList) match(want []string) ([]string, error) {
	refs := make([]string, len(want))
	for i, w := range want {
		for _, c := range l {
			if c.name == w {
				refs[i] = c.ref
			}
		}
		if refs[i] == "" {
			return nil, usagef("the model's reference needs the covariate %s: add --covariate %s=COLUMN naming the column that holds it", w, w)
		}
	}
	for _, c := range l {
		found := false
		for _, w := range want {
			found = found || c.name == w
		}
		if !found {
			if len(want) == 0 {
				return nil, usagef("--covariate %s: the model's reference uses no covariates besides age", c.name)
			}
			return nil, usagef("--covariate %s: the model's reference has no such covariate; it uses %s", c.name, strings.Join(want, ", "))
		}
	}
	return refs, nil
}

// readLMSTable reads an LMS centile table: a CSV file with the columns
// age, L, M and S, and group when the table has groups (other columns are
// ignored). Blank cells become missing values, which the table check
// reports with their row and column.
func readLMSTable(path string, how published.Interpolation) (*published.Reference, error) {
	t, err := loadTable(path)
	if err != nil {
		return nil, err
	}
	col := map[string]int{}
	for _, name := range []string{"group", "age", "L", "M", "S"} {
		if i, err := t.Column(name); err == nil {
			col[name] = i
		} else if name != "group" {
			return nil, fmt.Errorf("%s: an LMS table needs the columns age, L, M and S (and group when it has groups): %v", path, err)
		}
	}
	rows := make([]published.TableRow, len(t.Rows))
	for i, r := range t.Rows {
		tr := published.TableRow{Line: i + 2}
		for _, name := range []string{"age", "L", "M", "S"} {
			v := math.NaN()
			if cell := strings.TrimSpace(r[col[name]]); cell != "" {
				if v, err = table.ParseNumber(cell, t.DecimalComma); err != nil {
					return nil, fmt.Errorf("%s: data row %d (line %d), column %q: %v", path, i+1, i+2, name, err)
				}
			}
			switch name {
			case "age":
				tr.Age = v
			case "L":
				tr.L = v
			case "M":
				tr.M = v
			case "S":
				tr.S = v
			}
		}
		if gi, ok := col["group"]; ok {
			tr.Group = strings.TrimSpace(r[gi])
			if tr.Group == "" {
				tr = tr.BlankGroup()
			}
		}
		rows[i] = tr
	}
	ref, err := published.NewTable(rows, how)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	// A table carries no description of its own: name it by its file.
	return ref.WithInfo(published.Info{Name: filepath.Base(path)}), nil
}

// readEquations reads an equations document.
func readEquations(path string) (*published.Reference, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("cannot find the file %s", path)
		}
		return nil, err
	}
	ref, err := published.DecodeEquations(b)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return ref, nil
}

// publishedFlags are fit's flags for a model on a published reference.
type publishedFlags struct {
	table, equations, interpolate string
	phi, c                        string
	firstPass                     float64
	side                          string
	covariates                    covariateList
	extrapolate                   bool
}

func (p *publishedFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&p.table, "lms-table", "", "build the model on a published LMS centile table instead of fitting curves: a CSV file with columns age, L, M, S (and group)")
	fs.StringVar(&p.equations, "equations", "", "build the model on published reference equations instead of fitting curves: a veer equations file (JSON, see the README)")
	fs.StringVar(&p.interpolate, "interpolate", string(published.Linear), "with --lms-table: how L, M and S are found between the table's ages: linear or cubic (monotone)")
	fs.StringVar(&p.phi, "serial-phi", "", "with a published reference: set the serial correlation per year phi by hand (with --serial-c) instead of estimating it from the workforce's exams")
	fs.StringVar(&p.c, "serial-c", "", "with a published reference: set the persistent share c by hand (with --serial-phi)")
	fs.Float64Var(&p.firstPass, "first-pass-target", published.DefaultFirstPassTarget, "with a published reference: leave out of the serial estimate the workers a first screening pass flags at this target in years (0: no first pass)")
	fs.StringVar(&p.side, "side", string(chart.Up), "with a published reference: the direction of drift the screening will watch (up, down or both), used by the first pass")
	fs.Var(&p.covariates, "covariate", "with reference equations: NAME=COLUMN, the column of --in holding a covariate the equations use, e.g. height=height (repeatable)")
	fs.BoolVar(&p.extrapolate, "extrapolate", false, "with a published reference: score workforce exams outside the reference's ages or covariate ranges at its nearest end")
}

func (p *publishedFlags) wanted() bool { return p.table != "" || p.equations != "" }

// runFitPublished builds a model on a published reference: the serial
// model from the workforce's exams (--in), or set by hand.
func runFitPublished(e *env, p *publishedFlags, in, sheet, name, out string, cols examColumns) error {
	if p.table != "" && p.equations != "" {
		return usagef("give one of --lms-table and --equations")
	}
	if err := required("name", name, "out", out); err != nil {
		return err
	}
	if strings.Contains(cols.value, ",") {
		return usagef("a published reference describes one marker: build one model per marker (--value %s names several)", cols.value)
	}
	how := published.Interpolation(p.interpolate)
	if how != published.Linear && how != published.Cubic {
		return usagef("--interpolate must be linear or cubic, not %q", p.interpolate)
	}
	var opt screening.PublishedOptions
	opt.Name, opt.Extrapolate = name, p.extrapolate
	switch {
	case p.phi != "" && p.c != "":
		phi, err1 := strconv.ParseFloat(p.phi, 64)
		c, err2 := strconv.ParseFloat(p.c, 64)
		if err1 != nil || err2 != nil {
			return usagef("--serial-phi and --serial-c must be numbers")
		}
		sp, err := published.SetSerial(phi, c)
		if err != nil {
			return usageError{err.Error()}
		}
		opt.Serial = &sp
	case p.phi != "" || p.c != "":
		return usagef("set the serial model with both --serial-phi and --serial-c")
	case in == "":
		return usagef("without a reference cohort the serial correlation is estimated from the workforce's exams: give them with --in (and --id, --time, --value), or set it with --serial-phi and --serial-c")
	}
	if opt.Serial == nil && p.firstPass > 0 {
		spec := chart.DefaultSpec()
		spec.Side = chart.Side(p.side)
		if err := spec.Validate(); err != nil {
			return usageError{err.Error()}
		}
		fp := published.DefaultFirstPass(spec, monitor.DefaultMode)
		fp.Target = p.firstPass
		opt.FirstPass = &fp
	} else if p.firstPass < 0 || math.IsNaN(p.firstPass) {
		return usagef("--first-pass-target must be 0 (none) or a number of years")
	}
	var ref *published.Reference
	var err error
	source := p.table
	if p.table != "" {
		ref, err = readLMSTable(p.table, how)
	} else {
		source = p.equations
		ref, err = readEquations(p.equations)
	}
	if err != nil {
		return err
	}
	var exams []screening.Exam
	var x *examTable
	if in != "" {
		t, err := readInput(in, sheet, "--sheet")
		if err != nil {
			return err
		}
		if err := refuseOwnSheet(t); err != nil {
			return err
		}
		if x, err = readExamsCov(t, in, cols, p.covariates, ref.Covariates()); err != nil {
			return err
		}
		if pr := x.problems(); pr.Len() > 0 {
			return fmt.Errorf("%s: %v\nnothing was written", in, pr)
		}
		exams = x.exams
	} else if len(p.covariates) > 0 {
		return usagef("--covariate names columns of --in")
	}
	m, err := screening.FitPublished(context.Background(), ref, exams, opt)
	if err != nil {
		if x != nil {
			return fmt.Errorf("%s: %v\nnothing was written", in, x.examsError(err))
		}
		return err
	}
	doc, err := m.Encode()
	if err != nil {
		return err
	}
	if err := atomicfile.WriteFile(out, doc, outputPerm); err != nil {
		return err
	}
	describePublished(e, m, source)
	fmt.Fprintf(e.stderr, "model written to %s\n", out)
	return nil
}

// readExamsCov reads the exam rows of t with the covariates the reference
// wants, in its order, from the columns --covariate names; a blank
// covariate is NaN, for the reference to refuse in its row.
func readExamsCov(t *table.Table, path string, cols examColumns, covs covariateList, want []published.Covariate) (*examTable, error) {
	names := make([]string, len(want))
	for i, c := range want {
		names[i] = c.Name
	}
	covCols, err := covs.match(names)
	if err != nil {
		return nil, err
	}
	return readExamTableCov(t, path, cols, covCols, names)
}

// describePublished says on stderr what the model stands on, and which
// serial model it uses — an assumption the officer should know about.
func describePublished(e *env, m *screening.Model, source string) {
	ref := m.Reference()
	info := m.Published.Info()
	what := "LMS table"
	if len(m.Published.Covariates()) > 0 || strings.HasSuffix(strings.ToLower(source), ".json") {
		what = "reference equations"
	}
	fmt.Fprintf(e.stderr, "built %q on the %s in %s", m.Name, what, source)
	if info.Source != "" {
		fmt.Fprintf(e.stderr, " (%s)", info.Source)
	}
	fmt.Fprintln(e.stderr)
	for _, g := range ref.Groups() {
		lo, hi, _ := ref.Range(g)
		label := g
		if label == "" {
			label = "all"
		}
		fmt.Fprintf(e.stderr, "  group %s: ages %s to %s\n", label, strconv.FormatFloat(lo, 'g', 6, 64), strconv.FormatFloat(hi, 'g', 6, 64))
	}
	if cv := ref.Covariates(); len(cv) > 0 {
		fmt.Fprintf(e.stderr, "  covariates besides age: %s\n", strings.Join(cv, ", "))
	}
	s := m.Serial
	switch m.SerialSource {
	case screening.SerialFromUser:
		fmt.Fprintf(e.stderr, "serial model: set by the user: phi %.3f per year, persistent share c %.3f (not estimated; review it)\n", s.Phi, s.C)
	default:
		w := m.Workforce
		fmt.Fprintf(e.stderr, "serial model: estimated from the workforce's own exams (%d workers with repeated exams", s.Workers)
		if w.FirstPassTarget > 0 {
			fmt.Fprintf(e.stderr, "; %d workers flagged by a first pass at a %g-year target left out", w.LeftOut, w.FirstPassTarget)
		}
		fmt.Fprintf(e.stderr, "): phi %.3f per year (SE %.3f), persistent share c %.3f (SE %.3f)\n", s.Phi, s.SEPhi, s.C, s.SEC)
		fmt.Fprintf(e.stderr, "  the workforce's z against the reference: mean %.2f, SD %.2f (about 0 and 1 when the reference describes this workforce)\n", w.Location, w.Scale)
	}
	if m.MeanGap > 0 {
		fmt.Fprintf(e.stderr, "mean gap between exams %.2f years\n", m.MeanGap)
	} else {
		fmt.Fprintln(e.stderr, "no exam histories: give the planned gap between exams (--gap) and --horizon long when computing limits")
	}
}
