package evaluation_test

import (
	"context"
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"

	"veer/functions/evaluation"
)

// handWorker is one worker of the hand-worked cohort: exam ages, the
// outcome, and per method the ages of the flagged exams.
type handWorker struct {
	id    string
	ages  []float64
	dx    string  // diagnosis flag as written in the table
	dxAge float64 // NaN when blank
	flags map[string][]float64
}

// handCohort is a cohort of nine workers where every figure can be counted
// by hand (the counting is in TestHandCohort's comments). Method "m1" is a
// middling method, "m2" catches every diagnosed worker and no healthy one,
// "none" flags nothing.
func handCohort() []handWorker {
	nan := math.NaN()
	return []handWorker{
		// Diagnosed at 45; the exam at 46 is after the diagnosis.
		{"A", []float64{40, 42, 44, 46}, "yes", 45, map[string][]float64{"m1": {40, 46}, "m2": {44}}},
		// Diagnosed at 50, with an exam at 50 (the diagnosing exam, left
		// out) and one after. m1 flags only the exam at 50: not before.
		{"B", []float64{41, 44, 47, 50, 52}, "Yes", 50, map[string][]float64{"m1": {50}, "m2": {47, 52}}},
		// Diagnosed at 38; exam at 39 after.
		{"C", []float64{30, 33, 36, 39}, "TRUE", 38, map[string][]float64{"m1": {36}, "m2": {30, 33}}},
		// Diagnosed at 60, never flagged by m1.
		{"D", []float64{55, 58}, "1", 60, map[string][]float64{"m2": {58}}},
		// Diagnosed at the first exam: no screening exam, left out.
		{"E", []float64{35, 37}, "y", 35, map[string][]float64{"m1": {35}, "m2": {37}}},
		// Never diagnosed.
		{"F", []float64{30, 32, 35, 40}, "no", nan, map[string][]float64{"m1": {35, 40}}},
		{"G", []float64{50, 52, 56}, "No", nan, nil},
		{"H", []float64{21, 20}, "FALSE", nan, map[string][]float64{"m1": {20}}},
		{"I", []float64{45}, "0", nan, nil},
	}
}

// build turns hand workers into exams, outcomes and per-method flags.
func build(ws []handWorker) ([]evaluation.Exam, []evaluation.Outcome, map[string][]bool) {
	var exams []evaluation.Exam
	var outs []evaluation.Outcome
	flags := map[string][]bool{"m1": nil, "m2": nil, "none": nil}
	for _, w := range ws {
		for _, a := range w.ages {
			exams = append(exams, evaluation.Exam{Worker: w.id, Age: a})
			for m := range flags {
				f := false
				for _, x := range w.flags[m] {
					f = f || x == a
				}
				flags[m] = append(flags[m], f)
			}
		}
		outs = append(outs, evaluation.Outcome{Worker: w.id, Diagnosed: w.dx, Age: w.dxAge})
	}
	return exams, outs, flags
}

// same reports whether two figures agree, NaN included.
func same(a, b float64) bool {
	if math.IsNaN(a) || math.IsNaN(b) {
		return math.IsNaN(a) && math.IsNaN(b)
	}
	return a == b || math.Abs(a-b) <= 1e-12*math.Max(1, math.Abs(b))
}

// TestHandCohort checks every figure on the hand-worked cohort. The
// Wilson and Poisson bounds were computed with statsmodels 0.13.5
// proportion_confint(k, n, alpha=0.05, method="wilson") and with
// scipy.stats.chi2.ppf (Garwood's interval); everything else is counted
// in the comments.
func TestHandCohort(t *testing.T) {
	exams, outs, flags := build(handCohort())
	c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	// 27 exams. After (or at) the diagnosis: A 46; B 50, 52; C 39; E 35,
	// 37: 6 exams of 4 workers. Diagnosed with a screening exam: A, B, C,
	// D; E diagnosed at the first exam. Healthy F, G, H, I, followed
	// 10 + 6 + 1 + 0 = 17 years.
	wantSum := evaluation.Summary{Workers: 9, Diagnosed: 4, AtFirstExam: 1, Healthy: 4,
		Exams: 27, AfterDiagnosis: 6, WorkersAfterDiagnosis: 4, HealthyFollowUp: 17}
	if got := c.Summary(); got != wantSum {
		t.Errorf("summary %+v\nwant    %+v", got, wantSum)
	}
	nan := math.NaN()
	type want struct {
		diagnosed, flagged           int
		share, shareLo, shareHi      float64
		median, q25, q75, medFlagged float64
		leads                        []float64
		by                           map[float64]float64 // FlaggedBy
		healthyFlagged               int
		hShare, hShareLo, hShareHi   float64
		years, rate, rateLo, rateHi  float64
		within                       map[float64]float64 // FlaggedWithin
	}
	tests := map[string]want{
		// m1: A flagged at 40, lead 5; B's only flag is at the diagnosis,
		// not before; C flagged at 36, lead 2; D never. K = 2 of D = 4.
		// Y = s − a: events −5, −2; B and D censored at 0.
		// S(−5) = 3/4, S(−2) = 3/4·2/3 = 1/2. Median: 1 − S = 1/2 exactly
		// at −2 and no later event, so the midpoint of −2 and the last
		// time 0: −1, lead 1. Upper quartile: 1 − S = 1/4 exactly at −5,
		// midpoint with the next event −2: −3.5, lead 3.5. Lower quartile:
		// 1 − S never reaches 3/4: not reached. Among the flagged, median
		// of 2 and 5 = 3.5. Flagged at least 2 years before: A and C, 2/4;
		// at least 3: A, 1/4; more than 5: none.
		// Healthy: F flagged at 35 (at risk 30→35 = 5 years), G 6 years,
		// H flagged at its first exam 20 (0 years), I one exam (0 years):
		// 2 false signals in 11 worker-years = 18.18 per 100. Kaplan–Meier
		// of years to the first signal: H event at 0 and I censored at 0
		// (both at risk): S(0) = 3/4; F event at 5 with F, G at risk:
		// S(5) = 3/8. Past G's 6 years, unknown.
		"m1": {
			diagnosed: 4, flagged: 2, share: 0.5, shareLo: 0.15003898915214947, shareHi: 0.8499610108478506,
			median: 1, q25: nan, q75: 3.5, medFlagged: 3.5, leads: []float64{2, 5},
			by:             map[float64]float64{0.5: 0.5, 2: 0.5, 2.5: 0.25, 5: 0.25, 5.5: 0},
			healthyFlagged: 2, hShare: 0.5, hShareLo: 0.15003898915214947, hShareHi: 0.8499610108478506,
			years: 11, rate: 200.0 / 11, rateLo: 2.201902532217863, rateHi: 65.67897879749054,
			within: map[float64]float64{0: 0.25, 4.9: 0.25, 5: 0.625, 6: 0.625, 6.5: nan},
		},
		// m2: A at 44 (lead 1), B at 47 (lead 3), C at 30 (lead 8; the
		// flag at 33 comes later), D at 58 (lead 2); E's flag is after its
		// diagnosis. Y events −8, −3, −2, −1: S = 3/4, 1/2, 1/4, 0.
		// 1 − S = 1/4 exactly at −8: upper quartile midpoint(−8, −3) =
		// −5.5, lead 5.5; = 1/2 at −3: median midpoint(−3, −2), lead 2.5;
		// = 3/4 at −2: lower quartile midpoint(−2, −1), lead 1.5.
		// No healthy worker flagged: 0 in 17 worker-years.
		"m2": {
			diagnosed: 4, flagged: 4, share: 1, shareLo: 0.5101091635454025, shareHi: 1,
			median: 2.5, q25: 1.5, q75: 5.5, medFlagged: 2.5, leads: []float64{1, 2, 3, 8},
			by:             map[float64]float64{1: 1, 1.5: 0.75, 3: 0.5, 8: 0.25, 9: 0},
			healthyFlagged: 0, hShare: 0, hShareLo: 0, hShareHi: 0.4898908364545974,
			years: 17, rate: 0, rateLo: 0, rateHi: 21.69929090655256,
			within: map[float64]float64{0: 0, 10: 0, 10.5: nan},
		},
		"none": {
			diagnosed: 4, flagged: 0, share: 0, shareLo: 0, shareHi: 0.4898908364545974,
			median: nan, q25: nan, q75: nan, medFlagged: nan,
			by:             map[float64]float64{1: 0},
			healthyFlagged: 0, hShare: 0, hShareLo: 0, hShareHi: 0.4898908364545974,
			years: 17, rate: 0, rateLo: 0, rateHi: 21.69929090655256,
			within: map[float64]float64{3: 0},
		},
	}
	for m, w := range tests {
		t.Run(m, func(t *testing.T) {
			r, err := c.Evaluate(context.Background(), flags[m])
			if err != nil {
				t.Fatal(err)
			}
			if r.Diagnosed != w.diagnosed || r.Flagged != w.flagged || r.Healthy != 4 || r.HealthyFlagged != w.healthyFlagged {
				t.Errorf("counts: %d of %d diagnosed, %d of %d healthy flagged; want %d of %d, %d of 4",
					r.Flagged, r.Diagnosed, r.HealthyFlagged, r.Healthy, w.flagged, w.diagnosed, w.healthyFlagged)
			}
			for _, f := range []struct {
				name      string
				got, want float64
			}{
				{"share", r.FlaggedShare.Estimate, w.share}, {"share low", r.FlaggedShare.Low, w.shareLo}, {"share high", r.FlaggedShare.High, w.shareHi},
				{"median lead", r.Lead.Median, w.median}, {"lead Q25", r.Lead.Q25, w.q25}, {"lead Q75", r.Lead.Q75, w.q75},
				{"median lead of the flagged", r.Lead.MedianFlagged, w.medFlagged},
				{"healthy share", r.HealthyFlaggedShare.Estimate, w.hShare}, {"healthy low", r.HealthyFlaggedShare.Low, w.hShareLo},
				{"healthy high", r.HealthyFlaggedShare.High, w.hShareHi},
				{"years at risk", r.YearsAtRisk, w.years},
				{"rate", r.FalsePer100.Estimate, w.rate}, {"rate low", r.FalsePer100.Low, w.rateLo}, {"rate high", r.FalsePer100.High, w.rateHi},
			} {
				if !same(f.got, f.want) && !(math.Abs(f.got-f.want) < 1e-9*math.Max(1, math.Abs(f.want))) {
					t.Errorf("%s = %v, want %v", f.name, f.got, f.want)
				}
			}
			if len(r.Lead.Years) != len(w.leads) {
				t.Errorf("leads %v, want %v", r.Lead.Years, w.leads)
			} else {
				for i := range w.leads {
					if !same(r.Lead.Years[i], w.leads[i]) {
						t.Errorf("leads %v, want %v", r.Lead.Years, w.leads)
					}
				}
			}
			for y, want := range w.by {
				if got := r.Lead.FlaggedBy(y); !same(got, want) {
					t.Errorf("FlaggedBy(%v) = %v, want %v", y, got, want)
				}
			}
			for y, want := range w.within {
				if got := r.FlaggedWithin(y); !same(got, want) {
					t.Errorf("FlaggedWithin(%v) = %v, want %v", y, got, want)
				}
			}
		})
	}
}

// TestScreeningExams checks which exams count as screening exams.
func TestScreeningExams(t *testing.T) {
	exams, outs, _ := build(handCohort())
	c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	var left []string
	for i, e := range exams {
		if !c.Screening(i) {
			left = append(left, e.Worker+"@"+years(e.Age))
		}
	}
	want := "A@46 B@50 B@52 C@39 E@35 E@37"
	if got := strings.Join(left, " "); got != want || c.Len() != len(exams) {
		t.Errorf("left out %q of %d, want %q of %d", got, c.Len(), want, len(exams))
	}
}

func years(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// TestBadInput checks that each kind of bad input is refused with a typed
// error naming the row and the column.
func TestBadInput(t *testing.T) {
	nan := math.NaN()
	exams := []evaluation.Exam{
		{"a", 30}, {"a", 32}, {"b", 40}, {"b", 41}, {"c", 50}, {"c", 55},
	}
	ok := []evaluation.Outcome{
		{Worker: "a", Diagnosed: "yes", Age: 33}, {Worker: "b", Diagnosed: "no", Age: nan}, {Worker: "c", Diagnosed: "no", Age: nan},
	}
	with := func(i int, o evaluation.Outcome) []evaluation.Outcome {
		out := append([]evaluation.Outcome(nil), ok...)
		out[i] = o
		return out
	}
	cols := evaluation.Columns{Worker: "id", Time: "age", Diagnosed: "dx", DiagnosedAge: "dx_age"}
	tests := []struct {
		name     string
		exams    []evaluation.Exam
		outcomes []evaluation.Outcome
		opt      evaluation.Options
		sentinel error
		row      int
		column   string
		message  string
	}{
		{"unknown worker", exams, append(ok, evaluation.Outcome{Worker: "zz", Diagnosed: "no", Age: nan}), evaluation.Options{}, evaluation.ErrUnknownWorker, 4, "id",
			`outcomes data row 4, column "id": worker "zz" has no exams in the exam table; check the id, or remove the row`},
		{"diagnosed before the first exam", exams, with(0, evaluation.Outcome{Worker: "a", Diagnosed: "yes", Age: 29.5}), evaluation.Options{}, evaluation.ErrDiagnosedBeforeFirstExam, 1, "dx_age",
			`outcomes data row 1, column "dx_age": worker "a" was diagnosed at age 29.5, before their first exam at 30; check the age at diagnosis`},
		{"flag not yes/no", exams, with(1, evaluation.Outcome{Worker: "b", Diagnosed: "maybe", Age: nan}), evaluation.Options{}, evaluation.ErrDiagnosisFlag, 2, "dx",
			`outcomes data row 2, column "dx": "maybe" is not yes or no (yes/no, true/false and 1/0 are understood)`},
		{"blank flag", exams, with(1, evaluation.Outcome{Worker: "b", Diagnosed: " ", Age: nan}), evaluation.Options{}, evaluation.ErrDiagnosisFlag, 2, "dx", `" " is not yes or no`},
		{"duplicate row", exams, append(ok, evaluation.Outcome{Worker: "b", Diagnosed: "no", Age: nan}), evaluation.Options{}, evaluation.ErrDuplicateOutcome, 4, "id",
			`outcomes data rows 2 and 4, column "id": worker "b" has two outcome rows; keep one`},
		{"diagnosed without age", exams, with(0, evaluation.Outcome{Worker: "a", Diagnosed: "yes", Age: nan}), evaluation.Options{}, evaluation.ErrMissingDiagnosisAge, 1, "dx_age",
			`worker "a" is diagnosed but the age at diagnosis is blank`},
		{"age without diagnosis", exams, with(1, evaluation.Outcome{Worker: "b", Diagnosed: "no", Age: 45}), evaluation.Options{}, evaluation.ErrAgeWithoutDiagnosis, 2, "dx_age",
			`worker "b" is not diagnosed but has an age at diagnosis`},
		{"infinite age", exams, with(0, evaluation.Outcome{Worker: "a", Diagnosed: "yes", Age: math.Inf(1)}), evaluation.Options{}, evaluation.ErrBadAge, 1, "dx_age", `+Inf is not an age in years`},
		{"blank outcome id", exams, append(ok, evaluation.Outcome{Worker: "", Diagnosed: "no", Age: nan}), evaluation.Options{}, evaluation.ErrBlankWorker, 4, "id", `the worker id is empty`},
		{"no diagnosed worker", exams, with(0, evaluation.Outcome{Worker: "a", Diagnosed: "no", Age: nan}), evaluation.Options{}, evaluation.ErrNoDiagnosed, 0, "",
			`no worker in the outcomes table was diagnosed`},
		{"diagnosed only at the first exam", exams, with(0, evaluation.Outcome{Worker: "a", Diagnosed: "yes", Age: 30}), evaluation.Options{}, evaluation.ErrNoDiagnosed, 0, "",
			`all 1 were diagnosed at their first exam`},
		{"no healthy worker", exams, []evaluation.Outcome{{Worker: "a", Diagnosed: "yes", Age: 33}, {Worker: "b", Diagnosed: "yes", Age: 41}, {Worker: "c", Diagnosed: "yes", Age: 51}},
			evaluation.Options{}, evaluation.ErrNoHealthy, 0, "", `every worker was diagnosed`},
		{"missing outcomes", exams, ok[:1], evaluation.Options{}, evaluation.ErrMissingOutcomes, 0, "",
			`2 workers have exams but no row in the outcomes table ("b", "c")`},
		{"missing outcomes as healthy, still no healthy", exams[:2], ok[:1], evaluation.Options{MissingAsHealthy: true}, evaluation.ErrNoHealthy, 0, "", `every worker`},
		{"no exams", nil, ok, evaluation.Options{}, evaluation.ErrNoExams, 0, "", `there are no exams`},
		{"blank exam id", append([]evaluation.Exam{{"", 3}}, exams...), ok, evaluation.Options{}, evaluation.ErrBlankWorker, 1, "id", `exams data row 1, column "id": the worker id is empty`},
		{"NaN exam age", append(append([]evaluation.Exam(nil), exams...), evaluation.Exam{"a", nan}), ok, evaluation.Options{}, evaluation.ErrBadAge, 7, "age", `exams data row 7, column "age": NaN is not an age in years`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tc.opt.Columns = cols
			c, err := evaluation.NewCohort(context.Background(), tc.exams, tc.outcomes, tc.opt)
			if err == nil {
				t.Fatalf("no error; cohort %+v", c.Summary())
			}
			if !errors.Is(err, tc.sentinel) {
				t.Errorf("error %q is not %v", err, tc.sentinel)
			}
			if !strings.Contains(err.Error(), tc.message) {
				t.Errorf("message %q\nwant it to contain %q", err, tc.message)
			}
			if strings.Contains(err.Error(), "evaluation:") {
				t.Errorf("message %q has a package prefix", err)
			}
			var oe *evaluation.OutcomeError
			var ee *evaluation.ExamError
			switch {
			case errors.As(err, &oe):
				if oe.Row != tc.row || oe.Column != tc.column {
					t.Errorf("outcome error at row %d column %q, want %d %q", oe.Row, oe.Column, tc.row, tc.column)
				}
			case errors.As(err, &ee):
				if ee.Row != tc.row || ee.Column != tc.column {
					t.Errorf("exam error at row %d column %q, want %d %q", ee.Row, ee.Column, tc.row, tc.column)
				}
			case tc.row != 0:
				t.Errorf("error %T has no row; want row %d", err, tc.row)
			}
		})
	}
}

// TestAllProblemsAtOnce checks that every problem of the outcomes table is
// reported in one error, capped at MaxReported listed, with the rows the
// caller gave.
func TestAllProblemsAtOnce(t *testing.T) {
	nan := math.NaN()
	exams := []evaluation.Exam{{"a", 30}, {"b", 40}}
	outs := []evaluation.Outcome{
		{Row: 5, Worker: "a", Diagnosed: "perhaps", Age: nan},
		{Row: 6, Worker: "b", Diagnosed: "yes", Age: 20},
		{Row: 7, Worker: "x", Diagnosed: "no", Age: nan},
	}
	for i := 0; i < 20; i++ {
		outs = append(outs, evaluation.Outcome{Row: 8 + i, Worker: "y" + strconv.Itoa(i), Diagnosed: "no", Age: nan})
	}
	_, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{})
	var all *evaluation.OutcomeErrors
	if !errors.As(err, &all) {
		t.Fatalf("error %v is not an *OutcomeErrors", err)
	}
	if all.Total != 23 || len(all.Errs) != evaluation.MaxReported {
		t.Errorf("%d problems, %d listed; want 23, %d", all.Total, len(all.Errs), evaluation.MaxReported)
	}
	for _, s := range []error{evaluation.ErrDiagnosisFlag, evaluation.ErrDiagnosedBeforeFirstExam, evaluation.ErrUnknownWorker} {
		if !errors.Is(err, s) {
			t.Errorf("errors.Is(err, %v) is false", s)
		}
	}
	msg := err.Error()
	for _, want := range []string{"23 problems in the outcomes table:", "outcomes data row 5,", "outcomes data row 6,", "outcomes data row 7,", "... and 13 more"} {
		if !strings.Contains(msg, want) {
			t.Errorf("message lacks %q:\n%s", want, msg)
		}
	}
}

// TestMissingAsHealthy checks that workers without an outcome row may be
// taken as never diagnosed, and are counted.
func TestMissingAsHealthy(t *testing.T) {
	exams := []evaluation.Exam{{"a", 30}, {"a", 31}, {"b", 40}, {"b", 42}, {"c", 50}}
	outs := []evaluation.Outcome{{Worker: "a", Diagnosed: "yes", Age: 31}}
	if _, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{}); !errors.Is(err, evaluation.ErrMissingOutcomes) {
		t.Fatalf("without the option: %v", err)
	}
	c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{MissingAsHealthy: true})
	if err != nil {
		t.Fatal(err)
	}
	s := c.Summary()
	if s.Healthy != 2 || s.MissingAsHealthy != 2 || s.Diagnosed != 1 || s.HealthyFollowUp != 2 || s.AfterDiagnosis != 1 {
		t.Errorf("summary %+v", s)
	}
}

// TestCancel checks that a cancelled context stops the work.
func TestCancel(t *testing.T) {
	exams, outs, flags := build(handCohort())
	ctx, cancel := context.WithCancel(context.Background())
	c, err := evaluation.NewCohort(ctx, exams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	cancel()
	if _, err := c.Evaluate(ctx, flags["m1"]); !errors.Is(err, context.Canceled) {
		t.Errorf("Evaluate after cancel: %v", err)
	}
	if _, err := evaluation.NewCohort(ctx, exams, outs, evaluation.Options{}); !errors.Is(err, context.Canceled) {
		t.Errorf("NewCohort after cancel: %v", err)
	}
}

// TestEvaluateMismatch checks that flags of the wrong length are treated
// as the programmer error they are.
func TestEvaluateMismatch(t *testing.T) {
	exams, outs, _ := build(handCohort())
	c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer func() {
		if recover() == nil {
			t.Error("Evaluate with too few flags did not panic")
		}
	}()
	c.Evaluate(context.Background(), []bool{true})
}

func TestParseDiagnosed(t *testing.T) {
	for _, tc := range []struct {
		in     string
		dx, ok bool
	}{
		{"yes", true, true}, {" YES ", true, true}, {"y", true, true}, {"True", true, true}, {"1", true, true},
		{"no", false, true}, {"N", false, true}, {"false", false, true}, {"0", false, true},
		{"", false, false}, {"2", false, false}, {"yes!", false, false}, {"1.0", false, false}, {"oui", false, false},
	} {
		dx, ok := evaluation.ParseDiagnosed(tc.in)
		if dx != tc.dx || ok != tc.ok {
			t.Errorf("ParseDiagnosed(%q) = %v, %v; want %v, %v", tc.in, dx, ok, tc.dx, tc.ok)
		}
	}
}
