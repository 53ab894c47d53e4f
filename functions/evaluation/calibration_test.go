package evaluation_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"veer/functions/evaluation"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/functions/serial"
)

// simWorker is one simulated worker: exams, and for a worker who drifts
// the onset of the drift and the age at diagnosis.
type simWorker struct {
	id            string
	times, values []float64
	onset, dx     float64 // NaN when healthy
}

// simulate draws n workers: value = 120 + 0.5 (age − 40) + 10 e, e from
// the serial model par (package serial), first exam at a uniform age in
// 20–55, 3–10 exams at gaps uniform on 0.6–2.4 years, as the reference
// workers. A share drifting of them drift upward by 0.4 SD a year from an
// onset uniform over their exams, up to 2 SD, and are diagnosed 1–5 years
// after the onset; exams after the diagnosis are kept (they are follow-up
// and the evaluation must leave them out).
func simulate(n int, par serial.Params, drifting float64, seed uint64, prefix string) []simWorker {
	rng := rand.New(rand.NewPCG(seed, 11))
	out := make([]simWorker, n)
	for w := range out {
		k := 3 + rng.IntN(8)
		t := 20 + 35*rng.Float64()
		times := make([]float64, k)
		for j := range times {
			times[j] = math.Round(t*100) / 100
			t += 0.6 + 1.8*rng.Float64()
		}
		e := serial.Simulate(par, times, rng, nil)
		sw := simWorker{id: fmt.Sprintf("%s%05d", prefix, w), times: times, onset: math.NaN(), dx: math.NaN()}
		if rng.Float64() < drifting {
			sw.onset = times[0] + (times[k-1]-times[0])*rng.Float64()
			sw.dx = math.Round((sw.onset+1+4*rng.Float64())*100) / 100
		}
		for j, a := range times {
			d := 0.0
			if a > sw.onset {
				d = math.Min(0.4*(a-sw.onset), 2)
			}
			sw.values = append(sw.values, 120+0.5*(a-40)+10*(e[j]+d))
		}
		out[w] = sw
	}
	return out
}

func refRows(ws []simWorker) []refcurve.Row {
	var rows []refcurve.Row
	for _, w := range ws {
		for j := range w.times {
			rows = append(rows, refcurve.Row{Worker: w.id, Time: w.times[j], Value: w.values[j]})
		}
	}
	return rows
}

// TestFalseSignalRateMatchesTarget checks, on a simulated labelled cohort,
// the promise a target makes as the evaluation measures it: at each target
// T of a sweep, the chart's false signals per 100 worker-years among the
// workers never diagnosed agree with 100/T within Monte Carlo error (the
// Poisson error of the count, 3 standard errors, plus 8% for the
// reference model's own estimation error and the limit's Monte Carlo
// calibration, as in screening's TestRealisedFalseSignalRate). Readings are
// persistent (phi 0.95 a year, c 0.8), where a limit that ignored the
// follow-up would miss by far more. It also checks the trade-off the sweep
// shows: detection and lead fall as the target grows, and MatchTarget
// finds the target for a measured rate.
func TestFalseSignalRateMatchesTarget(t *testing.T) {
	par := serial.Params{Phi: 0.95, C: 0.8}
	ref := simulate(1500, par, 0, 1, "R")
	m, err := screening.Fit(context.Background(), refRows(ref), screening.FitOptions{Name: "sim"})
	if err != nil {
		t.Fatal(err)
	}
	n := 5000
	if testing.Short() {
		n = 2000
	}
	work := simulate(n, par, 0.15, 2, "W")
	var exams []screening.Exam
	var evExams []evaluation.Exam
	var outs []evaluation.Outcome
	for _, w := range work {
		for j := range w.times {
			exams = append(exams, screening.Exam{Worker: w.id, Time: w.times[j], Value: w.values[j]})
			evExams = append(evExams, evaluation.Exam{Worker: w.id, Age: w.times[j]})
		}
		o := evaluation.Outcome{Worker: w.id, Diagnosed: "no", Age: math.NaN()}
		if !math.IsNaN(w.dx) {
			o.Diagnosed, o.Age = "yes", w.dx
		}
		outs = append(outs, o)
	}
	ctx := context.Background()
	c, err := evaluation.NewCohort(ctx, evExams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	s := c.Summary()
	t.Logf("%d workers: %d diagnosed (%d at the first exam), %d never; %d of %d exams after a diagnosis left out",
		s.Workers, s.Diagnosed, s.AtFirstExam, s.Healthy, s.AfterDiagnosis, s.Exams)
	set := screening.DefaultSettings()
	set.Extrapolate = screening.MaxExtrapolation
	targets := []float64{5, 10, 20, 50, 100}
	rates := make([]float64, len(targets))
	prevShare, prevLead := 2.0, math.Inf(1)
	for i, target := range targets {
		lr, err := m.Limit(set, screening.LimitOptions{}, target)
		if err != nil {
			t.Fatal(err)
		}
		res, err := m.Screen(exams, set, lr.H)
		if err != nil {
			t.Fatal(err)
		}
		flags := make([]bool, len(res))
		for k, r := range res {
			flags[k] = r.Signal
		}
		r, err := c.Evaluate(ctx, flags)
		if err != nil {
			t.Fatal(err)
		}
		want := 100 / target
		got := r.FalsePer100.Estimate
		rse := 1 / math.Sqrt(float64(r.HealthyFlagged))
		t.Logf("target %3g: %.2f false signals per 100 worker-years (want %.2f, relative SE %.1f%%); %d of %d diagnosed flagged before diagnosis, median lead %.2f years",
			target, got, want, 100*rse, r.Flagged, r.Diagnosed, r.Lead.MedianFlagged)
		if math.Abs(got/want-1) > 0.08+3*rse {
			t.Errorf("target %g: %.3f false signals per 100 worker-years, want %.3f", target, got, want)
		}
		if r.FlaggedShare.Estimate > prevShare || r.Lead.MedianFlagged > prevLead+0.5 {
			t.Errorf("target %g: detection %.3f and median lead %.2f do not fall from %.3f and %.2f", target, r.FlaggedShare.Estimate, r.Lead.MedianFlagged, prevShare, prevLead)
		}
		prevShare, prevLead = r.FlaggedShare.Estimate, r.Lead.MedianFlagged
		rates[i] = got
	}
	// The rate a 30-year target promises lies between the 20- and 50-year
	// points; the matched target must be near 30.
	mt, ok := evaluation.MatchTarget(targets, rates, 100.0/30)
	if !ok || math.Abs(mt/30-1) > 0.25 {
		t.Errorf("MatchTarget for 3.33 per 100 = %.1f, %v; want about 30", mt, ok)
	}
}
