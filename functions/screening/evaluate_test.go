package screening_test

import (
	"fmt"
	"math"
	"testing"

	"veer/functions/screening"
)

// evWorker is one worker of a hand-made labelled cohort: exam ages and the
// ages of the exams that signal.
type evWorker struct {
	id      string
	times   []float64
	signals []float64
}

// evCohort turns workers into the exams and per-exam signals Evaluate takes.
func evCohort(ws []evWorker) ([]screening.Exam, []bool) {
	var exams []screening.Exam
	var sig []bool
	for _, w := range ws {
		for _, t := range w.times {
			exams = append(exams, screening.Exam{Worker: w.id, Group: "g", Time: t})
			s := false
			for _, st := range w.signals {
				s = s || st == t
			}
			sig = append(sig, s)
		}
	}
	return exams, sig
}

// same reports whether two figures agree, NaN and ±Inf included.
func same(a, b float64) bool {
	if math.IsNaN(a) || math.IsNaN(b) {
		return math.IsNaN(a) && math.IsNaN(b)
	}
	return a == b || math.Abs(a-b) <= 1e-12*math.Max(1, math.Abs(b))
}

// TestEvaluate checks Evaluate on small cohorts worked out by hand; the
// arithmetic is in the comments. The Kaplan–Meier figures of the third case
// are the product-limit estimate done by hand; the same estimator is checked
// against statsmodels' SurvfuncRight on the demo workforce in
// veer/examples/scenario (TestCutoffRuleMatchesPython).
func TestEvaluate(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	type by struct{ years, share float64 }
	tests := []struct {
		name    string
		workers []evWorker
		truth   map[string]screening.Truth
		want    screening.Evaluation // counts and headline figures
		wantBy  []by
	}{
		{
			// A: non-case, 30–33, no signal: 3 years at risk.
			// B: non-case, 40–42, signal at 41: false signal, 1 year at risk.
			// C: case from 50.5, signal at 52: detected after 1.5 years.
			// D: case from 20.5, signal at 20: early, left out of the delays.
			// E: case from 60.2, exams to 62, no signal: follow-up 1.8 years.
			// False rate 100·1/(3+1) = 25. At risk: C and E. KM: at 1.5
			// both at risk, one detected: S = 1/2 exactly with no later
			// detection, so the median is the midpoint of 1.5 and the
			// longest follow-up 1.8 (R's survival rule): 1.65.
			name: "mixed cohort",
			workers: []evWorker{
				{"A", []float64{30, 31, 33}, nil},
				{"B", []float64{40, 41, 42}, []float64{41}},
				{"C", []float64{50, 51, 52}, []float64{52}},
				{"D", []float64{20, 21}, []float64{20}},
				{"E", []float64{60, 61, 62}, nil},
			},
			truth: map[string]screening.Truth{
				"C": {Affected: true, Onset: 50.5},
				"D": {Affected: true, Onset: 20.5},
				"E": {Affected: true, Onset: 60.2},
			},
			want: screening.Evaluation{
				Workers: 5, Cases: 3, NonCases: 2, Flagged: 3, TrueFlagged: 2,
				Detected: 1, EarlySignals: 1, CasesAtRisk: 2, DetectedShare: 0.5,
				MedianDelay: 1.5, MedianDelayKM: 1.65,
				FalseSignals: 1, YearsAtRisk: 4, FalsePer100: 25,
			},
			wantBy: []by{{1, 0}, {1.5, 0.5}, {10, 0.5}},
		},
		{
			// No undetected case: delays 1, 2, 3, 4 (onset 10, signals at
			// 11..14). S = 3/4, 1/2, 1/4, 0; S is exactly 1/2 at 2, so the
			// median is (2+3)/2 = 2.5, the ordinary median.
			name: "all detected",
			workers: []evWorker{
				{"P", []float64{9, 11}, []float64{11}},
				{"Q", []float64{9, 12}, []float64{12}},
				{"R", []float64{9, 13}, []float64{13}},
				{"S", []float64{9, 14}, []float64{14}},
			},
			truth: map[string]screening.Truth{
				"P": {Affected: true, Onset: 10}, "Q": {Affected: true, Onset: 10},
				"R": {Affected: true, Onset: 10}, "S": {Affected: true, Onset: 10},
			},
			want: screening.Evaluation{
				Workers: 4, Cases: 4, Flagged: 4, TrueFlagged: 4, Detected: 4,
				CasesAtRisk: 4, DetectedShare: 1, MedianDelay: 2.5, MedianDelayKM: 2.5,
				FalsePer100: 0,
			},
			wantBy: []by{{0.5, 0}, {2, 0.5}, {3.9, 0.75}, {4, 1}},
		},
		{
			// Onset 0 for all; detections at 1, 2, 3, 5 and undetected
			// follow-ups 2, 4, 6. Risk sets: 7 at 1, 6 at 2 (the one
			// followed to 2 still counts), 4 at 3, 2 at 5:
			// S(1) = 6/7, S(2) = 6/7·5/6 = 5/7, S(3) = 5/7·3/4 = 15/28,
			// S(5) = 15/28·1/2 = 15/56. First S <= 1/2 at 5: median 5,
			// while the median of the detected alone is (2+3)/2 = 2.5.
			name: "censored",
			workers: []evWorker{
				{"a", []float64{0, 1}, []float64{1}},
				{"b", []float64{0, 2}, []float64{2}},
				{"c", []float64{0, 1, 2}, nil},
				{"d", []float64{0, 3}, []float64{3}},
				{"e", []float64{0, 4}, nil},
				{"f", []float64{0, 5}, []float64{5}},
				{"g", []float64{0, 6}, nil},
			},
			truth: map[string]screening.Truth{
				"a": {Affected: true}, "b": {Affected: true}, "c": {Affected: true}, "d": {Affected: true},
				"e": {Affected: true}, "f": {Affected: true}, "g": {Affected: true},
			},
			want: screening.Evaluation{
				Workers: 7, Cases: 7, Flagged: 4, TrueFlagged: 4, Detected: 4,
				CasesAtRisk: 7, DetectedShare: 4.0 / 7, MedianDelay: 2.5, MedianDelayKM: 5,
			},
			wantBy: []by{{1, 1.0 / 7}, {2, 2.0 / 7}, {4, 13.0 / 28}, {5, 41.0 / 56}, {100, 41.0 / 56}},
		},
		{
			// One of four caught (delay 1; the others followed 3, 4, 5
			// years): S stays at 3/4, the median is not reached.
			name: "median not reached",
			workers: []evWorker{
				{"a", []float64{10, 11}, []float64{11}},
				{"b", []float64{10, 13}, nil},
				{"c", []float64{10, 14}, nil},
				{"d", []float64{10, 15}, nil},
			},
			truth: map[string]screening.Truth{
				"a": {Affected: true, Onset: 10}, "b": {Affected: true, Onset: 10},
				"c": {Affected: true, Onset: 10}, "d": {Affected: true, Onset: 10},
			},
			want: screening.Evaluation{
				Workers: 4, Cases: 4, Flagged: 1, TrueFlagged: 1, Detected: 1,
				CasesAtRisk: 4, DetectedShare: 0.25, MedianDelay: 1, MedianDelayKM: inf,
			},
			wantBy: []by{{0.9, 0}, {1, 0.25}, {50, 0.25}},
		},
		{
			// Only non-cases, one missing from the truth (a non-case too);
			// exams out of order. X: 20–25, signals at 24 and 22: the first
			// is 22, so 2 years at risk. Y (no truth row): 30–31, 1 year.
			// Rate 100·1/3. No cases: the delay figures are NaN.
			name: "no cases",
			workers: []evWorker{
				{"X", []float64{25, 22, 20, 24}, []float64{24, 22}},
				{"Y", []float64{31, 30}, nil},
			},
			truth: map[string]screening.Truth{"X": {}},
			want: screening.Evaluation{
				Workers: 2, NonCases: 2, Flagged: 1, FalseSignals: 1, YearsAtRisk: 3,
				FalsePer100: 100.0 / 3, DetectedShare: nan, MedianDelay: nan, MedianDelayKM: nan,
			},
			wantBy: []by{{1, nan}},
		},
		{
			// A signal exactly at onset is a detection with delay 0; a case
			// signalled before and after onset is early, not detected.
			name: "at onset and before",
			workers: []evWorker{
				{"on", []float64{40, 41, 42}, []float64{41}},
				{"both", []float64{40, 41, 42}, []float64{40, 42}},
			},
			truth: map[string]screening.Truth{
				"on": {Affected: true, Onset: 41}, "both": {Affected: true, Onset: 41},
			},
			want: screening.Evaluation{
				Workers: 2, Cases: 2, Flagged: 2, TrueFlagged: 2, Detected: 1, EarlySignals: 1,
				CasesAtRisk: 1, DetectedShare: 1, MedianDelay: 0, MedianDelayKM: 0,
			},
			wantBy: []by{{0, 1}},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			exams, sig := evCohort(tc.workers)
			got := screening.Evaluate(exams, sig, tc.truth)
			w := tc.want
			if got.Workers != w.Workers || got.Cases != w.Cases || got.NonCases != w.NonCases ||
				got.Flagged != w.Flagged || got.TrueFlagged != w.TrueFlagged || got.Detected != w.Detected ||
				got.EarlySignals != w.EarlySignals || got.CasesAtRisk != w.CasesAtRisk || got.FalseSignals != w.FalseSignals {
				t.Errorf("counts = %+v\nwant     %+v", got, w)
			}
			for _, f := range []struct {
				name      string
				got, want float64
			}{
				{"DetectedShare", got.DetectedShare, w.DetectedShare},
				{"MedianDelay", got.MedianDelay, w.MedianDelay},
				{"MedianDelayKM", got.MedianDelayKM, w.MedianDelayKM},
				{"YearsAtRisk", got.YearsAtRisk, w.YearsAtRisk},
				{"FalsePer100", got.FalsePer100, w.FalsePer100},
			} {
				if !same(f.got, f.want) {
					t.Errorf("%s = %v, want %v", f.name, f.got, f.want)
				}
			}
			if len(got.Delays) != got.Detected || len(got.FollowUp) != got.CasesAtRisk-got.Detected {
				t.Errorf("%d delays and %d follow-ups for %d detected of %d at risk", len(got.Delays), len(got.FollowUp), got.Detected, got.CasesAtRisk)
			}
			for _, b := range tc.wantBy {
				if g := got.DetectedBy(b.years); !same(g, b.share) {
					t.Errorf("DetectedBy(%v) = %v, want %v", b.years, g, b.share)
				}
			}
		})
	}
}

// TestEvaluateMismatch checks that a signal slice of the wrong length is
// treated as the programmer error it is.
func TestEvaluateMismatch(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("Evaluate with 1 signal for 2 exams did not panic")
		}
	}()
	screening.Evaluate([]screening.Exam{{Worker: "a", Time: 1}, {Worker: "a", Time: 2}}, []bool{true}, nil)
}

func ExampleEvaluate() {
	// Worker "case" drifts from age 41; "ok" is healthy and is falsely
	// flagged at 52; "late" drifts from 40.5 and is never flagged. Counting
	// "late" as not yet caught after its 3.5 years of follow-up, half the
	// cases are caught by 2 years and the curve stays at 1/2 to the end:
	// the median is the midpoint 2.75 (R's survival rule).
	exams := []screening.Exam{
		{Worker: "case", Time: 40}, {Worker: "case", Time: 41}, {Worker: "case", Time: 42}, {Worker: "case", Time: 43},
		{Worker: "ok", Time: 50}, {Worker: "ok", Time: 52}, {Worker: "ok", Time: 54},
		{Worker: "late", Time: 40}, {Worker: "late", Time: 44},
	}
	signal := []bool{false, false, false, true, false, true, false, false, false}
	truth := map[string]screening.Truth{
		"case": {Affected: true, Onset: 41},
		"late": {Affected: true, Onset: 40.5},
	}
	ev := screening.Evaluate(exams, signal, truth)
	fmt.Printf("detected %d of %d cases; median %.1f years among them, %.1f counting the undetected\n",
		ev.Detected, ev.Cases, ev.MedianDelay, ev.MedianDelayKM)
	fmt.Printf("within 2 years of onset: %.0f%%; false signals per 100 worker-years: %.0f\n",
		100*ev.DetectedBy(2), ev.FalsePer100)
	// Output:
	// detected 1 of 2 cases; median 2.0 years among them, 2.8 counting the undetected
	// within 2 years of onset: 50%; false signals per 100 worker-years: 50
}
