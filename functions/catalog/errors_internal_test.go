package catalog

import (
	"errors"
	"fmt"
	"strings"
	"testing"

	"veer/functions/cell"
	"veer/functions/chart"
	"veer/functions/limit"
	"veer/functions/refcurve"
	"veer/functions/transform"
)

// reworded is a statistics error with other words: the same kind and
// facts (it unwraps to the original), a different message.
type reworded struct{ err error }

func (r reworded) Error() string { return "something else entirely" }
func (r reworded) Unwrap() error { return r.err }

// Rewording a statistics error's message cannot change the code a cell
// shows: the code comes from the error's kind, never from its text.
func TestRewordingKeepsTheCode(t *testing.T) {
	kinds := []struct {
		err  error
		want cell.Failure
	}{
		{&refcurve.RangeError{Group: "office", Time: 70, Min: 25, Max: 65}, cell.OutsideReference},
		{&refcurve.GroupError{Group: "lab", Groups: []string{"office", "plant"}}, cell.UnknownGroup},
		{&refcurve.DuplicateError{Worker: "W1", Time: 40, Rows: [2]int{2, 3}}, cell.BadData},
		{&transform.ValueError{Index: -1, Value: -3, Transform: transform.Log}, cell.OutOfDomain},
		{&transform.InverseError{Z: -2, Transform: transform.Transform{Name: transform.BoxCox, Lambda: 1}}, cell.OutOfDomain},
		{&chart.SettingError{Setting: "lambda", Value: 2.0, Want: "more than 0 and at most 1"}, cell.OutOfRange},
		{fmt.Errorf("limit: %w", limit.ErrStopped), cell.Busy},
		{fmt.Errorf("wrapped: %w", limit.ErrTargetTooLong), cell.OutOfRange},
		{&refcurve.ScoreErrors{Count: 1, Total: 2, First: []refcurve.EntryError{{Index: 1, Err: &refcurve.RangeError{Time: 90}}}}, cell.OutsideReference},
	}
	for _, k := range kinds {
		for _, err := range []error{k.err, reworded{k.err}, fmt.Errorf("row 3: %w", reworded{k.err})} {
			e := asCellError(err, cell.WrongArgument)
			if e.Code != k.want.Code() {
				t.Errorf("%T worded %q: %s; want %s", k.err, err, e.Code, k.want.Code())
			}
			if re := rowError(err, 3, true); re.Code != k.want.Code() {
				t.Errorf("%T worded %q in a row: %s; want %s", k.err, err, re.Code, k.want.Code())
			}
		}
	}
	// And the old trigger words decide nothing: an error of no known kind
	// gets the operation's fallback whatever it says.
	for _, msg := range []string{
		"time 70 is outside the reference range 25–65", "unknown group \"lab\"", "this model has no groups",
		"the target cannot reach", "the computation was cancelled",
	} {
		if e := asCellError(errors.New(msg), cell.BadData); e.Code != cell.BadData.Code() {
			t.Errorf("an untyped error saying %q gave %s", msg, e.Code)
		}
	}
}

func TestRowErrorWording(t *testing.T) {
	tests := []struct {
		err        error
		row        int
		groupGiven bool
		code       cell.Code
		want       string
	}{
		{&refcurve.RangeError{Group: "office", Time: 70, Min: 25.004, Max: 64.996}, 2, true, cell.CodeNum,
			`row 2: age 70 is outside the reference range 25 to 65 of group "office"; add "extrapolate=true" to the options to answer ages up to 5 years outside from the curves' end values`},
		{&refcurve.RangeError{Group: "office", Time: 80, Min: 25.004, Max: 64.996, Reach: 5}, 3, true, cell.CodeNum,
			`row 3: age 80 is 15 years outside the reference range 25 to 65 of group "office", farther than extrapolation reaches (5 years); give "reach=YEARS"`},
		{&refcurve.RangeError{Time: 70, Min: 25, Max: 65}, 0, false, cell.CodeNum,
			`age 70 is outside the reference range 25 to 65 of the reference data; add "extrapolate=true"`},
		{&refcurve.GroupError{Group: "", Groups: []string{"office", "plant"}}, 4, true, cell.CodeNA, "row 4: the group is blank; this model has groups"},
		{&refcurve.GroupError{Group: "", Groups: []string{"office", "plant"}}, 0, false, cell.CodeValue, "say which group"},
		{&refcurve.GroupError{Group: "lab", Groups: []string{"office", "plant"}}, 1, true, cell.CodeNA, `row 1: unknown group "lab"`},
	}
	for _, tt := range tests {
		e := rowError(tt.err, tt.row, tt.groupGiven)
		if e.Code != tt.code || !strings.Contains(e.Message, tt.want) {
			t.Errorf("rowError(%v) = %v; want %s containing %q", tt.err, e, tt.code, tt.want)
		}
	}
}
