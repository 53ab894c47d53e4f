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
	ErrDuplicateExam = errors.New("two exams of a worker at the same age")
	// ErrTooFewWorkers: a group with fewer reference workers than a curve
	// needs (a *GroupSizeError).
	ErrTooFewWorkers = errors.New("too few reference workers in a group")
)

// GroupSizeError reports a group with fewer reference workers than the
// minimum a curve needs (Options.MinWorkers). The caller names the setting
// that lowers the minimum.
type GroupSizeError struct {
	Group        string
	Workers, Min int
}

func (e *GroupSizeError) Error() string {
	return fmt.Sprintf("%s has %s; a reference curve needs at least %d",
		groupLabel(e.Group), plural(e.Workers, "worker", "workers"), e.Min)
}

// Is reports whether target is ErrTooFewWorkers.
func (e *GroupSizeError) Is(target error) bool { return target == ErrTooFewWorkers }

// MaxCollected bounds the problems a RowErrors keeps (it counts them all).
const MaxCollected = 1000

// RowErrors collects every problem Fit or Residuals found in the rows
// given (*RowError, *DuplicateError) or the groups they make
// (*GroupSizeError), so that one run reports them all. List holds the
// first MaxCollected, Count all of them. errors.Is and errors.As look into
// List.
type RowErrors struct {
	Count int
	List  []error
}

func (e *RowErrors) add(err error) {
	e.Count++
	if len(e.List) < MaxCollected {
		e.List = append(e.List, err)
	}
}

// err returns e, or nil when it holds nothing.
func (e *RowErrors) err() error {
	if e.Count == 0 {
		return nil
	}
	return e
}

func (e *RowErrors) Error() string {
	if e.Count == 1 && len(e.List) == 1 {
		return e.List[0].Error()
	}
	var b strings.Builder
	b.WriteString(strconv.Itoa(e.Count) + " problems")
	for i, x := range e.List {
		if i == 5 {
			b.WriteString("; ...")
			break
		}
		b.WriteString("; " + x.Error())
	}
	return b.String()
}

// Unwrap returns the problems kept.
func (e *RowErrors) Unwrap() []error { return e.List }

// plural writes n with the singular or plural noun.
func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return strconv.Itoa(n) + " " + many
}

// RangeError reports an age (the time of an exam) outside the reference
// range [Min, Max] of a group ("" for a model without groups): either no
// extrapolation was asked for (Reach 0) or the age lies farther outside
// than the Reach years extrapolation was allowed (see Place). Messages say
// what is wrong; the caller adds how to allow it (a command-line flag, a
// cell option).
type RangeError struct {
	Group    string
	Time     float64
	Min, Max float64
	// Reach is the years beyond the range that extrapolation allowed (0:
	// none was asked for).
	Reach float64
}

// Distance is how many years the age lies outside the range.
func (e *RangeError) Distance() float64 {
	if e.Time < e.Min {
		return e.Min - e.Time
	}
	return e.Time - e.Max
}

func (e *RangeError) Error() string {
	if e.Reach > 0 {
		side := "above"
		if e.Time < e.Min {
			side = "below"
		}
		return fmt.Sprintf("age %s is %s years %s the reference range %s–%s of %s, farther than the %s years extrapolation reaches",
			num(e.Time), strconv.FormatFloat(e.Distance(), 'g', 3, 64), side, num(e.Min), num(e.Max), groupLabel(e.Group), num(e.Reach))
	}
	return fmt.Sprintf("age %s is outside the reference range %s–%s of %s",
		num(e.Time), num(e.Min), num(e.Max), groupLabel(e.Group))
}

// Is reports whether target is ErrOutsideRange.
func (e *RangeError) Is(target error) bool { return target == ErrOutsideRange }

// Outside checks an age t against a group's reference range [lo, hi] when
// extrapolation may reach reach years beyond it (0: none): it returns nil
// when t is inside the range or within reach of it, else a *RangeError.
func Outside(group string, t, lo, hi, reach float64) error {
	if t >= lo-reach && t <= hi+reach {
		return nil
	}
	return &RangeError{Group: group, Time: t, Min: lo, Max: hi, Reach: reach}
}

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
// Same is true when both hold the same reading (a repeated row).
type DuplicateError struct {
	Worker string
	Time   float64
	Rows   [2]int
	Same   bool
}

func (e *DuplicateError) Error() string {
	if e.Same {
		return fmt.Sprintf("data row %d repeats the exam of worker %q at age %s of data row %d, with the same reading", e.Rows[1], e.Worker, num(e.Time), e.Rows[0])
	}
	return fmt.Sprintf("data rows %d and %d hold two exams of worker %q at the same age %s with different readings; keep one exam per worker and age (drop the wrong one or average the two)",
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
