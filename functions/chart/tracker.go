package chart

import "math"

// Tracker follows one chart over a stream of exams without a limit. For each
// exam, Next returns the critical limit g_n: the chart (started with its head
// start, never restarted) signals at exam n for every limit h < g_n and not for
// h >= g_n. Hence the first signal for limit h is at the first n with g_n > h,
// and that exam number is non-decreasing in h for a fixed stream, which makes
// Monte Carlo limits with common random numbers monotone in h.
//
// Without a head start g_n is the statistic itself. With head start fraction
// f the statistic started at f*h is, by the Lindley recursion,
//
//	S_n(h) = max(R_n, A_n*f*h + B_n)
//
// where R_n is the chart started at 0, B_n the same recursion without the
// reflection at 0, and A_n the product of the decay factors (1 for CUSUM,
// prod(1-w_j) for EWMA). So S_n(h) > h iff h < max(R_n, B_n/(1-f*A_n)) = g_n.
type Tracker struct {
	spec  Spec
	scale float64
	first bool
	// upper and lower sides: R (reflected), B (unreflected), A (decay product)
	rU, bU, rD, bD, a float64
	e                 float64 // two-sided EWMA value
}

// NewTracker returns a Tracker for spec, or the error of spec.Validate.
func NewTracker(spec Spec) (*Tracker, error) {
	if err := spec.Validate(); err != nil {
		return nil, err
	}
	t := &Tracker{spec: spec}
	if spec.Kind == EWMA {
		t.scale = 1 / spec.EWMAScale()
	}
	t.Reset()
	return t, nil
}

// Reset starts a new stream.
func (t *Tracker) Reset() {
	t.first = true
	t.rU, t.bU, t.rD, t.bD, t.a, t.e = 0, 0, 0, 0, 1, 0
}

// Next consumes one exam, gap years after the previous one (ignored for the
// first exam), with charted value u, and returns the critical limit g_n.
func (t *Tracker) Next(gap, u float64) float64 {
	s := &t.spec
	f := s.HeadStart
	var g float64
	if s.Kind == CUSUM {
		g = math.Inf(-1)
		if s.Side != Down {
			t.rU = math.Max(0, t.rU+u-s.Allowance)
			t.bU += u - s.Allowance
			g = math.Max(g, crit(t.rU, t.bU, 1, f))
		}
		if s.Side != Up {
			t.rD = math.Max(0, t.rD-u-s.Allowance)
			t.bD += -u - s.Allowance
			g = math.Max(g, crit(t.rD, t.bD, 1, f))
		}
		t.first = false
		return g
	}
	w := s.Lambda
	if !t.first {
		w = s.Weight(gap)
	}
	t.first = false
	x := u * t.scale
	switch s.Side {
	case Up:
		t.a *= 1 - w
		t.rU = math.Max(0, (1-w)*t.rU+w*x)
		t.bU = (1-w)*t.bU + w*x
		g = crit(t.rU, t.bU, t.a, f)
	case Down:
		t.a *= 1 - w
		t.rD = math.Max(0, (1-w)*t.rD-w*x)
		t.bD = (1-w)*t.bD - w*x
		g = crit(t.rD, t.bD, t.a, f)
	default:
		t.e = (1-w)*t.e + w*x
		g = math.Abs(t.e)
	}
	return g
}

func crit(r, b, a, f float64) float64 {
	if f == 0 {
		return r
	}
	return math.Max(r, b/(1-f*a))
}
