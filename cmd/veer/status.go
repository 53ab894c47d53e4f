package main

import (
	"errors"
	"fmt"
	"slices"
	"strings"

	"veer/functions/published"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/functions/transform"
)

// Row statuses of screen's status column: what happened to each exam row.
const (
	statusScreened     = "screened"        // screened against the reference
	statusExtrapolated = "extrapolated"    // screened at an age outside the reference range, against the curves' end values
	statusNoReading    = "no_reading"      // blank reading: a missing exam, not a fault
	statusOutside      = "outside_range"   // age outside the reference range, beyond --extrapolate's reach
	statusUnknownGroup = "unknown_group"   // a group the model does not know
	statusBlankGroup   = "blank_group"     // the group cell is blank
	statusBlankID      = "blank_id"        // the worker id is blank
	statusBlankAge     = "blank_age"       // the age is blank
	statusBadAge       = "bad_age"         // the age cell is not a number
	statusBadReading   = "bad_reading"     // the reading is not a number, or one the model's transform cannot take
	statusRepeated     = "repeated_exam"   // another exam of the worker at the same age
	statusBlankCov     = "blank_covariate" // a covariate the reference needs (e.g. height) is blank
	statusBadCov       = "bad_covariate"   // a covariate is not a number, or one the reference cannot take
	statusNotScreened  = "not_screened"    // any other reason (the note says which)
)

// statusHelp says what each status means, for --help and the README.
var statusHelp = []struct{ status, meaning string }{
	{statusScreened, "screened against the reference"},
	{statusExtrapolated, "screened at an age outside the reference range, against the curves' end values (--extrapolate)"},
	{statusNoReading, "blank reading: a missing exam, left out of the worker's chart"},
	{statusOutside, "age outside the reference range, beyond --extrapolate's reach"},
	{statusUnknownGroup, "a group the model has no curves for"},
	{statusBlankGroup, "the group cell is blank"},
	{statusBlankID, "the worker id is blank"},
	{statusBlankAge, "the age is blank"},
	{statusBadAge, "the age is not a number"},
	{statusBadReading, "the reading is not a number, or one the model's transform cannot take"},
	{statusRepeated, "another exam of the worker at the same age (a repeat with the same reading: the repeat only)"},
	{statusBlankCov, "a covariate the reference equations need (e.g. height) is blank"},
	{statusBadCov, "a covariate is not a number, or one the reference equations cannot take"},
}

// statusOf returns the status of an exam row: why it was not screened
// (nil: it was), and whether it was extrapolated.
func statusOf(why error, extrapolated bool) string {
	var (
		bn *badNumber
		ce *published.CovariateError
	)
	switch {
	case why == nil && extrapolated:
		return statusExtrapolated
	case why == nil:
		return statusScreened
	case errors.Is(why, screening.ErrNoReading):
		return statusNoReading
	case errors.As(why, &ce) && ce.Missing:
		return statusBlankCov
	case errors.As(why, &ce), errors.As(why, &bn) && bn.what == "covariate":
		return statusBadCov
	case errors.Is(why, refcurve.ErrOutsideRange):
		return statusOutside
	case errors.Is(why, refcurve.ErrUnknownGroup):
		return statusUnknownGroup
	case errors.Is(why, errBlankGroup):
		return statusBlankGroup
	case errors.Is(why, screening.ErrNoWorker):
		return statusBlankID
	case errors.Is(why, screening.ErrNoAge):
		return statusBlankAge
	case errors.As(why, &bn) && bn.what == "age":
		return statusBadAge
	case errors.As(why, &bn), errors.Is(why, transform.ErrDomain), errors.Is(why, published.ErrReading):
		return statusBadReading
	case errors.Is(why, refcurve.ErrDuplicateExam):
		return statusRepeated
	}
	return statusNotScreened
}

// isFault reports whether a row status is a fault of the sheet: a row that
// should have been screened and was not (a missing reading is not one).
func isFault(status string) bool {
	return status != statusScreened && status != statusExtrapolated && status != statusNoReading
}

// rowStatus is the status of one exam row and a note in plain words (why
// it was not screened, or how it was extrapolated), without the row's place.
type rowStatus struct {
	status, note string
}

// statusCounts counts rows per status, for the summary on stderr.
type statusCounts map[string]int

// describe lists the counts of statuses other than screened, in the order
// of statusHelp.
func (c statusCounts) describe(skip ...string) string {
	var parts []string
	for _, h := range statusHelp {
		if n := c[h.status]; n > 0 && !slices.Contains(skip, h.status) {
			parts = append(parts, fmt.Sprintf("%d %s", n, h.status))
		}
	}
	if n := c[statusNotScreened]; n > 0 {
		parts = append(parts, fmt.Sprintf("%d %s", n, statusNotScreened))
	}
	return strings.Join(parts, ", ")
}

// faults returns the number of rows with a fault status.
func (c statusCounts) faults() int {
	n := 0
	for s, k := range c {
		if isFault(s) {
			n += k
		}
	}
	return n
}

// statusLegend is the help text listing the statuses.
func statusLegend() string {
	var b strings.Builder
	for _, h := range statusHelp {
		fmt.Fprintf(&b, "  %-14s %s\n", h.status, h.meaning)
	}
	return b.String()
}

// rowsSkipped is the result of a command that wrote its output but could
// not screen every row: it exits with exitSkipped.
type rowsSkipped struct{ n int }

func (e rowsSkipped) Error() string {
	if e.n == 1 {
		return "1 exam row could not be screened (see its status)"
	}
	return fmt.Sprintf("%d exam rows could not be screened (see their status)", e.n)
}

// exitSkipped is the exit code of a command that wrote its output but
// could not screen every exam row (their status column says why).
const exitSkipped = 3
