package cell

import (
	"context"
	"errors"
	"fmt"
)

// Spreadsheet error codes used by veer. A cell function reports a failure as
// an *Error carrying one of these codes and a message a spreadsheet user can
// act on; the add-ins show the code in the cell and the message as its tooltip.
//
// What each code means in veer:
//
//	#VALUE!  an argument has the wrong type, count or content (bad option,
//	         text in a numeric range, malformed request); also any failure
//	         that has no better code (every plain Go error maps here)
//	#N/A     a value is not available: a row whose input is blank or an
//	         error, a time outside the reference range, a group the model
//	         does not know
//	#NUM!    a number is out of range or a computation does not converge
//	         (negative standard deviation, lambda outside (0, 1], a result
//	         that is not finite)
//	#NAME?   the function name is unknown
//	#REF!    a model name or handle does not exist (or was deleted), or a
//	         read-only model would be written
//	#DIV/0!  a division by zero (for example the mean of no numbers)
//	#NULL!   a required range is empty
//	#BUSY!   the server could not finish within its limits: all computation
//	         slots busy, the time limit per call passed, the call was
//	         cancelled or the server is shutting down; recalculating later
//	         may succeed
const (
	CodeValue = "#VALUE!"
	CodeNA    = "#N/A"
	CodeNum   = "#NUM!"
	CodeName  = "#NAME?"
	CodeRef   = "#REF!"
	CodeDiv0  = "#DIV/0!"
	CodeNull  = "#NULL!"
	CodeBusy  = "#BUSY!"
)

// knownCodes are the error codes accepted from spreadsheets in input cells.
// Besides veer's own codes, spreadsheets send a few more (#SPILL!, #CALC!,
// #GETTING_DATA, ...); they are kept so an input error propagates unchanged.
var knownCodes = map[string]string{
	"#VALUE!":       CodeValue,
	"#N/A":          CodeNA,
	"#NUM!":         CodeNum,
	"#NAME?":        CodeName,
	"#REF!":         CodeRef,
	"#DIV/0!":       CodeDiv0,
	"#NULL!":        CodeNull,
	"#BUSY!":        CodeBusy,
	"#SPILL!":       "#SPILL!",
	"#CALC!":        "#CALC!",
	"#GETTING_DATA": "#GETTING_DATA",
	"#FIELD!":       "#FIELD!",
	"#BLOCKED!":     "#BLOCKED!",
	"#CONNECT!":     "#CONNECT!",
	"#UNKNOWN!":     "#UNKNOWN!",
	"ERR:502":       CodeValue, // LibreOffice "invalid argument"
	"ERR:504":       CodeValue, // LibreOffice "parameter list error"
	"ERR:532":       CodeDiv0,  // LibreOffice division by zero
}

// NormalizeCode returns the canonical spelling of a spreadsheet error code
// (matching is case-insensitive) and whether it was recognised. Unknown codes
// normalise to #VALUE!.
func NormalizeCode(code string) (string, bool) {
	if c, ok := knownCodes[code]; ok {
		return c, true
	}
	for k, c := range knownCodes {
		if len(k) == len(code) && equalFoldASCII(k, code) {
			return c, true
		}
	}
	return CodeValue, false
}

// Error is a spreadsheet error: a code such as #N/A shown in the cell and a
// message for the user. It implements the error interface, so cell functions
// simply return it.
type Error struct {
	Code    string `json:"code"`
	Message string `json:"message"`
}

// Error returns "code: message".
func (e *Error) Error() string {
	if e.Message == "" {
		return e.Code
	}
	return e.Code + ": " + e.Message
}

// Errorf returns an *Error with the given code and a formatted message.
func Errorf(code, format string, a ...any) *Error {
	return &Error{Code: code, Message: fmt.Sprintf(format, a...)}
}

// ValueError returns a #VALUE! error (wrong argument type, count or content).
func ValueError(format string, a ...any) *Error { return Errorf(CodeValue, format, a...) }

// NAError returns a #N/A error (a value is not available).
func NAError(format string, a ...any) *Error { return Errorf(CodeNA, format, a...) }

// NumError returns a #NUM! error (a number out of range, no convergence).
func NumError(format string, a ...any) *Error { return Errorf(CodeNum, format, a...) }

// NameError returns a #NAME? error (an unknown function name).
func NameError(format string, a ...any) *Error { return Errorf(CodeName, format, a...) }

// RefError returns a #REF! error (an unknown or read-only model).
func RefError(format string, a ...any) *Error { return Errorf(CodeRef, format, a...) }

// Div0Error returns a #DIV/0! error.
func Div0Error(format string, a ...any) *Error { return Errorf(CodeDiv0, format, a...) }

// NullError returns a #NULL! error (a required range is empty).
func NullError(format string, a ...any) *Error { return Errorf(CodeNull, format, a...) }

// BusyError returns a #BUSY! error (limits reached; retrying may help).
func BusyError(format string, a ...any) *Error { return Errorf(CodeBusy, format, a...) }

// AsError maps any error to a spreadsheet error. An *Error anywhere in the
// chain is returned as is; context.DeadlineExceeded becomes #BUSY! (time
// limit), context.Canceled becomes #BUSY! (cancelled); every other error
// becomes #VALUE! with the error's text as message. AsError(nil) is nil.
func AsError(err error) *Error {
	if err == nil {
		return nil
	}
	var e *Error
	if errors.As(err, &e) && e != nil {
		return e
	}
	switch {
	case errors.Is(err, context.DeadlineExceeded):
		return BusyError("the computation took longer than the time limit per call")
	case errors.Is(err, context.Canceled):
		return BusyError("the call was cancelled")
	}
	return &Error{Code: CodeValue, Message: err.Error()}
}

func equalFoldASCII(a, b string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := 0; i < len(a); i++ {
		x, y := a[i], b[i]
		if 'a' <= x && x <= 'z' {
			x -= 'a' - 'A'
		}
		if 'a' <= y && y <= 'z' {
			y -= 'a' - 'A'
		}
		if x != y {
			return false
		}
	}
	return true
}
