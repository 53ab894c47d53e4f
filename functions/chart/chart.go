package chart

import (
	"fmt"
	"math"
)

// Kind is a chart statistic, as a user names it ("cusum", "ewma").
type Kind string

// Chart kinds.
const (
	CUSUM Kind = "cusum" // cumulative sum (Page 1954)
	EWMA  Kind = "ewma"  // exponentially weighted moving average (Roberts 1959)
)

// Side is the direction of drift a chart watches for ("up", "down",
// "both").
type Side string

// Chart sides.
const (
	Up   Side = "up"   // signal on a rise
	Down Side = "down" // signal on a fall
	Both Side = "both" // signal on either
)

// Kinds and Sides list the valid values, in the order users see them.
var (
	Kinds = []Kind{CUSUM, EWMA}
	Sides = []Side{Up, Down, Both}
)

// Spec describes one chart. The zero value is not usable: Kind and Side must
// be set (DefaultSpec gives a usable starting point).
type Spec struct {
	Kind Kind
	Side Side
	// Allowance is the CUSUM reference value k in SDs of the charted values
	// (common practice: half the shift to detect; DefaultSpec uses 0.5).
	// Zero is a valid allowance. Ignored by EWMA.
	Allowance float64
	// Lambda is the EWMA smoothing constant for an exam one Unit after the
	// previous one, in (0, 1]. Ignored by CUSUM.
	Lambda float64
	// Unit is the gap in years at which the EWMA weight equals Lambda.
	// Zero means 1 year.
	Unit float64
	// HeadStart is the fast-initial-response head start as a fraction of the
	// limit, in [0, 1) (Lucas & Crosier 1982). For EWMA it is allowed only for
	// one-sided charts.
	HeadStart float64
	// Restart, when true, resets the statistic to its starting value after a
	// signal; otherwise the statistic runs on.
	Restart bool
}

// DefaultSpec returns a one-sided upward CUSUM with allowance 0.5, no head
// start and no restart; Lambda is preset to 0.1 (used only if Kind is
// switched to EWMA) and Unit to 1 year.
func DefaultSpec() Spec {
	return Spec{Kind: CUSUM, Side: Up, Allowance: 0.5, Lambda: 0.1, Unit: 1}
}

// Validate reports the first problem with s as an error a spreadsheet user can
// act on, or nil.
func (s Spec) Validate() error {
	switch s.Kind {
	case CUSUM, EWMA:
	default:
		return &SettingError{Setting: "chart", Value: string(s.Kind), Want: fmt.Sprintf("%q or %q", CUSUM, EWMA)}
	}
	switch s.Side {
	case Up, Down, Both:
	default:
		return &SettingError{Setting: "side", Value: string(s.Side), Want: fmt.Sprintf("%q, %q or %q", Up, Down, Both)}
	}
	if s.Kind == CUSUM && !(s.Allowance >= 0 && !math.IsInf(s.Allowance, 1)) {
		return &SettingError{Setting: "allowance", Value: s.Allowance, Want: "a number 0 or more (in SDs)"}
	}
	if s.Kind == EWMA && !(s.Lambda > 0 && s.Lambda <= 1) {
		return &SettingError{Setting: "lambda", Value: s.Lambda, Want: "more than 0 and at most 1"}
	}
	if !(s.Unit >= 0 && !math.IsInf(s.Unit, 1)) {
		return &SettingError{Setting: "unit", Value: s.Unit, Want: "a positive number of years (0 means 1 year)"}
	}
	if !(s.HeadStart >= 0 && s.HeadStart < 1) {
		return &SettingError{Setting: "headstart", Value: s.HeadStart, Want: "a fraction of the limit from 0 up to (not including) 1"}
	}
	if s.Kind == EWMA && s.Side == Both && s.HeadStart != 0 {
		return &SettingError{Setting: "headstart", Value: s.HeadStart,
			Want: fmt.Sprintf("0 for an EWMA on side %q (a head start is available for a one-sided EWMA only, side %q or %q)", Both, Up, Down)}
	}
	return nil
}

// ValidateLimit reports whether h is usable as a control limit.
func ValidateLimit(h float64) error {
	if !(h > 0) || math.IsInf(h, 1) {
		return &SettingError{Setting: "limit", Value: h, Want: "a positive number"}
	}
	return nil
}

// UnitOrDefault returns s.Unit, or 1 year when it is zero.
func (s Spec) UnitOrDefault() float64 {
	if s.Unit == 0 {
		return 1
	}
	return s.Unit
}

// Weight returns the EWMA weight for an exam gap years after the previous
// one,
//
//	w = 1 - (1-lambda)^(gap/unit),
//
// so that two exams half a unit apart weigh as much as one exam a unit apart
// would. It returns lambda for gap <= 0 (used for the first exam).
func (s Spec) Weight(gap float64) float64 {
	if gap <= 0 || s.Lambda == 1 {
		return s.Lambda
	}
	return -math.Expm1(gap / s.UnitOrDefault() * math.Log1p(-s.Lambda))
}

// EWMAScale returns the asymptotic standard deviation of the EWMA of i.i.d.
// N(0,1) values at gap Unit, sqrt(lambda/(2-lambda)) (Roberts 1959). EWMA
// statistics are reported divided by it, so the limit is in the usual "L"
// units.
func (s Spec) EWMAScale() float64 {
	return math.Sqrt(s.Lambda / (2 - s.Lambda))
}

// Point is the chart state after one exam. Up and Down are the upward and
// downward statistics (both non-negative; the side not charted is 0), Stat is
// the statistic compared with the limit and Signal reports Stat > h.
type Point struct {
	Up, Down, Stat float64
	Signal         bool
}

// state is the running chart state shared by Run and Tracker.
type state struct {
	spec  Spec
	h     float64
	scale float64 // 1/EWMAScale for EWMA
	up    float64 // CUSUM upper sum, or EWMA value (standardised, signed for both)
	down  float64 // CUSUM lower sum, or lower reflected EWMA (non-negative)
	start float64
	first bool
}

func newState(s Spec, h float64) state {
	st := state{spec: s, h: h, first: true}
	if s.Kind == EWMA {
		st.scale = 1 / s.EWMAScale()
	}
	st.start = s.HeadStart * h
	st.reset()
	return st
}

func (st *state) reset() {
	st.up, st.down = 0, 0
	if st.spec.Side != Down {
		st.up = st.start
	}
	if st.spec.Side != Up {
		st.down = st.start
	}
}

func (st *state) step(gap, u float64) Point {
	s := &st.spec
	var p Point
	if s.Kind == CUSUM {
		if s.Side != Down {
			st.up = math.Max(0, st.up+u-s.Allowance)
			p.Up = st.up
		}
		if s.Side != Up {
			st.down = math.Max(0, st.down-u-s.Allowance)
			p.Down = st.down
		}
	} else {
		w := s.Lambda
		if !st.first {
			w = s.Weight(gap)
		}
		x := u * st.scale
		switch s.Side {
		case Up:
			st.up = math.Max(0, (1-w)*st.up+w*x)
			p.Up = st.up
		case Down:
			st.down = math.Max(0, (1-w)*st.down-w*x)
			p.Down = st.down
		default:
			st.up = (1-w)*st.up + w*x
			p.Up, p.Down = math.Max(st.up, 0), math.Max(-st.up, 0)
		}
	}
	st.first = false
	p.Stat = math.Max(p.Up, p.Down)
	p.Signal = p.Stat > st.h
	if p.Signal && s.Restart {
		st.reset()
	}
	return p
}

// Run charts the values u of one worker's time-ordered exams and appends one
// Point per exam to out (which may be nil) and returns it. gaps[j] is the time
// in years since exam j-1; gaps[0] is not used (the first EWMA weight is
// Lambda). A single exam gives a defined statistic.
//
// CUSUM (Page 1954, "Continuous inspection schemes", Biometrika 41):
//
//	Up_j   = max(0, Up_{j-1}   + u_j - k)
//	Down_j = max(0, Down_{j-1} - u_j - k)
//
// EWMA (Roberts 1959, "Control chart tests based on geometric moving
// averages", Technometrics 1), with a gap-aware weight w_j = 1-(1-lambda)^(gap_j/unit)
// and values standardised by sigma = sqrt(lambda/(2-lambda)):
//
//	E_j = (1-w_j) E_{j-1} + w_j u_j / sigma
//
// reported as Up = max(E,0), Down = max(-E,0) for side "both"; one-sided
// EWMAs are reflected at 0 (Up_j = max(0, (1-w_j)Up_{j-1} + w_j u_j/sigma)),
// as in Crowder & Hamilton (1992, J. Quality Technology 24) and R spc's
// one-sided EWMA. At equal gaps of one unit the limit is thus the usual L
// multiplier; at other gaps the same scale is kept.
//
// Both start at HeadStart*h (Lucas & Crosier 1982, "Fast initial response for
// CUSUM quality-control schemes", Technometrics 24) and, with Restart, go back
// to that start after a signal.
//
// Run panics if spec is invalid (call Validate first), h is not a valid limit
// or len(gaps) != len(u): these are programmer errors.
func Run(spec Spec, h float64, gaps, u []float64, out []Point) []Point {
	if err := spec.Validate(); err != nil {
		panic("chart.Run: " + err.Error())
	}
	if err := ValidateLimit(h); err != nil {
		panic("chart.Run: " + err.Error())
	}
	if len(gaps) != len(u) {
		panic(fmt.Sprintf("chart.Run: %d gaps for %d values", len(gaps), len(u)))
	}
	st := newState(spec, h)
	for j := range u {
		out = append(out, st.step(gaps[j], u[j]))
	}
	return out
}
