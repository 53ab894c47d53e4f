package serial

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Series is one worker's standardised residuals Z at exam times Time
// (years, strictly increasing).
type Series struct {
	Time, Z []float64
}

// Params are the serial-correlation parameters of the model
//
//	e(t) = s(t) + w(t),  corr(s(t), s(t+d)) = Phi^d,  var s = C,  var w = 1 - C,
//
// so that corr(e(t), e(t+d)) = C*Phi^d for d > 0. SEPhi and SEC are standard
// errors (zero when the parameters were set by hand); Pairs and Workers count
// the pairs of exams and workers (with at least one pair) behind the estimate,
// and Test is the test of no serial correlation Estimate made (zero, and
// Tested false, when the parameters were set by hand or come from a model
// written before the test).
type Params struct {
	Phi, C     float64
	SEPhi, SEC float64
	Pairs      int
	Workers    int
	Test       CorrelationTest `json:",omitzero"`
}

// Validate reports whether Phi is in [0,1) and C in [0,1].
func (p Params) Validate() error {
	if !(p.Phi >= 0 && p.Phi < 1) {
		return fmt.Errorf("the yearly correlation phi must be at least 0 and below 1, got %v", p.Phi)
	}
	if !(p.C >= 0 && p.C <= 1) {
		return fmt.Errorf("the persistent share c must be between 0 and 1, got %v", p.C)
	}
	return nil
}

// Independent reports whether the model implies uncorrelated exams
// (c = 0 or phi = 0), in which case z is already white.
func (p Params) Independent() bool { return p.C == 0 || p.Phi == 0 }

// NoCorrelationDetected reports whether the estimate found no serial
// correlation: the fitted model has none (Independent), or the test of no
// correlation between consecutive exams did not reject it at TestLevel.
// Parameters without a test are judged by Independent alone.
func (p Params) NoCorrelationDetected() bool {
	return p.Independent() || (p.Tested() && !p.Test.Detected())
}

// Tested reports whether p carries a test of no correlation (Estimate
// made it).
func (p Params) Tested() bool { return p.Test.Workers > 0 }

// Finding says in words what the estimate found about serial correlation,
// for people: whether the test detected it (with the lag-1 correlation
// and the p-value) and the fitted phi and c, or that the readings are
// treated as independent. When the test finds none but the fitted model
// is not independent, the model's correlation at the mean gap is given
// too: near the edge of the parameter space phi and c alone can look
// large (c 1.000 with phi 0.003) for a correlation that is negligible.
// For example
//
//	no serial correlation detected (consecutive exams, 1.50 years apart on average, correlate -0.001, p = 0.57); readings of a worker are treated as independent
//	serial correlation detected (consecutive exams, 1.50 years apart on average, correlate 0.331, p < 0.001): phi 0.705 per year, persistent share c 0.597
func (p Params) Finding() string {
	fitted := fmt.Sprintf("phi %.3f per year, persistent share c %.3f", p.Phi, p.C)
	if !p.Tested() {
		if p.Independent() {
			return "no serial correlation: readings of a worker are treated as independent"
		}
		return "serial correlation " + fitted
	}
	t := p.Test
	test := fmt.Sprintf("consecutive exams, %.2f years apart on average, correlate %.3f, %s", t.MeanGap, t.Corr, PValueText(t.P))
	switch {
	case p.Independent():
		return "no serial correlation detected (" + test + "); readings of a worker are treated as independent"
	case !t.Detected():
		return fmt.Sprintf("no serial correlation detected (%s); the fitted model (%s) gives them a correlation of %.3f",
			test, fitted, p.Corr(t.MeanGap))
	}
	return "serial correlation detected (" + test + "): " + fitted
}

// PValueText writes a p-value for people: "p < 0.001" or "p = 0.42".
func PValueText(p float64) string {
	if p < 0.001 {
		return "p < 0.001"
	}
	return fmt.Sprintf("p = %.3g", p)
}

// Corr returns the model correlation of two exams d > 0 years apart, C*Phi^d.
func (p Params) Corr(d float64) float64 { return p.C * math.Pow(p.Phi, d) }

// CheckTimes returns an error naming the first exam whose time is not finite
// or not after the previous one.
func CheckTimes(time []float64) error {
	for j, t := range time {
		if math.IsNaN(t) || math.IsInf(t, 0) {
			return fmt.Errorf("exam %d: the time is not a number (%v)", j+1, t)
		}
		if j > 0 && !(t > time[j-1]) {
			return fmt.Errorf("exam %d: its time %v is not after the previous exam's time %v; a worker's exam times must strictly increase (two exams at the same time are not allowed)", j+1, t, time[j-1])
		}
	}
	return nil
}

// Filter is the Kalman filter of the model at arbitrary gaps (Jones &
// Boadi-Boateng 1991, "Unequally spaced longitudinal data with AR(1) serial
// correlation", Biometrics 47), with state s and stationary start
// m = 0, P = C. For an exam gap d years after the previous one:
//
//	predict  m' = Phi^d m,  P' = Phi^(2d) P + C (1 - Phi^(2d))
//	         F  = P' + 1 - C,  u = (z - m') / sqrt(F)
//	update   K  = P'/F,  m = m' + K (z - m'),  P = P' (1 - K)
//
// For a healthy worker the innovations u are i.i.d. N(0,1) at any gaps: they
// are the standardised one-step prediction errors of a Gaussian sequence,
// i.e. L^{-1} z for the Cholesky factor L of its covariance matrix.
// The zero value is not usable; use NewFilter.
type Filter struct {
	p       Params
	lphi    float64 // log Phi, so Phi^d = exp(d log Phi)
	m, v    float64
	started bool
}

// NewFilter returns a filter at the stationary start. It panics if p is
// invalid (check p.Validate first).
func NewFilter(p Params) *Filter {
	if err := p.Validate(); err != nil {
		panic("serial.NewFilter: " + err.Error())
	}
	f := &Filter{p: p, lphi: math.Log(p.Phi)}
	f.Reset()
	return f
}

// Reset returns the filter to the stationary start (a new worker).
func (f *Filter) Reset() { f.m, f.v, f.started = 0, f.p.C, false }

// predict returns m' and F for the next exam gap years on.
func (f *Filter) predict(gap float64) (mp, pp, fv float64) {
	if !f.started {
		mp, pp = 0, f.p.C
	} else {
		a := math.Exp(gap * f.lphi)
		mp = a * f.m
		pp = a*a*f.v + f.p.C*(1-a*a)
	}
	return mp, pp, pp + 1 - f.p.C
}

func (f *Filter) update(mp, pp, fv, z float64) {
	if fv > 0 {
		k := pp / fv
		f.m = mp + k*(z-mp)
		f.v = pp * (1 - k)
	} else {
		f.m, f.v = mp, pp
	}
	f.started = true
}

// Predict returns the one-step prediction of the next exam's z, gap years
// after the previous exam (gap is ignored for the first exam), and the SD
// of its prediction error: m' and sqrt(F) above, from the exams seen so
// far. It does not advance the filter; Whiten does.
func (f *Filter) Predict(gap float64) (z, sd float64) {
	mp, _, fv := f.predict(gap)
	return mp, math.Sqrt(math.Max(fv, 0))
}

// Whiten takes the next exam's z, gap years after the previous exam (gap
// is ignored for the first exam), and returns its innovation u.
func (f *Filter) Whiten(gap, z float64) float64 {
	mp, pp, fv := f.predict(gap)
	f.update(mp, pp, fv, z)
	if fv <= 0 { // only with C = 1 and no time for the state to move
		return 0
	}
	return (z - mp) / math.Sqrt(fv)
}

// Colour is the inverse of Whiten: given an innovation u it returns the z
// that would have produced it, z = m' + sqrt(F) u, and advances the filter.
// Colouring i.i.d. N(0,1) values gives a sequence with the model's law.
func (f *Filter) Colour(gap, u float64) float64 {
	mp, pp, fv := f.predict(gap)
	z := mp + math.Sqrt(math.Max(fv, 0))*u
	f.update(mp, pp, fv, z)
	return z
}

// Innovations runs the Kalman filter over one worker's exams (times in
// years, strictly increasing) and appends the innovation of each exam to out.
// It returns an error naming the exam if a time does not increase or a value
// is not a finite number.
func Innovations(p Params, time, z []float64, out []float64) ([]float64, error) {
	if err := p.Validate(); err != nil {
		return out, err
	}
	if len(time) != len(z) {
		return out, fmt.Errorf("%d exam times for %d values", len(time), len(z))
	}
	if err := CheckTimes(time); err != nil {
		return out, err
	}
	f := NewFilter(p)
	for j, v := range z {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return out, fmt.Errorf("exam %d: the standardised value is not a number (%v)", j+1, v)
		}
		gap := 0.0
		if j > 0 {
			gap = time[j] - time[j-1]
		}
		out = append(out, f.Whiten(gap, v))
	}
	return out, nil
}

// Simulate appends to out a healthy worker's standardised values at the
// given strictly increasing times, drawn exactly from the model: s(t) is a
// stationary continuous-time AR(1) (s_1 ~ N(0,C), s_j = Phi^d s_{j-1} +
// sqrt(C(1-Phi^(2d))) eps) plus independent N(0, 1-C) noise. It panics if p
// is invalid (a programmer error).
func Simulate(p Params, times []float64, rng *rand.Rand, out []float64) []float64 {
	if err := p.Validate(); err != nil {
		panic("serial.Simulate: " + err.Error())
	}
	var s float64
	noise := math.Sqrt(1 - p.C)
	for j, t := range times {
		if j == 0 {
			s = math.Sqrt(p.C) * rng.NormFloat64()
		} else {
			a := math.Pow(p.Phi, t-times[j-1])
			s = a*s + math.Sqrt(p.C*(1-a*a))*rng.NormFloat64()
		}
		out = append(out, s+noise*rng.NormFloat64())
	}
	return out
}
