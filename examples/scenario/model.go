package scenario

import (
	"fmt"
	"math"
)

// Group names used in the generated files.
const (
	Tower    = "tower"    // tower crew: climbing technicians
	Workshop = "workshop" // workshop crew: onshore repair workshop
)

// Age range of all exams, in years.
const (
	MinAge = 20.0
	MaxAge = 65.0
)

// Groups returns the group names in the order used by the generator.
func Groups() []string { return []string{Tower, Workshop} }

// Marker identifies one of the generated markers.
type Marker int

const (
	// SBP is systolic blood pressure in mmHg; its model scale is mmHg.
	SBP Marker = iota
	// FEV1 is forced expiratory volume in one second in litres; its model
	// scale is ln(litres).
	FEV1
)

// String returns the marker's column name in the CSV files.
func (m Marker) String() string {
	switch m {
	case SBP:
		return "sbp"
	case FEV1:
		return "fev1"
	}
	return fmt.Sprintf("Marker(%d)", int(m))
}

// Curve returns the mean and standard deviation of marker m among healthy
// workers of group at age, on the marker's model scale (mmHg for SBP,
// ln(litres) for FEV1). With u = age - 40:
//
//	SBP   tower:    mean  121 + 0.45 u + 0.006 u²           sd  11 + 0.12 u
//	SBP   workshop: mean  124 + 0.50 u + 0.006 u²           sd  12 + 0.12 u
//	FEV1  tower:    mean  ln(4.05 - 0.030 u - 0.0004 u²)    sd  0.12 + 0.0012 u
//	FEV1  workshop: mean  ln(3.80 - 0.028 u - 0.0004 u²)    sd  0.13 + 0.0012 u
//
// The curves are meant for MinAge <= age <= MaxAge; outside it Curve returns
// an error, as it does for an unknown group or marker.
func Curve(m Marker, group string, age float64) (mean, sd float64, err error) {
	if !(age >= MinAge && age <= MaxAge) {
		return 0, 0, fmt.Errorf("scenario: age %v is outside the scenario's range %v to %v years", age, MinAge, MaxAge)
	}
	u := age - 40
	switch {
	case m == SBP && group == Tower:
		return 121 + 0.45*u + 0.006*u*u, 11 + 0.12*u, nil
	case m == SBP && group == Workshop:
		return 124 + 0.50*u + 0.006*u*u, 12 + 0.12*u, nil
	case m == FEV1 && group == Tower:
		return math.Log(4.05 - 0.030*u - 0.0004*u*u), 0.12 + 0.0012*u, nil
	case m == FEV1 && group == Workshop:
		return math.Log(3.80 - 0.028*u - 0.0004*u*u), 0.13 + 0.0012*u, nil
	case m != SBP && m != FEV1:
		return 0, 0, fmt.Errorf("scenario: unknown marker %v; expected sbp or fev1", m)
	}
	return 0, 0, fmt.Errorf("scenario: unknown group %q; expected %q or %q", group, Tower, Workshop)
}

// Standardise returns the standardised reading (y' - mean)/sd of a reading y
// of marker m, where y' is y on the model scale (y for SBP, ln y for FEV1)
// and mean, sd come from Curve. For a healthy worker it is the residual e(t)
// of the generating model (up to rounding of the reading).
func Standardise(m Marker, group string, age, y float64) (float64, error) {
	mean, sd, err := Curve(m, group, age)
	if err != nil {
		return 0, err
	}
	if m == FEV1 {
		if !(y > 0) {
			return 0, fmt.Errorf("scenario: FEV1 reading %v must be a positive number of litres", y)
		}
		y = math.Log(y)
	}
	return (y - mean) / sd, nil
}

// reading turns a standardised value z (residual plus drift) into a rounded
// reading on the marker's own scale. Callers pass a valid group and age.
func reading(m Marker, group string, age, z float64) float64 {
	mean, sd, err := Curve(m, group, age)
	if err != nil {
		panic(err) // the generator only asks for valid groups and ages
	}
	if m == SBP {
		return math.Round(mean + sd*z)
	}
	return round2(math.Exp(mean + sd*z))
}

// Onset is the truth about one marker of one worker.
type Onset struct {
	// Affected reports whether the worker drifts in this marker.
	Affected bool
	// Age is the onset age T₀ in years (0 when not affected).
	Age float64
	// Slope is the rate β at which the drift grows, in standard deviations
	// per year on the model scale: positive for SBP (upward), negative for
	// FEV1 (downward); 0 when not affected.
	Slope float64
	// Plateau is the size A of the sustained shift the drift grows to, in
	// standard deviations, with the sign of Slope; it is reached A/β years
	// after the onset. 0 when not affected.
	Plateau float64
}

// Shift returns the drift δ(age) in standard deviations that the worker's
// readings carry at age: 0 up to the onset, then Slope·(age - onset) until
// it reaches Plateau, then Plateau:
//
//	δ(t) = 0                                   t <= T₀
//	δ(t) = sign(A)·min(|β|·(t - T₀), |A|)      t >  T₀
func (o Onset) Shift(age float64) float64 {
	if !o.Affected || age <= o.Age {
		return 0
	}
	d := math.Min(math.Abs(o.Slope)*(age-o.Age), math.Abs(o.Plateau))
	if o.Plateau < 0 {
		return -d
	}
	return d
}

func round2(x float64) float64 { return math.Round(x*100) / 100 }
func round3(x float64) float64 { return math.Round(x*1000) / 1000 }
