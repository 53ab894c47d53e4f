package refcurve

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// Kinds of failure a caller may need to tell apart, for errors.Is. The
// errors that carry the facts (RangeError, GroupError, DuplicateError)
// match them; their messages may be reworded freely.
var (
	// ErrOutsideRange: a time outside a group's reference range, without
	// extrapolation (a *RangeError).
	ErrOutsideRange = errors.New("outside the reference range")
	// ErrUnknownGroup: a group the model does not know, or no group for a
	// model that has several (a *GroupError).
	ErrUnknownGroup = errors.New("unknown group")
	// ErrDuplicateExam: two exams of one worker at the same time (a
	// *DuplicateError).
	ErrDuplicateExam = errors.New("two exams of a worker at the same time")
)

// RangeError reports a time outside the reference range [Min, Max] of a
// group ("" for a model without groups) where extrapolation was not asked
// for.
type RangeError struct {
	Group    string
	Time     float64
	Min, Max float64
}

func (e *RangeError) Error() string {
	return fmt.Sprintf("time %s is outside the reference range %s–%s of %s; ask for extrapolation to allow it",
		num(e.Time), num(e.Min), num(e.Max), groupLabel(e.Group))
}

// Is reports whether target is ErrOutsideRange.
func (e *RangeError) Is(target error) bool { return target == ErrOutsideRange }

// GroupError reports a group the model has no curves for. Groups are the
// model's groups ("" alone for a model without groups); Group is the one
// asked for ("" when none was given to a model with groups).
type GroupError struct {
	Group  string
	Groups []string
}

func (e *GroupError) Error() string {
	if len(e.Groups) == 1 && e.Groups[0] == "" {
		return fmt.Sprintf("this model has no groups, so group %q is unknown; leave the group empty", e.Group)
	}
	names := make([]string, len(e.Groups))
	for i, g := range e.Groups {
		names[i] = strconv.Quote(g)
	}
	if e.Group == "" {
		return "this model has groups " + strings.Join(names, ", ") + "; say which group"
	}
	return fmt.Sprintf("unknown group %q; the model has groups %s", e.Group, strings.Join(names, ", "))
}

// Is reports whether target is ErrUnknownGroup.
func (e *GroupError) Is(target error) bool { return target == ErrUnknownGroup }

// DuplicateError reports two exams of one worker at the same time. Rows are
// the 1-based positions of both in the slice given (the earlier first).
type DuplicateError struct {
	Worker string
	Time   float64
	Rows   [2]int
}

func (e *DuplicateError) Error() string {
	return fmt.Sprintf("data rows %d and %d hold two exams of worker %q at the same age %s; keep one exam per worker and age (drop the repeat or average the two)",
		e.Rows[0], e.Rows[1], e.Worker, num(e.Time))
}

// Is reports whether target is ErrDuplicateExam.
func (e *DuplicateError) Is(target error) bool { return target == ErrDuplicateExam }

// RowError is a problem with input rows. Rows are 1-based positions in the
// slice given to Fit or Residuals (data rows, not counting a header);
// Column is "worker", "time", "value" or "group" when one column is at
// fault. Err, when not nil, is the underlying failure.
type RowError struct {
	Rows   []int
	Column string
	Reason string
	Err    error
}

func (e *RowError) Error() string {
	var b strings.Builder
	if len(e.Rows) == 1 {
		b.WriteString("data row " + strconv.Itoa(e.Rows[0]))
	} else {
		b.WriteString("data rows ")
		for i, r := range e.Rows {
			if i > 0 {
				b.WriteString(" and ")
			}
			b.WriteString(strconv.Itoa(r))
		}
	}
	if e.Column != "" {
		b.WriteString(", column " + e.Column)
	}
	b.WriteString(": " + e.Reason)
	return b.String()
}

// Unwrap returns the underlying failure, if any.
func (e *RowError) Unwrap() error { return e.Err }

// EntryError is the failure of one entry of ZMany; Index is 0-based.
type EntryError struct {
	Index int
	Err   error
}

func (e EntryError) Error() string { return "entry " + strconv.Itoa(e.Index+1) + ": " + e.Err.Error() }

// Unwrap returns the entry's failure.
func (e EntryError) Unwrap() error { return e.Err }

// ScoreErrors reports the entries ZMany could not score: Count of them,
// the first few in First. errors.Is and errors.As look into the first few.
type ScoreErrors struct {
	Count, Total int
	First        []EntryError
}

func (e *ScoreErrors) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d of %d scores could not be computed", e.Count, e.Total)
	for _, f := range e.First {
		b.WriteString("; ")
		b.WriteString(f.Error())
	}
	if e.Count > len(e.First) {
		b.WriteString("; ...")
	}
	return b.String()
}

// Unwrap returns the failures of the first few entries.
func (e *ScoreErrors) Unwrap() []error {
	out := make([]error, len(e.First))
	for i, f := range e.First {
		out[i] = f
	}
	return out
}
