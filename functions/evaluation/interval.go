package evaluation

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Level is the confidence level of every interval veer reports for an
// evaluation: 95%, common practice.
const Level = 0.95

// Interval is an estimate with a two-sided confidence interval.
type Interval struct {
	Estimate, Low, High float64
}

// nan is an interval with no estimate.
func nan() Interval { return Interval{math.NaN(), math.NaN(), math.NaN()} }

// Wilson returns the share k/n with its Wilson score interval at the given
// level (Wilson, E. B. (1927), "Probable inference, the law of succession,
// and statistical inference", Journal of the American Statistical
// Association 22, 209–212):
//
//	centre ± half = (k + z²/2)/(n + z²) ± z/(n + z²)·√(k(n−k)/n + z²/4),
//
// z the standard normal quantile at (1 + level)/2. Unlike the Wald
// interval it stays inside [0, 1] and is not empty at k = 0 or k = n. All
// three values are NaN when n is 0. It panics unless 0 <= k <= n and
// 0 < level < 1 (programmer errors).
func Wilson(k, n int, level float64) Interval {
	if k < 0 || k > n || !(level > 0 && level < 1) {
		panic("evaluation: Wilson needs 0 <= k <= n and a level in (0, 1)")
	}
	if n == 0 {
		return nan()
	}
	z := distuv.UnitNormal.Quantile((1 + level) / 2)
	fk, fn, z2 := float64(k), float64(n), z*z
	centre := (fk + z2/2) / (fn + z2)
	half := z / (fn + z2) * math.Sqrt(fk*(fn-fk)/fn+z2/4)
	lo, hi := centre-half, centre+half
	// At k = 0 and k = n the bounds are exactly 0 and 1; rounding may miss.
	if k == 0 {
		lo = 0
	}
	if k == n {
		hi = 1
	}
	return Interval{Estimate: fk / fn, Low: lo, High: hi}
}

// PoissonRate returns the rate k/exposure per unit of exposure with the
// exact interval of Garwood, F. (1936), "Fiducial limits for the Poisson
// distribution", Biometrika 28, 437–442:
//
//	low = χ²_{α/2}(2k)/2 / exposure,  high = χ²_{1−α/2}(2k+2)/2 / exposure,
//
// α = 1 − level and χ²_q(ν) the q-quantile of the chi-squared distribution
// with ν degrees of freedom; low is 0 when k is 0. All three values are NaN
// when exposure is not positive. It panics unless k >= 0 and
// 0 < level < 1 (programmer errors).
func PoissonRate(k int, exposure, level float64) Interval {
	if k < 0 || !(level > 0 && level < 1) {
		panic("evaluation: PoissonRate needs k >= 0 and a level in (0, 1)")
	}
	if !(exposure > 0) || math.IsInf(exposure, 0) {
		return nan()
	}
	alpha := 1 - level
	lo := 0.0
	if k > 0 {
		lo = distuv.ChiSquared{K: float64(2 * k)}.Quantile(alpha/2) / 2
	}
	hi := distuv.ChiSquared{K: float64(2*k + 2)}.Quantile(1-alpha/2) / 2
	return Interval{Estimate: float64(k) / exposure, Low: lo / exposure, High: hi / exposure}
}
