package evaluation_test

import (
	"math"
	"testing"

	"veer/functions/evaluation"
)

func TestMatchTarget(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name           string
		targets, rates []float64
		rate           float64
		want           float64
		ok             bool
	}{
		// A calibrated chart: rate = 100/target, straight in log-log, so
		// interpolation is exact: rate 4 per 100 is a 25-year target.
		{"calibrated", []float64{5, 10, 20, 50, 100}, []float64{20, 10, 5, 2, 1}, 4, 25, true},
		{"order does not matter", []float64{100, 5, 50, 20, 10}, []float64{1, 20, 2, 5, 10}, 4, 25, true},
		{"at a swept target", []float64{10, 20}, []float64{10, 5}, 5, 20, true},
		{"at the first target", []float64{10, 20}, []float64{10, 5}, 10, 10, true},
		// Between 20 (rate 3) and 50 (rate 0): linear in the rate,
		// log-linear in the target: f = (1.5−3)/(0−3) = 1/2, so
		// exp((ln 20 + ln 50)/2) = sqrt(1000).
		{"zero rate", []float64{20, 50}, []float64{3, 0}, 1.5, math.Sqrt(1000), true},
		{"above the swept rates", []float64{10, 20}, []float64{10, 5}, 12, nan, false},
		{"below the swept rates", []float64{10, 20}, []float64{10, 5}, 1, nan, false},
		{"one target", []float64{10}, []float64{10}, 10, 10, true},
		{"one target, other rate", []float64{10}, []float64{10}, 3, nan, false},
		{"no targets", nil, nil, 3, nan, false},
		{"lengths differ", []float64{10, 20}, []float64{10}, 10, nan, false},
		{"NaN rate", []float64{10, 20}, []float64{10, 5}, nan, nan, false},
		{"negative rate", []float64{10, 20}, []float64{10, 5}, -1, nan, false},
		// Noisy sweep, not monotone: the first bracketing pair wins.
		{"noisy", []float64{10, 20, 50}, []float64{6, 4, 5}, 4.5, 10 * math.Pow(2, math.Log(4.5/6)/math.Log(4.0/6)), true},
		// A NaN rate (no healthy years) at one target is skipped.
		{"NaN in sweep", []float64{10, 20, 40}, []float64{10, nan, 2.5}, 5, 20, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := evaluation.MatchTarget(tc.targets, tc.rates, tc.rate)
			if ok != tc.ok || !same(got, tc.want) && !(math.Abs(got-tc.want) < 1e-9*tc.want) {
				t.Errorf("MatchTarget = %v, %v; want %v, %v", got, ok, tc.want, tc.ok)
			}
		})
	}
}
