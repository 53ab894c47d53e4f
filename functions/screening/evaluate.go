package screening

import (
	"math"
	"sort"

	"veer/functions/evaluation"
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
//
// MedianDelay is over detected cases only, so a rule that catches only the
// easy cases can look quick. The fairer figures count every case at risk
// (no signal before onset): DetectedShare, and the Kaplan–Meier estimate
// (Kaplan, E. L. and Meier, P. (1958), "Nonparametric estimation from
// incomplete observations", JASA 53, 457–481; recalled from memory) of the
// distribution of years from onset to signal in which an undetected case is
// censored at its follow-up after onset (last exam − onset), because it
// might have been caught had it been followed longer:
//
//	S(t) = ∏_{t_i <= t} (1 − d_i/n_i),
//
// t_i the distinct delays, d_i the detections at t_i and n_i the cases
// still at risk (delay or follow-up >= t_i); censoring is taken to be
// unrelated to the drift, as follow-up length is in the demo scenario.
// MedianDelayKM is the median of that curve by R's survival rule (see
// evaluation.Curve.Quantile): the smallest t_i with S(t_i) <= 0.5, except
// that when S(t_i) is exactly 0.5 it is the midpoint of t_i and the next
// delay, or the longest follow-up when no delay follows (so that with no
// undetected case it equals the ordinary median of the delays); it is
// +Inf when S never falls to 0.5 (fewer than half are caught within
// follow-up). DetectedBy(t) = 1 − S(t). The curve is computed by package
// evaluation, which also scores methods against diagnoses rather than
// known onsets.
type Evaluation struct {
	Workers, Cases, NonCases int
	// Flagged counts workers with any signal; TrueFlagged the cases among them.
	Flagged, TrueFlagged int
	// Detected counts cases signalled at or after onset.
	Detected int
	// EarlySignals counts cases whose first signal came before onset.
	EarlySignals int
	// CasesAtRisk = Cases − EarlySignals: cases with no signal before onset.
	CasesAtRisk int
	// DetectedShare = Detected / CasesAtRisk (NaN when no case is at risk).
	DetectedShare float64
	// MedianDelay is the median years from onset to signal over detected
	// cases (NaN when none).
	MedianDelay float64
	// MedianDelayKM is the Kaplan–Meier median years from onset to signal
	// over the cases at risk, undetected ones censored at their follow-up
	// after onset (+Inf when not reached, NaN when no case is at risk).
	MedianDelayKM float64
	// Delays are the detected cases' years from onset to signal and
	// FollowUp the undetected cases' years from onset to their last exam,
	// both sorted ascending; DetectedBy reads them.
	Delays, FollowUp []float64
	// FalseSignals and YearsAtRisk give FalsePer100 = 100·FalseSignals/YearsAtRisk.
	FalseSignals int
	YearsAtRisk  float64
	FalsePer100  float64
}

// Evaluate scores per-exam signals (true where a rule or chart flags the
// exam) against the truth. Workers missing from truth count as non-cases.
// It panics if signal and exams differ in length (a programmer error).
func Evaluate(exams []Exam, signal []bool, truth map[string]Truth) Evaluation {
	if len(signal) != len(exams) {
		panic("screening: Evaluate needs one signal per exam")
	}
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
			ev.CasesAtRisk++
			if !math.IsInf(s.firstAfterOnset, 1) {
				ev.Detected++
				ev.Delays = append(ev.Delays, s.firstAfterOnset-t.Onset)
			} else {
				ev.FollowUp = append(ev.FollowUp, math.Max(0, s.last-t.Onset))
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
	sort.Float64s(ev.Delays)
	sort.Float64s(ev.FollowUp)
	ev.MedianDelay = median(ev.Delays)
	ev.DetectedShare = math.NaN()
	ev.MedianDelayKM = math.NaN()
	if ev.CasesAtRisk > 0 {
		ev.DetectedShare = float64(ev.Detected) / float64(ev.CasesAtRisk)
		ev.MedianDelayKM = ev.curve().Quantile(0.5)
		if math.IsNaN(ev.MedianDelayKM) {
			ev.MedianDelayKM = math.Inf(1)
		}
	}
	if ev.YearsAtRisk > 0 {
		ev.FalsePer100 = 100 * float64(ev.FalseSignals) / ev.YearsAtRisk
	}
	return ev
}

// curve returns the Kaplan–Meier curve of years from onset to signal:
// detections are events, undetected cases censored at their follow-up.
func (ev Evaluation) curve() evaluation.Curve {
	times := append(append([]float64(nil), ev.Delays...), ev.FollowUp...)
	events := make([]bool, len(times))
	for i := range ev.Delays {
		events[i] = true
	}
	return evaluation.KaplanMeier(times, events)
}

// DetectedBy returns the Kaplan–Meier estimate of the share of cases at
// risk signalled within years of onset, 1 − S(years) (NaN when no case is
// at risk). Beyond the longest follow-up it stays at its last value.
func (ev Evaluation) DetectedBy(years float64) float64 {
	c := ev.curve()
	if c.N == 0 {
		return math.NaN()
	}
	return 1 - c.At(math.Min(years, c.Last))
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
