package limit

import (
	"errors"
	"fmt"
)

// Kinds of failure of a limit computation, for errors.Is. Settings out of
// range are *chart.SettingError (chart.ErrSetting).
var (
	// ErrStopped: MonteCarlo.Stop ended a simulation early (a cancelled
	// computation; never an answer to keep).
	ErrStopped = errors.New("the computation was cancelled")
	// ErrTargetTooShort: no positive limit gives an in-control run as
	// short as requested.
	ErrTargetTooShort = errors.New("the target is shorter than any limit gives")
	// ErrTargetTooLong: no limit within reach gives an in-control run as
	// long as requested.
	ErrTargetTooLong = errors.New("the target is longer than any limit within reach gives")
	// ErrTooMuchWork: a simulation would step through more exams than
	// MonteCarlo.MaxExams allows (a *WorkError).
	ErrTooMuchWork = errors.New("the simulation needs more exams than one computation may")
)

// WorkError is a simulation stopped at its budget of simulated exams; it
// matches ErrTooMuchWork.
type WorkError struct {
	// Max is the budget (MonteCarlo.MaxExams).
	Max int64
}

func (e *WorkError) Error() string {
	return fmt.Sprintf("the simulation reached its budget of %d simulated exams", e.Max)
}

// Unwrap makes errors.Is(err, ErrTooMuchWork) true.
func (e *WorkError) Unwrap() error { return ErrTooMuchWork }

// reachError is a target no limit reaches, worded for the user; it
// unwraps to its kind, ErrTargetTooShort or ErrTargetTooLong.
type reachError struct {
	kind error
	msg  string
}

func reachErrorf(kind error, format string, a ...any) error {
	return &reachError{kind: kind, msg: fmt.Sprintf(format, a...)}
}

func (e *reachError) Error() string { return e.msg }
func (e *reachError) Unwrap() error { return e.kind }
