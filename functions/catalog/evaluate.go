// VEER.EVALUATE: the chart at a sweep of targets, a centile baseline and
// alert rules scored on a labelled history (see package evaluation).

package catalog

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"veer/functions/cell"
	"veer/functions/evaluation"
	"veer/functions/rules"
	"veer/functions/screening"
)

// evaluateOptions are the options of VEER.EVALUATE: the chart's (but not
// limit: each target gets its own) and the evaluation's own.
var evaluateOptions = func() []string {
	var out []string
	for _, o := range chartOptions {
		if o != cell.OptionLimit {
			out = append(out, o)
		}
	}
	return append(out, cell.OptionTargets, cell.OptionCentile, cell.OptionMissing)
}()

// evaluateFunc declares VEER.EVALUATE.
func evaluateFunc(cache *rules.Cache) cell.Func {
	return cell.Func{
		Name:    "VEER.EVALUATE",
		Summary: "Scores the chart, alert rules and a centile cut-off on a history of later diagnoses.",
		Help: "For workers some of whom were later diagnosed with the condition screened for: of the diagnosed, the share flagged before the diagnosis (95% Wilson interval) and how many years before (median and quartiles over all of them, Kaplan–Meier); of those never diagnosed, false signals per 100 worker-years and the share flagged at least once. " +
			"A header row, then one row per method: the chart at the target and at each of the targets option (e.g. \"targets=5,10,20,50,100\" or \"targets=5-100\"), at the target matching the baseline's false-signal rate, the baseline (a reading beyond the centile option, 97.5 by default, in the chart's direction) and each rule, which sees the chart at the target. " +
			"Exams at or after a worker's diagnosis are left out (they are not screening). A rule that cannot be evaluated shows its reason in its row; the others still run. " +
			"Rows of the outcomes or exams with a problem fail the call with the row named. " + cell.CallHelp(cell.WrongArgument, cell.BadData, cell.OutOfRange) + caution,
		Params: []cell.Param{modelParam(),
			{Name: "outcomes", Type: cell.TypeRange, Help: "three columns, one row per worker: worker id, diagnosed (yes/no, TRUE/FALSE or 1/0) and age at diagnosis (blank when never diagnosed); a header row is allowed"},
			{Name: "ids", Type: cell.TypeRange, Help: "worker ids, one per exam"},
			{Name: "ages", Type: cell.TypeRange, Help: "age at each exam, in years"},
			{Name: "values", Type: cell.TypeRange, Help: "the reading at each exam"},
			{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group per exam"},
			{Name: "rules", Type: cell.TypeRange, Optional: true, Help: `alert rules giving true/false: a column of expressions (or "@set/name", or "@set" for every rule of a saved set), or two columns of name and expression`},
			{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "target=20; targets=5,10,50; centile=97.5; missing=healthy"`}},
		Options: evaluateOptions, Result: cell.ShapeTable, Streaming: true, Slow: true,
		Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
			return callEvaluate(ctx, env, a, cache)
		},
	}
}

// Argument positions of VEER.EVALUATE.
const (
	evalModel = iota
	evalOutcomes
	evalIDs
	evalAges
	evalValues
	evalGroups
	evalRules
	evalOptions
)

func callEvaluate(ctx context.Context, env cell.Env, a cell.Args, cache *rules.Cache) (any, error) {
	c := &chartCall{env: env}
	if err := c.readModel(ctx, a, evalModel); err != nil {
		return nil, err
	}
	sh, err := examsArgs(a, evalIDs)
	if err != nil {
		return nil, err
	}
	if err := c.readOptions(ctx, a, evalOptions); err != nil {
		return nil, err
	}
	target := c.opts.Number(cell.OptionTarget, 20)
	sweep, err := evaluation.ParseTargets(c.opts.Text(cell.OptionTargets, ""))
	if err != nil {
		return nil, cellError(err, cell.OutOfRange)
	}
	named, err := rulesArg(env, a, evalRules)
	if err != nil {
		return nil, err
	}
	outs, cols, err := outcomesArg(a, evalOutcomes)
	if err != nil {
		return nil, err
	}
	// Every exam row counts: a wholly blank row is skipped (a whole-column
	// range ends in blank rows), any other row that cannot be screened
	// fails the call, as a missing exam would change every figure.
	if err := sh.screenable(c.m, c.set.Extrapolate); err != nil {
		return nil, err
	}
	ids, _ := a.Texts(evalIDs, cell.PolicyMissing)
	for r := 0; r < sh.n; r++ {
		if e, failed := sh.failed[r]; failed && !blankExamRow(a, ids, r) {
			return nil, e
		}
	}
	evx := make([]evaluation.Exam, len(sh.exams))
	for k, e := range sh.exams {
		evx[k] = evaluation.Exam{Worker: e.Worker, Age: e.Time}
	}
	cohort, err := evaluation.NewCohort(ctx, evx, outs, evaluation.Options{
		Columns:          cols,
		MissingAsHealthy: c.opts.Text(cell.OptionMissing, "error") == "healthy",
	})
	if err != nil {
		return nil, cohortError(sh, err)
	}
	h, err := c.m.EvaluateHistory(ctx, sh.exams, cohort, screening.HistoryOptions{
		Settings: c.set, Limits: c.lim, Target: target, Sweep: sweep,
		Centile: c.opts.Number(cell.OptionCentile, screening.DefaultBaselineCentile),
		Rules:   named, Cache: cache, MatchBaseline: true,
	})
	if err != nil {
		return nil, sheetError(sh, err)
	}
	return evaluationTable(h, named), nil
}

// cohortError words a problem of the outcomes or exams on one line: the
// first problem of the outcomes, and how many more there are; an exam
// problem with its sheet row.
func cohortError(sh *sheet, err error) error {
	var all *evaluation.OutcomeErrors
	var exam *evaluation.ExamError
	switch {
	case errors.As(err, &all) && all.Total > 1:
		return failureOf(all.Errs[0], cell.BadData).Errorf("%v (and %d more problems in the outcomes)", all.Errs[0], all.Total-1)
	case errors.As(err, &exam):
		return failureOf(exam, cell.BadData).Errorf("exams row %d: %v", sh.rowOf[exam.Row-1]+1, exam.Err)
	}
	return cellError(err, cell.BadData)
}

// blankExamRow reports whether exam row r has a blank id, age and reading.
func blankExamRow(a cell.Args, ids []string, r int) bool {
	if strings.TrimSpace(ids[r]) != "" {
		return false
	}
	for _, i := range []int{evalAges, evalValues} {
		rows := a.Range(i)
		if r < len(rows) && len(rows[r]) > 0 && !rows[r][0].IsBlank() {
			return false
		}
	}
	return true
}

// sheetError words a screening failure of the exams with sheet rows.
func sheetError(sh *sheet, err error) error {
	if e := sh.duplicateError(err); e != nil {
		return e
	}
	return cellError(err, cell.BadData)
}

// evaluationTable lays the evaluation out as a table: the header row, the
// chart rows and the baseline, then the rules in the order given, a rule
// that could not be evaluated with its reason in every figure.
func evaluationTable(h *screening.History, named []rules.NamedRule) [][]any {
	head := evaluation.Header()
	out := [][]any{make([]any, len(head))}
	for i, c := range head {
		out[0][i] = c
	}
	row := func(r evaluation.Row) []any {
		cells := r.Cells(h.Cohort)
		v := make([]any, len(cells))
		for i, c := range cells {
			switch {
			case c.IsText:
				v[i] = c.Text
			case math.IsNaN(c.Number):
				v[i] = nil
			default:
				v[i] = c.Number
			}
		}
		return v
	}
	ruleRows := map[string]evaluation.Row{}
	for _, r := range h.Rows {
		if r.Method == evaluation.MethodRule {
			ruleRows[r.Name] = r
			continue
		}
		out = append(out, row(r))
	}
	failed := map[string]error{}
	for _, f := range h.Failed {
		failed[f.Name] = f.Err
	}
	for _, nr := range named {
		if r, ok := ruleRows[nr.Name]; ok {
			out = append(out, row(r))
			continue
		}
		e := ruleFailure(nr.Name, failed[nr.Name])
		v := make([]any, len(head))
		v[0], v[1] = evaluation.MethodRule, nr.Name
		for i := 2; i < len(v); i++ {
			v[i] = e
		}
		out = append(out, v)
	}
	return out
}

// ruleFailure words a rule that could not be evaluated.
func ruleFailure(name string, err error) *cell.Error {
	var ce *rules.CompileError
	if errors.As(err, &ce) {
		return cell.WrongArgument.Errorf("rule %q cannot be evaluated: %s", name, ce.Short())
	}
	return failureOf(err, cell.WrongArgument).Errorf("rule %q cannot be evaluated: %v", name, err)
}

// outcomesArg reads the outcomes range: three columns (worker id,
// diagnosed, age at diagnosis), an optional header row (its names are then
// used in messages), wholly blank rows skipped. Rows are counted from the
// first data row.
func outcomesArg(a cell.Args, i int) ([]evaluation.Outcome, evaluation.Columns, error) {
	cols := evaluation.Columns{Worker: "worker", Diagnosed: "diagnosed", DiagnosedAge: "age at diagnosis"}
	rows := a.Range(i)
	if len(rows) == 0 || len(rows[0]) != 3 {
		w := 0
		if len(rows) > 0 {
			w = len(rows[0])
		}
		return nil, cols, cell.WrongArgument.Errorf("the outcomes (argument %s) must be three columns: worker id, diagnosed (yes/no) and age at diagnosis; got %d", a.Func().ArgName(i), w)
	}
	if isOutcomesHeader(rows[0]) {
		cols = evaluation.Columns{Worker: cellText(rows[0][0]), Diagnosed: cellText(rows[0][1]), DiagnosedAge: cellText(rows[0][2])}
		rows = rows[1:]
	}
	out := make([]evaluation.Outcome, 0, len(rows))
	for k, r := range rows {
		if r[0].IsBlank() && r[1].IsBlank() && r[2].IsBlank() {
			continue
		}
		o := evaluation.Outcome{Row: k + 1, Worker: strings.TrimSpace(cellText(r[0])), Diagnosed: cellText(r[1]), Age: math.NaN()}
		switch c := r[2]; c.Kind {
		case cell.KindBlank:
		case cell.KindNumber:
			o.Age = c.Num
		case cell.KindText:
			v, err := strconv.ParseFloat(strings.TrimSpace(c.Str), 64)
			if strings.TrimSpace(c.Str) == "" {
				break
			}
			if err != nil {
				return nil, cols, cell.WrongArgument.Errorf("outcomes row %d, column %q: %s is not an age in years", k+1, cols.DiagnosedAge, strconv.Quote(c.Str))
			}
			o.Age = v
		default:
			return nil, cols, cell.WrongArgument.Errorf("outcomes row %d, column %q: %s is not an age in years", k+1, cols.DiagnosedAge, c)
		}
		out = append(out, o)
	}
	return out, cols, nil
}

// isOutcomesHeader reports whether the first outcomes row names the
// columns: a diagnosis cell that is text but not yes/no, or an age cell
// that is text but not a number.
func isOutcomesHeader(r []cell.Cell) bool {
	if r[1].Kind == cell.KindText {
		if _, ok := evaluation.ParseDiagnosed(r[1].Str); !ok && strings.TrimSpace(r[1].Str) != "" {
			return true
		}
	}
	if r[2].Kind == cell.KindText {
		if _, err := strconv.ParseFloat(strings.TrimSpace(r[2].Str), 64); err != nil && strings.TrimSpace(r[2].Str) != "" {
			return true
		}
	}
	return false
}

// cellText is a cell as an outcome reads it: text as is, a number as
// text (ids are often numbers; 1 and 0 are flags), TRUE/FALSE as true and
// false, an error code as itself, blank as "".
func cellText(c cell.Cell) string {
	switch c.Kind {
	case cell.KindText:
		return c.Str
	case cell.KindNumber:
		return cell.FormatNumber(c.Num)
	case cell.KindBool:
		return strconv.FormatBool(c.B)
	case cell.KindError:
		return c.Str
	}
	return ""
}

// rulesArg reads the rules argument: absent, a column of expressions
// (named rule1, rule2, ... by position; "@set/name" is that stored rule
// under its own name; "@set" is every rule of a stored set), or two
// columns of name and expression.
func rulesArg(env cell.Env, a cell.Args, i int) ([]rules.NamedRule, error) {
	if a.Missing(i) {
		return nil, nil
	}
	rows := a.Range(i)
	if len(rows) > 0 && len(rows[0]) > 2 {
		return nil, cell.WrongArgument.Errorf("the rules (argument %s) must be one column of expressions or two columns of name and expression; got %d columns", a.Func().ArgName(i), len(rows[0]))
	}
	var out []rules.NamedRule
	seen := map[string]bool{}
	add := func(name, expr string) error {
		key := strings.ToLower(name)
		if seen[key] {
			return cell.WrongArgument.Errorf("two rules are called %q; give each rule its own name", name)
		}
		seen[key] = true
		out = append(out, rules.NamedRule{Name: name, Expr: expr})
		return nil
	}
	for k, r := range rows {
		text := strings.TrimSpace(cellText(r[len(r)-1]))
		if text == "" {
			continue
		}
		name := fmt.Sprintf("rule%d", k+1)
		if len(r) == 2 {
			if name = strings.TrimSpace(cellText(r[0])); name == "" {
				return nil, cell.WrongArgument.Errorf("rules row %d: the rule has no name", k+1)
			}
		}
		if strings.HasPrefix(text, "@") && !strings.Contains(text, "/") {
			rs, _, err := storedRuleSet(env, text[1:])
			if err != nil {
				return nil, err
			}
			for _, x := range rs.Rules {
				if err := add(x.Name, x.Expr); err != nil {
					return nil, err
				}
			}
			continue
		}
		if strings.HasPrefix(text, "@") && len(r) == 1 {
			name = text[strings.LastIndex(text, "/")+1:]
		}
		expr, err := resolveRule(env, text)
		if err != nil {
			return nil, err
		}
		if err := add(name, expr); err != nil {
			return nil, err
		}
	}
	if len(out) > rules.MaxRules {
		return nil, cell.WrongArgument.Errorf("%d rules are more than the %d one call evaluates", len(out), rules.MaxRules)
	}
	if err := (rules.RuleSet{Rules: out}).Validate(); err != nil {
		return nil, cell.WrongArgument.Errorf("%v", err)
	}
	return out, nil
}
