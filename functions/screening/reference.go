package screening

import (
	"veer/functions/published"
	"veer/functions/refcurve"
)

// Reference is what a model standardises exams against: curves fitted
// from the site's own healthy reference cohort (package refcurve), or a
// published reference — an LMS centile table or reference equations with
// covariates such as height (package published). Everything downstream —
// z, centiles, charts, limits, rules, reports — works the same on either.
//
// Covariates are the variables besides age the reference needs (none for
// fitted curves and LMS tables; "height" for typical lung-function
// equations); cov arguments hold their values in that order (NaN for a
// blank one), and ZMany takes one column per covariate.
type Reference interface {
	// Kind is ReferenceFitted or ReferencePublished.
	Kind() string
	Groups() []string
	// Range is the ages group covers; outside them a lookup is an error
	// unless extrapolate, when the reference is held at its nearest end.
	Range(group string) (lo, hi float64, err error)
	Covariates() []string
	Z(group string, age float64, cov []float64, y float64, extrapolate bool) (float64, error)
	ZMany(groups []string, age, y []float64, cov [][]float64, extrapolate bool, out []float64) error
	// MeanSD is the centre and spread the reference reports at an age: for
	// fitted curves the mean and SD on the model's (transformed) scale; for
	// a published reference the median M and M·S, the SD of the reading
	// near the median (exact when L = 1).
	MeanSD(group string, age float64, cov []float64, extrapolate bool) (mean, sd float64, err error)
	// Centile is the p-th centile (0 < p < 100) of a reading.
	Centile(group string, age float64, cov []float64, p float64, extrapolate bool) (float64, error)
	// Within reports whether the age and covariates lie inside the ranges
	// the reference covers (so no extrapolation is needed).
	Within(group string, age float64, cov []float64) bool
}

// Kinds of Reference.
const (
	ReferenceFitted    = "fitted"
	ReferencePublished = "published"
)

// fitted adapts refcurve.Model, which has no covariates.
type fitted struct{ m *refcurve.Model }

func (f fitted) Kind() string                                 { return ReferenceFitted }
func (f fitted) Groups() []string                             { return f.m.Groups() }
func (f fitted) Range(group string) (float64, float64, error) { return f.m.Range(group) }
func (f fitted) Covariates() []string                         { return nil }
func (f fitted) Z(group string, age float64, _ []float64, y float64, ext bool) (float64, error) {
	return f.m.Z(group, age, y, ext)
}
func (f fitted) ZMany(groups []string, age, y []float64, _ [][]float64, ext bool, out []float64) error {
	return f.m.ZMany(groups, age, y, ext, out)
}
func (f fitted) MeanSD(group string, age float64, _ []float64, ext bool) (float64, float64, error) {
	return f.m.At(group, age, ext)
}
func (f fitted) Within(group string, age float64, _ []float64) bool {
	lo, hi, err := f.m.Range(group)
	return err == nil && age >= lo && age <= hi
}
func (f fitted) Centile(group string, age float64, _ []float64, p float64, ext bool) (float64, error) {
	return f.m.Centile(group, age, p, ext)
}

// pub adapts published.Reference.
type pub struct{ r *published.Reference }

func (p pub) Kind() string                                 { return ReferencePublished }
func (p pub) Groups() []string                             { return p.r.Groups() }
func (p pub) Range(group string) (float64, float64, error) { return p.r.Range(group) }
func (p pub) Covariates() []string {
	cs := p.r.Covariates()
	if len(cs) == 0 {
		return nil
	}
	out := make([]string, len(cs))
	for i, c := range cs {
		out[i] = c.Name
	}
	return out
}
func (p pub) Z(group string, age float64, cov []float64, y float64, ext bool) (float64, error) {
	return p.r.Z(group, age, cov, y, ext)
}
func (p pub) ZMany(groups []string, age, y []float64, cov [][]float64, ext bool, out []float64) error {
	return p.r.ZMany(groups, age, y, cov, ext, out)
}
func (p pub) MeanSD(group string, age float64, cov []float64, ext bool) (float64, float64, error) {
	l, err := p.r.At(group, age, cov, ext)
	if err != nil {
		return 0, 0, err
	}
	return l.M, l.M * l.S, nil
}
func (p pub) Within(group string, age float64, cov []float64) bool {
	return p.r.Within(group, age, cov)
}
func (p pub) Centile(group string, age float64, cov []float64, c float64, ext bool) (float64, error) {
	return p.r.Centile(group, age, cov, c, ext)
}

// Reference returns what the model standardises against.
func (m *Model) Reference() Reference {
	if m.Published != nil {
		return pub{m.Published}
	}
	return fitted{m.Curves}
}
