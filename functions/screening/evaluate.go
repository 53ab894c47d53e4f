package screening

import (
	"math"
	"sort"
)

// Truth says whether a worker of a labelled cohort truly drifts and from
// which age.
type Truth struct {
	Affected bool
	Onset    float64
}

// Evaluation summarises signals on a labelled cohort, in the manner of
// process-monitoring evaluations (Qiu, P., Xia, Z. and You, L. (2020),
// "Process monitoring ROC curve for evaluating dynamic screening methods",
// Technometrics 62(2), 236–248 — details recalled from memory).
//
// A signal at or after a case's onset is a detection, with delay = age at
// the first such signal − onset. A first signal of a non-case is a false
// signal; the false-signal rate is false signals per 100 worker-years at
// risk, where a non-case is at risk from the first exam to the first
// signal or, without one, to the last exam. A case whose first signal came
// before onset is counted apart (EarlySignals) and enters neither figure,
// so delays are conditional on no false signal before the drift.
type Evaluation struct {
	Workers, Cases, NonCases int
	// Flagged counts workers with any signal; TrueFlagged the cases among them.
	Flagged, TrueFlagged int
	// Detected counts cases signalled at or after onset.
	Detected int
	// EarlySignals counts cases whose first signal came before onset.
	EarlySignals int
	// MedianDelay is the median years from onset to signal over detected
	// cases (NaN when none).
	MedianDelay float64
	// FalseSignals and YearsAtRisk give FalsePer100 = 100·FalseSignals/YearsAtRisk.
	FalseSignals int
	YearsAtRisk  float64
	FalsePer100  float64
}

// Evaluate scores per-exam signals (true where a rule or chart flags the
// exam) against the truth. Workers missing from truth count as non-cases.
func Evaluate(exams []Exam, signal []bool, truth map[string]Truth) Evaluation {
	type span struct {
		first, last, firstSignal, firstAfterOnset float64
		signalled                                 bool
	}
	spans := map[string]*span{}
	order := []string{}
	for i, e := range exams {
		s, ok := spans[e.Worker]
		if !ok {
			s = &span{first: e.Time, last: e.Time, firstSignal: math.Inf(1), firstAfterOnset: math.Inf(1)}
			spans[e.Worker] = s
			order = append(order, e.Worker)
		}
		s.first = math.Min(s.first, e.Time)
		s.last = math.Max(s.last, e.Time)
		if signal[i] {
			s.signalled = true
			s.firstSignal = math.Min(s.firstSignal, e.Time)
			if t := truth[e.Worker]; t.Affected && e.Time >= t.Onset {
				s.firstAfterOnset = math.Min(s.firstAfterOnset, e.Time)
			}
		}
	}
	var ev Evaluation
	var delays []float64
	for _, w := range order {
		s := spans[w]
		t := truth[w]
		ev.Workers++
		if s.signalled {
			ev.Flagged++
		}
		if t.Affected {
			ev.Cases++
			if s.signalled {
				ev.TrueFlagged++
			}
			if s.firstSignal < t.Onset {
				// A signal before onset is not a detection of the drift.
				ev.EarlySignals++
				continue
			}
			if !math.IsInf(s.firstAfterOnset, 1) {
				ev.Detected++
				delays = append(delays, s.firstAfterOnset-t.Onset)
			}
			continue
		}
		ev.NonCases++
		end := s.last
		if s.signalled {
			ev.FalseSignals++
			end = s.firstSignal
		}
		ev.YearsAtRisk += end - s.first
	}
	ev.MedianDelay = median(delays)
	if ev.YearsAtRisk > 0 {
		ev.FalsePer100 = 100 * float64(ev.FalseSignals) / ev.YearsAtRisk
	}
	return ev
}

func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}
