package screening

import (
	"context"
	"errors"
	"math"
	"testing"

	"veer/functions/chart"
	"veer/functions/refcurve"
	"veer/functions/serial"
	"veer/functions/transform"
)

// A workforce sheet is never clean: ScreenEach screens every exam it can
// and sets the others aside, each with its reason as a typed error; a
// worker's other exams are charted as if the rows set aside were not
// there.
func TestScreenEachSetsAsideWhatCannotBeScreened(t *testing.T) {
	m := fit(t, cohort(300, serial.Params{Phi: 0.6, C: 0.6}, 3, "R"))
	lo, hi, err := m.Curves.Range("")
	if err != nil {
		t.Fatal(err)
	}
	clean := []Exam{
		{Worker: "a", Time: 40, Value: 160},
		{Worker: "a", Time: 41, Value: 150},
		{Worker: "a", Time: 43, Value: 155},
		{Worker: "b", Time: 44, Value: 120},
		{Worker: "b", Time: 45, Value: 150},
	}
	messy := []Exam{
		clean[0],
		{Worker: "a", Time: 40.5, Value: math.NaN()}, // 2: no reading
		clean[1], // 3
		{Worker: "a", Time: hi + 0.001, Value: 150},     // 4: just outside, no extrapolation
		{Worker: "a", Time: 41, Value: 150},             // 5: repeats row 3, same reading
		clean[2],                                        // 6
		{Worker: "b", Time: 44, Value: 120},             // 7: clean[3]
		{Worker: "b", Time: 50, Value: 130},             // 8: two readings at 50 ...
		{Worker: "b", Time: 50, Value: 131},             // 9: ... both set aside
		{Worker: "", Time: 50, Value: 131},              // 10: no worker
		{Worker: "c", Time: math.NaN(), Value: 131},     // 11: no age
		{Worker: "b", Time: 45, Value: 150, Group: "x"}, // 12: a group the model does not have
		{Worker: "b", Time: 45, Value: 150},             // 13: clean[4]
		{Worker: "d", Time: lo - 30, Value: 150},        // 14: far outside
		{Worker: "d", Time: 40, Value: math.Inf(1)},     // 15: not a finite reading
	}
	want := []error{nil, ErrNoReading, nil, refcurve.ErrOutsideRange, refcurve.ErrDuplicateExam, nil, nil,
		refcurve.ErrDuplicateExam, refcurve.ErrDuplicateExam, ErrNoWorker, ErrNoAge, refcurve.ErrUnknownGroup, nil,
		refcurve.ErrOutsideRange, nil}
	set := DefaultSettings()
	res, err := m.ScreenEach(messy, set, 2)
	if err != nil {
		t.Fatal(err)
	}
	ref, err := m.Screen(clean, set, 2)
	if err != nil {
		t.Fatal(err)
	}
	k := 0
	for i, r := range res {
		switch {
		case want[i] == nil && i == 14:
			if r.Skipped == nil {
				t.Errorf("row %d: an infinite reading was screened", i+1)
			}
		case want[i] == nil:
			if r.Skipped != nil {
				t.Errorf("row %d set aside: %v", i+1, r.Skipped)
				continue
			}
			c := ref[k]
			k++
			if r.Z != c.Z || r.Stat != c.Stat || r.Exam != c.Exam || r.Exams != c.Exams || !r.InRange || r.Extrapolated() {
				t.Errorf("row %d: %+v; want the clean sheet's %+v", i+1, r, c)
			}
		default:
			if !errors.Is(r.Skipped, want[i]) {
				t.Errorf("row %d: skipped %v; want %v", i+1, r.Skipped, want[i])
			}
			if !math.IsNaN(r.Z) || !math.IsNaN(r.Stat) || r.Signal || r.Exam != 0 {
				t.Errorf("row %d was set aside but has results %+v", i+1, r)
			}
		}
	}
	var dup *refcurve.DuplicateError
	if !errors.As(res[4].Skipped, &dup) || !dup.Same || dup.Rows != [2]int{3, 5} {
		t.Errorf("row 5: %#v", res[4].Skipped)
	}
	if !errors.As(res[8].Skipped, &dup) || dup.Same || dup.Rows != [2]int{8, 9} || res[7].Skipped != res[8].Skipped {
		t.Errorf("rows 8 and 9: %#v %#v", res[7].Skipped, res[8].Skipped)
	}
	var re *refcurve.RangeError
	if !errors.As(res[3].Skipped, &re) || re.Reach != 0 || re.Time != hi+0.001 {
		t.Errorf("row 4: %#v", res[3].Skipped)
	}

	// Extrapolation reaches a stated distance: the row just outside is
	// screened against the curves' end and marked, the one 30 years out is
	// still set aside, naming the reach.
	set.Extrapolate = DefaultExtrapolation
	res, err = m.ScreenEach(messy, set, 2)
	if err != nil {
		t.Fatal(err)
	}
	if r := res[3]; r.Skipped != nil || r.InRange || !r.Extrapolated() || r.Exam != 4 || r.Exams != 4 {
		t.Errorf("row 4 with extrapolation: %+v", r)
	}
	if !errors.As(res[13].Skipped, &re) || re.Reach != DefaultExtrapolation || math.Abs(re.Distance()-30) > 1e-9 {
		t.Errorf("row 14 with extrapolation: %#v", res[13].Skipped)
	}

	// Strict screening names every row that cannot be screened.
	_, err = m.Screen(messy, DefaultSettings(), 2)
	var all *ExamErrors
	if !errors.As(err, &all) || all.Count != 9 || all.Total != len(messy) {
		t.Fatalf("strict: %v", err)
	}
	if all.First[0].Index != 1 || !errors.Is(all.First[0], ErrNoReading) {
		t.Errorf("first listed: %+v", all.First[0])
	}

	// A reading the transform cannot take is set aside with the
	// transform's kind.
	ml, err := Fit(context.Background(), cohort(300, serial.Params{Phi: 0.6, C: 0.6}, 3, "R"), FitOptions{Name: "log", Curves: refcurve.Options{Transform: transform.Log}})
	if err != nil {
		t.Fatal(err)
	}
	res, err = ml.ScreenEach([]Exam{{Worker: "a", Time: 40, Value: -1}, {Worker: "a", Time: 41, Value: 150}}, DefaultSettings(), 2)
	if err != nil || !errors.Is(res[0].Skipped, transform.ErrDomain) || res[1].Skipped != nil || res[1].Exam != 1 {
		t.Errorf("log of -1: %v, %+v", err, res)
	}

	// The call itself fails for bad settings, not for rows.
	set = DefaultSettings()
	set.Extrapolate = -1
	if _, err := m.ScreenEach(clean, set, 2); !errors.Is(err, chart.ErrSetting) {
		t.Errorf("negative extrapolation: %v", err)
	}
	if _, err := m.ScreenEach(nil, DefaultSettings(), 2); !errors.Is(err, ErrNoExams) {
		t.Errorf("no exams: %v", err)
	}
}
