package evaluation

import (
	"context"
	"math"
	"sort"
)

// Result is the evaluation of one method's flags on a cohort (definitions
// in the package comment).
type Result struct {
	// Diagnosed counts the diagnosed workers with an exam before the
	// diagnosis; Flagged those of them flagged at such an exam.
	Diagnosed, Flagged int
	// FlaggedShare is Flagged/Diagnosed with its Wilson interval.
	FlaggedShare Interval
	// Lead is the lead time from the first signal to the diagnosis.
	Lead Lead
	// Healthy counts the workers never diagnosed; HealthyFlagged those of
	// them flagged at least once, each a false signal.
	Healthy, HealthyFlagged int
	// HealthyFlaggedShare is HealthyFlagged/Healthy with its Wilson
	// interval.
	HealthyFlaggedShare Interval
	// YearsAtRisk sums the healthy workers' years from the first exam to
	// the first signal, or to the last exam when never flagged.
	YearsAtRisk float64
	// FalsePer100 is false signals per 100 worker-years at risk,
	// 100·HealthyFlagged/YearsAtRisk, with its exact Poisson interval
	// (NaN when YearsAtRisk is 0).
	FalsePer100 Interval
	// HealthyCurve is the Kaplan–Meier curve of the healthy workers' years from
	// the first exam to the first signal, censored at the last exam.
	HealthyCurve Curve
}

// Lead describes the lead times of one method: years from the first signal
// to the diagnosis, over every diagnosed worker with an exam before it.
type Lead struct {
	// Curve is the Kaplan–Meier curve of Y = (age at first signal) − (age
	// at diagnosis), negative, with a worker never flagged before the
	// diagnosis censored at Y = 0, the diagnosis.
	Curve Curve
	// Median, Q25 and Q75 are the median and quartiles of the lead time,
	// a worker never flagged counting as less lead than any flagged one:
	// Median = −Curve.Quantile(0.5), Q25 = −Curve.Quantile(0.75) and
	// Q75 = −Curve.Quantile(0.25). Half of the diagnosed workers were
	// flagged about Median years or more before the diagnosis, three in
	// four about Q25 or more, one in four about Q75 or more. Each is NaN
	// ("not reached") when fewer than that share were flagged at all.
	Median, Q25, Q75 float64
	// MedianFlagged is the ordinary median lead among the flagged workers
	// only (NaN when none); it leaves out the workers never flagged.
	MedianFlagged float64
	// Years are the flagged workers' lead times, ascending.
	Years []float64
}

// FlaggedBy returns the share of the diagnosed workers flagged at least
// years before their diagnosis, 1 − S(−years) (years > 0). At years → 0
// it is the share flagged before the diagnosis.
func (l Lead) FlaggedBy(years float64) float64 {
	if l.Curve.N == 0 {
		return math.NaN()
	}
	return 1 - l.Curve.At(-years)
}

// FlaggedWithin returns the Kaplan–Meier estimate of the share of healthy
// workers flagged within years of their first exam, 1 − S(years); NaN
// past the longest follow-up (unless every worker was flagged by then).
func (r Result) FlaggedWithin(years float64) float64 {
	return 1 - r.HealthyCurve.At(years)
}

// Evaluate scores one method: flags[i] says whether the method flags exam
// i (in the order given to NewCohort). Flags of exams at or after a
// diagnosis are ignored. It panics if len(flags) != c.Len() (a programmer
// error) and returns ctx.Err() when ctx is cancelled.
func (c *Cohort) Evaluate(ctx context.Context, flags []bool) (Result, error) {
	if len(flags) != len(c.row) {
		panic("evaluation: Evaluate needs one flag per exam")
	}
	first := make([]float64, len(c.workers))
	for k := range first {
		first[k] = math.Inf(1)
	}
	for i, k := range c.row {
		if i%checkEvery == 0 {
			if err := ctx.Err(); err != nil {
				return Result{}, err
			}
		}
		if k >= 0 && flags[i] && c.age[i] < first[k] {
			first[k] = c.age[i]
		}
	}
	var r Result
	var y []float64
	var ev []bool
	var hy []float64
	var hev []bool
	for k, w := range c.workers {
		s := first[k]
		flagged := !math.IsInf(s, 1)
		switch {
		case !w.diagnosed:
			r.Healthy++
			end := w.last
			if flagged {
				r.HealthyFlagged++
				end = s
			}
			r.YearsAtRisk += end - w.first
			hy = append(hy, end-w.first)
			hev = append(hev, flagged)
		case w.n == 0:
			// Diagnosed at the first exam: nothing to screen.
		default:
			r.Diagnosed++
			if flagged {
				r.Flagged++
				y = append(y, s-w.dxAge)
				ev = append(ev, true)
				r.Lead.Years = append(r.Lead.Years, w.dxAge-s)
			} else {
				y = append(y, 0)
				ev = append(ev, false)
			}
		}
	}
	r.FlaggedShare = Wilson(r.Flagged, r.Diagnosed, Level)
	r.HealthyFlaggedShare = Wilson(r.HealthyFlagged, r.Healthy, Level)
	r.FalsePer100 = PoissonRate(r.HealthyFlagged, r.YearsAtRisk/100, Level)
	r.HealthyCurve = KaplanMeier(hy, hev)
	l := &r.Lead
	l.Curve = KaplanMeier(y, ev)
	l.Median = -l.Curve.Quantile(0.5)
	l.Q25 = -l.Curve.Quantile(0.75)
	l.Q75 = -l.Curve.Quantile(0.25)
	sort.Float64s(l.Years)
	l.MedianFlagged = median(l.Years)
	return r, nil
}

// median is the ordinary median of sorted values (NaN when empty).
func median(s []float64) float64 {
	n := len(s)
	switch {
	case n == 0:
		return math.NaN()
	case n%2 == 1:
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}
