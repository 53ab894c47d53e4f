package serial

import (
	"fmt"
	"math"
	"veer/functions/refcurve"

	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Diagnostics summarise the innovations of the reference workers under a
// fitted model, for a reviewer to judge whether they are i.i.d. N(0,1).
type Diagnostics struct {
	// Workers and Exams counted; Pairs of consecutive innovations within
	// workers used for the lag-1 check.
	Workers, Exams, Pairs int
	// Mean and SD of all innovations (expected 0 and 1).
	Mean, SD float64
	// Lag1 is the Pearson correlation of consecutive innovations within
	// workers and Lag1P its two-sided p-value (t test with Pairs-2 degrees
	// of freedom); NaN with fewer than 3 pairs.
	Lag1, Lag1P float64
	// Skewness and ExcessKurtosis of the innovations (biased moment
	// estimates); Normality is the D'Agostino-Pearson K^2 statistic and
	// NormalityP its p-value (chi-squared, 2 df); NaN with fewer than 20
	// innovations.
	Skewness, ExcessKurtosis float64
	Normality, NormalityP    float64
}

// Diagnose computes the innovations of each reference worker under p and
// checks them for lag-1 correlation and normality.
func Diagnose(p Params, s []Series) (Diagnostics, error) {
	var d Diagnostics
	if err := p.Validate(); err != nil {
		return d, err
	}
	var all, xs, ys []float64
	var u []float64
	for i, w := range s {
		var err error
		u, err = Innovations(p, w.Time, w.Z, u[:0])
		if err != nil {
			return d, fmt.Errorf("reference worker %d, %w", i+1, err)
		}
		if len(u) == 0 {
			continue
		}
		d.Workers++
		all = append(all, u...)
		for j := 1; j < len(u); j++ {
			xs = append(xs, u[j-1])
			ys = append(ys, u[j])
		}
	}
	d.Exams, d.Pairs = len(all), len(xs)
	if d.Exams < 2 {
		return d, fmt.Errorf("only %d reference exams; diagnostics need at least 2: %w", d.Exams, ErrTooFewExams)
	}
	d.Mean, d.SD = stat.MeanStdDev(all, nil)
	d.Lag1, d.Lag1P = math.NaN(), math.NaN()
	if d.Pairs >= 3 {
		d.Lag1, d.Lag1P = PearsonTest(xs, ys)
	}
	d.Skewness, d.ExcessKurtosis = math.NaN(), math.NaN()
	d.Normality, d.NormalityP = math.NaN(), math.NaN()
	if d.Exams >= 20 {
		d.Normality, d.NormalityP, d.Skewness, d.ExcessKurtosis = NormalityTest(all)
	}
	return d, nil
}

// PearsonTest returns the Pearson correlation r of x and y and the two-sided
// p-value of r = 0 from t = r sqrt((n-2)/(1-r^2)) with n-2 degrees of freedom
// (common practice; the same test as scipy.stats.pearsonr).
func PearsonTest(x, y []float64) (r, p float64) {
	n := float64(len(x))
	r = stat.Correlation(x, y, nil)
	if math.Abs(r) >= 1 {
		return r, 0
	}
	t := r * math.Sqrt((n-2)/(1-r*r))
	p = 2 * distuv.StudentsT{Mu: 0, Sigma: 1, Nu: n - 2}.Survival(math.Abs(t))
	return r, p
}

// NormalityTest is the D'Agostino-Pearson omnibus test, the test
// scipy.stats.normaltest computes (formulas and references at
// refcurve.DAgostinoPearson, which it calls):
//
//	K^2 = Z(sqrt b1)^2 + Z(b2)^2 ~ chi^2_2 under normality.
//
// It returns K^2, its p-value, the sample skewness sqrt(b1) = m3/m2^1.5 and
// the excess kurtosis b2 - 3 = m4/m2^2 - 3; all NaN when the test cannot be
// computed (fewer than 8 values, or values that are not finite or all equal).
func NormalityTest(x []float64) (k2, p, skew, exkurt float64) {
	nt, err := refcurve.DAgostinoPearson(x)
	if err != nil {
		return math.NaN(), math.NaN(), math.NaN(), math.NaN()
	}
	return nt.Statistic, nt.PValue, nt.Skewness, nt.ExcessKurtosis
}
