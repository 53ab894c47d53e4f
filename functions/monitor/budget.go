package monitor

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"veer/functions/limit"
)

// ErrTooMuchWork matches (errors.Is) a computation refused or stopped
// because it would simulate more exams than Calibration.MaxExams allows.
var ErrTooMuchWork = limit.ErrTooMuchWork

// WorkError is a limit or delay that would simulate more exams than its
// budget. Its message says how to ask for less.
type WorkError struct {
	// Exams is the estimated number of exams to simulate, Max the budget.
	Exams, Max int64
	// Paths is the number of simulated paths (the reps option), MeanGap
	// the mean years between exams, Target the target (0 for a delay) and
	// Onset the onset of a delay's shift (years).
	Paths                  int
	MeanGap, Target, Onset float64
}

func (e *WorkError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "this would simulate about %s exams (%d paths of %s each), more than the %s one computation may; ask for less: ",
		roundCount(float64(e.Exams)), e.Paths, roundCount(float64(e.Exams)/float64(max(e.Paths, 1))), roundCount(float64(e.Max)))
	perPath := float64(e.Exams) / float64(max(e.Paths, 1))
	if fit := int(float64(e.Max) / perPath); fit >= 100 && fit < e.Paths {
		scale := int(math.Pow(10, math.Floor(math.Log10(float64(fit)))-1))
		fmt.Fprintf(&b, "fewer paths (reps=%d or less), ", fit/scale*scale)
	}
	fmt.Fprintf(&b, "a longer gap between exams (now %.3g years)", e.MeanGap)
	if e.Target > 0 {
		fmt.Fprintf(&b, " or a shorter target (now %g years)", e.Target)
	}
	if e.Onset > 0 {
		fmt.Fprintf(&b, " or an earlier onset (now %g years)", e.Onset)
	}
	return b.String()
}

// Unwrap makes errors.Is(err, ErrTooMuchWork) true.
func (e *WorkError) Unwrap() error { return ErrTooMuchWork }

// roundCount writes a count with about two significant digits in words a
// reader takes in at once: 48,000, 3.2 million, 310 billion.
func roundCount(x float64) string {
	unit := func(v float64, name string) string {
		if v >= 10 {
			return fmt.Sprintf("%.0f %s", v, name)
		}
		return fmt.Sprintf("%.1f %s", v, name)
	}
	switch {
	case x >= 1e9:
		return unit(x/1e9, "billion")
	case x >= 1e6:
		return unit(x/1e6, "million")
	case x >= 1e4:
		return fmt.Sprintf("%d,000", int(math.Round(x/1e3)))
	}
	return fmt.Sprintf("%d", int(math.Round(x)))
}

// DefaultPaths is the number of Monte Carlo paths when none is given
// (limit.MonteCarlo's default).
const DefaultPaths = 4000

// Budget bounds the work of a Monte Carlo limit or delay: it estimates the
// exams the simulation would step through before it starts, refuses what
// would exceed MaxExams with a *WorkError saying how to ask for less, and
// hands limit.MonteCarlo the same budget as a hard stop. Packages with
// their own Monte Carlo calibrations (several markers) use it too.
type Budget struct {
	// Paths simulated (0: DefaultPaths) and the most exams all of them may
	// step through (0: DefaultMaxExams).
	Paths    int
	MaxExams int64
	// MeanGap is the mean years between exams.
	MeanGap float64
	// WorkerExams holds, for the follow-up horizon, the number of exams of
	// each reference worker a path chains (a worker's first exam counts
	// no time); nil for one unending worker.
	WorkerExams []int
}

func (b Budget) paths() int {
	if b.Paths > 0 {
		return b.Paths
	}
	return DefaultPaths
}

func (b Budget) max() int64 {
	if b.MaxExams > 0 {
		return b.MaxExams
	}
	return DefaultMaxExams
}

// MonteCarlo returns the simulation settings within the budget.
func (b Budget) MonteCarlo(seed uint64, progress func(done, total int), stop func() bool) limit.MonteCarlo {
	return limit.MonteCarlo{Paths: b.paths(), Seed: seed, Progress: progress, Stop: stop, MaxExams: b.max()}
}

// examsPerYear is how many exams a simulated path steps through per year
// it counts: one per mean gap, and for the follow-up horizon one more per
// worker.
func (b Budget) examsPerYear() float64 {
	r := 1 / b.MeanGap
	if len(b.WorkerExams) > 0 {
		var exams float64
		for _, n := range b.WorkerExams {
			exams += float64(n)
		}
		if per := exams / float64(len(b.WorkerExams)); per > 1 {
			r *= per / (per - 1)
		}
	}
	return r
}

// check refuses a simulation whose paths each cover years on average.
func (b Budget) check(years, target, onset float64) error {
	est := float64(b.paths()) * math.Max(1, years*b.examsPerYear())
	if est <= float64(b.max()) {
		return nil
	}
	return &WorkError{Exams: int64(math.Min(est, math.MaxInt64/2)), Max: b.max(), Paths: b.paths(), MeanGap: b.MeanGap, Target: target, Onset: onset}
}

// CheckLimit refuses a limit calibration for target years that would
// exceed the budget: a pilot of up to 400 paths over 4 x target and the
// main pass over about 1.4 x target (see limit.MonteCarlo.Calibrate).
func (b Budget) CheckLimit(target float64) error {
	pilot := float64(min(b.paths(), 400)) / float64(b.paths())
	return b.check(1.5*target+pilot*4*target, target, 0)
}

// CheckDelay refuses a delay whose paths would step through more exams up
// to the onset than the budget holds. The paths are capped
// (DelayCapExams) so that together they stay within it.
func (b Budget) CheckDelay(onset float64) error {
	return b.check(onset+b.MeanGap, 0, onset)
}

// DelayCapExams is the exams each path of a delay may step through.
func (b Budget) DelayCapExams() int {
	return int(min(200_000, b.max()/int64(b.paths())))
}

// CheckCensored refuses a delay whose paths too often (more than 1 in
// 100) reached their cap without a signal: the mean would be understated.
func (b Budget) CheckCensored(r limit.RunLength) error {
	if r.Censored*100 <= r.Paths {
		return nil
	}
	capExams := b.DelayCapExams()
	return fmt.Errorf("in %d of %d simulated paths the chart had not signalled after %d exams (about %.0f years), so the delay would be understated; ask for less: fewer paths (reps), a larger shift or a lower limit: %w",
		r.Censored, r.Paths, capExams, float64(capExams)*b.MeanGap, ErrTooMuchWork)
}

// Stopped words a simulation stopped at the budget's hard stop (the
// estimate fell short) like a refusal; other errors pass unchanged.
func (b Budget) Stopped(err error, target, onset float64) error {
	if errors.Is(err, limit.ErrTooMuchWork) {
		return &WorkError{Exams: b.max() + 1, Max: b.max(), Paths: b.paths(), MeanGap: b.MeanGap, Target: target, Onset: onset}
	}
	return err
}
