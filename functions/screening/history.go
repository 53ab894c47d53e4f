package screening

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strconv"
	"sync"

	"veer/functions/chart"
	"veer/functions/evaluation"
	"veer/functions/refcurve"
	"veer/functions/rules"
)

// DefaultBaselineCentile is the reference centile of the baseline rule "a
// reading beyond the reference centile p" when none is given: 97.5, the
// usual upper end of a reference interval (common practice).
const DefaultBaselineCentile = 97.5

// MaxSweep is the most targets one evaluation sweeps.
const MaxSweep = 100

// HistoryOptions choose the methods Model.EvaluateHistory scores.
type HistoryOptions struct {
	// Settings and Limits are the chart's, as for Screen and Limit.
	Settings Settings
	Limits   LimitOptions
	// Target is the chart's target in years; the rules see the chart at
	// its limit.
	Target float64
	// Sweep holds more targets at which the chart is evaluated (Target is
	// always evaluated; repeats are dropped).
	Sweep []float64
	// Centile is p of the baseline "a reading beyond the reference centile
	// p" in the chart's direction: above p for side up, below 100 − p for
	// side down, either for both; a p below 50 is read as 100 − p, so 2.5
	// and 97.5 mean the same. 0 means DefaultBaselineCentile.
	Centile float64
	// Rules are alert rules, each a method flagging the exams where it is
	// true; they must give true or false.
	Rules []rules.NamedRule
	// Cache compiles the rules (nil: a fresh cache with default limits).
	Cache *rules.Cache
	// MatchBaseline adds the chart at the target whose false-signal rate
	// on this history equals the baseline's, when the sweep brackets it.
	MatchBaseline bool
}

// RuleFailure is a rule that could not be evaluated: it does not compile,
// does not give true or false, or fails on some exams. The other methods
// are evaluated all the same.
type RuleFailure struct {
	Name string
	Err  error
}

func (f RuleFailure) Error() string {
	return fmt.Sprintf("rule %q cannot be evaluated: %v", f.Name, f.Err)
}

// History is the evaluation of several methods on a labelled history.
type History struct {
	// Cohort counts the workers and exams (see evaluation.Summary).
	Cohort evaluation.Summary
	// Rows are the chart at each target (ascending), the baseline, then
	// the rules in the order given (less those that failed).
	Rows []evaluation.Row
	// Failed lists the rules that could not be evaluated.
	Failed []RuleFailure
	// Matched is the target at which the chart's false-signal rate on
	// this history equals the baseline's, interpolated from the sweep
	// (evaluation.MatchTarget); NaN when the sweep does not bracket it.
	Matched float64
}

// Baseline returns the baseline row.
func (h *History) Baseline() evaluation.Row {
	for _, r := range h.Rows {
		if r.Method == evaluation.MethodBaseline {
			return r
		}
	}
	return evaluation.Row{}
}

// ChartName names a chart's settings in the evaluation table, e.g.
// "cusum up" or "ewma both".
func ChartName(s Settings) string { return string(s.Chart.Kind) + " " + string(s.Chart.Side) }

// BaselineName names the baseline rule in the evaluation table, e.g.
// "centile > 97.5", "centile < 2.5" or "centile > 97.5 or < 2.5".
func BaselineName(side chart.Side, centile float64) string {
	p := baselineCentile(centile)
	hi, lo := strconv.FormatFloat(p, 'f', -1, 64), strconv.FormatFloat(100-p, 'f', -1, 64)
	switch side {
	case chart.Down:
		return "centile < " + lo
	case chart.Both:
		return "centile > " + hi + " or < " + lo
	}
	return "centile > " + hi
}

func baselineCentile(p float64) float64 {
	switch {
	case p == 0:
		return DefaultBaselineCentile
	case p < 50:
		return 100 - p
	}
	return p
}

// BeyondCentile flags each exam whose reading lies beyond the reference
// centile p in the direction side (see HistoryOptions.Centile).
func BeyondCentile(res []Result, side chart.Side, p float64) []bool {
	p = baselineCentile(p)
	out := make([]bool, len(res))
	for i, x := range res {
		switch side {
		case chart.Down:
			out[i] = x.Centile < 100-p
		case chart.Both:
			out[i] = x.Centile > p || x.Centile < 100-p
		default:
			out[i] = x.Centile > p
		}
	}
	return out
}

// EvaluateHistory scores the chart at each target, the baseline and each
// rule on a labelled history: exams (as for Screen) and the cohort c made
// from the same exams, in the same order, with their outcomes (see package
// evaluation). Exams at or after a diagnosis are left out before
// screening, so no method sees them. A rule that cannot be evaluated is
// listed in History.Failed and the others still run; any other failure
// (a bad setting, an exam the model cannot score, a target no limit can be
// found for, cancellation) is returned as an error.
//
// The chart is screened once: without a head start its statistic does not
// depend on the limit, so its first signal at each target is the first
// exam whose statistic exceeds that target's limit (a restart after a
// signal changes nothing before the first one). With a head start, which
// scales with the limit, it is screened again at each target.
func (m *Model) EvaluateHistory(ctx context.Context, exams []Exam, c *evaluation.Cohort, o HistoryOptions) (*History, error) {
	if c.Len() != len(exams) {
		return nil, fmt.Errorf("internal: a cohort of %d exams for %d exams", c.Len(), len(exams))
	}
	if !(o.Target > 0) || math.IsInf(o.Target, 0) {
		return nil, &chart.SettingError{Setting: "target", Value: o.Target, Want: "a positive number of years"}
	}
	if p := baselineCentile(o.Centile); !(p > 50 && p < 100) {
		return nil, &chart.SettingError{Setting: "centile", Value: o.Centile, Want: "a centile between 0 and 100 other than 50 (97.5 and 2.5 both mean beyond the 2.5% tail)"}
	}
	targets := []float64{o.Target}
	for _, t := range o.Sweep {
		if !(t > 0) || math.IsInf(t, 0) {
			return nil, &chart.SettingError{Setting: "targets", Value: t, Want: "positive numbers of years"}
		}
		if !slices.Contains(targets, t) {
			targets = append(targets, t)
		}
	}
	if len(targets) > MaxSweep {
		return nil, &chart.SettingError{Setting: "targets", Value: len(targets), Want: fmt.Sprintf("at most %d targets", MaxSweep)}
	}
	slices.Sort(targets)
	if o.Limits.Stop == nil {
		o.Limits.Stop = func() bool { return ctx.Err() != nil }
	}

	// Only the screening exams are screened.
	keep := make([]int, 0, len(exams))
	for i := range exams {
		if c.Screening(i) {
			keep = append(keep, i)
		}
	}
	sub := make([]Exam, len(keep))
	for k, i := range keep {
		sub[k] = exams[i]
	}
	full := func(f []bool) []bool {
		out := make([]bool, len(exams))
		for k, i := range keep {
			out[i] = f[k]
		}
		return out
	}

	// Limits for every target, computed side by side.
	lims, err := m.limits(ctx, o.Settings, o.Limits, targets)
	if err != nil {
		return nil, err
	}
	hT := lims[slices.Index(targets, o.Target)]
	res, err := m.Screen(sub, o.Settings, hT)
	if err != nil {
		return nil, inExamRows(err, keep)
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	h := &History{Cohort: c.Summary(), Matched: math.NaN()}
	score := func(f []bool) (evaluation.Result, error) { return c.Evaluate(ctx, full(f)) }

	// The chart at each target.
	flagsAt, err := m.chartFlags(sub, res, o.Settings)
	if err != nil {
		return nil, inExamRows(err, keep)
	}
	name := ChartName(o.Settings)
	rates := make([]float64, len(targets))
	for k, t := range targets {
		f, err := flagsAt(lims[k])
		if err != nil {
			return nil, inExamRows(err, keep)
		}
		r, err := score(f)
		if err != nil {
			return nil, err
		}
		rates[k] = r.FalsePer100.Estimate
		h.Rows = append(h.Rows, evaluation.Row{Method: evaluation.MethodChart, Name: name, Target: t, Limit: lims[k], Result: r})
	}

	// The baseline.
	br, err := score(BeyondCentile(res, o.Settings.Chart.Side, o.Centile))
	if err != nil {
		return nil, err
	}
	baseline := evaluation.Row{Method: evaluation.MethodBaseline, Name: BaselineName(o.Settings.Chart.Side, o.Centile),
		Target: math.NaN(), Limit: math.NaN(), Result: br}

	// The chart at the baseline's false-signal rate.
	if mt, ok := evaluation.MatchTarget(targets, rates, br.FalsePer100.Estimate); ok {
		// A tenth of a year is finer than the sweep can tell targets apart.
		mt = math.Max(math.Round(mt*10)/10, 0.1)
		h.Matched = mt
		if o.MatchBaseline && !slices.Contains(targets, mt) {
			if lr, err := m.Limit(o.Settings, o.Limits, mt); err == nil {
				f, err := flagsAt(lr.H)
				if err != nil {
					return nil, inExamRows(err, keep)
				}
				r, err := score(f)
				if err != nil {
					return nil, err
				}
				row := evaluation.Row{Method: evaluation.MethodChart, Name: name + " (baseline's false-signal rate)", Target: mt, Limit: lr.H, Result: r}
				at, _ := slices.BinarySearchFunc(h.Rows, mt, func(r evaluation.Row, t float64) int {
					if r.Target < t {
						return -1
					}
					return 1
				})
				h.Rows = slices.Insert(h.Rows, at, row)
			} else if ctx.Err() != nil {
				return nil, ctx.Err()
			}
		}
	}
	h.Rows = append(h.Rows, baseline)

	// The rules, at the target's limit.
	if len(o.Rules) > 0 {
		vars, err := RuleExams(sub, res, hT)
		if err != nil {
			return nil, err
		}
		cache := o.Cache
		if cache == nil {
			cache = rules.NewCache(len(o.Rules), rules.DefaultLimits())
		}
		vals := make([]rules.Value, len(vars))
		for _, nr := range o.Rules {
			f, err := ruleFlags(ctx, cache, nr, vars, vals)
			if err != nil {
				if ctx.Err() != nil {
					return nil, ctx.Err()
				}
				h.Failed = append(h.Failed, RuleFailure{Name: nr.Name, Err: err})
				continue
			}
			r, err := score(f)
			if err != nil {
				return nil, err
			}
			h.Rows = append(h.Rows, evaluation.Row{Method: evaluation.MethodRule, Name: nr.Name, Target: o.Target, Limit: hT, Result: r})
		}
	}
	return h, nil
}

// inExamRows rewrites the rows an error of screening the kept exams names
// (positions among them) as positions among all the exams given.
func inExamRows(err error, keep []int) error {
	var dup *refcurve.DuplicateError
	var se *refcurve.ScoreErrors
	var ee *ExamErrors
	switch {
	case errors.As(err, &ee):
		x := *ee
		x.First = slices.Clone(ee.First)
		for i := range x.First {
			x.First[i].Index = keep[x.First[i].Index]
			x.First[i].Err = inExamRows(x.First[i].Err, keep)
		}
		return &x
	case errors.As(err, &dup):
		d := *dup
		d.Rows = [2]int{keep[d.Rows[0]-1] + 1, keep[d.Rows[1]-1] + 1}
		return &d
	case errors.As(err, &se):
		s := *se
		s.First = slices.Clone(se.First)
		for i := range s.First {
			s.First[i].Index = keep[s.First[i].Index]
		}
		return &s
	}
	return err
}

// limits computes the limit of each target, up to GOMAXPROCS at a time.
func (m *Model) limits(ctx context.Context, set Settings, o LimitOptions, targets []float64) ([]float64, error) {
	out := make([]float64, len(targets))
	errs := make([]error, len(targets))
	next := make(chan int)
	var wg sync.WaitGroup
	for w := 0; w < min(runtime.GOMAXPROCS(0), len(targets)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := range next {
				lr, err := m.Limit(set, o, targets[k])
				out[k], errs[k] = lr.H, err
			}
		}()
	}
	for k := range targets {
		if ctx.Err() != nil {
			break
		}
		next <- k
	}
	close(next)
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	for k, err := range errs {
		if err != nil {
			return nil, fmt.Errorf("target %v years: %w", targets[k], err)
		}
	}
	return out, nil
}

// chartFlags returns a function giving the chart's flags at limit h:
// exams whose statistic exceeds h, from the one screening res when the
// chart's path does not depend on the limit (see EvaluateHistory), from a
// new screening at h otherwise.
func (m *Model) chartFlags(exams []Exam, res []Result, set Settings) (func(h float64) ([]bool, error), error) {
	if set.Chart.HeadStart != 0 {
		return func(h float64) ([]bool, error) {
			r, err := m.Screen(exams, set, h)
			if err != nil {
				return nil, err
			}
			f := make([]bool, len(r))
			for i, x := range r {
				f[i] = x.Signal
			}
			return f, nil
		}, nil
	}
	if set.Chart.Restart {
		// The statistic's path without restarts, to find first signals at
		// higher limits.
		noRestart := set
		noRestart.Chart.Restart = false
		var err error
		if res, err = m.Screen(exams, noRestart, 1); err != nil {
			return nil, err
		}
	}
	stat := make([]float64, len(res))
	for i, x := range res {
		stat[i] = x.Stat
	}
	return func(h float64) ([]bool, error) {
		f := make([]bool, len(stat))
		for i, s := range stat {
			f[i] = s > h
		}
		return f, nil
	}, nil
}

// ruleFlags evaluates one rule on every exam: true where it is true. A
// rule that does not compile to true/false, or fails on any exam, is an
// error.
func ruleFlags(ctx context.Context, cache *rules.Cache, nr rules.NamedRule, vars []rules.Exam, vals []rules.Value) ([]bool, error) {
	r, err := cache.Compile(nr.Expr, rules.Bool)
	if err != nil {
		return nil, err
	}
	if err := rules.EvalAll(ctx, r, vars, vals); err != nil {
		return nil, err
	}
	f := make([]bool, len(vars))
	for i, v := range vals {
		f[i], _ = v.Bool()
	}
	return f, nil
}
