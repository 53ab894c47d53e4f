package monitor

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"veer/functions/chart"
	"veer/functions/serial"
)

// Test world: the serial model and exam spacing of the task's evidence
// setting (phi = 0.7 per year, c = 0.6, gaps uniform on 0.5-3 years).
var truth = serial.Params{Phi: 0.7, C: 0.6}

func uniformGap(rng *rand.Rand) float64 { return 0.5 + 2.5*rng.Float64() }

func gapPool(n int, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 1))
	g := make([]float64, n)
	for i := range g {
		g[i] = uniformGap(rng)
	}
	return g
}

// reference simulates n healthy reference workers with m exams each.
func reference(n, m int, seed uint64) []serial.Series {
	rng := rand.New(rand.NewPCG(seed, 2))
	s := make([]serial.Series, n)
	for i := range s {
		t := make([]float64, m)
		t[0] = 20 + 30*rng.Float64()
		for j := 1; j < m; j++ {
			t[j] = t[j-1] + uniformGap(rng)
		}
		s[i] = serial.Series{Time: t, Z: serial.Simulate(truth, t, rng, nil)}
	}
	return s
}

// realisedATS follows fresh simulated healthy workers (true model, fresh
// gaps) through Run until their first signal and returns the mean time from
// the start of monitoring (the first exam comes one gap after the start, as
// in ATS0 = ARL0 x mean gap) and its standard error.
func realisedATS(t *testing.T, set Settings, h, target float64, n int, seed uint64) (float64, float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 3))
	horizon := 12 * target // P(T > 12 ATS) is about exp(-12)
	var s, s2 float64
	var times, z []float64
	var rows []Row
	for range n {
		times = times[:0]
		for tt := uniformGap(rng); tt < horizon; tt += uniformGap(rng) {
			times = append(times, tt)
		}
		z = serial.Simulate(truth, times, rng, z[:0])
		var err error
		rows, err = Run(set, h, times, z, rows[:0])
		if err != nil {
			t.Fatal(err)
		}
		ft, ok := FirstSignal(rows)
		if !ok {
			t.Fatalf("a fresh worker did not signal within %v years", horizon)
		}
		s += ft
		s2 += ft * ft
	}
	m := s / float64(n)
	return m, math.Sqrt((s2/float64(n) - m*m) / float64(n))
}

// TestRealisedATS is the end-to-end check: limits for a target ATS0 of 50
// years, computed from a simulated reference cohort (phi and c estimated
// from it), give a realised ATS0 within 5% of the target on fresh healthy
// workers from the true model, for both methods and both modes; treating
// correlated z as i.i.d. clearly misses the target.
func TestRealisedATS(t *testing.T) {
	const target = 50.0
	ref := reference(1500, 8, 11)
	est, err := serial.Estimate(context.Background(), ref)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("estimated from the reference: phi %.3f (SE %.3f), c %.3f (SE %.3f); truth phi %.2f c %.2f", est.Phi, est.SEPhi, est.C, est.SEC, truth.Phi, truth.C)
	paths, fresh := 12000, 12000
	if testing.Short() {
		paths, fresh = 4000, 4000
	}
	for _, tc := range []struct {
		mode   Mode
		method Method
	}{{Direct, Normal}, {Direct, Bootstrap}, {Whiten, Normal}, {Whiten, Bootstrap}} {
		set := Settings{Chart: chart.DefaultSpec(), Mode: tc.mode, Serial: est}
		lr, err := Limit(Calibration{Settings: set, Method: tc.method, Reference: ref, Seed: 7, Paths: paths}, target)
		if err != nil {
			t.Fatal(err)
		}
		got, se := realisedATS(t, set, lr.H, target, fresh, 99)
		t.Logf("%s/%s: h = %.3f (SE %.3f, exact %v), calibrated ATS %.2f (SE %.2f); realised ATS on fresh workers %.2f (SE %.2f), %+.1f%% off target",
			tc.mode, tc.method, lr.H, lr.SEH, lr.Exact, lr.ATS, lr.SE, got, se, 100*(got/target-1))
		if math.Abs(got/target-1) > 0.05 {
			t.Errorf("%s/%s: realised ATS %.2f years, target %v (more than 5%% off)", tc.mode, tc.method, got, target)
		}
	}
	// Correlation ignored: z charted as if i.i.d. (exact i.i.d. limit).
	naive := Settings{Chart: chart.DefaultSpec(), Mode: Direct}
	lr, err := Limit(Calibration{Settings: naive, Method: Normal, Reference: ref}, target)
	if err != nil {
		t.Fatal(err)
	}
	got, se := realisedATS(t, naive, lr.H, target, fresh, 99)
	t.Logf("correlation ignored: h = %.3f (exact i.i.d.), realised ATS %.2f (SE %.2f) years for a %v-year target: %+.0f%%", lr.H, got, se, target, 100*(got/target-1))
	if got > 0.85*target {
		t.Errorf("ignoring the correlation should clearly shorten the realised ATS; got %.2f for target %v", got, target)
	}
	// The miss grows with the target (model simulation of the true process
	// at the naive limit, via Delay with shift 0).
	for _, tgt := range []float64{100, 200} {
		lr, err := Limit(Calibration{Settings: naive, Method: Normal, Reference: ref}, tgt)
		if err != nil {
			t.Fatal(err)
		}
		r, err := Delay(Calibration{Settings: Settings{Chart: naive.Chart, Mode: Direct, Serial: truth}, Method: Normal, Reference: ref, Seed: 5}, lr.H, 0, 0)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("correlation ignored, target %v years: h = %.3f, realised ATS %.1f (SE %.1f): %+.0f%%", tgt, lr.H, r.Years, r.SE, 100*(r.Years/tgt-1))
		if r.Years > 0.85*tgt {
			t.Errorf("target %v: ignoring correlation gave ATS %.1f", tgt, r.Years)
		}
	}
}

// TestModeEvidence is the comparison behind DefaultMode, at equal ATS0 with
// the default chart (upward CUSUM, k = 0.5), for sustained shifts of 0.5, 1
// and 2 SD in the readings, present from the first exam (onset 0) or
// starting after 10 healthy years (onset 10), in two settings: moderate
// persistence (phi 0.7 per year, c 0.6) and the persistent personal levels
// typical of blood pressure or lung function (phi 0.95, c 0.8). The figures
// are quoted in doc.go. Screening looks for drifts that start during
// employment after a healthy history, so the default mode must win the
// onset-10 comparison for 0.5 and 1 SD shifts in the persistent setting,
// and must not lose by more than 15% anywhere at onset 10.
func TestModeEvidence(t *testing.T) {
	pool := gapPool(4000, 5)
	other := Whiten
	if DefaultMode == Whiten {
		other = Direct
	}
	for _, par := range []serial.Params{truth, {Phi: 0.95, C: 0.8}} {
		persistent := par.Phi > 0.9
		for _, target := range []float64{20, 50} {
			delays := map[Mode]map[[2]float64]DelayResult{}
			for _, mode := range []Mode{Whiten, Direct} {
				c := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: mode, Serial: par}, Method: Normal, Gaps: pool, Seed: 1}
				lr, err := Limit(c, target)
				if err != nil {
					t.Fatal(err)
				}
				c.Seed = 2
				delays[mode] = map[[2]float64]DelayResult{}
				line := ""
				for _, onset := range []float64{0, 10} {
					for _, d := range []float64{0.5, 1, 2} {
						r, err := Delay(c, lr.H, d, onset)
						if err != nil {
							t.Fatal(err)
						}
						delays[mode][[2]float64{onset, d}] = r
						line += " " + ftoa(r.Years) + " (" + ftoa(r.SE) + ")"
					}
					line += " |"
				}
				t.Logf("phi %.2f c %.2f ATS0 %v y, %s: h %.3f; delay (SE) in years for shifts 0.5/1/2 SD, onset 0 | onset 10 y:%s", par.Phi, par.C, target, mode, lr.H, line)
			}
			for _, d := range []float64{0.5, 1} {
				a, b := delays[DefaultMode][[2]float64{10, d}], delays[other][[2]float64{10, d}]
				if persistent && !(a.Years < b.Years) {
					t.Errorf("phi %.2f, ATS0 %v, shift %v after 10 years: default mode %s delay %.2f not below %s %.2f", par.Phi, target, d, DefaultMode, a.Years, other, b.Years)
				}
				if a.Years > 1.15*b.Years {
					t.Errorf("phi %.2f, ATS0 %v, shift %v after 10 years: default mode %s delay %.2f more than 15%% above %s %.2f", par.Phi, target, d, DefaultMode, a.Years, other, b.Years)
				}
			}
		}
	}
}

func TestLimitCheckValues(t *testing.T) {
	up := chart.DefaultSpec()
	both := up
	both.Side = chart.Both
	for _, tc := range []struct {
		spec   chart.Spec
		target float64
		source string
	}{
		{up, 930.887, "R spc xcusum.arl(0.5,5,0) = 930.887 at h = 5"},
		{both, 465.44, "R spc xcusum.arl(0.5,5,0,sided='two') = 465.44 at h = 5"},
	} {
		for _, mode := range []Mode{Whiten, Direct} {
			lr, err := Limit(Calibration{Settings: Settings{Chart: tc.spec, Mode: mode}, Method: Normal, Gap: 1}, tc.target)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(lr.H-5) > 0.01 || !lr.Exact {
				t.Errorf("%s: limit %.4f (exact %v), want 5.00 (%s)", tc.spec.Side, lr.H, lr.Exact, tc.source)
			}
		}
	}
	// Gap 2 years: the same limit for twice the target in years.
	lr, err := Limit(Calibration{Settings: Settings{Chart: up, Mode: Whiten}, Method: Normal, Gap: 2}, 2*930.887)
	if err != nil || math.Abs(lr.H-5) > 0.01 {
		t.Errorf("gap 2: %+v %v", lr, err)
	}
}

func TestRun(t *testing.T) {
	set := Settings{Chart: chart.DefaultSpec(), Mode: Whiten, Serial: truth}
	// One exam: defined statistic.
	rows, err := Run(set, 4, []float64{40}, []float64{2.5}, nil)
	if err != nil || len(rows) != 1 || rows[0].Innovation != 2.5 || rows[0].Up != 2 || rows[0].Signal {
		t.Errorf("one exam: %+v %v", rows, err)
	}
	// Direct charts z, whiten charts the innovation; the innovation column
	// is filled in both.
	tm, z := []float64{40, 41, 43.5}, []float64{1, 2, 1.5}
	w, _ := Run(set, 4, tm, z, nil)
	set.Mode = Direct
	d, _ := Run(set, 4, tm, z, nil)
	if d[2].Up != 3 || d[1].Innovation != w[1].Innovation || w[1].Innovation >= z[1] {
		t.Errorf("direct %+v whiten %+v", d, w)
	}
	// A shift signals.
	rows, _ = Run(set, 2, []float64{1, 2, 3, 4}, []float64{2, 2, 2, 2}, nil)
	if ft, ok := FirstSignal(rows); !ok || ft != 2 {
		t.Errorf("first signal %v %v", ft, ok)
	}
	bad := []struct {
		name    string
		set     Settings
		h       float64
		time, z []float64
		want    string
	}{
		{"equal times", set, 4, []float64{1, 1}, []float64{0, 0}, "strictly increase"},
		{"decreasing times", set, 4, []float64{2, 1}, []float64{0, 0}, "exam 2"},
		{"length mismatch", set, 4, []float64{1}, []float64{0, 0}, "1 exam times for 2"},
		{"missing z", set, 4, []float64{1, 2}, []float64{0, math.NaN()}, "exam 2"},
		{"bad limit", set, 0, []float64{1}, []float64{0}, "limit"},
		{"unknown mode", Settings{Chart: chart.DefaultSpec(), Mode: "raw"}, 4, []float64{1}, []float64{0}, "mode must be"},
		{"negative allowance", Settings{Chart: chart.Spec{Kind: "cusum", Side: "up", Allowance: -1}, Mode: Direct}, 4, []float64{1}, []float64{0}, "allowance"},
		{"lambda 0", Settings{Chart: chart.Spec{Kind: "ewma", Side: "up"}, Mode: Direct}, 4, []float64{1}, []float64{0}, "lambda"},
		{"lambda 1.5", Settings{Chart: chart.Spec{Kind: "ewma", Side: "up", Lambda: 1.5}, Mode: Direct}, 4, []float64{1}, []float64{0}, "lambda"},
		{"bad phi", Settings{Chart: chart.DefaultSpec(), Mode: Direct, Serial: serial.Params{Phi: 1.2}}, 4, []float64{1}, []float64{0}, "phi"},
	}
	for _, tc := range bad {
		if _, err := Run(tc.set, tc.h, tc.time, tc.z, nil); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want one mentioning %q", tc.name, err, tc.want)
		}
	}
}

func TestLimitBadInput(t *testing.T) {
	ok := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: Direct, Serial: truth}, Method: Normal, Gap: 1.5}
	ref := reference(5, 4, 1)
	tests := []struct {
		name   string
		c      func(Calibration) Calibration
		target float64
		want   string
	}{
		{"zero target", nil, 0, "positive"},
		{"negative target", nil, -20, "positive"},
		{"NaN target", nil, math.NaN(), "positive"},
		{"target below one gap", nil, 1, "at least one mean gap"},
		{"absurd target", nil, 1e7, "at most 10000 years"},
		{"unknown method", func(c Calibration) Calibration { c.Method = "exact"; return c }, 20, "method must be"},
		{"negative gap", func(c Calibration) Calibration { c.Gap = -1; return c }, 20, "gap must be from a day (0.0027 years) to 20 years"},
		{"tiny gap", func(c Calibration) Calibration { c.Gap = 1e-9; return c }, 20, "gap must be from a day (0.0027 years) to 20 years"},
		{"gap of a lifetime", func(c Calibration) Calibration { c.Gap = 25; return c }, 200, "gap must be from a day (0.0027 years) to 20 years"},
		{"NaN gap", func(c Calibration) Calibration { c.Gap = math.NaN(); return c }, 20, "gap must be from a day"},
		{"no gaps known", func(c Calibration) Calibration { c.Gap = 0; return c }, 20, "no gap"},
		{"bad gap in list", func(c Calibration) Calibration { c.Gap, c.Gaps = 0, []float64{1, 0}; return c }, 20, "gap 2"},
		{"bootstrap without reference", func(c Calibration) Calibration { c.Method = Bootstrap; return c }, 20, "at least 10 reference workers"},
		{"bootstrap with 5 workers", func(c Calibration) Calibration { c.Method, c.Reference = Bootstrap, ref; return c }, 20, "at least 10"},
		{"lambda outside (0,1]", func(c Calibration) Calibration {
			c.Settings.Chart = chart.Spec{Kind: "ewma", Side: "both", Lambda: 0}
			return c
		}, 20, "lambda"},
		{"allowance < 0", func(c Calibration) Calibration { c.Settings.Chart.Allowance = -0.5; return c }, 20, "allowance"},
		{"unknown side", func(c Calibration) Calibration { c.Settings.Chart.Side = "upper"; return c }, 20, "side must be"},
	}
	for _, tc := range tests {
		c := ok
		if tc.c != nil {
			c = tc.c(c)
		}
		if _, err := Limit(c, tc.target); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want one mentioning %q", tc.name, err, tc.want)
		}
	}
	// A chart that cannot be that quick: k = 3 needs about 741 exams.
	c := ok
	c.Settings.Mode = Whiten
	c.Settings.Chart.Allowance = 3
	if _, err := Limit(c, 30); err == nil || !strings.Contains(err.Error(), "shorter than this chart can give") {
		t.Errorf("k = 3, target 30 years: %v", err)
	}
	if _, err := Delay(ok, 2, math.Inf(1), 0); err == nil {
		t.Error("infinite shift accepted")
	}
	if _, err := Delay(ok, 2, 1, -3); err == nil {
		t.Error("negative onset accepted")
	}
	if _, err := Delay(ok, 2, 1, 150); err == nil || !strings.Contains(err.Error(), "onset must be from 0 to 100 years") {
		t.Errorf("onset of 150 years: %v", err)
	}
	if _, err := Delay(ok, -2, 1, 0); err == nil {
		t.Error("negative limit accepted")
	}
}

// TestWorkIsBounded: a limit or delay that would simulate more exams than
// the budget is refused before it starts, quickly, with a message that says
// how to ask for less; asking for less then works. A limit that needs no
// simulation (exact) is never refused.
func TestWorkIsBounded(t *testing.T) {
	ref := reference(200, 6, 5)
	daily := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: Direct, Serial: truth}, Method: Normal, Gap: MinGap, Reference: ref, Seed: 1, Horizon: HorizonFollowUp}
	start := time.Now()
	_, err := Limit(daily, 50)
	var we *WorkError
	if !errors.As(err, &we) || !errors.Is(err, ErrTooMuchWork) {
		t.Fatalf("a 50-year target at daily exams: %v; want a *WorkError", err)
	}
	if el := time.Since(start); el > time.Second {
		t.Errorf("the refusal took %v; it must come before any simulation", el)
	}
	for _, want := range []string{"million exams", "4000 paths", "reps=", "longer gap", "0.00274 years", "shorter target (now 50 years)"} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("message %q does not say %q", err, want)
		}
	}
	// Fewer paths, as the message suggests, fit the budget.
	daily.Paths = 200
	daily.MaxExams = 3_000_000
	if _, err := Limit(daily, 5); err != nil {
		t.Errorf("200 paths at daily exams: %v", err)
	}
	// A budget the estimate fell short of stops the simulation itself.
	daily.MaxExams = 1000
	if _, err := Limit(daily, 5); !errors.Is(err, ErrTooMuchWork) {
		t.Errorf("over a tiny budget: %v", err)
	}
	// Delays: the onset counts too.
	d := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: Direct, Serial: truth}, Method: Normal, Gap: MinGap, Seed: 1}
	if _, err := Delay(d, 4, 1, 90); !errors.As(err, &we) || !strings.Contains(err.Error(), "earlier onset (now 90 years)") {
		t.Errorf("a 90-year onset at daily exams: %v", err)
	}
	// A limit so high that paths do not signal: refused, not understated.
	d.Gap, d.Paths, d.MaxExams = 1, 200, 200_000
	if _, err := Delay(d, 60, 0, 0); !errors.Is(err, ErrTooMuchWork) || !strings.Contains(err.Error(), "had not signalled") {
		t.Errorf("a limit no path reaches: %v", err)
	}
	// The exact limit needs no simulation: any target within range.
	exact := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: Whiten}, Method: Normal, Gap: MinGap}
	if r, err := Limit(exact, MaxTarget); err != nil || !r.Exact {
		t.Errorf("an exact limit for %d years at daily exams: %+v, %v", MaxTarget, r, err)
	}
}

// Delays shrink as the shift grows, and Delay at shift 0 reproduces the
// calibrated ATS0 with fresh random numbers; Monte Carlo limits are
// reproducible for a seed.
func TestDelayAndReproducible(t *testing.T) {
	ref := reference(300, 6, 21)
	for _, m := range []Method{Normal, Bootstrap} {
		c := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: Direct, Serial: truth}, Method: m, Reference: ref, Seed: 3}
		lr, err := Limit(c, 30)
		if err != nil {
			t.Fatal(err)
		}
		again, _ := Limit(c, 30)
		if again != lr {
			t.Errorf("%s: same seed gave %+v then %+v", m, lr, again)
		}
		c.Seed = 4
		prev := math.Inf(1)
		for _, d := range []float64{0, 0.5, 1, 2, 3} {
			r, err := Delay(c, lr.H, d, 0)
			if err != nil {
				t.Fatal(err)
			}
			if d == 0 && math.Abs(r.Years-30) > 4*math.Hypot(r.SE, lr.SE) {
				t.Errorf("%s: in-control delay %.2f (SE %.2f), calibrated for 30", m, r.Years, r.SE)
			}
			if r.Years >= prev {
				t.Errorf("%s: delay %.2f at shift %v not below %.2f", m, r.Years, d, prev)
			}
			prev = r.Years
		}
	}
}

// BenchmarkLimitBootstrap: speed target SE <= 2% of the target in <= 2 s
// on 2 cores (reference of 1000 workers x 6 exams, default 4000 paths).
func BenchmarkLimitBootstrap(b *testing.B) {
	ref := reference(1000, 6, 31)
	est, _ := serial.Estimate(context.Background(), ref)
	for _, mode := range []Mode{Direct, Whiten} {
		for _, target := range []float64{100, 1000} {
			c := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: mode, Serial: est}, Method: Bootstrap, Reference: ref, Seed: 1}
			b.Run(fmt.Sprintf("%s/target=%v", mode, target), func(b *testing.B) {
				var lr LimitResult
				for b.Loop() {
					var err error
					if lr, err = Limit(c, target); err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(100*lr.SE/target, "SE%")
			})
		}
	}
}

func BenchmarkLimitNormalDirect(b *testing.B) {
	c := Calibration{Settings: Settings{Chart: chart.DefaultSpec(), Mode: Direct, Serial: truth}, Method: Normal, Gaps: gapPool(2000, 1), Seed: 1}
	var lr LimitResult
	for b.Loop() {
		var err error
		if lr, err = Limit(c, 100); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(100*lr.SE/100, "SE%")
}

// BenchmarkRun charts 100000 workers x 10 exams (1M exams) per iteration,
// the core of screening a 1M-row file (the CSV part is the CLI's).
func BenchmarkRun(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	tm := make([]float64, 10)
	for j := range tm {
		tm[j] = 30 + 1.5*float64(j)
	}
	z := serial.Simulate(truth, tm, rng, nil)
	set := Settings{Chart: chart.DefaultSpec(), Mode: DefaultMode, Serial: truth}
	var rows []Row
	for b.Loop() {
		for range 100000 {
			var err error
			if rows, err = Run(set, 2, tm, z, rows[:0]); err != nil {
				b.Fatal(err)
			}
		}
	}
}
