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
// MedianDelayKM is the smallest t_i with S(t_i) <= 0.5, except that when
// S(t_i) is exactly 0.5 it is the midpoint of t_i and the next delay (so
// that with no undetected case it equals the ordinary median of the
// delays); it is +Inf when S never falls to 0.5 (fewer than half are
// caught within follow-up). DetectedBy(t) = 1 − S(t).
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
		ev.MedianDelayKM = kmMedian(ev.survival())
	}
	if ev.YearsAtRisk > 0 {
		ev.FalsePer100 = 100 * float64(ev.FalseSignals) / ev.YearsAtRisk
	}
	return ev
}

// kmPoint is one step of a Kaplan–Meier curve: S(t) = s from t on.
type kmPoint struct{ t, s float64 }

// survival returns the Kaplan–Meier curve of years from onset to signal,
// one point per distinct delay. A follow-up equal to a delay counts as
// still at risk at that delay (the usual convention).
func (ev Evaluation) survival() []kmPoint {
	d, c := ev.Delays, ev.FollowUp
	atRisk := len(d) + len(c)
	var out []kmPoint
	s := 1.0
	i, j := 0, 0
	for i < len(d) {
		t := d[i]
		for j < len(c) && c[j] < t {
			j++
			atRisk--
		}
		n := 0
		for i < len(d) && d[i] == t {
			i++
			n++
		}
		s *= 1 - float64(n)/float64(atRisk)
		atRisk -= n
		out = append(out, kmPoint{t, s})
	}
	return out
}

// kmMedian returns the median of a Kaplan–Meier curve as documented on
// Evaluation. S is a product of fractions, so "exactly 0.5" allows for
// rounding (1e-12).
func kmMedian(km []kmPoint) float64 {
	const eps = 1e-12
	for i, p := range km {
		if p.s > 0.5+eps {
			continue
		}
		if p.s >= 0.5-eps && i+1 < len(km) {
			return (p.t + km[i+1].t) / 2
		}
		return p.t
	}
	return math.Inf(1)
}

// DetectedBy returns the Kaplan–Meier estimate of the share of cases at
// risk signalled within years of onset, 1 − S(years) (NaN when no case is
// at risk). Beyond the longest follow-up it stays at its last value.
func (ev Evaluation) DetectedBy(years float64) float64 {
	if len(ev.Delays)+len(ev.FollowUp) == 0 {
		return math.NaN()
	}
	s := 1.0
	for _, p := range ev.survival() {
		if p.t > years {
			break
		}
		s = p.s
	}
	return 1 - s
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
