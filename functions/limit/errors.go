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
)

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
