package published

import (
	"fmt"
	"sort"

	"gonum.org/v1/gonum/interp"
)

// Interpolation is how values between the ages of a table are found.
type Interpolation string

const (
	// Linear interpolates linearly in age between the two neighbouring
	// rows: the default. It is what a user checking a value by hand in a
	// spreadsheet reproduces, it never leaves the range of the two
	// neighbouring rows (so M and S stay positive), and at the spacing
	// published adult tables use (a year or less) its error is far below
	// the rounding of the published values (TestInterpolationError).
	Linear Interpolation = "linear"
	// Cubic is the monotone piecewise cubic interpolant of Fritsch, F. N.
	// and Butland, J. (1984), "A method for constructing local monotone
	// piecewise cubic interpolants", SIAM J. Sci. Stat. Comput. 5, 300–304
	// (slopes at the rows from gonum's interp.FritschButland; the same
	// interpolant as SciPy's PchipInterpolator, checked against it in the
	// tests). It has a continuous slope, is local (a row changes the curve
	// only between its neighbours) and, like Linear, stays between
	// neighbouring rows, so it never overshoots into a non-positive M or
	// S. Useful for coarse tables (every 5 years, say) of a curved
	// reference.
	Cubic Interpolation = "cubic"
)

// interpolation validates name ("" is Linear).
func interpolation(name string) (Interpolation, error) {
	switch Interpolation(name) {
	case "", Linear:
		return Linear, nil
	case Cubic:
		return Cubic, nil
	}
	return "", fmt.Errorf("interpolation must be %q or %q, not %q", Linear, Cubic, name)
}

// segment is where an age falls in a lookup's ages: between row k and
// k+1, a share f of the way, the rows h years apart.
type segment struct {
	k    int
	f, h float64
}

// locate finds t, which the caller has placed inside [age[0], age[n-1]];
// age is strictly increasing with at least two entries.
func locate(age []float64, t float64) segment {
	n := len(age)
	k := sort.SearchFloat64s(age, t) - 1 // last index with age < t
	switch {
	case k < 0:
		return segment{k: 0, f: 0, h: age[1] - age[0]}
	case k >= n-1:
		return segment{k: n - 2, f: 1, h: age[n-1] - age[n-2]}
	}
	h := age[k+1] - age[k]
	return segment{k: k, f: (t - age[k]) / h, h: h}
}

// column is one value column of a lookup: the values at the lookup's ages
// and, for Cubic, the interpolant's slopes there.
type column struct {
	val, slope []float64
}

// newColumn prepares val (at strictly increasing ages, at least two; the
// callers check this with row numbers) for interpolation.
func newColumn(age, val []float64, how Interpolation) column {
	c := column{val: val}
	if how == Cubic {
		var fb interp.FritschButland
		_ = fb.Fit(age, val) // always nil; panics only on input ruled out above
		c.slope = make([]float64, len(age))
		for i, a := range age {
			c.slope[i] = fb.PredictDerivative(a)
		}
	}
	return c
}

// at interpolates the column in segment s: linearly, or by the cubic
// Hermite polynomial with the stored slopes.
func (c *column) at(s segment) float64 {
	y0, y1 := c.val[s.k], c.val[s.k+1]
	if c.slope == nil {
		return y0 + s.f*(y1-y0)
	}
	f := s.f
	f2 := f * f
	f3 := f2 * f
	return (2*f3-3*f2+1)*y0 + (f3-2*f2+f)*s.h*c.slope[s.k] + (-2*f3+3*f2)*y1 + (f3-f2)*s.h*c.slope[s.k+1]
}
