package evaluation

import (
	"math"
	"sort"
)

// MatchTarget returns the target at which a chart's measured false-signal
// rate equals rate, from a sweep: the chart gave rates[i] false signals per
// 100 worker-years at targets[i] years. Targets are taken in ascending
// order (rates fall as the target grows, up to sampling noise); the first
// pair of neighbouring targets whose rates bracket rate is interpolated
// linearly in log(target) against log(rate) — straight when the rate is
// inversely proportional to the target, as a calibrated chart's is — or
// against the rate itself when one of the two rates is 0. ok is false
// when no pair brackets rate (it lies outside the swept rates), when rate
// is not a finite number >= 0, or when the slices differ in length.
func MatchTarget(targets, rates []float64, rate float64) (target float64, ok bool) {
	if len(targets) != len(rates) || !(rate >= 0) || math.IsInf(rate, 0) {
		return math.NaN(), false
	}
	idx := make([]int, 0, len(targets))
	for i := range targets {
		if targets[i] > 0 && !math.IsInf(targets[i], 0) && rates[i] >= 0 && !math.IsInf(rates[i], 0) {
			idx = append(idx, i)
		}
	}
	sort.SliceStable(idx, func(a, b int) bool { return targets[idx[a]] < targets[idx[b]] })
	for j, a := range idx {
		if rates[a] == rate {
			return targets[a], true
		}
		if j+1 == len(idx) {
			break
		}
		b := idx[j+1]
		lo, hi := math.Min(rates[a], rates[b]), math.Max(rates[a], rates[b])
		if !(rate > lo && rate < hi) {
			continue
		}
		ta, tb := math.Log(targets[a]), math.Log(targets[b])
		var f float64
		if rates[a] > 0 && rates[b] > 0 {
			f = (math.Log(rate) - math.Log(rates[a])) / (math.Log(rates[b]) - math.Log(rates[a]))
		} else {
			f = (rate - rates[a]) / (rates[b] - rates[a])
		}
		return math.Exp(ta + f*(tb-ta)), true
	}
	return math.NaN(), false
}
