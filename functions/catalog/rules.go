package catalog

import (
	"bytes"
	"context"
	"errors"
	"strings"

	"veer/functions/cell"
	"veer/functions/rules"
	"veer/functions/screening"
)

// ruleFuncs are the cell functions of alert rules. They share one compile
// cache, so a rule text is compiled once however many cells use it.
func ruleFuncs(cache *rules.Cache) []cell.Func {
	return []cell.Func{
		{
			Name:    "VEER.RULE",
			Summary: "Evaluates an alert rule (a CEL expression) for every exam of a sheet.",
			Help: "The rule sees " + ruleVariables() + ". " +
				`It gives true/false, a label or a number per exam, in the same order as VEER.CHART. The rule may also name a stored rule as "@set/name" (see VEER.SAVERULES). Options as for VEER.CHART (target or limit). ` +
				sheetHelp + " A row the rule cannot evaluate is " + string(cell.WrongArgument.Code()) + " with the reason." + caution,
			Params: []cell.Param{
				{Name: "rule", Type: cell.TypeText, Help: `CEL expression, e.g. "chart > limit || centile > 99.0", or "@set/name"`},
				modelParam(),
				{Name: "ids", Type: cell.TypeRange, Help: "worker ids, one per exam"},
				{Name: "ages", Type: cell.TypeRange, Help: "age at each exam, in years"},
				{Name: "values", Type: cell.TypeRange, Help: "the reading at each exam"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group per exam"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "target=20"`},
				covariatesParam(),
			},
			Options: chartOptions, Result: cell.ShapeColumn, Streaming: true, Slow: true,
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) { return callRule(ctx, env, a, cache) },
		},
		{
			Name:    "VEER.RULECOLS",
			Summary: "Evaluates a CEL rule over the rows of any table whose first row names the columns.",
			Help:    `Column names become variables: "Systolic BP" is systolic_bp. Numbers, text and TRUE/FALSE keep their kind; a blank cell is null. One result per data row.`,
			Params: []cell.Param{
				{Name: "rule", Type: cell.TypeText, Help: `CEL expression over the column names, e.g. "systolic_bp > 140.0"`},
				{Name: "data", Type: cell.TypeRange, Help: "a table whose first row holds the column names"},
			},
			Result: cell.ShapeColumn,
			Call:   func(ctx context.Context, env cell.Env, a cell.Args) (any, error) { return callRuleCols(ctx, a, cache) },
		},
		{
			Name:    "VEER.SAVERULES",
			Summary: "Stores a named set of rules on the server and returns its handle.",
			Help:    `One rule per line, "name [severity] = expression", # for comments. Refer to a rule of the set as "@set/name" in VEER.RULE.`,
			Params: []cell.Param{
				{Name: "name", Type: cell.TypeText, Help: "name of the rule set, e.g. bp-rules"},
				{Name: "rules", Type: cell.TypeRange, Help: "the rules: one text, or a column of lines"},
			},
			Result: cell.ShapeValue, Writes: true,
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) { return callSaveRules(env, a, cache) },
		},
	}
}

// ruleVariables lists the names an exam rule sees, from the rules package
// itself, so the help cannot fall behind it.
func ruleVariables() string {
	var names []string
	for _, v := range rules.Variables() {
		names = append(names, v.Name)
	}
	return strings.Join(names[:len(names)-1], ", ") + " and " + names[len(names)-1]
}

// ruleSetPrefix marks a stored rule set, so it is never mistaken for a model.
const ruleSetPrefix = "# veer rule set\n"

// isRuleSet reports whether a stored document is a rule set.
func isRuleSet(doc []byte) bool { return bytes.HasPrefix(doc, []byte(ruleSetPrefix)) }

func callSaveRules(env cell.Env, a cell.Args, cache *rules.Cache) (any, error) {
	name, err := a.Text(0)
	if err != nil {
		return nil, err
	}
	if name, err = checkName("rule set", name); err != nil {
		return nil, err
	}
	lines, err := a.Texts(1, cell.PolicySkip)
	if err != nil {
		return nil, err
	}
	text := strings.Join(lines, "\n")
	rs, err := rules.ParseRuleSet([]byte(text))
	if err != nil {
		return nil, cell.WrongArgument.Errorf("%v", err)
	}
	if _, err := cache.CompileSet(rs); err != nil {
		return nil, cell.WrongArgument.Errorf("%v", err)
	}
	if err := checkKind(env, name, true); err != nil {
		return nil, err
	}
	return env.SaveModel(name, append([]byte(ruleSetPrefix), rs.Format()...))
}

// resolveRule returns the rule text: the argument itself, or a stored rule
// named "@set/name".
func resolveRule(env cell.Env, text string) (string, error) {
	text = strings.TrimSpace(text)
	if !strings.HasPrefix(text, "@") {
		return text, nil
	}
	set, name, ok := strings.Cut(text[1:], "/")
	if !ok || set == "" || name == "" {
		return "", cell.WrongArgument.Errorf(`a stored rule is named "@set/name", e.g. "@bp-rules/high"`)
	}
	rs, ref, err := storedRuleSet(env, set)
	if err != nil {
		return "", err
	}
	r, ok := rs.Lookup(name)
	if !ok {
		var names []string
		for _, x := range rs.Rules {
			names = append(names, x.Name)
		}
		return "", cell.UnknownRule.Errorf("rule set %s has no rule %q; it has: %s", ref.Handle, name, strings.Join(names, ", "))
	}
	return r.Expr, nil
}

// storedRuleSet reads the rule set saved as set with VEER.SAVERULES.
func storedRuleSet(env cell.Env, set string) (rules.RuleSet, cell.ModelRef, error) {
	ref, err := env.Model(set)
	if err != nil {
		return rules.RuleSet{}, ref, err
	}
	if !isRuleSet(ref.Doc) {
		return rules.RuleSet{}, ref, cell.UnknownModel.Errorf("%s is a model, not a rule set saved with VEER.SAVERULES", ref.Handle)
	}
	rs, err := rules.ParseRuleSet(ref.Doc[len(ruleSetPrefix):])
	if err != nil {
		return rules.RuleSet{}, ref, cell.UnknownModel.Errorf("rule set %s cannot be read: %v", ref.Handle, err)
	}
	return rs, ref, nil
}

func compileError(err error) error {
	var ce *rules.CompileError
	if errors.As(err, &ce) {
		return cell.WrongArgument.Errorf("%s", ce.Short())
	}
	return cell.WrongArgument.Errorf("%v", err)
}

// ruleValues turns rule results into cells; rows the rule could not
// evaluate become #VALUE! with the reason. A rule stopped by its cost or
// time limit fails the call (OutOfRange); a cancelled call is Busy.
func ruleValues(vals []rules.Value, err error) ([]any, error) {
	out := make([]any, len(vals))
	for i, v := range vals {
		if v.IsEmpty() {
			out[i] = nil
		} else {
			out[i] = v.Interface()
		}
	}
	if err == nil {
		return out, nil
	}
	var re *rules.RowErrors
	if errors.As(err, &re) {
		for _, e := range re.Rows {
			if e.Row >= 1 && e.Row <= len(out) {
				out[e.Row-1] = cell.WrongArgument.Errorf("%s", e.Message)
			}
		}
		return out, nil
	}
	var ee *rules.EvalError
	if errors.As(err, &ee) && ee.Limit {
		return nil, cell.OutOfRange.Errorf("%s", ee.Message)
	}
	return nil, cellError(err, cell.WrongArgument)
}

func callRule(ctx context.Context, env cell.Env, a cell.Args, cache *rules.Cache) (any, error) {
	text, err := a.Text(0)
	if err != nil {
		return nil, err
	}
	if text, err = resolveRule(env, text); err != nil {
		return nil, err
	}
	rule, err := cache.Compile(text, rules.Any)
	if err != nil {
		return nil, compileError(err)
	}
	sc, err := screenSheet(ctx, env, a, ruleLayout)
	if err != nil {
		return nil, err
	}
	sh, h, res := sc.sheet, sc.h, sc.res
	vars, err := screening.RuleExams(sh.exams, res, h)
	if err != nil {
		return nil, err
	}
	vals := make([]rules.Value, len(vars))
	got, err := ruleValues(vals, rules.EvalAll(ctx, rule, vars, vals))
	if err != nil {
		return nil, err
	}
	out := make([]any, sh.n)
	for r, e := range sh.failed {
		out[r] = e
	}
	for k, v := range got {
		out[sh.rowOf[k]] = v
	}
	return out, nil
}

func callRuleCols(ctx context.Context, a cell.Args, cache *rules.Cache) (any, error) {
	text, err := a.Text(0)
	if err != nil {
		return nil, err
	}
	data := a.Range(1)
	if len(data) < 2 {
		return nil, cell.WrongArgument.Errorf("the data range needs a header row and at least one data row")
	}
	header := make([]string, len(data[0]))
	for j, c := range data[0] {
		if c.Kind != cell.KindText || strings.TrimSpace(c.Str) == "" {
			return nil, cell.WrongArgument.Errorf("header cell %d must be a column name (text), got %s", j+1, c)
		}
		header[j] = c.Str
	}
	rows := make([][]rules.Value, len(data)-1)
	for i, r := range data[1:] {
		row := make([]rules.Value, len(r))
		for j, c := range r {
			switch c.Kind {
			case cell.KindNumber:
				row[j] = rules.NumberValue(c.Num)
			case cell.KindText:
				row[j] = rules.StringValue(c.Str)
			case cell.KindBool:
				row[j] = rules.BoolValue(c.B)
			}
		}
		rows[i] = row
	}
	cols := make([]rules.Column, len(header))
	names := rules.SanitizeNames(header)
	kinds := rules.ColumnKinds(rows, len(header))
	for j := range cols {
		cols[j] = rules.Column{Name: names[j], Kind: kinds[j]}
	}
	rule, err := cache.CompileColumnsTyped(text, cols, rules.Any)
	if err != nil {
		return nil, compileError(err)
	}
	vals := make([]rules.Value, len(rows))
	return ruleValues(vals, rules.EvalRows(ctx, rule, rows, vals))
}
