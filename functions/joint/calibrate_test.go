package joint

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"veer/functions/chart"
	"veer/functions/limit"
	"veer/functions/monitor"
)

// Without a model: the textbook MEWMA limit for i.i.d. N(0, I) vectors at
// gaps of one year, and its delay, against R spc.
func TestTextbookLimit(t *testing.T) {
	for _, tc := range []struct {
		p      int
		want   float64
		source string
	}{
		{2, 8.6336, "R spc 0.6.7 mewma.crit(0.1, 200, 2) = 8.633581"},
		{3, 10.78365, "R spc 0.6.7 mewma.crit(0.1, 200, 3) = 10.78365"},
	} {
		c := Calibration{Settings: Settings{Chart: Spec{Kind: MEWMA, Lambda: 0.1, Unit: 1}, Mode: monitor.Whiten, Model: Independent(tc.p)}, Method: monitor.Normal, Gap: 1}
		lr, err := Limit(c, 200)
		if err != nil || !lr.Exact || math.Abs(lr.H-tc.want) > 5e-5 {
			t.Errorf("p %d: %+v %v, want exact %.4f (%s)", tc.p, lr, err, tc.want, tc.source)
		}
		// Two years between exams: the same limit for twice the target.
		c.Gap, c.Settings.Chart.Unit = 2, 2
		lr2, err := Limit(c, 400)
		if err != nil || !lr2.Exact || math.Abs(lr2.H-lr.H) > 1e-9 {
			t.Errorf("p %d at gap 2: %+v %v", tc.p, lr2, err)
		}
	}
	c := Calibration{Settings: Settings{Chart: Spec{Kind: MEWMA, Lambda: 0.1, Unit: 1}, Mode: monitor.Whiten, Model: Independent(2)}, Method: monitor.Normal, Gap: 1}
	d, err := Delay(c, 8.633581, []float64{1, 0}, 0)
	// R spc 0.6.7 mewma.arl(0.1, 8.633581, 2, delta = 1, r = 40) = 10.12143.
	if err != nil || math.Abs(d.Years-10.12143) > 1e-4 {
		t.Errorf("delay at a 1-SD shift: %+v %v, want 10.12143 (R spc mewma.arl, r = 40)", d, err)
	}
}

// The Monte Carlo machinery reproduces exact limits: the joint MEWMA on
// i.i.d. vectors at resampled (here constant) gaps, one marker's directed
// chart against the single-marker reflected EWMA, and Any over one marker
// against the single-marker CUSUM.
func TestMonteCarloMatchesExact(t *testing.T) {
	ones := []float64{1, 1, 1}
	mewma := Calibration{Settings: Settings{Chart: Spec{Kind: MEWMA, Lambda: 0.1, Unit: 1}, Mode: monitor.Whiten, Model: Independent(3)}, Method: monitor.Normal, Gaps: ones, Seed: 1, Paths: 6000}
	lr, err := Limit(mewma, 150)
	if err != nil || lr.Exact {
		t.Fatalf("%+v %v", lr, err)
	}
	arl, _ := limit.MEWMAARL(0.1, lr.H, 3, 0)
	if math.Abs(arl-150) > 4*lr.SE {
		t.Errorf("MEWMA: Monte Carlo limit %.4f (SE %.4f) has exact ARL %.2f for a target of 150 (SE %.2f)", lr.H, lr.SEH, arl, lr.SE)
	}
	one := func(spec Spec) Calibration {
		return Calibration{Settings: Settings{Chart: spec, Mode: monitor.Whiten, Model: Independent(1)}, Method: monitor.Normal, Gaps: ones, Seed: 2, Paths: 6000}
	}
	lr, err = Limit(one(Spec{Kind: EWMA, Sides: []chart.Side{chart.Down}, Lambda: 0.2, Unit: 1}), 100)
	if err != nil {
		t.Fatal(err)
	}
	arl, _ = limit.ARL(chart.Spec{Kind: chart.EWMA, Side: chart.Down, Lambda: 0.2, Unit: 1}, math.Sqrt(lr.H), 0, 1)
	if math.Abs(arl-100) > 4*lr.SE {
		t.Errorf("directed, one marker: limit %.4f has the single-marker EWMA's exact ARL %.2f for a target of 100 (SE %.2f)", lr.H, arl, lr.SE)
	}
	lr, err = Limit(one(Spec{Kind: Any, Sides: []chart.Side{chart.Both}, Allowance: 0.5}), 200)
	if err != nil {
		t.Fatal(err)
	}
	arl, _ = limit.ARL(chart.Spec{Kind: chart.CUSUM, Side: chart.Both, Allowance: 0.5}, lr.H, 0, 1)
	if math.Abs(arl-200) > 4*lr.SE {
		t.Errorf("any, one marker: limit %.4f has the two-sided CUSUM's exact ARL %.2f for a target of 200 (SE %.2f)", lr.H, arl, lr.SE)
	}
}

// Limits are reproducible for a seed; delays shrink as the shift grows and
// at shift 0 reproduce the target; a shift against every harmful direction
// is not seen by the directed chart.
func TestLimitDelayReproducible(t *testing.T) {
	model := testModel()
	ref := simulateCohort(model, 300, 6, 5, []float64{0.1, 0.3, 0.2})
	sides := []chart.Side{chart.Up, chart.Up, chart.Down}
	for _, method := range []monitor.Method{monitor.Normal, monitor.Bootstrap} {
		c := Calibration{Settings: Settings{Chart: Spec{Kind: CUSUM, Sides: sides, Allowance: 0.5}, Mode: monitor.Whiten, Model: model},
			Method: method, Reference: ref, Seed: 3, Horizon: monitor.HorizonLong}
		lr, err := Limit(c, 30)
		if err != nil {
			t.Fatal(err)
		}
		again, _ := Limit(c, 30)
		if again != lr {
			t.Errorf("%s: same seed gave %+v then %+v", method, lr, again)
		}
		c.Seed = 4
		prev := math.Inf(1)
		for _, d := range []float64{0, 0.5, 1, 2} {
			r, err := Delay(c, lr.H, []float64{d, d, -d}, 0)
			if err != nil {
				t.Fatal(err)
			}
			if d == 0 && math.Abs(r.Years-30) > 4*math.Hypot(r.SE, lr.SE) {
				t.Errorf("%s: in-control delay %.2f (SE %.2f), calibrated for 30", method, r.Years, r.SE)
			}
			if r.Years >= prev {
				t.Errorf("%s: delay %.2f at shift %v not below %.2f", method, r.Years, d, prev)
			}
			prev = r.Years
		}
		wrong, err := Delay(c, lr.H, []float64{-1, -1, 1}, 0)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: limit %.3f (SE %.3f); delay of a 1-SD shift against every harmful direction %.1f years", method, lr.H, lr.SEH, wrong.Years)
		if wrong.Years < 30 {
			t.Errorf("%s: a shift the harmless way was flagged after %.1f years, sooner than a false signal", method, wrong.Years)
		}
	}
}

func TestLimitBadInput(t *testing.T) {
	model := testModel()
	ref := simulateCohort(model, 8, 4, 1, nil)
	ok := Calibration{Settings: Settings{Chart: DefaultSpec(3), Mode: monitor.Whiten, Model: model}, Method: monitor.Normal, Gap: 1.5}
	for _, tc := range []struct {
		name   string
		c      func(Calibration) Calibration
		target float64
		want   string
	}{
		{"zero target", nil, 0, "positive"},
		{"NaN target", nil, math.NaN(), "positive"},
		{"target below one gap", nil, 1, "at least one mean gap"},
		{"absurd target", nil, 1e7, "at most 10000 years"},
		{"method must be", func(c Calibration) Calibration { c.Method = "exact"; return c }, 20, "method must be"},
		{"serial must be", func(c Calibration) Calibration { c.Settings.Mode = "raw"; return c }, 20, "serial must be"},
		{"horizon must be", func(c Calibration) Calibration { c.Horizon = "ever"; return c }, 20, "horizon must be"},
		{"no model", func(c Calibration) Calibration { c.Settings.Model = nil; return c }, 20, "no model"},
		{"negative gap", func(c Calibration) Calibration { c.Gap = -1; return c }, 20, "gap must be from a day"},
		{"tiny gap", func(c Calibration) Calibration { c.Gap = 1e-9; return c }, 20, "gap must be from a day (0.0027 years) to 20 years"},
		{"too much work", func(c Calibration) Calibration { c.Gap, c.Paths = monitor.MinGap, 100_000; return c }, 500, "ask for less"},
		{"no gaps known", func(c Calibration) Calibration { c.Gap = 0; return c }, 20, "no gap"},
		{"bootstrap, 8 workers", func(c Calibration) Calibration { c.Method, c.Reference = monitor.Bootstrap, ref; return c }, 20, "at least 10"},
		{"follow-up without reference", func(c Calibration) Calibration { c.Horizon = monitor.HorizonFollowUp; return c }, 20, "at least two exams"},
		{"sides", func(c Calibration) Calibration { c.Settings.Chart.Sides = []chart.Side{chart.Up}; return c }, 20, "3 markers need 3 sides"},
		{"reference shape", func(c Calibration) Calibration {
			c.Reference = []Series{{Time: []float64{1, 2}, Z: [][]float64{{0, 1}}}}
			return c
		}, 20, "reference worker 1"},
	} {
		c := ok
		if tc.c != nil {
			c = tc.c(c)
		}
		if _, err := Limit(c, tc.target); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v, want an error about %q", tc.name, err, tc.want)
		}
	}
	if _, err := Delay(ok, 5, []float64{1, 1}, 0); err == nil || !strings.Contains(err.Error(), "3 shifts") {
		t.Errorf("two shifts for three markers: %v", err)
	}
	if _, err := Delay(ok, -1, []float64{1, 1, 1}, 0); err == nil {
		t.Error("negative limit accepted")
	}
	if _, err := Delay(ok, 5, []float64{1, 1, 1}, 101); err == nil || !strings.Contains(err.Error(), "onset must be from 0 to 100 years") {
		t.Errorf("onset of 101 years: %v", err)
	}
	small := ok
	small.Paths, small.MaxExams = 100, 50_000
	if _, err := Delay(small, 60, []float64{0, 0, 0}, 0); !errors.Is(err, monitor.ErrTooMuchWork) {
		t.Errorf("a limit no path reaches: %v", err)
	}
	var se *SidesError
	c := ok
	c.Settings.Chart.Sides = nil
	if _, err := Limit(c, 20); !errors.As(err, &se) || !errors.Is(err, ErrSides) {
		t.Errorf("no sides: %v", err)
	}
}

// A cancelled calibration stops with limit.ErrStopped and is not an answer.
func TestLimitStop(t *testing.T) {
	n := 0
	c := Calibration{Settings: Settings{Chart: DefaultSpec(3), Mode: monitor.Whiten, Model: testModel()}, Method: monitor.Normal, Gap: 1,
		Stop: func() bool { n++; return n > 30 }}
	if _, err := Limit(c, 100); !errors.Is(err, limit.ErrStopped) {
		t.Errorf("stopped calibration: %v", err)
	}
	n = 0
	if _, err := Delay(c, 10, []float64{1, 1, 1}, 0); !errors.Is(err, limit.ErrStopped) {
		t.Errorf("stopped delay: %v", err)
	}
}

// realisedFollowUp screens fresh healthy workers followed like the
// reference (8 exams at gaps 0.5-3 years, the same missing markers) and
// returns worker-years of exams per false signal (a worker is at risk from
// its first exam to its first signal or last exam) and its relative SE.
func realisedFollowUp(t *testing.T, set Settings, h float64, fresh []Series) (float64, float64) {
	t.Helper()
	var years float64
	signals := 0
	for _, w := range fresh {
		rows, err := Run(set, h, w)
		if err != nil {
			t.Fatal(err)
		}
		end := w.Time[len(w.Time)-1]
		for j, r := range rows {
			if r.Signal {
				end = w.Time[j]
				signals++
				break
			}
		}
		years += end - w.Time[0]
	}
	return years / float64(signals), 1 / math.Sqrt(float64(signals))
}

// realisedLong follows fresh healthy workers through unending exams (gaps
// 0.5-3 years, each marker missing with probability miss) until their first
// signal and returns the mean time from the start of monitoring (the first
// exam one gap after it) and its SE.
func realisedLong(t *testing.T, set Settings, h, target float64, n int, miss float64, seed uint64) (float64, float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 9))
	ch, err := set.NewChart()
	if err != nil {
		t.Fatal(err)
	}
	p := len(set.Model.Markers)
	var s, s2 float64
	for range n {
		var times []float64
		for tt := uniformGap(rng); tt < 12*target; tt += uniformGap(rng) {
			times = append(times, tt)
		}
		w := set.Model.Simulate(times, func(j, k int) bool { return rng.Float64() >= miss || k == 0 }, rng)
		u := set.Model.Innovations(w)
		x := make([]float64, p)
		ch.Reset()
		ft := math.NaN()
		for j := range times {
			for k := range p {
				x[k] = u[k][j]
				if set.Mode == monitor.Direct {
					x[k] = w.Z[k][j]
				}
			}
			gap := 0.0
			if j > 0 {
				gap = times[j] - times[j-1]
			}
			if ch.Next(gap, x) > h {
				ft = times[j]
				break
			}
		}
		if math.IsNaN(ft) {
			t.Fatalf("a fresh worker did not signal within %v years", 12*target)
		}
		s += ft
		s2 += ft * ft
	}
	m := s / float64(n)
	return m, math.Sqrt((s2/float64(n) - m*m) / float64(n))
}

// TestRealisedRate is the end-to-end check of the promise behind a target:
// limits computed from a simulated reference cohort (serial models and
// correlations estimated from it, 20% of readings missing per marker) give
// a realised false-signal rate within 10% of the target on fresh healthy
// workers from the true model, for both methods and both horizons, for the
// default chart and MEWMA.
func TestRealisedRate(t *testing.T) {
	truth := testModel()
	miss := []float64{0, 0.2, 0.2}
	ref := simulateCohort(truth, 1500, 8, 11, miss)
	est, err := Estimate(context.Background(), truth.Markers, ref, nil)
	if err != nil {
		t.Fatal(err)
	}
	for k, s := range est.Serial {
		t.Logf("%s: phi %.3f (truth %.2f), c %.3f (truth %.2f)", est.Markers[k], s.Phi, truth.Serial[k].Phi, s.C, truth.Serial[k].C)
	}
	t.Logf("innovation correlations %.3f (SE %.3f), %.3f (SE %.3f), %.3f (SE %.3f); truth 0.4, -0.25, -0.2",
		est.Innovation.R[0][1], est.Innovation.SE[0][1], est.Innovation.R[0][2], est.Innovation.SE[0][2], est.Innovation.R[1][2], est.Innovation.SE[1][2])
	fresh := simulateCohort(truth, 20000, 8, 12, miss)
	nLong := 6000
	if testing.Short() {
		fresh, nLong = fresh[:6000], 2000
	}
	const followTarget, longTarget = 20.0, 50.0
	for _, spec := range []Spec{DefaultSpec(3), {Kind: MEWMA, Lambda: 0.1, Unit: 1}} {
		if sided(spec.Kind) {
			spec.Sides = []chart.Side{chart.Up, chart.Up, chart.Down}
		}
		set := Settings{Chart: spec, Mode: monitor.Whiten, Model: est}
		for _, method := range []monitor.Method{monitor.Normal, monitor.Bootstrap} {
			c := Calibration{Settings: set, Method: method, Reference: ref, Seed: 7, Horizon: monitor.HorizonFollowUp}
			lr, err := Limit(c, followTarget)
			if err != nil {
				t.Fatal(err)
			}
			got, rse := realisedFollowUp(t, set, lr.H, fresh)
			t.Logf("%s/%s, follow-up: limit %.3f (SE %.3f, ATS SE %.1f%%); realised %.2f worker-years per false signal for %g (rel. SE %.1f%%): %+.1f%%",
				spec.Kind, method, lr.H, lr.SEH, 100*lr.SE/followTarget, got, followTarget, 100*rse, 100*(got/followTarget-1))
			if math.Abs(got/followTarget-1) > 0.10 {
				t.Errorf("%s/%s, follow-up: realised %.2f, target %g", spec.Kind, method, got, followTarget)
			}
			c.Horizon = monitor.HorizonLong
			lr, err = Limit(c, longTarget)
			if err != nil {
				t.Fatal(err)
			}
			got, se := realisedLong(t, set, lr.H, longTarget, nLong, 0.2, 13)
			t.Logf("%s/%s, long: limit %.3f (SE %.3f, ATS SE %.1f%%); realised ATS %.2f years for %g (SE %.2f): %+.1f%%",
				spec.Kind, method, lr.H, lr.SEH, 100*lr.SE/longTarget, got, longTarget, se, 100*(got/longTarget-1))
			if math.Abs(got/longTarget-1) > 0.10 {
				t.Errorf("%s/%s, long: realised %.2f, target %g", spec.Kind, method, got, longTarget)
			}
		}
	}
}
