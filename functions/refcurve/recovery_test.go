package refcurve

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// TestNormalityMatchesScipy compares DAgostinoPearson with scipy.stats
// normaltest / skewtest / kurtosistest / skew / kurtosis on the samples in
// testdata/normality_fixture.json (made by
// testdata/make_normality_fixture.py; the file names the scipy version).
// Same closed-form formulas in double precision: 1e-9 relative (p-values
// as small as 1e-139 included) leaves room only for rounding.
func TestNormalityMatchesScipy(t *testing.T) {
	raw, err := os.ReadFile("testdata/normality_fixture.json")
	if err != nil {
		t.Fatal(err)
	}
	var fx struct {
		Source string `json:"source"`
		Cases  []struct {
			Name           string    `json:"name"`
			Data           []float64 `json:"data"`
			Statistic      float64   `json:"statistic"`
			PValue         float64   `json:"p_value"`
			ZSkewness      float64   `json:"z_skewness"`
			ZKurtosis      float64   `json:"z_kurtosis"`
			Skewness       float64   `json:"skewness"`
			ExcessKurtosis float64   `json:"excess_kurtosis"`
		} `json:"cases"`
	}
	if err := json.Unmarshal(raw, &fx); err != nil {
		t.Fatal(err)
	}
	if len(fx.Cases) == 0 || fx.Source == "" {
		t.Fatal("empty fixture")
	}
	close := func(got, want float64) bool {
		return math.Abs(got-want) <= 1e-9*math.Abs(want)+1e-300
	}
	for _, c := range fx.Cases {
		t.Run(c.Name, func(t *testing.T) {
			got, err := DAgostinoPearson(c.Data)
			if err != nil {
				t.Fatal(err)
			}
			for _, v := range []struct {
				name      string
				got, want float64
			}{
				{"K2", got.Statistic, c.Statistic},
				{"p", got.PValue, c.PValue},
				{"z skewness", got.ZSkewness, c.ZSkewness},
				{"z kurtosis", got.ZKurtosis, c.ZKurtosis},
				{"skewness", got.Skewness, c.Skewness},
				{"excess kurtosis", got.ExcessKurtosis, c.ExcessKurtosis},
			} {
				if !close(v.got, v.want) {
					t.Errorf("%s = %.15g, scipy %.15g", v.name, v.got, v.want)
				}
			}
			if got.N != len(c.Data) {
				t.Errorf("N = %d", got.N)
			}
		})
	}
	if _, err := DAgostinoPearson([]float64{1, 2, 3}); err == nil {
		t.Error("3 values accepted")
	}
	if _, err := DAgostinoPearson([]float64{1, 1, 1, 1, 1, 1, 1, 1, 1}); err == nil {
		t.Error("constant values accepted")
	}
}

// integratedSqError is the mean over the model grid of (μ̂ - μ)², the
// discretised integrated squared error per unit time.
func integratedSqError(t *testing.T, times, est []float64, g int) float64 {
	t.Helper()
	var s float64
	for k, tk := range times {
		d := est[k] - trueMean(tk, g)
		s += d * d
	}
	return s / float64(len(times))
}

// TestRecovery fits synthetic cohorts whose true mean and sd curves are
// known (helpers_test.go: y ~ N(μ(t), σ(t)²) at every exam, correlated
// within a worker) and checks the fitted curves across the whole range.
//
// Stated errors, from the size of the cohorts: with ~1,500 workers x 6
// exams per group, the local linear mean at a chosen bandwidth h ≈ 2-4
// years rests on roughly 350-700 exams from 100-200 workers, whose
// correlation (60% persistent) leaves a standard error near σ/√150 ≈ 0.08σ
// inside the range and up to twice that at the ends, where local linear
// uses one-sided data. We require |μ̂ - μ| <= 0.25σ everywhere (~3 standard
// errors at the ends) and a root-mean-square error over the grid <= 0.08σ.
// The sd curve is a smooth of squared residuals: a variance estimated from
// m effectively independent squared residuals has relative sd √(2/m), the
// sd half that; with m ≈ 150 inside the range this is ~0.06, and at the
// ends, with one-sided data and local linear's boundary variance, about
// twice that. We require |σ̂/σ - 1| <= 0.15 at every grid time and an RMS
// over the grid <= 0.05. The true curves have the shapes of real age
// curves: a trend plus a wave of 4 units over ~40 years for the mean; an
// sd growing linearly (group F) or rising steeply around 45 (group M).
func TestRecovery(t *testing.T) {
	for _, tc := range []struct {
		name string
		seed uint64
		opt  Options
	}{
		{"cross-validated", 11, Options{}},
		{"other cohort", 12, Options{}},
		{"fixed bandwidths", 13, Options{Bandwidth: 3, SDBandwidth: 5}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			groups := []string{"F", "M"}
			m, err := Fit(cohortRows(tc.seed, 1500, 6, groups), tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			for gi, g := range groups {
				c, err := m.curve(g)
				if err != nil {
					t.Fatal(err)
				}
				var worstMean, worstSD, msMean, msSD float64
				for k, tk := range c.Time {
					sd := trueSD(tk, gi)
					em := (c.Mean[k] - trueMean(tk, gi)) / sd
					es := c.SD[k]/sd - 1
					worstMean = math.Max(worstMean, math.Abs(em))
					worstSD = math.Max(worstSD, math.Abs(es))
					msMean += em * em
					msSD += es * es
				}
				rmsMean := math.Sqrt(msMean / float64(len(c.Time)))
				rmsSD := math.Sqrt(msSD / float64(len(c.Time)))
				dg := c.Diagnostics
				t.Logf("%s: h=%.2f, h_sd=%.2f; mean error max %.3fσ rms %.3fσ; sd ratio error max %.3f rms %.3f; coverage %.3f",
					g, dg.MeanBandwidth, dg.SDBandwidth, worstMean, rmsMean, worstSD, rmsSD, dg.Coverage95)
				if worstMean > 0.25 || rmsMean > 0.08 {
					t.Errorf("%s: mean curve error max %.3fσ, rms %.3fσ", g, worstMean, rmsMean)
				}
				if worstSD > 0.15 || rmsSD > 0.05 {
					t.Errorf("%s: sd curve error max %.3f, rms %.3f", g, worstSD, rmsSD)
				}
				// With the right mean and sd, 95% of the reference exams
				// fall in the central band (binomial sd for ~8,000 exams
				// is 0.0025; allow 0.01 for the fitted curves).
				if math.Abs(dg.Coverage95-0.95) > 0.01 {
					t.Errorf("%s: coverage %.4f", g, dg.Coverage95)
				}
				if dg.Normality == nil || dg.Normality.PValue < 0.001 {
					t.Errorf("%s: normal data failed the normality check: %+v", g, dg.Normality)
				}
			}
		})
	}
}

// TestCVNearISEOptimal: on cohorts with known truth, the bandwidth chosen
// by leave-one-worker-out cross-validation must be close to the one that
// minimises the true integrated squared error of the mean curve over the
// same data, and lose little accuracy against it. Cross-validated
// bandwidths converge to the optimum slowly (relative error of order
// n^(-1/10); Härdle, Hall & Marron 1988, JASA 83:86-95), so we ask for a
// factor of 2 in h and at most 50% more squared error.
func TestCVNearISEOptimal(t *testing.T) {
	for _, seed := range []uint64{21, 22, 23} {
		rows := cohortRows(seed, 1200, 6, []string{""})
		m, err := Fit(rows, Options{SDBandwidth: 5})
		if err != nil {
			t.Fatal(err)
		}
		c := &m.Curves[0]
		x := make([]float64, len(rows))
		y := make([]float64, len(rows))
		for i, r := range rows {
			x[i], y[i] = r.Time, r.Value
		}
		ise := func(h float64) float64 {
			est, err := curveOnGrid(x, y, h, c.TimeMin, c.TimeMax, len(c.Time))
			if err != nil {
				t.Fatal(err)
			}
			return integratedSqError(t, c.Time, est, 0)
		}
		bestH, bestISE := 0.0, math.Inf(1)
		for h := 0.5; h < 20; h *= 1.05 {
			if e := ise(h); e < bestISE {
				bestH, bestISE = h, e
			}
		}
		hcv := c.Diagnostics.MeanBandwidth
		cvISE := ise(hcv)
		t.Logf("seed %d: CV h=%.2f (ISE %.4f), ISE-optimal h=%.2f (ISE %.4f)", seed, hcv, cvISE, bestH, bestISE)
		if hcv < bestH/2 || hcv > 2*bestH {
			t.Errorf("seed %d: CV bandwidth %.3g is not within a factor 2 of the ISE-optimal %.3g", seed, hcv, bestH)
		}
		if cvISE > 1.5*bestISE {
			t.Errorf("seed %d: ISE at the CV bandwidth %.4g is more than 1.5 times the best %.4g", seed, cvISE, bestISE)
		}
	}
}
