package refcurve

import (
	"errors"
	"math"
	"slices"
	"strings"
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

// Fit reports every problem of its rows and every group too small for a
// curve in one error, each carrying its facts, rather than the first one.
func TestFitCollectsEveryProblem(t *testing.T) {
	rows := smallRows()
	rows[2].Worker = ""
	rows[4].Time = math.NaN()
	rows[9].Value = math.Inf(1)
	_, err := Fit(rows, Options{})
	var all *RowErrors
	if !errors.As(err, &all) || all.Count != 3 || len(all.List) != 3 {
		t.Fatalf("three bad rows: %v", err)
	}
	var got []int
	for _, e := range all.List {
		var re *RowError
		if !errors.As(e, &re) {
			t.Fatalf("%T %v", e, e)
		}
		got = append(got, re.Rows[0])
	}
	if !slices.Equal(got, []int{3, 5, 10}) {
		t.Errorf("rows %v; want 3, 5, 10", got)
	}

	// Two repeated exams (one the same reading, one not) and two groups
	// too small: all four together.
	rows = smallRows()
	rows = append(rows, rows[6], Row{Worker: rows[8].Worker, Group: rows[8].Group, Time: rows[8].Time, Value: rows[8].Value + 1})
	_, err = Fit(rows, Options{})
	if !errors.As(err, &all) || all.Count != 2 {
		t.Fatalf("two repeated exams: %v", err)
	}
	var dups []*DuplicateError
	for _, e := range all.List {
		var de *DuplicateError
		if errors.As(e, &de) {
			dups = append(dups, de)
		}
	}
	if len(dups) != 2 || !errors.Is(err, ErrDuplicateExam) {
		t.Fatalf("%v", err)
	}
	same := map[int]bool{dups[0].Rows[0]: dups[0].Same, dups[1].Rows[0]: dups[1].Same}
	if !same[7] || same[9] {
		t.Errorf("the repeat of row 7 has the same reading, that of row 9 not: %+v %+v", dups[0], dups[1])
	}

	rows = smallRows()
	rows = append(rows, Row{Worker: "x1", Time: 30, Value: 100, Group: "tiny"},
		Row{Worker: "y1", Time: 30, Value: 100, Group: "small"}, Row{Worker: "y2", Time: 31, Value: 100, Group: "small"})
	_, err = Fit(rows, Options{})
	if !errors.As(err, &all) || all.Count != 2 || !errors.Is(err, ErrTooFewWorkers) {
		t.Fatalf("two small groups: %v", err)
	}
	var ge *GroupSizeError
	if !errors.As(all.List[0], &ge) || ge.Group != "small" || ge.Workers != 2 || ge.Min != DefaultMinWorkers {
		t.Errorf("%#v", all.List[0])
	}
	if msg := all.List[1].Error(); msg != `group "tiny" has 1 worker; a reference curve needs at least 10` {
		t.Errorf("message %q", msg)
	}
}

// Outside bounds extrapolation: within reach of the range is fine, farther
// out a *RangeError carrying the reach and saying how far the age lies.
func TestOutsideReach(t *testing.T) {
	for _, c := range []struct {
		t, reach float64
		ok       bool
		msg      string
	}{
		{40, 0, true, ""},
		{25, 0, true, ""},
		{24.99, 0, false, `age 24.99 is outside the reference range 25–65 of group "F"`},
		{20, 5, true, ""},
		{70, 5, true, ""},
		{70.5, 5, false, `age 70.5 is 5.5 years above the reference range 25–65 of group "F", farther than the 5 years extrapolation reaches`},
		{5, 5, false, `age 5 is 20 years below`},
		{math.NaN(), 5, false, "age NaN"},
	} {
		err := Outside("F", c.t, 25, 65, c.reach)
		if (err == nil) != c.ok {
			t.Errorf("age %g, reach %g: %v", c.t, c.reach, err)
			continue
		}
		if err == nil {
			continue
		}
		var re *RangeError
		if !errors.As(err, &re) || !errors.Is(err, ErrOutsideRange) || re.Reach != c.reach || re.Min != 25 || re.Max != 65 {
			t.Errorf("%#v", err)
		}
		if !strings.HasPrefix(err.Error(), c.msg) {
			t.Errorf("message %q; want it to start %q", err, c.msg)
		}
	}
}
