package main

import (
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"

	"veer/functions/published"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/functions/transform"
	"veer/internal/table"
	"veer/internal/workbook"
)

// examColumns names the columns of an exam table.
type examColumns struct {
	id, time, value, group string
}

func (c *examColumns) register(fsAdd func(p *string, name, def, usage string)) {
	fsAdd(&c.id, "id", "", "column holding the worker id (required)")
	fsAdd(&c.time, "time", "", "column holding the worker's age at the exam, in years (required)")
	fsAdd(&c.value, "value", "", "column holding the marker's reading (required; a blank cell is a missing exam); several markers screened together: their columns, comma-separated, e.g. sbp,chol,fev1")
	fsAdd(&c.group, "group", "", "column holding the reference group, e.g. sex or job group (optional)")
}

// refuseOwnSheet refuses a sheet veer screen writes given as the exams.
func refuseOwnSheet(t *table.Table) error {
	if strings.EqualFold(t.Sheet, workbook.DefaultResultsSheet) || strings.EqualFold(t.Sheet, workbook.DefaultSummarySheet) {
		return usagef("the sheet %q is what veer screen writes; give the sheet of exams with --sheet", t.Sheet)
	}
	return nil
}

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

// errBlankGroup is a blank group cell in a table read with --group.
var errBlankGroup = errors.New("the group is blank")

// badNumber is a cell of the age or reading column that is not a number.
type badNumber struct {
	what string // "age" or "reading"
	err  error
}

func (e *badNumber) Error() string { return e.err.Error() }
func (e *badNumber) Unwrap() error { return e.err }

// examTable is a table of exams read with the columns named on the command
// line: every data row either becomes an exam or has the reason it cannot,
// so one run reports every problem of a file.
type examTable struct {
	t    *table.Table
	path string
	cols examColumns
	// idc, tc, vc, gc are the column indexes (gc -1: no group column);
	// covc those of the covariates, named covNames in the reference.
	idc, tc, vc, gc int
	covc            []int
	covNames        []string
	// exams are the rows that read as exams, in table order; rowOf gives
	// each one's data row.
	exams []screening.Exam
	rowOf []int
	// why holds, per data row, why it is not an exam (nil: it is one). A
	// blank reading is screening.ErrNoReading: a missing exam, not a
	// fault.
	why []error
}

// readExamTable reads the exam columns of t. Only the command line or the
// file's layout can fail it (a column that is not there); a bad cell only
// sets its row aside.
func readExamTable(t *table.Table, path string, c examColumns) (*examTable, error) {
	return readExamTableCov(t, path, c, nil, nil)
}

// readExamTableCov is readExamTable with covariates: covCols names the
// column of each of the reference's covariates covNames (in its order). A
// blank covariate is read as NaN, for the reference to refuse in its row.
func readExamTableCov(t *table.Table, path string, c examColumns, covCols, covNames []string) (*examTable, error) {
	if err := required("id", c.id, "time", c.time, "value", c.value); err != nil {
		return nil, err
	}
	x := &examTable{t: t, path: path, cols: c, gc: -1}
	var err error
	if x.idc, err = t.Column(c.id); err != nil {
		return nil, fmt.Errorf("%s: --id: %v", path, err)
	}
	if x.tc, err = t.Column(c.time); err != nil {
		return nil, fmt.Errorf("%s: --time: %v", path, err)
	}
	if x.vc, err = t.Column(c.value); err != nil {
		return nil, fmt.Errorf("%s: --value: %v", path, err)
	}
	if c.group != "" {
		if x.gc, err = t.Column(c.group); err != nil {
			return nil, fmt.Errorf("%s: --group: %v", path, err)
		}
	}
	for _, cc := range covCols {
		k, err := t.Column(cc)
		if err != nil {
			return nil, fmt.Errorf("%s: --covariate: %v", path, err)
		}
		x.covc = append(x.covc, k)
	}
	x.covNames = covNames
	n := len(t.Rows)
	x.why = make([]error, n)
	x.exams = make([]screening.Exam, 0, n)
	x.rowOf = make([]int, 0, n)
	for i, r := range t.Rows {
		e := screening.Exam{Worker: strings.TrimSpace(r[x.idc])}
		var why error
		if e.Worker == "" {
			why = t.CellError(i, x.idc, screening.ErrNoWorker)
		}
		if why == nil {
			v, err := table.ParseNumber(r[x.tc], t.DecimalComma)
			switch {
			case errors.Is(err, table.ErrEmptyCell):
				why = t.CellError(i, x.tc, screening.ErrNoAge)
			case err != nil:
				why = t.CellError(i, x.tc, &badNumber{"age", err})
			}
			e.Time = v
		}
		if why == nil {
			v, err := table.ParseNumber(r[x.vc], t.DecimalComma)
			switch {
			case errors.Is(err, table.ErrEmptyCell):
				why = t.CellError(i, x.vc, screening.ErrNoReading)
			case err != nil:
				why = t.CellError(i, x.vc, &badNumber{"reading", err})
			}
			e.Value = v
		}
		if why == nil && x.gc >= 0 {
			e.Group = strings.TrimSpace(r[x.gc])
			if e.Group == "" {
				why = t.CellError(i, x.gc, errBlankGroup)
			}
		}
		if why == nil && len(x.covc) > 0 {
			e.Covariates = make([]float64, len(x.covc))
			for k, cc := range x.covc {
				v, err := table.ParseNumber(r[cc], t.DecimalComma)
				switch {
				case errors.Is(err, table.ErrEmptyCell):
					v = math.NaN()
				case err != nil:
					why = t.CellError(i, cc, &badNumber{"covariate", err})
				}
				e.Covariates[k] = v
			}
		}
		if why != nil {
			x.why[i] = why
			continue
		}
		x.exams = append(x.exams, e)
		x.rowOf = append(x.rowOf, i)
	}
	return x, nil
}

// missing is how many rows have no reading (missing exams).
func (x *examTable) missing() int {
	n := 0
	for _, w := range x.why {
		if errors.Is(w, screening.ErrNoReading) {
			n++
		}
	}
	return n
}

// problems collects every row set aside for a fault (a blank reading is
// not one), worded for the command line.
func (x *examTable) problems() *table.Problems {
	var p table.Problems
	for i, w := range x.why {
		if w != nil && !errors.Is(w, screening.ErrNoReading) {
			p.Add(x.placed(i, w))
		}
	}
	return &p
}

// placed returns err about data row i as a *table.CellError worded for
// the command line, in the column it concerns.
func (x *examTable) placed(i int, err error) *table.CellError {
	var ce *table.CellError
	if errors.As(err, &ce) {
		return x.t.CellError(ce.Row, ce.Col, x.word(i, ce.Err))
	}
	return x.t.CellError(i, x.columnOf(err), x.word(i, err))
}

// columnOf is the column an error about a row concerns (-1: the row).
func (x *examTable) columnOf(err error) int {
	var (
		re  *refcurve.RowError
		ce  *published.CovariateError
		pre *published.RangeError
	)
	switch {
	case errors.As(err, &ce):
		return x.covColumn(ce.Name)
	case errors.As(err, &pre) && pre.Name != "age":
		return x.covColumn(pre.Name)
	case errors.Is(err, refcurve.ErrOutsideRange), errors.Is(err, screening.ErrNoAge):
		return x.tc
	case errors.Is(err, refcurve.ErrUnknownGroup):
		if x.gc >= 0 {
			return x.gc
		}
		return -1
	case errors.Is(err, transform.ErrDomain), errors.Is(err, screening.ErrNoReading), errors.Is(err, published.ErrReading):
		return x.vc
	case errors.Is(err, screening.ErrNoWorker):
		return x.idc
	case errors.As(err, &re):
		switch re.Column {
		case "worker":
			return x.idc
		case "time":
			return x.tc
		case "value":
			return x.vc
		case "group":
			return x.gc
		}
	}
	return -1
}

// covColumn is the column of the covariate called name (-1: none).
func (x *examTable) covColumn(name string) int {
	for k, n := range x.covNames {
		if n == name && k < len(x.covc) {
			return x.covc[k]
		}
	}
	return -1
}

// word words why data row i was set aside, for the command line: the
// flags that change it, other rows by their lines.
func (x *examTable) word(i int, err error) error {
	var (
		re   *refcurve.RangeError
		pre  *published.RangeError
		ge   *refcurve.GroupError
		de   *refcurve.DuplicateError
		rowE *refcurve.RowError
	)
	switch {
	case errors.As(err, &pre) && pre.Name != "age":
		return fmt.Errorf("%s %s is outside the range %s–%s the reference covers; --extrapolate holds it at the nearest end", pre.Name, fmtNum(pre.Value), fmtNum(pre.Min), fmtNum(pre.Max))
	case errors.As(err, &re):
		return reachError{re}
	case errors.As(err, &ge):
		if ge.Group == "" && x.gc < 0 {
			return fmt.Errorf("%v: name the group column with --group", err)
		}
		return err
	case errors.Is(err, errBlankGroup):
		if g := x.groupOfWorker(i); g != "" {
			return fmt.Errorf("the group is blank (worker %q is in group %q on other rows); fill it in", x.t.Rows[i][x.idc], g)
		}
		return errors.New("the group is blank; fill it in")
	case errors.As(err, &de):
		// de.Rows are 1-based positions among x.exams.
		a, b := x.rowOf[de.Rows[0]-1], x.rowOf[de.Rows[1]-1]
		if de.Same {
			return fmt.Errorf("repeats the exam of worker %q at age %s of %s (same reading); the repeat is left out", de.Worker, fmtNum(de.Time), x.t.Where(a, -1))
		}
		other := b
		if other == i {
			other = a
		}
		return fmt.Errorf("worker %q has another exam at age %s with a different reading (%s); keep one exam per worker and age", de.Worker, fmtNum(de.Time), x.t.Where(other, -1))
	case errors.As(err, &rowE):
		if rowE.Err != nil {
			return x.word(i, rowE.Err)
		}
		return errors.New(rowE.Reason)
	}
	return err
}

// groupOfWorker returns the group the worker of data row i has on other
// rows ("" if none).
func (x *examTable) groupOfWorker(i int) string {
	id := strings.TrimSpace(x.t.Rows[i][x.idc])
	for _, r := range x.t.Rows {
		if strings.TrimSpace(r[x.idc]) == id {
			if g := strings.TrimSpace(r[x.gc]); g != "" {
				return g
			}
		}
	}
	return ""
}

// reachError words an age outside the reference range for the command
// line, naming --extrapolate and --reach.
type reachError struct{ *refcurve.RangeError }

func (e reachError) Error() string {
	re := e.RangeError
	g := "the reference data"
	if re.Group != "" {
		g = "group " + strconv.Quote(re.Group)
	}
	side := "above"
	if re.Time < re.Min {
		side = "below"
	}
	if re.Reach > 0 {
		return fmt.Sprintf("age %s is %s years %s the reference range %s–%s of %s, farther than --extrapolate reaches (%s years; --reach YEARS reaches further, if the curves' end values still fit such ages)",
			fmtNum(re.Time), fmtYears(re.Distance()), side, fmtNum(round2(re.Min)), fmtNum(round2(re.Max)), g, fmtNum(re.Reach))
	}
	return fmt.Sprintf("age %s is %s years %s the reference range %s–%s of %s; --extrapolate screens ages up to %s years outside it against the curves' end values",
		fmtNum(re.Time), fmtYears(re.Distance()), side, fmtNum(round2(re.Min)), fmtNum(round2(re.Max)), g, fmtNum(screening.DefaultExtrapolation))
}

func (e reachError) Unwrap() error { return e.RangeError }

func fmtNum(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func round2(v float64) float64 { return math.Round(v*100) / 100 }

// fmtYears writes a distance in years to three significant digits (0.001,
// 1.03, 41.5).
func fmtYears(d float64) string { return strconv.FormatFloat(d, 'g', 3, 64) }

// reachFlags are --extrapolate and --reach: how many years beyond the
// reference ages an exam is screened against the curves' end values.
type reachFlags struct {
	on    setBool
	years setFloat
}

// setBool and setFloat are flag values that remember being given.
type setBool struct{ v, set bool }

func (b *setBool) String() string { return strconv.FormatBool(b.v) }
func (b *setBool) Set(s string) error {
	v, err := strconv.ParseBool(s)
	if err != nil {
		return errors.New("give true or false")
	}
	b.v, b.set = v, true
	return nil
}
func (b *setBool) IsBoolFlag() bool { return true }

type setFloat struct {
	v   float64
	set bool
}

func (f *setFloat) String() string { return strconv.FormatFloat(f.v, 'g', -1, 64) }
func (f *setFloat) Set(s string) error {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return errors.New("give a number")
	}
	f.v, f.set = v, true
	return nil
}

func (r *reachFlags) register(fs *flag.FlagSet) {
	fs.Var(&r.on, "extrapolate", fmt.Sprintf("screen exams up to %g years (or --reach) outside the reference age range against the curves' end values; such rows are marked \"extrapolated\"", screening.DefaultExtrapolation))
	fs.Var(&r.years, "reach", fmt.Sprintf("how many years beyond the reference ages --extrapolate reaches (default %g; giving it turns --extrapolate on)", screening.DefaultExtrapolation))
}

// value returns the years beyond the reference ages to extrapolate (0:
// none).
func (r *reachFlags) value() (float64, error) {
	if !r.years.set {
		if r.on.v {
			return screening.DefaultExtrapolation, nil
		}
		return 0, nil
	}
	if r.on.set && !r.on.v {
		return 0, usagef("--reach says how far --extrapolate reaches, but --extrapolate=false turns it off; drop one of them")
	}
	if !(r.years.v > 0 && r.years.v <= screening.MaxExtrapolation) {
		return 0, usagef("--reach must be a number of years above 0 and at most %g", screening.MaxExtrapolation)
	}
	return r.years.v, nil
}

// readRows reads the exams of a table that must be whole (a reference
// cohort, the exams of an evaluation, the embedded demo data): a row that
// is not an exam fails it, naming every such row.
func readRows(t *table.Table, path string, c examColumns) ([]refcurve.Row, error) {
	x, err := readExamTable(t, path, c)
	if err != nil {
		return nil, err
	}
	for _, w := range x.why {
		if w != nil {
			var p table.Problems
			for i, w := range x.why {
				if w != nil {
					p.Add(x.placed(i, w))
				}
			}
			return nil, fmt.Errorf("%s: %v", path, &p)
		}
	}
	rows := make([]refcurve.Row, len(x.exams))
	for i, e := range x.exams {
		rows[i] = refcurve.Row{Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value}
	}
	return rows, nil
}

// examsError words an error of screening x's exams (entries or rows are
// positions among x.exams) at the rows and columns of the user's file:
// every problem with its place.
func (x *examTable) examsError(err error) error {
	var (
		se  *refcurve.ScoreErrors
		ee  *screening.ExamErrors
		dup *refcurve.DuplicateError
		p   table.Problems
	)
	switch {
	case errors.As(err, &ee):
		for _, f := range ee.First {
			p.Add(x.placed(x.rowOf[f.Index], f.Err))
		}
		if ee.Count > len(ee.First) {
			return fmt.Errorf("%v\nand %d more", &p, ee.Count-len(ee.First))
		}
	case errors.As(err, &se):
		for _, f := range se.First {
			p.Add(x.placed(x.rowOf[f.Index], f.Err))
		}
		if se.Count > len(se.First) {
			return fmt.Errorf("%v\nand %d more rows that cannot be scored", &p, se.Count-len(se.First))
		}
	case errors.As(err, &dup):
		p.Add(x.placed(x.rowOf[dup.Rows[1]-1], dup))
	default:
		return err
	}
	return &p
}
