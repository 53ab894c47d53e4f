// The sheet path: VEER.CHART (and VEER.RULE, in rules.go) read a whole
// sheet of exams, set aside the rows that cannot be charted and screen the
// rest.

package catalog

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"veer/functions/cell"
	"veer/functions/refcurve"
	"veer/functions/screening"
)

// sheetHelp says what VEER.CHART and VEER.RULE answer for rows that cannot
// be charted and which failures stop the call, from the error contract.
var sheetHelp = cell.RowHelp(cell.BlankInput, cell.UnknownGroup, cell.OutsideReference, cell.OutOfDomain) +
	"; two exams of a worker at the same age give " + string(cell.BadData.Code()) + " in both rows (a repeat with the same reading in the repeat only)." +
	" The worker's other exams are charted without those rows. " + cell.CallHelp(cell.WrongArgument, cell.BadData) +
	" Messages name the rows."

// sheet is a table of exam rows read from ids, ages, values and groups
// columns: the rows that can be screened, and an error for each of the
// others, in sheet order.
type sheet struct {
	n int // rows in the sheet
	// groupGiven: the groups argument was given (a "" group is a blank cell)
	groupGiven bool
	exams      []screening.Exam    // rows that can be screened, in sheet order
	rowOf      []int               // 0-based sheet row of each exam
	failed     map[int]*cell.Error // sheet rows answered with an error instead
}

// examsArgs reads ids, ages, values and groups columns starting at argument
// i. Cells follow cell.PolicyMissing: a blank (or error) id, age or reading
// makes its row #N/A, text or TRUE/FALSE in a numeric column fails the call
// naming the cell.
func examsArgs(a cell.Args, i int) (*sheet, error) {
	ids, err := a.Texts(i, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	ages, err := a.Numbers(i+1, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	vals, err := a.Numbers(i+2, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	n := len(ids)
	if len(ages) != n || len(vals) != n {
		return nil, cell.WrongArgument.Errorf("ids, ages and values must have the same number of rows (they have %d, %d and %d)", n, len(ages), len(vals))
	}
	if n == 0 {
		return nil, cell.WrongArgument.Errorf("there are no exam rows")
	}
	groups, err := groupsArg(a, i+3, n)
	if err != nil {
		return nil, err
	}
	sh := &sheet{n: n, groupGiven: !a.Missing(i + 3), failed: map[int]*cell.Error{}, exams: make([]screening.Exam, 0, n), rowOf: make([]int, 0, n)}
	for r := 0; r < n; r++ {
		id := strings.TrimSpace(ids[r])
		switch {
		case id == "":
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the worker id is blank", r+1)
		case math.IsNaN(ages[r]):
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the age is blank", r+1)
		case math.IsNaN(vals[r]):
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the reading is blank", r+1)
		default:
			sh.exams = append(sh.exams, screening.Exam{Worker: id, Group: groups[r], Time: ages[r], Value: vals[r]})
			sh.rowOf = append(sh.rowOf, r)
		}
	}
	if len(sh.exams) == 0 {
		return nil, cell.WrongArgument.Errorf("every exam row has a blank id, age or reading")
	}
	return sh, nil
}

// maxListed is how many rows a message about several rows lists.
const maxListed = 5

// failedList lists the messages of the first failed rows, in row order,
// and counts the others.
func (sh *sheet) failedList() string {
	rows := make([]int, 0, len(sh.failed))
	for r := range sh.failed {
		rows = append(rows, r)
	}
	slices.Sort(rows)
	var parts []string
	for i, r := range rows {
		if i == maxListed {
			parts = append(parts, fmt.Sprintf("and %d more rows", len(rows)-maxListed))
			break
		}
		parts = append(parts, sh.failed[r].Message)
	}
	return strings.Join(parts, "; ")
}

// firstFailed returns the error of the first failed row, or nil.
func (sh *sheet) firstFailed() *cell.Error {
	first := -1
	for r := range sh.failed {
		if first < 0 || r < first {
			first = r
		}
	}
	if first < 0 {
		return nil
	}
	return sh.failed[first]
}

// screenable moves the rows m cannot score (age outside the reference
// range by more than reach years, unknown group, a reading the transform
// cannot take) to the failed rows, each with its own error, so the rest of
// the sheet is still charted; the other exams of such a worker are charted
// without that row.
func (sh *sheet) screenable(m *screening.Model, reach float64) error {
	ext := reach > 0
	// The usual row passes with a range check against its group's span,
	// looked up once per group; a row that fails it is scored alone to
	// find why (rowError words it).
	type span struct {
		lo, hi float64
		ok     bool
	}
	spans := map[string]span{}
	var last span
	lastGroup, haveLast := "", false
	ref := m.Reference()
	// Published references score positive readings only (unless L = 1) and
	// may need covariates: such rows are checked one by one.
	positive := m.Published != nil || (m.Curves.Transform != "" && m.Curves.Transform != "none")
	each := len(ref.Covariates()) > 0
	kept := sh.exams[:0]
	rowOf := sh.rowOf[:0]
	for k, e := range sh.exams {
		r := sh.rowOf[k]
		if !haveLast || e.Group != lastGroup {
			sp, found := spans[e.Group]
			if !found {
				lo, hi, err := ref.Range(e.Group)
				sp = span{lo, hi, err == nil}
				spans[e.Group] = sp
			}
			last, lastGroup, haveLast = sp, e.Group, true
		}
		if each || !last.ok || e.Time < last.lo || e.Time > last.hi || (positive && !(e.Value > 0)) {
			err := error(nil)
			if last.ok {
				err = refcurve.Outside(e.Group, e.Time, last.lo, last.hi, reach)
			}
			if err == nil {
				_, err = ref.Z(e.Group, e.Time, e.Covariates, e.Value, ext)
			}
			if err != nil {
				sh.failed[r] = rowError(err, r+1, sh.groupGiven)
				continue
			}
		}
		kept = append(kept, e)
		rowOf = append(rowOf, r)
	}
	sh.exams, sh.rowOf = kept, rowOf
	if len(sh.exams) == 0 {
		return sh.firstFailed()
	}
	return nil
}

// screen charts the rows of the sheet that can be screened
// (screening.Model.ScreenEach) and moves the others to the failed rows,
// each with its own error: an age beyond the reach of the reference, an
// unknown or blank group, a reading the transform cannot take, a repeated
// exam. The other exams of such a worker are charted without that row.
// The sheet keeps the rows screened, with their results.
func (sh *sheet) screen(m *screening.Model, s screening.Settings, h float64) ([]screening.Result, error) {
	res, err := m.ScreenEach(sh.exams, s, h)
	if err != nil {
		return nil, cellError(err, cell.BadData)
	}
	kept := make([]screening.Exam, 0, len(res))
	rowOf := make([]int, 0, len(res))
	out := make([]screening.Result, 0, len(res))
	for k, r := range res {
		row := sh.rowOf[k]
		if r.Skipped != nil {
			sh.failed[row] = sh.skipError(r.Skipped, row)
			continue
		}
		kept, rowOf, out = append(kept, sh.exams[k]), append(rowOf, row), append(out, r)
	}
	// Errors that name other rows (a repeated exam) were worded above,
	// before the rows were compacted.
	sh.exams, sh.rowOf = kept, rowOf
	if len(sh.exams) == 0 {
		return nil, sh.firstFailed()
	}
	return out, nil
}

// skipError words why sheet row row (0-based) was not screened. A repeated
// exam names both sheet rows; other reasons are worded by rowError.
func (sh *sheet) skipError(err error, row int) *cell.Error {
	var dup *refcurve.DuplicateError
	if errors.As(err, &dup) {
		a, b := sh.rowOf[dup.Rows[0]-1]+1, sh.rowOf[dup.Rows[1]-1]+1
		if dup.Same {
			return cell.BadData.Errorf("row %d: repeats the exam of worker %q at age %s in row %d (same reading); it is left out", b, dup.Worker, cell.FormatNumber(dup.Time), a)
		}
		return cell.BadData.Errorf("row %d: worker %q has two exams at the same age %s with different readings (rows %d and %d); remove or merge one", row+1, dup.Worker, cell.FormatNumber(dup.Time), a, b)
	}
	return rowError(err, row+1, sh.groupGiven)
}

// screened is a sheet charted by VEER.CHART or VEER.RULE: its rows, the
// call's settings, the limit and the results of the screenable rows.
type screened struct {
	*sheet
	call *chartCall
	h    float64
	res  []screening.Result
}

// sheetLayout says where the arguments of VEER.CHART or VEER.RULE are: the
// model, the first of the ids, ages, values and groups columns, and the
// options; the covariates follow the options.
type sheetLayout struct {
	model, exams, options int
}

// Layouts of the sheet functions.
var (
	chartLayout = sheetLayout{model: 0, exams: 1, options: 5} // VEER.CHART
	ruleLayout  = sheetLayout{model: 1, exams: 2, options: 6} // VEER.RULE (the rule is argument 0)
)

// screenSheet reads the model, the exams and the options of VEER.CHART or
// VEER.RULE, laid out as at, and screens the sheet.
func screenSheet(ctx context.Context, env cell.Env, a cell.Args, at sheetLayout) (*screened, error) {
	c := &chartCall{env: env}
	if err := c.readModel(ctx, a, at.model); err != nil {
		return nil, err
	}
	if c.j != nil {
		return nil, cell.WrongArgument.Errorf("model %s holds several markers (%s); rules over several markers run in veer screen, and here on one of them as %s/%s",
			c.ref.Handle, strings.Join(c.j.MarkerNames(), ", "), c.ref.Name, c.j.MarkerNames()[0])
	}
	sh, err := examsArgs(a, at.exams)
	if err != nil {
		return nil, err
	}
	cov, err := covariatesArg(a, at.options+1, c.m, sh.n)
	if err != nil {
		return nil, err
	}
	if cov != nil {
		for k := range sh.exams {
			sh.exams[k].Covariates = covRow(cov, sh.rowOf[k], nil)
		}
	}
	if err := c.readOptions(ctx, a, at.options); err != nil {
		return nil, err
	}
	h, err := c.resolveLimit()
	if err != nil {
		return nil, err
	}
	if err := sh.screenable(c.m, c.set.Extrapolate); err != nil {
		return nil, err
	}
	res, err := sh.screen(c.m, c.set, h)
	if err != nil {
		return nil, err
	}
	return &screened{sheet: sh, call: c, h: h, res: res}, nil
}

func callChart(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	if c, ok, err := jointChartCall(ctx, env, a, chartLayout); ok || err != nil {
		if err != nil {
			return nil, err
		}
		return callJointChart(ctx, c, a)
	}
	sc, err := screenSheet(ctx, env, a, chartLayout)
	if err != nil {
		return nil, err
	}
	sh, h, res := sc.sheet, sc.h, sc.res
	out := make([][]any, sh.n)
	for r, e := range sh.failed {
		out[r] = []any{e, e, e, e, e, e}
	}
	for k, r := range res {
		var fs any
		if !math.IsNaN(r.FirstSignal) {
			fs = r.FirstSignal
		}
		out[sh.rowOf[k]] = []any{r.Z, r.Innovation, r.Stat, h, r.Signal, fs}
	}
	return out, nil
}

// duplicateError words two exams of one worker at the same age with their
// sheet rows, or returns nil for another error. The engine names them by
// their place among the screenable rows.
func (sh *sheet) duplicateError(err error) *cell.Error {
	var dup *refcurve.DuplicateError
	if !errors.As(err, &dup) {
		return nil
	}
	return cell.BadData.Errorf("worker %q has two exams at the same age %s (rows %d and %d); remove or merge one",
		dup.Worker, cell.FormatNumber(dup.Time), sh.rowOf[dup.Rows[0]-1]+1, sh.rowOf[dup.Rows[1]-1]+1)
}
