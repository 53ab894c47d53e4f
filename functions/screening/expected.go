package screening

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/serial"
	"veer/internal/numeric"
)

// Expected is what the serial model expected of one exam of a worker before
// its reading was seen: the Kalman one-step prediction from the worker's
// earlier exams (Jones, R. H. and Boadi-Boateng, F. (1991), "Unequally
// spaced longitudinal data with AR(1) serial correlation", Biometrics 47,
// 161–175). With serial whitening the chart adds up how far each reading
// lies from this expectation (the innovation), so a reading near the
// reference median can move the chart up when the worker's own level was
// low.
type Expected struct {
	// Z is the predicted standardised value (0 at the first exam: the
	// reference mean) and SD the SD of the prediction error, in reference
	// SDs; the innovation is (z − Z) / SD.
	Z, SD float64
	// Value is the predicted reading on the user's scale and Low, High the
	// central 95% prediction interval (Z ± 1.96 SD, back-transformed);
	// NaN where the back-transform has no value.
	Value, Low, High float64
}

// ExpectedLevels returns, for one worker's exams in age order (ages
// strictly increasing, z their standardised values as Screen gives them),
// what the serial model expected at each exam. The readings are read on
// the model's reference at each exam's group, age and covariates. Without
// serial correlation (set.Serial off, or a model with none) every exam
// expects the reference itself: Z 0 and SD 1.
func (m *Model) ExpectedLevels(set Settings, exams []Exam, z []float64) ([]Expected, error) {
	if len(exams) != len(z) {
		panic("screening: ExpectedLevels needs one z per exam")
	}
	ms, err := m.monitorSettings(set)
	if err != nil {
		return nil, err
	}
	times := make([]float64, len(exams))
	for j, e := range exams {
		times[j] = e.Time
	}
	if err := serial.CheckTimes(times); err != nil {
		return nil, err
	}
	ref := m.Reference()
	var cov []float64
	if k := len(ref.Covariates()); k > 0 {
		cov = make([]float64, k)
	}
	f := serial.NewFilter(ms.Serial)
	out := make([]Expected, len(z))
	std := distuv.UnitNormal
	for j, ex := range exams {
		if !numeric.Finite(z[j]) {
			return nil, fmt.Errorf("exam %d: the standardised value is not a number (%v)", j+1, z[j])
		}
		for c := range cov {
			cov[c] = math.NaN()
			if c < len(ex.Covariates) {
				cov[c] = ex.Covariates[c]
			}
		}
		gap := 0.0
		if j > 0 {
			gap = times[j] - times[j-1]
		}
		e := &out[j]
		e.Z, e.SD = f.Predict(gap)
		f.Whiten(gap, z[j])
		at := func(q float64) float64 {
			v, err := ref.Centile(ex.Group, ex.Time, cov, 100*std.CDF(q), true)
			if err != nil {
				return math.NaN()
			}
			return v
		}
		e.Value, e.Low, e.High = at(e.Z), at(e.Z-1.96*e.SD), at(e.Z+1.96*e.SD)
	}
	return out, nil
}
