package cell

import (
	"context"
	"errors"
	"fmt"
	"strings"
)

// Code is a spreadsheet error code such as #N/A: what a cell shows when a
// cell function fails. The add-ins show the code in the cell and the
// error's message as its note.
type Code string

// Spreadsheet error codes. Which code a failure gives is the error-code
// contract: see Failure.
const (
	CodeValue Code = "#VALUE!"
	CodeNA    Code = "#N/A"
	CodeNum   Code = "#NUM!"
	CodeName  Code = "#NAME?"
	CodeRef   Code = "#REF!"
	CodeDiv0  Code = "#DIV/0!"
	CodeNull  Code = "#NULL!"
	CodeBusy  Code = "#BUSY!"
)

// Failure is one kind of failure a cell function reports. The failure
// kinds and their codes are veer's error-code contract: every kind has
// exactly one code, and every error a cell function returns is made from the
// kind it stands for (WrongArgument.Errorf(...)), so the code follows from
// the kind and never from the wording of a message. The contract is written
// once, in the table below; Code, Meaning, CodeMeanings (served in the
// GET /v1/functions listing) and the help texts (RowHelp, CallHelp) are
// made from it.
//
// An error value in an input cell where one value is needed fails the call
// with that cell's own code (Errorf); #DIV/0! and #NULL! reach a cell only
// that way.
type Failure uint8

// The kinds of failure, in contract order.
const (
	WrongArgument    Failure = iota + 1 // wrong type, count, shape or option
	BadData                             // data a result cannot be computed from
	BlankInput                          // a blank (or error) input cell of a row
	UnknownGroup                        // a group the model does not know
	UnknownRule                         // a rule name the rule set does not hold
	OutsideReference                    // an age outside the reference range
	OutOfDomain                         // a value the model's transform cannot take
	OutOfRange                          // a number out of range; no finite answer
	UnknownFunction                     // a function name not in the catalogue
	UnknownModel                        // no such model, unreadable, read-only
	Busy                                // limits reached, time limit, cancelled
)

// contract is the error-code contract: the code of each failure kind and
// what it covers, in words a spreadsheet user reads in the function
// listing and help texts.
var contract = [...]struct {
	code    Code
	meaning string
}{
	WrongArgument:    {CodeValue, "an argument of the wrong type, count or shape (text where a number is needed, columns of different lengths, an unknown option or option value)"},
	BadData:          {CodeValue, "data the result cannot be computed from (two exams of a worker at the same age, too few reference workers)"},
	BlankInput:       {CodeNA, "a blank or error input cell"},
	UnknownGroup:     {CodeNA, "a group the model does not know"},
	UnknownRule:      {CodeNA, "a rule name the rule set does not hold"},
	OutsideReference: {CodeNum, "an age (or a covariate such as height) outside the reference range (unless extrapolate=true, which reaches 5 years beyond the reference ages, or reach=YEARS)"},
	OutOfDomain:      {CodeNum, "a reading the model's transform cannot take (zero or less under log or Box-Cox) or a centile it cannot map back"},
	OutOfRange:       {CodeNum, "a number outside its allowed range (a lambda outside (0, 1], a negative onset) or a computation without a finite answer (a target no limit reaches, a rule stopped by its cost or time limit)"},
	UnknownFunction:  {CodeName, "a function name the catalogue does not hold"},
	UnknownModel:     {CodeRef, "a model name or handle that does not exist or was deleted, a model that cannot be read, a rule set where a model is wanted, or a write to a built-in model"},
	Busy:             {CodeBusy, "all computation slots busy, the time limit per call passed, a cancelled call or a server shutting down; recalculating later may succeed (never kept in the cache)"},
}

// codeHeadlines are the codes cells may show, in listing order, with a
// headline each; the failures of each code follow it in CodeMeanings.
var codeHeadlines = []struct {
	code     Code
	headline string
}{
	{CodeValue, "an argument has the wrong type, count or content"},
	{CodeNA, "a value is not available"},
	{CodeNum, "a number is out of range or has no answer"},
	{CodeName, "unknown function name"},
	{CodeRef, "unknown, deleted, unreadable or read-only model"},
	{CodeDiv0, "division by zero (veer's functions pass it on from an input cell, never make it)"},
	{CodeNull, "a required range is empty (veer's functions pass it on from an input cell, never make it)"},
	{CodeBusy, "the server could not finish within its limits"},
}

// Failures returns every failure kind in contract order.
func Failures() []Failure {
	out := make([]Failure, 0, len(contract)-1)
	for f := WrongArgument; int(f) < len(contract); f++ {
		out = append(out, f)
	}
	return out
}

// Code returns the spreadsheet code of the failure kind.
func (f Failure) Code() Code {
	if f == 0 || int(f) >= len(contract) {
		return CodeValue
	}
	return contract[f].code
}

// Meaning describes what the failure kind covers, for help texts.
func (f Failure) Meaning() string {
	if f == 0 || int(f) >= len(contract) {
		return ""
	}
	return contract[f].meaning
}

// Errorf returns an *Error with the failure's code and a formatted message.
func (f Failure) Errorf(format string, a ...any) *Error {
	return &Error{Code: f.Code(), Message: fmt.Sprintf(format, a...)}
}

// CodeMeanings returns the codes cells may show with what each means: its
// headline and the meanings of the failure kinds that give it.
func CodeMeanings() map[Code]string {
	out := make(map[Code]string, len(codeHeadlines))
	for _, h := range codeHeadlines {
		var parts []string
		for _, f := range Failures() {
			if f.Code() == h.code {
				parts = append(parts, f.Meaning())
			}
		}
		if len(parts) == 0 {
			out[h.code] = h.headline
			continue
		}
		out[h.code] = h.headline + ": " + strings.Join(parts, "; ")
	}
	return out
}

// RowHelp is a help sentence saying which code each failure gives in the
// row it concerns (the other rows are still answered), e.g. "In its row,
// a blank or error input cell gives #N/A; ...".
func RowHelp(fs ...Failure) string {
	return "In its row, " + helpList(fs) + "."
}

// CallHelp is a help sentence saying which code each failure fails the
// whole call with, e.g. "The whole call fails with #VALUE! for ...".
func CallHelp(fs ...Failure) string {
	var parts []string
	for _, f := range fs {
		parts = append(parts, "with "+string(f.Code())+" for "+f.Meaning())
	}
	return "The whole call fails " + strings.Join(parts, ", and ") + "."
}

func helpList(fs []Failure) string {
	var parts []string
	for _, f := range fs {
		parts = append(parts, f.Meaning()+" gives "+string(f.Code()))
	}
	return strings.Join(parts, "; ")
}

// knownCodes are the error codes accepted from spreadsheets in input cells.
// Besides veer's own codes, spreadsheets send a few more (#SPILL!, #CALC!,
// #GETTING_DATA, ...); they are kept so an input error propagates unchanged.
var knownCodes = map[string]Code{
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
func NormalizeCode(code string) (Code, bool) {
	if c, ok := knownCodes[code]; ok {
		return c, true
	}
	for k, c := range knownCodes {
		if strings.EqualFold(k, code) {
			return c, true
		}
	}
	return CodeValue, false
}

// Error is a spreadsheet error: a code such as #N/A shown in the cell and a
// message for the user. It implements the error interface, so cell functions
// simply return it.
//
// Cell functions do not name themselves in messages: the layer that
// dispatches a call adds the function's name once, with In, to the error of
// the call and to the errors inside a spilled result (EncodeResult), as
// os.PathError adds the operation and the path.
type Error struct {
	Code    Code   `json:"code"`
	Message string `json:"message"`
	// Func is the function whose name In put at the start of Message; ""
	// until then.
	Func string `json:"-"`
}

// Error returns "code: message".
func (e *Error) Error() string {
	if e.Message == "" {
		return string(e.Code)
	}
	return string(e.Code) + ": " + e.Message
}

// In returns the error in the context of the cell function fn: a copy whose
// message starts with "fn: ". An error already in a function's context, a
// nil error and an empty fn are returned as they are. e is never modified,
// since an error may be shared by several calls.
func (e *Error) In(fn string) *Error {
	if e == nil || e.Func != "" || fn == "" {
		return e
	}
	msg := fn
	if e.Message != "" {
		msg += ": " + e.Message
	}
	return &Error{Code: e.Code, Message: msg, Func: fn}
}

// Errorf returns an *Error with the given code and a formatted message. Use
// it for a code that comes from outside the contract (an input cell's own
// error); veer's own failures use Failure.Errorf.
func Errorf(code Code, format string, a ...any) *Error {
	return &Error{Code: code, Message: fmt.Sprintf(format, a...)}
}

// AsError maps any error to a spreadsheet error. An *Error anywhere in the
// chain is returned as is; context.DeadlineExceeded and context.Canceled
// become Busy; every other error becomes WrongArgument with the error's
// text as message. AsError(nil) is nil.
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
		return Busy.Errorf("the computation took longer than the time limit per call")
	case errors.Is(err, context.Canceled):
		return Busy.Errorf("the call was cancelled")
	}
	return &Error{Code: CodeValue, Message: err.Error()}
}
