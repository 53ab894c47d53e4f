package published

import (
	"errors"
	"strconv"
	"strings"

	"veer/functions/refcurve"
)

// Sentinel errors. Every error of this package wraps one of them, so
// callers tell kinds apart with errors.Is and read the facts with
// errors.As on the typed errors below.
var (
	// ErrMissing: a value the reference needs is blank (L, M or S in a
	// table row, a parameter of an equation).
	ErrMissing = errors.New("missing value")
	// ErrNotPositive: M or S (or the SD or mean of an equation) is zero or
	// negative, where it must be positive.
	ErrNotPositive = errors.New("value must be positive")
	// ErrNotFinite: a number is NaN or infinite.
	ErrNotFinite = errors.New("value is not a finite number")
	// ErrDuplicate: two table rows for the same group and age, two groups
	// of the same name, or a term given twice.
	ErrDuplicate = errors.New("duplicate")
	// ErrUnsorted: ages of a group do not increase down the table.
	ErrUnsorted = errors.New("ages not in increasing order")
	// ErrTooFewAges: a group has fewer than two ages.
	ErrTooFewAges = errors.New("too few ages")
	// ErrReading: a reading is zero or negative where the reference's
	// L ≠ 1 needs positive readings, or is not a finite number.
	ErrReading = errors.New("reading cannot be scored")
	// ErrMissingCovariate: a covariate an equation uses (height, say) is
	// blank for an exam.
	ErrMissingCovariate = errors.New("missing covariate")
	// ErrCovariate: a covariate value cannot be used (not finite, or not
	// positive under a logarithm).
	ErrCovariate = errors.New("covariate cannot be used")
	// ErrOutOfRange: an age or covariate lies outside the range the
	// reference covers, and extrapolation was not asked for. It is the
	// same kind as refcurve's, so fitted and published references fail
	// alike.
	ErrOutOfRange = refcurve.ErrOutsideRange
	// ErrUnknownGroup: the group is not in the reference (the same kind
	// as refcurve's).
	ErrUnknownGroup = refcurve.ErrUnknownGroup
	// ErrNoCentile: the centile does not exist for these L, M, S
	// (1 + L·S·z ≤ 0).
	ErrNoCentile = errors.New("centile does not exist")
	// ErrInvalidParams: an evaluated L, M or S is unusable (M or S not
	// positive, or not finite) at some age and covariates.
	ErrInvalidParams = errors.New("invalid reference parameters")
	// ErrFormat: the equations document is not readable or not laid out as
	// documented (syntax, unknown fields, wrong format or version, a term
	// that cannot be read, an unknown covariate).
	ErrFormat = errors.New("unreadable reference file")
)

// InputError is a problem with a reference given by the user: a row of an
// LMS table, or a place in an equations document. Row is 1-based (a data
// row of the table, or a row of an equation's age lookup) and 0 when the
// problem is not tied to one row; Rows lists both rows of a duplicate or
// of ages out of order. Column names the column or field at fault ("L",
// "M", "S", "age", "group", "terms", ...). Group and Part ("L", "M", "S",
// "mean", "sd", "lookup", "covariates") locate it in an equations
// document. Err is one of the sentinels.
type InputError struct {
	Group  string
	Part   string
	Row    int
	Rows   []int
	Column string
	// Line and Col place the problem in the user's file: a syntax error in
	// an equations document, or (Line, and Lines for Rows) a table row's
	// line when the caller gave it.
	Line, Col int
	Lines     []int
	Err       error
	Reason    string
	inTable   bool
}

func (e *InputError) Error() string {
	var loc []string
	if e.Line > 0 && !e.inTable {
		loc = append(loc, "line "+strconv.Itoa(e.Line)+", column "+strconv.Itoa(e.Col))
	}
	if !e.inTable && e.Group != "" {
		loc = append(loc, "group "+strconv.Quote(e.Group))
	}
	if e.Part != "" {
		loc = append(loc, e.Part)
	}
	row := "lookup row"
	if e.inTable {
		row = "data row"
	}
	switch {
	case len(e.Rows) > 1:
		s := row + "s " + joinInts(e.Rows)
		if e.inTable && len(e.Lines) == len(e.Rows) {
			s += " (lines " + joinInts(e.Lines) + ")"
		}
		loc = append(loc, s)
	case e.Row > 0:
		s := row + " " + strconv.Itoa(e.Row)
		if e.inTable && e.Line > 0 {
			s += " (line " + strconv.Itoa(e.Line) + ")"
		}
		loc = append(loc, s)
	}
	if e.Column != "" {
		loc = append(loc, "column "+strconv.Quote(e.Column))
	}
	if len(loc) == 0 {
		return e.Reason
	}
	return strings.Join(loc, ", ") + ": " + e.Reason
}

func joinInts(v []int) string {
	parts := make([]string, len(v))
	for i, r := range v {
		parts[i] = strconv.Itoa(r)
	}
	return strings.Join(parts, " and ")
}

func (e *InputError) Unwrap() error { return e.Err }

// RangeError is a covariate (height, say) outside the range a group of
// the reference declares for it. An age outside the reference's ages is
// refcurve's *RangeError, as for fitted curves. Both match ErrOutOfRange.
type RangeError struct {
	Group    string
	Name     string
	Value    float64
	Min, Max float64
}

func (e *RangeError) Error() string {
	return e.Name + " " + num(e.Value) + " is outside the reference range " + num(e.Min) + "–" + num(e.Max) +
		" of " + groupLabel(e.Group) + "; ask for extrapolation to allow it"
}

func (e *RangeError) Unwrap() error { return ErrOutOfRange }

// UnknownGroupError is a group the reference does not have: refcurve's
// *GroupError, so fitted and published references answer alike.
type UnknownGroupError = refcurve.GroupError

// ReadingError is a reading that cannot be scored against L, M, S: not a
// finite number, or not positive while L ≠ 1 (the Box-Cox power of
// y/M needs y > 0).
type ReadingError struct {
	Value, L float64
}

func (e *ReadingError) Error() string {
	if isNaNOrInf(e.Value) {
		return "the reading " + num(e.Value) + " is not a finite number"
	}
	return "the reading " + num(e.Value) + " is not positive, and this reference (L = " + num(e.L) +
		") only describes positive readings"
}

func (e *ReadingError) Unwrap() error { return ErrReading }

// CovariateError is a covariate that is blank, not finite, or not
// positive where a logarithm of it is taken.
type CovariateError struct {
	Group string
	Name  string
	Value float64
	// Missing is true when the value is blank (NaN).
	Missing bool
}

func (e *CovariateError) Error() string {
	if e.Missing {
		return "the " + e.Name + " is missing; the reference equation of " + groupLabel(e.Group) + " needs it"
	}
	if isNaNOrInf(e.Value) {
		return "the " + e.Name + " " + num(e.Value) + " is not a finite number"
	}
	return "the " + e.Name + " " + num(e.Value) + " is not positive, but the equation of " + groupLabel(e.Group) +
		" takes its logarithm"
}

func (e *CovariateError) Unwrap() error {
	if e.Missing {
		return ErrMissingCovariate
	}
	return ErrCovariate
}

// ParamsError is an unusable L, M or S evaluated from a reference at some
// age (an equation whose M or S is not positive there, or a centile that
// does not exist).
type ParamsError struct {
	Group  string
	Age    float64
	Params LMS
	Err    error
	Reason string
}

func (e *ParamsError) Error() string {
	return e.Reason + " (" + groupLabel(e.Group) + ", age " + num(e.Age) + ")"
}

func (e *ParamsError) Unwrap() error { return e.Err }

// EntryError and ScoreErrors report the entries of a batch (ZMany) that
// could not be scored; they are refcurve's types, so a batch fails the
// same way against fitted curves and against a published reference.
type (
	EntryError  = refcurve.EntryError
	ScoreErrors = refcurve.ScoreErrors
)

const maxReportedEntries = 5

func groupLabel(g string) string {
	if g == "" {
		return "the reference"
	}
	return "group " + strconv.Quote(g)
}

// num formats a number for messages: up to 6 significant digits.
func num(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }
