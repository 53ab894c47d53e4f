package screening

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"veer/functions/chart"
	"veer/functions/evaluation"
	"veer/functions/refcurve"
	"veer/functions/rules"
	"veer/functions/serial"
)

// labelled simulates a labelled history: the healthy cohort of cohort(),
// a fifth of whose workers drift upward by 0.4 SD a year from an onset
// inside their exams, up to 2 SD, and are diagnosed 1–5 years after it.
// Exams after the diagnosis are kept.
func labelled(t testing.TB, n int, seed uint64) ([]Exam, *evaluation.Cohort) {
	t.Helper()
	rows := cohort(n, serial.Params{Phi: 0.9, C: 0.7}, seed, "L")
	rng := rand.New(rand.NewPCG(seed, 99))
	type span struct{ first, last, onset, dx float64 }
	spans := map[string]*span{}
	var order []string
	for _, r := range rows {
		s, ok := spans[r.Worker]
		if !ok {
			s = &span{first: r.Time, onset: math.NaN(), dx: math.NaN()}
			spans[r.Worker] = s
			order = append(order, r.Worker)
		}
		s.last = r.Time
	}
	for _, w := range order {
		if s := spans[w]; rng.Float64() < 0.2 {
			s.onset = s.first + (s.last-s.first)*rng.Float64()
			s.dx = math.Round((s.onset+1+4*rng.Float64())*100) / 100
		}
	}
	ex := exams(rows)
	evx := make([]evaluation.Exam, len(ex))
	for i := range ex {
		if s := spans[ex[i].Worker]; ex[i].Time > s.onset {
			ex[i].Value += 10 * math.Min(0.4*(ex[i].Time-s.onset), 2)
		}
		evx[i] = evaluation.Exam{Worker: ex[i].Worker, Age: ex[i].Time}
	}
	var outs []evaluation.Outcome
	for _, w := range order {
		o := evaluation.Outcome{Worker: w, Diagnosed: "no", Age: math.NaN()}
		if s := spans[w]; !math.IsNaN(s.dx) {
			o.Diagnosed, o.Age = "yes", s.dx
		}
		outs = append(outs, o)
	}
	c, err := evaluation.NewCohort(context.Background(), evx, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return ex, c
}

// sameResult compares the figures of two evaluations.
func sameResult(a, b evaluation.Result) bool {
	eq := func(x, y float64) bool { return x == y || math.IsNaN(x) && math.IsNaN(y) }
	return a.Diagnosed == b.Diagnosed && a.Flagged == b.Flagged && a.Healthy == b.Healthy && a.HealthyFlagged == b.HealthyFlagged &&
		eq(a.YearsAtRisk, b.YearsAtRisk) && eq(a.Lead.Median, b.Lead.Median) && eq(a.Lead.MedianFlagged, b.Lead.MedianFlagged)
}

// TestEvaluateHistory checks every method of an evaluation against a
// direct computation: the chart at each target against a fresh screening
// of all exams (exams after a diagnosis included: the chart looks only
// backwards, so they cannot change a first signal before the diagnosis),
// for the settings where the one-screening shortcut applies and where it
// does not; a rule equal to the chart and one equal to the baseline
// against those rows; and rules that cannot be evaluated reported by name
// while the others run.
func TestEvaluateHistory(t *testing.T) {
	ctx := context.Background()
	m := fit(t, cohort(800, serial.Params{Phi: 0.9, C: 0.7}, 5, "R"))
	ex, c := labelled(t, 1200, 6)
	for _, tc := range []struct {
		name      string
		headStart float64
		restart   bool
	}{
		{"plain", 0, false}, {"restart", 0, true}, {"head start", 0.5, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			set := DefaultSettings()
			set.Extrapolate = MaxExtrapolation
			set.Chart.HeadStart, set.Chart.Restart = tc.headStart, tc.restart
			o := HistoryOptions{
				Settings: set, Target: 20, Sweep: []float64{5, 10, 50, 20, 200}, MatchBaseline: true,
				Rules: []rules.NamedRule{
					{Name: "as_chart", Expr: "chart > limit"},
					{Name: "label", Expr: `z > 2.0 ? "high" : "none"`},
					{Name: "as_baseline", Expr: "centile > 97.5"},
					{Name: "fourth_exam", Expr: "zs[3] > 1.0"},
					{Name: "typo", Expr: "zz > 1.0"},
				},
			}
			h, err := m.EvaluateHistory(ctx, ex, c, o)
			if err != nil {
				t.Fatal(err)
			}
			var charts []evaluation.Row
			byName := map[string]evaluation.Row{}
			for _, r := range h.Rows {
				if r.Method == evaluation.MethodChart {
					charts = append(charts, r)
				} else {
					byName[r.Name] = r
				}
			}
			if len(charts) < 5 || len(charts) > 6 || len(h.Rows) != len(charts)+3 {
				t.Fatalf("%d chart rows of %d", len(charts), len(h.Rows))
			}
			for k, r := range charts {
				if k > 0 && !(r.Target > charts[k-1].Target) {
					t.Errorf("chart rows not by target: %v after %v", r.Target, charts[k-1].Target)
				}
				lr, err := m.Limit(set, LimitOptions{}, r.Target)
				if err != nil {
					t.Fatal(err)
				}
				res, err := m.Screen(ex, set, lr.H)
				if err != nil {
					t.Fatal(err)
				}
				f := make([]bool, len(res))
				for i, x := range res {
					f[i] = x.Signal
				}
				want, err := c.Evaluate(ctx, f)
				if err != nil {
					t.Fatal(err)
				}
				if r.Limit != lr.H || !sameResult(r.Result, want) {
					t.Errorf("target %.2f: limit %v, %d/%d diagnosed and %d/%d healthy flagged; direct: limit %v, %d/%d, %d/%d",
						r.Target, r.Limit, r.Result.Flagged, r.Result.Diagnosed, r.Result.HealthyFlagged, r.Result.Healthy,
						lr.H, want.Flagged, want.Diagnosed, want.HealthyFlagged, want.Healthy)
				}
				if r.Target == 20 && !sameResult(byName["as_chart"].Result, r.Result) {
					t.Errorf("the rule chart > limit differs from the chart at its target")
				}
			}
			base := h.Baseline()
			if base.Name != "centile > 97.5" || !sameResult(byName["as_baseline"].Result, base.Result) {
				t.Errorf("baseline %q differs from the rule centile > 97.5", base.Name)
			}
			t.Logf("baseline %.2f false signals per 100 worker-years, %d of %d diagnosed flagged; the chart matches it at a %.1f-year target",
				base.Result.FalsePer100.Estimate, base.Result.Flagged, base.Result.Diagnosed, h.Matched)
			if math.IsNaN(h.Matched) || len(charts) != 6 {
				t.Errorf("the chart was not matched to the baseline's rate (%v); %d chart rows", h.Matched, len(charts))
			}
			var failed []string
			for _, f := range h.Failed {
				failed = append(failed, f.Name)
			}
			if strings.Join(failed, " ") != "label fourth_exam typo" {
				t.Errorf("failed rules %v", failed)
			}
			var ce *rules.CompileError
			var re *rules.RowErrors
			if !errors.As(h.Failed[0].Err, &ce) || !errors.As(h.Failed[1].Err, &re) || !errors.As(h.Failed[2].Err, &ce) {
				t.Errorf("failures: %v", h.Failed)
			}
			if !strings.Contains(h.Failed[0].Error(), `rule "label" cannot be evaluated`) {
				t.Errorf("message %q", h.Failed[0].Error())
			}
			s := h.Cohort
			if s.AfterDiagnosis == 0 || s.Diagnosed < 100 {
				t.Errorf("cohort %+v", s)
			}
		})
	}
}

// TestBaselineSides checks the baseline's direction and name per side.
func TestBaselineSides(t *testing.T) {
	res := []Result{{Centile: 99}, {Centile: 50}, {Centile: 1}, {Centile: 97.5}, {Centile: 2.5}}
	for _, tc := range []struct {
		side chart.Side
		p    float64
		name string
		want string
	}{
		{"up", 97.5, "centile > 97.5", "10000"},
		{"up", 0, "centile > 97.5", "10000"},
		{"down", 97.5, "centile < 2.5", "00100"},
		{"down", 2.5, "centile < 2.5", "00100"},
		{"both", 95, "centile > 95 or < 5", "10111"},
	} {
		f := BeyondCentile(res, tc.side, tc.p)
		var b strings.Builder
		for _, x := range f {
			if x {
				b.WriteByte('1')
			} else {
				b.WriteByte('0')
			}
		}
		if b.String() != tc.want || BaselineName(tc.side, tc.p) != tc.name {
			t.Errorf("%s %v: flags %s, name %q; want %s, %q", tc.side, tc.p, b.String(), BaselineName(tc.side, tc.p), tc.want, tc.name)
		}
	}
}

// TestEvaluateHistoryBadOptions checks that options and cancellation are
// refused with plain messages.
func TestEvaluateHistoryBadOptions(t *testing.T) {
	m := fit(t, cohort(300, serial.Params{Phi: 0.6, C: 0.6}, 3, "R"))
	ex, c := labelled(t, 200, 4)
	set := DefaultSettings()
	set.Extrapolate = MaxExtrapolation
	many := make([]float64, MaxSweep+1)
	for i := range many {
		many[i] = float64(i + 1)
	}
	for _, tc := range []struct {
		o    HistoryOptions
		want string
	}{
		{HistoryOptions{Settings: set}, "target must be a positive number of years, got 0"},
		{HistoryOptions{Settings: set, Target: 20, Centile: 50}, "centile must be a centile between 0 and 100 other than 50"},
		{HistoryOptions{Settings: set, Target: 20, Centile: 100}, "centile must be a centile between 0 and 100 other than 50"},
		{HistoryOptions{Settings: set, Target: 20, Sweep: []float64{-1}}, "targets must be positive numbers of years, got -1"},
		{HistoryOptions{Settings: set, Target: 20, Sweep: many}, "targets must be at most 100 targets, got 101"},
		{HistoryOptions{Settings: set, Target: 20, Sweep: []float64{1e6}}, "target 1e+06 years"},
	} {
		_, err := m.EvaluateHistory(context.Background(), ex, c, tc.o)
		if err == nil || !strings.Contains(err.Error(), tc.want) || !errors.Is(err, chart.ErrSetting) {
			t.Errorf("error %v, want %q (a setting error)", err, tc.want)
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := m.EvaluateHistory(ctx, ex, c, HistoryOptions{Settings: set, Target: 20}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
}

// BenchmarkEvaluateHistory1M compares, on about 1,000,000 exams, one
// screening as veer screen does it (the limit for a target, the screening,
// one rule) with an evaluation sweeping 10 targets with 5 rules. The
// issue's budget is 5 screenings; the ratio of the two ns/op is the figure.
func BenchmarkEvaluateHistory1M(b *testing.B) {
	m := fit(b, cohort(1000, serial.Params{Phi: 0.9, C: 0.7}, 5, "R"))
	ex, c := labelled(b, 160000, 6)
	set := DefaultSettings()
	set.Extrapolate = MaxExtrapolation
	rs := []rules.NamedRule{
		{Name: "chart", Expr: "chart > limit"},
		{Name: "high_twice", Expr: "centile > 99.0 && times.count(t, t >= time - 5.0) >= 2"},
		{Name: "three_of_four", Expr: "last(zs, 4).count(v, v > 2.0) >= 3"},
		{Name: "jump", Expr: "has_previous && z - prev_z > 2.5"},
		{Name: "typical", Expr: "chart > limit || (centile > 99.0 && times.filter(t, t >= time - 5.0).size() >= 2)"},
	}
	ctx := context.Background()
	b.Run("screen", func(b *testing.B) {
		for range b.N {
			lr, err := m.Limit(set, LimitOptions{}, 20)
			if err != nil {
				b.Fatal(err)
			}
			res, err := m.Screen(ex, set, lr.H)
			if err != nil {
				b.Fatal(err)
			}
			vars, err := RuleExams(ex, res, lr.H)
			if err != nil {
				b.Fatal(err)
			}
			r, err := rules.Compile(rs[4].Expr, rules.Any)
			if err != nil {
				b.Fatal(err)
			}
			if err := rules.EvalAll(ctx, r, vars, make([]rules.Value, len(vars))); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportMetric(float64(len(ex)), "exams")
	})
	b.Run("evaluate", func(b *testing.B) {
		for range b.N {
			h, err := m.EvaluateHistory(ctx, ex, c, HistoryOptions{
				Settings: set, Target: 20, Sweep: []float64{5, 7, 10, 15, 20, 30, 50, 70, 100, 150}, Rules: rs, MatchBaseline: true,
			})
			if err != nil {
				b.Fatal(err)
			}
			if len(h.Failed) > 0 {
				b.Fatal(h.Failed)
			}
		}
		b.ReportMetric(float64(len(ex)), "exams")
	})
}

// TestEvaluateHistoryRows checks that a failure of screening names the rows
// as given, though exams after a diagnosis are left out before screening:
// worker b's duplicate exams are rows 5 and 6, after a's exam past its
// diagnosis (row 3); an age outside the reference range is row 7.
func TestEvaluateHistoryRows(t *testing.T) {
	m := fit(t, cohort(300, serial.Params{Phi: 0.6, C: 0.6}, 3, "R"))
	ex := []Exam{
		{Worker: "a", Time: 40, Value: 120}, {Worker: "a", Time: 41, Value: 125}, {Worker: "a", Time: 45, Value: 150},
		{Worker: "b", Time: 40, Value: 120}, {Worker: "b", Time: 42, Value: 121}, {Worker: "b", Time: 42, Value: 122},
	}
	outs := []evaluation.Outcome{{Worker: "a", Diagnosed: "yes", Age: 44}, {Worker: "b", Diagnosed: "no", Age: math.NaN()}}
	cohortOf := func(ex []Exam) *evaluation.Cohort {
		evx := make([]evaluation.Exam, len(ex))
		for i, e := range ex {
			evx[i] = evaluation.Exam{Worker: e.Worker, Age: e.Time}
		}
		c, err := evaluation.NewCohort(context.Background(), evx, outs, evaluation.Options{})
		if err != nil {
			t.Fatal(err)
		}
		return c
	}
	set := DefaultSettings()
	_, err := m.EvaluateHistory(context.Background(), ex, cohortOf(ex), HistoryOptions{Settings: set, Target: 20})
	var dup *refcurve.DuplicateError
	if !errors.As(err, &dup) || dup.Rows != [2]int{5, 6} {
		t.Errorf("duplicate: %v", err)
	}
	ex[5].Time = 99
	_, err = m.EvaluateHistory(context.Background(), ex, cohortOf(ex), HistoryOptions{Settings: set, Target: 20})
	var ee *ExamErrors
	if !errors.As(err, &ee) || ee.First[0].Index != 5 || !errors.Is(err, refcurve.ErrOutsideRange) {
		t.Errorf("outside the range: %v", err)
	}
}
