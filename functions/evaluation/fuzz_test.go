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

// FuzzCohort feeds NewCohort and Evaluate tables decoded from arbitrary
// text, as a user's files might hold: one exam per line
// "worker,age,flag" and, after a line "--", one outcome per line
// "worker,diagnosed,age". It checks that nothing panics, that every
// failure is one of the package's typed errors with a plain message, and
// that a cohort's figures are consistent.
func FuzzCohort(f *testing.F) {
	f.Add("a,30,0\na,31,1\nb,40,0\nb,42,1\n--\na,yes,31\nb,no,\n", false)
	f.Add("a,30,1\nb,40,0\nc,50,1\n--\na,y,30\nb,maybe,\nc,no,\nc,no,\nz,no,\n", false)
	f.Add("a,30,1\nb,40,0\n--\na,1,35\n", true)
	f.Add("a,NaN,1\n--\n", false)
	f.Add(",3,1\n--\n,no,\n", true)
	f.Fuzz(func(t *testing.T, text string, missingAsHealthy bool) {
		examText, outText, _ := strings.Cut(text, "--\n")
		var exams []evaluation.Exam
		var flags []bool
		for _, line := range strings.Split(examText, "\n") {
			if line == "" {
				continue
			}
			p := strings.SplitN(line, ",", 3)
			for len(p) < 3 {
				p = append(p, "")
			}
			exams = append(exams, evaluation.Exam{Worker: p[0], Age: parse(p[1])})
			flags = append(flags, p[2] == "1")
		}
		var outs []evaluation.Outcome
		for _, line := range strings.Split(outText, "\n") {
			if line == "" {
				continue
			}
			p := strings.SplitN(line, ",", 3)
			for len(p) < 3 {
				p = append(p, "")
			}
			outs = append(outs, evaluation.Outcome{Worker: p[0], Diagnosed: p[1], Age: parse(p[2])})
		}
		c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{MissingAsHealthy: missingAsHealthy})
		if err != nil {
			var oe *evaluation.OutcomeErrors
			var ee *evaluation.ExamError
			var me *evaluation.MissingOutcomesError
			var ce *evaluation.CohortError
			if !errors.As(err, &oe) && !errors.As(err, &ee) && !errors.As(err, &me) && !errors.As(err, &ce) {
				t.Fatalf("untyped error %T: %v", err, err)
			}
			if msg := err.Error(); msg == "" || strings.Contains(msg, "evaluation:") {
				t.Fatalf("message %q", msg)
			}
			return
		}
		s := c.Summary()
		if s.Diagnosed+s.AtFirstExam+s.Healthy != s.Workers || s.Diagnosed == 0 || s.Healthy == 0 || s.Exams != len(exams) {
			t.Fatalf("summary %+v", s)
		}
		r, err := c.Evaluate(context.Background(), flags)
		if err != nil {
			t.Fatal(err)
		}
		if r.Flagged > r.Diagnosed || r.HealthyFlagged > r.Healthy || r.Diagnosed != s.Diagnosed || r.Healthy != s.Healthy ||
			len(r.Lead.Years) != r.Flagged || r.YearsAtRisk < 0 || r.YearsAtRisk > s.HealthyFollowUp+1e-9*math.Abs(s.HealthyFollowUp) {
			t.Fatalf("result %+v for summary %+v", r, s)
		}
		for _, iv := range []evaluation.Interval{r.FlaggedShare, r.HealthyFlaggedShare} {
			if !(iv.Low >= 0 && iv.Low <= iv.Estimate && iv.Estimate <= iv.High && iv.High <= 1) {
				t.Fatalf("interval %+v", iv)
			}
		}
		for _, l := range r.Lead.Years {
			if !(l > 0) {
				t.Fatalf("lead %v", l)
			}
		}
		if got := r.Lead.FlaggedBy(1e-300); math.Abs(got-r.FlaggedShare.Estimate) > 1e-12 {
			t.Fatalf("share flagged before diagnosis %v from the curve, %v counted", got, r.FlaggedShare.Estimate)
		}
	})
}

// parse reads a number; anything else, blank included, is NaN.
func parse(s string) float64 {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil {
		return math.NaN()
	}
	return v
}
