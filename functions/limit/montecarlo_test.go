package limit

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"veer/functions/chart"
)

// iidStream gives i.i.d. N(mu,1) values at equal gaps.
type iidStream struct {
	rng     *rand.Rand
	gap, mu float64
}

func (s *iidStream) Next() (float64, float64) { return s.gap, s.mu + s.rng.NormFloat64() }

func iid(gap, mu float64) StreamFunc {
	return func(rng *rand.Rand) Stream { return &iidStream{rng, gap, mu} }
}

// Monte Carlo calibration on i.i.d. N(0,1) values reproduces the exact
// limit (itself checked against R spc), including head starts (which use
// the critical-limit construction of chart.Tracker) and EWMA.
func TestCalibrateMatchesExact(t *testing.T) {
	tests := []struct {
		spec   chart.Spec
		target float64
		gap    float64
	}{
		{chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 0.5}, 100, 1},
		{chart.Spec{Kind: chart.CUSUM, Side: chart.Both, Allowance: 0.5, HeadStart: 0.5}, 150, 2},
		{chart.Spec{Kind: chart.CUSUM, Side: chart.Down, Allowance: 1, HeadStart: 0.3}, 60, 1.5},
		{chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: 0.2, Unit: 1}, 100, 1},
		{chart.Spec{Kind: chart.EWMA, Side: chart.Up, Lambda: 0.1, Unit: 1, HeadStart: 0.5}, 80, 0.5},
		{chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: 0.05, Unit: 1}, 300, 2.5},
	}
	for _, tc := range tests {
		exact, err := Solve(tc.spec, tc.target/tc.gap, tc.gap)
		if err != nil {
			t.Fatal(err)
		}
		mc := MonteCarlo{Paths: 6000, Seed: 42}
		c, err := mc.Calibrate(tc.spec, tc.target, iid(tc.gap, 0), 0)
		if err != nil {
			t.Fatal(err)
		}
		// The exact ARL at the Monte Carlo limit must be within 4 SE of the
		// target (the Monte Carlo error is in the ATS).
		arl, _ := ARL(tc.spec, c.H, 0, tc.gap)
		if d := math.Abs(arl*tc.gap - tc.target); d > 4*c.SE {
			t.Errorf("%+v: MC limit %.4f (exact %.4f): exact ATS there %.2f, target %v, MC SE %.2f", tc.spec, c.H, exact, arl*tc.gap, tc.target, c.SE)
		}
		if math.Abs(c.ATS-tc.target) > 0.01*tc.target {
			t.Errorf("%+v: achieved ATS %.3f, target %v", tc.spec, c.ATS, tc.target)
		}
		t.Logf("%s/%s hs %.1f: MC h %.4f (SE %.4f), exact %.4f; SE %.2f%% of target; censored %d", tc.spec.Kind, tc.spec.Side, tc.spec.HeadStart, c.H, c.SEH, exact, 100*c.SE/tc.target, c.Censored)
	}
}

// Delay for i.i.d. shifted values equals ARL(mu) x gap.
func TestDelayMatchesExact(t *testing.T) {
	spec := chart.Spec{Kind: chart.CUSUM, Side: chart.Both, Allowance: 0.5}
	for _, mu := range []float64{0, 0.5, 1, 2} {
		r, err := MonteCarlo{Paths: 4000, Seed: 1}.Delay(spec, 4, iid(2, mu), 0)
		if err != nil {
			t.Fatal(err)
		}
		arl, _ := ARL(spec, 4, mu, 2)
		if math.Abs(r.Mean-2*arl) > 4*r.SE {
			t.Errorf("mu %v: simulated delay %.3f (SE %.3f), exact %.3f", mu, r.Mean, r.SE, 2*arl)
		}
	}
}

// Same seed, any number of goroutines: identical results; the result is
// monotone in the target.
func TestCalibrateDeterministic(t *testing.T) {
	spec := chart.DefaultSpec()
	var prev Calibration
	for i, w := range []int{1, 2, 3} {
		c, err := MonteCarlo{Paths: 2000, Seed: 9, Workers: w}.Calibrate(spec, 80, iid(1, 0), 0)
		if err != nil {
			t.Fatal(err)
		}
		if i > 0 && c != prev {
			t.Errorf("%d workers: %+v, 1 worker: %+v", w, c, prev)
		}
		prev = c
	}
	last := 0.0
	for _, target := range []float64{20, 40, 80, 160} {
		c, _ := MonteCarlo{Paths: 2000, Seed: 9}.Calibrate(spec, target, iid(1, 0), 0)
		if c.H <= last {
			t.Errorf("limit %.4f for target %v not above %.4f", c.H, target, last)
		}
		last = c.H
	}
}

func TestMonteCarloBadInput(t *testing.T) {
	mc := MonteCarlo{Paths: 100}
	if _, err := mc.Calibrate(chart.DefaultSpec(), -1, iid(1, 0), 0); err == nil {
		t.Error("negative target accepted")
	}
	if _, err := mc.Calibrate(chart.Spec{Kind: "cusum", Side: "sideways"}, 10, iid(1, 0), 0); err == nil {
		t.Error("bad side accepted")
	}
	if _, err := mc.Delay(chart.DefaultSpec(), 0, iid(1, 0), 0); err == nil {
		t.Error("zero limit accepted")
	}
	if _, err := mc.Delay(chart.DefaultSpec(), 3, iid(1, 0), math.NaN()); err == nil {
		t.Error("NaN onset accepted")
	}
	// k = 3: the statistic is 0 at almost every exam, so no positive limit
	// gives a 5-exam ATS.
	big := chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 3}
	if _, err := (MonteCarlo{Paths: 500}).Calibrate(big, 5, iid(1, 0), 0); !errors.Is(err, ErrTargetTooShort) {
		t.Errorf("k = 3, target 5: %v", err)
	}
	// Progress reaches the total of each pass, in order.
	last, lastTotal, calls := 0, 0, 0
	prog := func(done, total int) {
		calls++
		if done > total || (total == lastTotal && done <= last) {
			t.Errorf("progress %d of %d after %d of %d", done, total, last, lastTotal)
		}
		last, lastTotal = done, total
	}
	if _, err := (MonteCarlo{Paths: 1000, Progress: prog}).Calibrate(chart.DefaultSpec(), 50, iid(1, 0), 0); err != nil || calls == 0 || last != 1000 {
		t.Errorf("progress: %d calls, last %d, %v", calls, last, err)
	}
	// A limit so high that paths hit the exam cap: reported as censored.
	r, err := MonteCarlo{Paths: 20, CapExams: 50}.Delay(chart.DefaultSpec(), 30, iid(1, 0), 0)
	if err != nil || r.Censored != 20 {
		t.Errorf("censoring: %+v %v", r, err)
	}
}

// BenchmarkCalibrate: the speed target is SE <= 2% of the target in <= 2 s
// (bootstrap-style Monte Carlo on 2 cores); see the monitor package for the
// full bootstrap benchmark.
func BenchmarkCalibrate(b *testing.B) {
	spec := chart.DefaultSpec()
	var c Calibration
	for b.Loop() {
		c, _ = MonteCarlo{Seed: 1}.Calibrate(spec, 500, iid(1, 0), 0)
	}
	b.ReportMetric(100*c.SE/500, "SE%")
}
