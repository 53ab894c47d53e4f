package evaluation_test

import (
	"math"
	"testing"

	"veer/functions/evaluation"
)

// TestKaplanMeierEdges checks the curve and its quantiles on small cases
// worked by hand; the quantile rule is R survival's (quantile.survfit),
// whose behaviour on the first three cases was checked with R 4 and
// survival 3.5.3 (quantile(survfit(Surv(time, status) ~ 1))).
func TestKaplanMeierEdges(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name      string
		times     []float64
		event     []bool
		wantTimes []float64
		wantSurv  []float64
		quantiles [3]float64 // p = 0.25, 0.5, 0.75
		at        map[float64]float64
		wantLast  float64
	}{
		{
			// R: times 1 2 3 4 all events: 1.5 2.5 3.5.
			name: "all events", times: []float64{4, 2, 3, 1}, event: []bool{true, true, true, true},
			wantTimes: []float64{1, 2, 3, 4}, wantSurv: []float64{0.75, 0.5, 0.25, 0},
			quantiles: [3]float64{1.5, 2.5, 3.5}, at: map[float64]float64{0.5: 1, 1: 0.75, 3.9: 0.25, 4: 0, 100: 0}, wantLast: 4,
		},
		{
			// R: 1 2 2+ 3 4+: S = .8, .6, .3 -> 2, 3, NA.
			name: "censored", times: []float64{1, 2, 2, 3, 4}, event: []bool{true, true, false, true, false},
			wantTimes: []float64{1, 2, 3}, wantSurv: []float64{0.8, 0.6, 0.3},
			quantiles: [3]float64{2, 3, nan}, at: map[float64]float64{2.5: 0.6, 4: 0.3, 4.01: nan}, wantLast: 4,
		},
		{
			// R: −5 −3 events, 0+ 0+: −4, −1.5, NA (the median is the
			// midpoint of −3 and the last time 0).
			name: "censored at the end", times: []float64{-5, -3, 0, 0}, event: []bool{true, true, false, false},
			wantTimes: []float64{-5, -3}, wantSurv: []float64{0.75, 0.5},
			quantiles: [3]float64{-4, -1.5, nan}, at: map[float64]float64{-6: 1, -5: 0.75, 0: 0.5, 0.1: nan}, wantLast: 0,
		},
		{
			// An event and a censoring at the same time: the censored one is
			// still at risk: S(2) = 1 − 1/3.
			name: "tie of event and censoring", times: []float64{2, 2, 5}, event: []bool{true, false, true},
			wantTimes: []float64{2, 5}, wantSurv: []float64{2.0 / 3, 0},
			quantiles: [3]float64{2, 5, 5}, at: map[float64]float64{2: 2.0 / 3}, wantLast: 5,
		},
		{
			name: "all censored", times: []float64{1, 2}, event: []bool{false, false},
			quantiles: [3]float64{nan, nan, nan}, at: map[float64]float64{1.5: 1, 3: nan}, wantLast: 2,
		},
		{
			name: "empty", quantiles: [3]float64{nan, nan, nan}, at: map[float64]float64{0: nan}, wantLast: nan,
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			c := evaluation.KaplanMeier(tc.times, tc.event)
			if len(c.Times) != len(tc.wantTimes) {
				t.Fatalf("times %v, want %v", c.Times, tc.wantTimes)
			}
			for i := range c.Times {
				if c.Times[i] != tc.wantTimes[i] || !same(c.Surv[i], tc.wantSurv[i]) {
					t.Errorf("curve %v %v, want %v %v", c.Times, c.Surv, tc.wantTimes, tc.wantSurv)
				}
			}
			if !same(c.Last, tc.wantLast) || c.N != len(tc.times) {
				t.Errorf("last %v of %d, want %v of %d", c.Last, c.N, tc.wantLast, len(tc.times))
			}
			for i, p := range []float64{0.25, 0.5, 0.75} {
				if got := c.Quantile(p); !same(got, tc.quantiles[i]) {
					t.Errorf("Quantile(%v) = %v, want %v", p, got, tc.quantiles[i])
				}
			}
			for x, want := range tc.at {
				if got := c.At(x); !same(got, want) {
					t.Errorf("At(%v) = %v, want %v", x, got, want)
				}
			}
			for _, p := range []float64{0, 1, -1, nan} {
				if got := c.Quantile(p); !math.IsNaN(got) {
					t.Errorf("Quantile(%v) = %v, want NaN", p, got)
				}
			}
		})
	}
}

// TestIntervalEdges checks the intervals at their edges. Values from
// statsmodels 0.13.5 proportion_confint(k, n, method="wilson") and
// scipy.stats.chi2.ppf.
func TestIntervalEdges(t *testing.T) {
	for _, tc := range []struct {
		k, n        int
		est, lo, hi float64
	}{
		{0, 4, 0, 0, 0.4898908364545974},
		{4, 4, 1, 0.5101091635454025, 1},
		{1, 3, 1.0 / 3, 0.06149194472039626, 0.7923403991979523},
		{1, 2, 0.5, 0.09453120573423068, 0.9054687942657693},
	} {
		iv := evaluation.Wilson(tc.k, tc.n, evaluation.Level)
		if !same(iv.Estimate, tc.est) || math.Abs(iv.Low-tc.lo) > 1e-12 || math.Abs(iv.High-tc.hi) > 1e-12 {
			t.Errorf("Wilson(%d, %d) = %+v, want %v %v %v", tc.k, tc.n, iv, tc.est, tc.lo, tc.hi)
		}
	}
	if iv := evaluation.Wilson(0, 0, evaluation.Level); !math.IsNaN(iv.Estimate) || !math.IsNaN(iv.Low) || !math.IsNaN(iv.High) {
		t.Errorf("Wilson(0, 0) = %+v, want NaN", iv)
	}
	// Garwood: 2 events in 0.11 units: chi2.ppf(0.025, 4)/2/0.11 and
	// chi2.ppf(0.975, 6)/2/0.11.
	iv := evaluation.PoissonRate(2, 0.11, evaluation.Level)
	if math.Abs(iv.Low-2.201902532217863) > 1e-9 || math.Abs(iv.High-65.67897879749054) > 1e-9 || !same(iv.Estimate, 2/0.11) {
		t.Errorf("PoissonRate(2, 0.11) = %+v", iv)
	}
	for _, e := range []float64{0, -1, math.Inf(1), math.NaN()} {
		if iv := evaluation.PoissonRate(1, e, evaluation.Level); !math.IsNaN(iv.Estimate) {
			t.Errorf("PoissonRate(1, %v) = %+v, want NaN", e, iv)
		}
	}
	for _, f := range []func(){
		func() { evaluation.Wilson(3, 2, evaluation.Level) },
		func() { evaluation.Wilson(-1, 2, evaluation.Level) },
		func() { evaluation.Wilson(1, 2, 1) },
		func() { evaluation.PoissonRate(-1, 1, evaluation.Level) },
		func() { evaluation.KaplanMeier([]float64{1}, nil) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Error("a programmer error did not panic")
				}
			}()
			f()
		}()
	}
}
