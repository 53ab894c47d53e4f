package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"strings"

	"veer/functions/rules"
	"veer/functions/screening"
)

// ruleList collects repeated --rule NAME=EXPR flags.
type ruleList []rules.NamedRule

func (r *ruleList) String() string { return "" }

func (r *ruleList) Set(v string) error {
	name, expr, ok := strings.Cut(v, "=")
	name, expr = strings.TrimSpace(name), strings.TrimSpace(expr)
	if !ok || name == "" || expr == "" {
		return errors.New("a rule is written NAME=EXPRESSION or NAME [SEVERITY]=EXPRESSION, e.g. 'over [high]=chart > limit'")
	}
	if strings.HasPrefix(expr, "=") {
		return fmt.Errorf("rule %q: the expression starts with '='; write NAME=EXPRESSION with a single '=' after the name", name)
	}
	sev := ""
	if n, rest, ok := strings.Cut(name, "["); ok {
		s, tail, closed := strings.Cut(rest, "]")
		if !closed || strings.TrimSpace(tail) != "" {
			return fmt.Errorf("rule %q: write the severity in brackets after the name, e.g. 'over [high]=chart > limit'", name)
		}
		name, sev = strings.TrimSpace(n), strings.TrimSpace(s)
	}
	*r = append(*r, rules.NamedRule{Name: name, Severity: sev, Expr: expr})
	return nil
}

// collectRules joins --rule flags and a --rules file into one checked set,
// every rule compiled.
func collectRules(flags ruleList, file string) (rules.RuleSet, error) {
	rs, err := collectRulesUnchecked(flags, file)
	if err != nil {
		return rs, err
	}
	// Compile now, so a mistake in a rule is reported before any data are read.
	if _, err := rules.NewCache(len(rs.Rules)+1, rules.DefaultLimits()).CompileSet(rs); err != nil {
		return rs, usageError{err.Error()}
	}
	return rs, nil
}

// collectRulesUnchecked joins the rules and checks their names, not their
// expressions.
func collectRulesUnchecked(flags ruleList, file string) (rules.RuleSet, error) {
	var rs rules.RuleSet
	if file != "" {
		b, err := os.ReadFile(file)
		if err != nil {
			return rs, fmt.Errorf("cannot read the rules file: %v", err)
		}
		if rs, err = rules.ParseRuleSet(b); err != nil {
			return rs, fmt.Errorf("%s: %v", file, err)
		}
	}
	rs.Rules = append(rs.Rules, flags...)
	seen := map[string]bool{}
	for _, r := range rs.Rules {
		if seen[r.Name] {
			return rs, usagef("two rules are called %q; give each rule its own name", r.Name)
		}
		seen[r.Name] = true
	}
	if err := rs.Validate(); err != nil {
		return rs, usageError{err.Error()}
	}
	return rs, nil
}

// evalRules evaluates every rule over the screened exams under ctx and
// returns the column names and, per rule, one text cell per exam.
func evalRules(ctx context.Context, rs rules.RuleSet, exams []screening.Exam, res []screening.Result, h float64) ([]string, [][]string, error) {
	if len(rs.Rules) == 0 {
		return nil, nil, nil
	}
	vars, err := screening.RuleExams(exams, res, h)
	if err != nil {
		return nil, nil, err
	}
	cache := rules.NewCache(len(rs.Rules), rules.DefaultLimits())
	compiled, err := cache.CompileSet(rs)
	if err != nil {
		return nil, nil, err
	}
	names := make([]string, len(rs.Rules))
	cols := make([][]string, len(rs.Rules))
	vals := make([]rules.Value, len(vars))
	for k, r := range compiled {
		names[k] = rs.Rules[k].Name
		err := rules.EvalAll(ctx, r, vars, vals)
		var rowErrs *rules.RowErrors
		if err != nil && !errors.As(err, &rowErrs) {
			return nil, nil, fmt.Errorf("rule %q: %v", names[k], err)
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

// ruleCell formats a rule's value for a CSV cell: true/false as 1/0.
func ruleCell(v rules.Value) string {
	if b, ok := v.Bool(); ok {
		if b {
			return "1"
		}
		return "0"
	}
	if v.IsEmpty() {
		return ""
	}
	return v.String()
}
