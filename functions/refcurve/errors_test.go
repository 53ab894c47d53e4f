package refcurve

import (
	"errors"
	"math"
	"slices"
	"testing"

	"veer/functions/transform"
)

// Lookups fail with errors that carry their facts and match their kind,
// so callers decide by type, never by wording.
func TestLookupErrorTypes(t *testing.T) {
	m := fitSmall(t, Options{Transform: "boxcox"})
	lo, hi, err := m.Range("F")
	if err != nil {
		t.Fatal(err)
	}
	_, _, err = m.At("F", hi+3, false)
	var re *RangeError
	if !errors.As(err, &re) || !errors.Is(err, ErrOutsideRange) || re.Group != "F" || re.Time != hi+3 || re.Min != lo || re.Max != hi {
		t.Errorf("outside the range: %#v", err)
	}
	for _, g := range []string{"X", ""} {
		_, _, err = m.At(g, 40, false)
		var ge *GroupError
		if !errors.As(err, &ge) || !errors.Is(err, ErrUnknownGroup) || ge.Group != g || !slices.Equal(ge.Groups, []string{"F", "M"}) {
			t.Errorf("group %q: %#v", g, err)
		}
	}
	_, err = m.Z("F", 40, -1, false)
	if !errors.Is(err, transform.ErrDomain) {
		t.Errorf("a negative reading under Box-Cox: %v", err)
	}
	// ZMany's report holds the entries' own errors.
	out := make([]float64, 3)
	err = m.ZMany([]string{"F", "X", "F"}, []float64{40, 40, hi + 3}, []float64{120, 120, 120}, false, out)
	var se *ScoreErrors
	if !errors.As(err, &se) || se.Count != 2 || !errors.Is(err, ErrOutsideRange) || !errors.Is(err, ErrUnknownGroup) || math.IsNaN(out[0]) {
		t.Errorf("ZMany: %v", err)
	}
}

// A centile the Box-Cox back-transform cannot reach wraps the transform's
// error: with lambda -1 no reading maps to 1 or more on the transformed
// scale, and the 99.9th centile here is 0.99 + 3.09 x 0.01 > 1.
func TestCentileNoInverse(t *testing.T) {
	m := &Model{Transform: transform.BoxCox, Lambda: -1, Curves: []Curve{{
		TimeMin: 20, TimeMax: 60, Time: []float64{20, 60}, Mean: []float64{0.99, 0.99}, SD: []float64{0.01, 0.01},
	}}}
	if _, err := m.Centile("", 40, 50, false); err != nil {
		t.Fatalf("median: %v", err)
	}
	_, err := m.Centile("", 40, 99.9, false)
	var ie *transform.InverseError
	if !errors.Is(err, transform.ErrDomain) || !errors.As(err, &ie) || ie.Overflow {
		t.Errorf("centile without a back-transform: %#v", err)
	}
}
