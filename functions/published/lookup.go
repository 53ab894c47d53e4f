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
	// (gonum's interp.FritschButland; the same interpolant as SciPy's
	// PchipInterpolator, checked against it in the tests). It has a
	// continuous slope, is local (a row changes the curve only between its
	// neighbours) and, like Linear, stays between neighbouring rows, so it
	// never overshoots into a non-positive M or S. Useful for coarse
	// tables (every 5 years, say) of a curved reference.
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

// lookup is a function of age given by values at strictly increasing ages.
type lookup struct {
	age []float64
	val []float64
	fb  *interp.FritschButland // nil for Linear
}

// newLookup builds the interpolant; age must be strictly increasing with at
// least two entries (checked by the callers, with row numbers).
func newLookup(age, val []float64, how Interpolation) *lookup {
	l := &lookup{age: age, val: val}
	if how == Cubic {
		l.fb = new(interp.FritschButland)
		_ = l.fb.Fit(age, val) // always nil; panics only on bad input, ruled out above
	}
	return l
}

// at returns the value at t, which the caller has placed inside
// [age[0], age[n-1]].
func (l *lookup) at(t float64) float64 {
	if l.fb != nil {
		return l.fb.Predict(t)
	}
	n := len(l.age)
	k := sort.SearchFloat64s(l.age, t) // first index with age >= t
	switch {
	case k >= n:
		return l.val[n-1]
	case l.age[k] == t:
		return l.val[k]
	case k == 0:
		return l.val[0]
	}
	a, b := l.age[k-1], l.age[k]
	f := (t - a) / (b - a)
	return l.val[k-1] + f*(l.val[k]-l.val[k-1])
}
