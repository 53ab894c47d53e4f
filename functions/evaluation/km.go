package evaluation

import (
	"cmp"
	"math"
	"slices"
	"sort"
)

// Curve is a Kaplan–Meier estimate of a survival function (Kaplan, E. L.
// and Meier, P. (1958), "Nonparametric estimation from incomplete
// observations", Journal of the American Statistical Association 53,
// 457–481):
//
//	S(t) = ∏_{t_i <= t} (1 − d_i/n_i),
//
// t_i the distinct event times, d_i the events at t_i and n_i the
// observations still at risk at t_i (time >= t_i). An observation censored
// at the same time as an event counts as at risk at that time, the usual
// convention (as R's survival and statsmodels' SurvfuncRight do).
type Curve struct {
	// Times are the distinct event times, ascending; Surv[i] = S(Times[i]).
	Times, Surv []float64
	// AtRisk[i] and Events[i] are n_i and d_i.
	AtRisk, Events []int
	// N is the number of observations and Last the largest observed time,
	// event or censored (NaN when N is 0).
	N    int
	Last float64
}

// KaplanMeier estimates the survival curve of observations that end at
// times[i], with an event when event[i] is true and censored otherwise.
// It panics if the slices differ in length (a programmer error); times must
// not be NaN.
func KaplanMeier(times []float64, event []bool) Curve {
	if len(times) != len(event) {
		panic("evaluation: KaplanMeier needs one event flag per time")
	}
	n := len(times)
	c := Curve{N: n, Last: math.NaN()}
	if n == 0 {
		return c
	}
	type obs struct {
		t     float64
		event bool
	}
	o := make([]obs, n)
	for i, t := range times {
		o[i] = obs{t, event[i]}
	}
	slices.SortFunc(o, func(a, b obs) int { return cmp.Compare(a.t, b.t) })
	c.Last = o[n-1].t
	atRisk := n
	s := 1.0
	for i := 0; i < n; {
		t := o[i].t
		d, all := 0, 0
		for i < n && o[i].t == t {
			if o[i].event {
				d++
			}
			all++
			i++
		}
		if d > 0 {
			s *= 1 - float64(d)/float64(atRisk)
			c.Times = append(c.Times, t)
			c.Surv = append(c.Surv, s)
			c.AtRisk = append(c.AtRisk, atRisk)
			c.Events = append(c.Events, d)
		}
		atRisk -= all
	}
	return c
}

// At returns S(t): 1 before the first event time, the curve's value from
// each event time on. Past the largest observed time the estimate is
// undefined unless the curve has reached 0, and At returns NaN; it also
// returns NaN for an empty curve.
func (c Curve) At(t float64) float64 {
	if c.N == 0 || math.IsNaN(t) {
		return math.NaN()
	}
	k := sort.SearchFloat64s(c.Times, t) // first event time >= t
	if k < len(c.Times) && c.Times[k] == t {
		k++
	}
	s := 1.0
	if k > 0 {
		s = c.Surv[k-1]
	}
	if t > c.Last && s > 0 {
		return math.NaN()
	}
	return s
}

// survTol is how close S must be to 1 − p to count as equal to it (S is a
// product of fractions, so exact equality is lost to rounding); it is the
// tolerance R's survival package uses, sqrt of the double epsilon.
const survTol = 1.4901161193847656e-08

// Quantile returns the p-quantile of the estimated distribution (0 < p < 1)
// by the rule of R's survival package (quantile.survfit, version 3.5): the
// smallest event time t_i with 1 − S(t_i) >= p; when 1 − S equals p on a
// flat stretch, the midpoint of that stretch, that is of t_i and the next
// event time, or of t_i and the largest observed time when no event
// follows. It returns NaN when 1 − S never reaches p (the quantile is "not
// reached") and for p outside (0, 1).
func (c Curve) Quantile(p float64) float64 {
	if !(p > 0 && p < 1) {
		return math.NaN()
	}
	for i, s := range c.Surv {
		f := 1 - s
		if f < p-survTol {
			continue
		}
		if f <= p+survTol {
			if i+1 < len(c.Times) {
				return (c.Times[i] + c.Times[i+1]) / 2
			}
			return (c.Times[i] + c.Last) / 2
		}
		return c.Times[i]
	}
	return math.NaN()
}
