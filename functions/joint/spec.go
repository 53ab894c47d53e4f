package joint

import (
	"fmt"
	"math"

	"veer/functions/chart"
)

// Kind is a chart kind; the kinds over several markers share the type
// and the words of package chart's, so one option names them all.
type Kind = chart.Kind

// Chart kinds. CUSUM and EWMA look only in each marker's harmful direction
// (Spec.Sides) and, for one marker, are the single-marker charts of
// package chart; MEWMA and MCUSUM look in every direction; Any combines
// the single-marker charts.
const (
	// CUSUM is the multivariate CUSUM of Crosier (1988) restricted to the
	// markers' harmful directions: after every exam the CUSUM vector is
	// projected onto the cone of harmful shifts (in the metric R^-1), so
	// drifts the other way never build up. For one marker with side up or
	// down it is the single-marker one-sided CUSUM.
	CUSUM = chart.CUSUM
	// EWMA is the multivariate EWMA of Lowry et al. (1992) restricted to
	// the harmful directions in the same way (the one-sided MEWMA of
	// Testik & Runger 2006, reflected at the cone's boundary as the
	// single-marker one-sided EWMA is at 0). For one marker with side up
	// or down it is the single-marker one-sided EWMA (squared).
	EWMA = chart.EWMA
	// MEWMA is the multivariate EWMA of Lowry, Woodall, Champ & Rigdon
	// (1992): it watches every direction.
	MEWMA Kind = "mewma"
	// MCUSUM is the multivariate CUSUM of Crosier (1988): it watches every
	// direction.
	MCUSUM Kind = "mcusum"
	// Any runs each marker's own CUSUM on its own values (side per marker,
	// allowance k) and signals when any of them crosses the common limit:
	// single-marker charts combined by "any of them signals", with one
	// limit for the joint false-signal rate.
	Any Kind = "any"
)

// DefaultKind is the chart chosen from the comparison documented in the
// package comment (TestChartEvidence, TestJointDriftCohort).
const DefaultKind = CUSUM

// Kinds lists the kinds in the order they are offered to users.
var Kinds = []Kind{CUSUM, EWMA, MEWMA, MCUSUM, Any}

// MaxMarkers is the largest number of markers charted together.
const MaxMarkers = 8

// sided reports whether the kind takes one side per marker.
func sided(k Kind) bool { return k == CUSUM || k == EWMA || k == Any }

// ewmaKind reports whether the kind is an EWMA (weights lambda, tracked
// covariance), as opposed to a CUSUM.
func ewmaKind(k Kind) bool { return k == EWMA || k == MEWMA }

// Spec describes a chart over p markers. The zero value is not usable; see
// DefaultSpec.
type Spec struct {
	Kind Kind
	// Sides holds one direction per marker for kinds CUSUM, EWMA and Any:
	// chart.Up (a rise is harmful), chart.Down or chart.Both. MEWMA and
	// MCUSUM watch every direction: Sides must then be empty or all Both.
	Sides []chart.Side
	// Lambda is the EWMA weight of an exam one Unit after the marker's
	// previous measurement (kinds EWMA and MEWMA), in (0, 1]; Unit is
	// in years (0 means 1).
	Lambda, Unit float64
	// Allowance is the reference value k: Crosier's k for CUSUM and MCUSUM
	// (in Mahalanobis units per exam), each marker's CUSUM allowance for
	// Any (in SDs).
	Allowance float64
	// Restart, when true, starts the chart afresh after a signal.
	Restart bool
}

// DefaultSpec returns the default chart for p markers: kind DefaultKind,
// every side up, lambda 0.1 per year, allowance 0.5.
func DefaultSpec(p int) Spec {
	s := Spec{Kind: DefaultKind, Lambda: 0.1, Unit: 1, Allowance: 0.5}
	s.Sides = make([]chart.Side, p)
	for i := range s.Sides {
		s.Sides[i] = chart.Up
	}
	return s
}

// ewma returns the single-marker EWMA spec whose weights the joint EWMA
// charts use.
func (s Spec) ewma() chart.Spec {
	return chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: s.Lambda, Unit: s.Unit}
}

// Validate reports the first problem with s for p markers.
func (s Spec) Validate(p int) error {
	if p < 1 || p > MaxMarkers {
		return &chart.SettingError{Setting: "markers", Value: p, Want: fmt.Sprintf("a number of markers from 1 to %d", MaxMarkers)}
	}
	switch s.Kind {
	case CUSUM, EWMA, MEWMA, MCUSUM, Any:
	default:
		return &chart.SettingError{Setting: "chart", Value: string(s.Kind), Want: fmt.Sprintf("%q, %q, %q, %q or %q for several markers", CUSUM, EWMA, MEWMA, MCUSUM, Any)}
	}
	oneWay := sided(s.Kind)
	if len(s.Sides) != 0 && len(s.Sides) != p {
		return &SidesError{Got: len(s.Sides), Want: p}
	}
	if oneWay && len(s.Sides) == 0 {
		return &SidesError{Got: 0, Want: p}
	}
	for i, side := range s.Sides {
		switch side {
		case chart.Up, chart.Down, chart.Both:
		default:
			return &chart.SettingError{Setting: "side", Value: string(side), Want: fmt.Sprintf("%q, %q or %q (side %d)", chart.Up, chart.Down, chart.Both, i+1)}
		}
		if !oneWay && side != chart.Both {
			return &chart.SettingError{Setting: "side", Value: string(side), Want: fmt.Sprintf("%q with chart %s, which watches every direction (for one direction per marker use chart %s or %s)", chart.Both, s.Kind, CUSUM, EWMA)}
		}
	}
	if ewmaKind(s.Kind) {
		if !(s.Lambda > 0 && s.Lambda <= 1) {
			return &chart.SettingError{Setting: "lambda", Value: s.Lambda, Want: "more than 0 and at most 1"}
		}
		if !(s.Unit >= 0 && !math.IsInf(s.Unit, 1)) {
			return &chart.SettingError{Setting: "unit", Value: s.Unit, Want: "a positive number of years (0 means 1 year)"}
		}
	} else if !(s.Allowance >= 0 && !math.IsInf(s.Allowance, 1)) {
		return &chart.SettingError{Setting: "allowance", Value: s.Allowance, Want: "a number 0 or more"}
	}
	return nil
}
