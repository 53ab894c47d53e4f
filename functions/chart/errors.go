package chart

import (
	"errors"
	"fmt"
	"strconv"
)

// ErrSetting is the kind of failure of a setting outside what a chart, its
// limit or its calibration accepts (a *SettingError), for errors.Is.
var ErrSetting = errors.New("a setting is out of range")

// SettingError reports a setting outside what the method accepts: the
// setting's name (the option name a user gives it, e.g. "lambda" or
// "headstart"), the value given (a number or a text) and what is wanted. Packages that build on charts (limits, monitoring)
// report their own settings with it too, so one check finds them all.
type SettingError struct {
	Setting string // option name, e.g. "lambda"
	Value   any    // the value given: float64, int or string
	Want    string // e.g. "more than 0 and at most 1"
}

func (e *SettingError) Error() string {
	if s, ok := e.Value.(string); ok {
		return fmt.Sprintf("%s must be %s, not %q", e.Setting, e.Want, s)
	}
	return fmt.Sprintf("%s must be %s, got %v", e.Setting, e.Want, e.Value)
}

// Is reports whether target is ErrSetting.
func (e *SettingError) Is(target error) bool { return target == ErrSetting }

// Years writes a number of years for a message to three significant
// digits, with the noun in the singular for exactly one ("1 year", "1.5
// years").
func Years(v float64) string {
	s := strconv.FormatFloat(v, 'g', 3, 64)
	if s == "1" {
		return "1 year"
	}
	return s + " years"
}
