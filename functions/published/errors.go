package published

import (
	"errors"
	"strconv"
	"strings"
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
	// reference covers, and extrapolation was not asked for.
	ErrOutOfRange = errors.New("outside the reference range")
	// ErrUnknownGroup: the group is not in the reference.
	ErrUnknownGroup = errors.New("unknown group")
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

// RangeError is an age or covariate outside the range a group of the
// reference covers. Name is "age" or the covariate's name.
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

// UnknownGroupError is a group the reference does not have.
type UnknownGroupError struct {
	Group string
	Known []string
}

func (e *UnknownGroupError) Error() string {
	if len(e.Known) == 1 && e.Known[0] == "" {
		return "this reference has no groups, so group " + strconv.Quote(e.Group) + " is unknown; leave the group empty"
	}
	names := make([]string, len(e.Known))
	for i, g := range e.Known {
		names[i] = strconv.Quote(g)
	}
	if e.Group == "" {
		return "this reference has groups " + strings.Join(names, ", ") + "; say which group"
	}
	return "unknown group " + strconv.Quote(e.Group) + "; the reference has groups " + strings.Join(names, ", ")
}

func (e *UnknownGroupError) Unwrap() error { return ErrUnknownGroup }

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

// EntryError is the failure of one entry of a batch; Index is 0-based.
type EntryError struct {
	Index int
	Err   error
}

func (e EntryError) Unwrap() error { return e.Err }

// ScoreErrors reports the entries of a batch (ZMany) that could not be
// scored: Count of Total, the first few in First.
type ScoreErrors struct {
	Count, Total int
	First        []EntryError
}

func (e *ScoreErrors) Error() string {
	var b strings.Builder
	b.WriteString(strconv.Itoa(e.Count) + " of " + strconv.Itoa(e.Total) + " scores could not be computed")
	for _, f := range e.First {
		b.WriteString("; entry " + strconv.Itoa(f.Index+1) + ": " + f.Err.Error())
	}
	if e.Count > len(e.First) {
		b.WriteString("; ...")
	}
	return b.String()
}

// Unwrap gives the errors of the first entries, so errors.Is and errors.As
// see their kinds.
func (e *ScoreErrors) Unwrap() []error {
	out := make([]error, len(e.First))
	for i, f := range e.First {
		out[i] = f.Err
	}
	return out
}

const maxReportedEntries = 5

func groupLabel(g string) string {
	if g == "" {
		return "the reference"
	}
	return "group " + strconv.Quote(g)
}

// num formats a number for messages: up to 6 significant digits.
func num(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }
