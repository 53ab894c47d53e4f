package rules

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/google/cel-go/interpreter"
)

// The errors a rule gives: CompileError for a mistake in its text
// (diagnose.go finds the problems, messages.go words cel-go's findings
// for a rule writer, suggest.go finds the names meant), EvalError for an
// exam or row it failed on, RowErrors for a batch.

// Problem is one mistake found in a rule's text.
type Problem struct {
	Line    int    // 1-based line of the mistake; 0 when the mistake has no position
	Column  int    // 1-based column, counted in characters; 0 when unknown
	Message string // plain-language explanation, without the position
	Excerpt string // the rule's line and a caret (^) under the column; "" without a position
}

// position formats the place of the mistake: "column 7" for a one-line
// rule, "line 2, column 7" otherwise, "" when unknown.
func (p Problem) position(multiline bool) string {
	switch {
	case p.Line == 0:
		return ""
	case multiline:
		return fmt.Sprintf("line %d, column %d", p.Line, p.Column)
	default:
		return fmt.Sprintf("column %d", p.Column)
	}
}

// CompileError reports why a rule could not be compiled. Problems holds at
// least one entry; the first is the one to fix first.
type CompileError struct {
	Rule     string
	Problems []Problem
}

// Error gives the first problem with its position and excerpt, for
// example:
//
//	column 1: unknown name "zz"; did you mean "z" or "zs"?
//	  zz > 2.0
//	  ^
func (e *CompileError) Error() string {
	var sb strings.Builder
	multiline := strings.Contains(e.Rule, "\n")
	for i, p := range e.Problems {
		if i > 0 {
			sb.WriteString("\n")
		}
		if pos := p.position(multiline); pos != "" {
			sb.WriteString(pos)
			sb.WriteString(": ")
		}
		sb.WriteString(p.Message)
		if p.Excerpt != "" {
			sb.WriteString("\n")
			sb.WriteString(p.Excerpt)
		}
	}
	return sb.String()
}

// Short gives the first problem on one line ("column 1: unknown name ..."),
// for a spreadsheet cell.
func (e *CompileError) Short() string {
	if len(e.Problems) == 0 {
		return "the rule could not be compiled"
	}
	p := e.Problems[0]
	s := p.Message
	if pos := p.position(strings.Contains(e.Rule, "\n")); pos != "" {
		s = pos + ": " + s
	}
	if n := len(e.Problems) - 1; n > 0 {
		s += fmt.Sprintf(" (and %d more problem%s)", n, plural(n))
	}
	return s
}

// EvalError reports a rule that failed on one exam or row.
type EvalError struct {
	Row     int    // 1-based position in the batch; 0 for a single evaluation
	Worker  string // the exam's worker, when known
	Message string // plain-language explanation
	// Limit is true when a cost or time limit, or a cancelled request,
	// stopped the rule: the rule (or the request), not the row, is at fault.
	Limit bool
	err   error
}

func (e *EvalError) Error() string {
	var where string
	switch {
	case e.Row > 0 && e.Worker != "":
		where = fmt.Sprintf("row %d (worker %q): ", e.Row, e.Worker)
	case e.Row > 0:
		where = fmt.Sprintf("row %d: ", e.Row)
	case e.Worker != "":
		where = fmt.Sprintf("worker %q: ", e.Worker)
	}
	return where + e.Message
}

// Unwrap returns the underlying evaluation error.
func (e *EvalError) Unwrap() error { return e.err }

// RowErrors lists the rows of a batch on which a rule failed; the other
// rows were evaluated normally. Rows are in input order.
type RowErrors struct {
	Total int // number of rows in the batch
	Rows  []*EvalError
}

func (e *RowErrors) Error() string {
	first := e.Rows[0].Error()
	if len(e.Rows) == 1 {
		return fmt.Sprintf("the rule failed on 1 of %d rows: %s", e.Total, first)
	}
	return fmt.Sprintf("the rule failed on %d of %d rows; first: %s", len(e.Rows), e.Total, first)
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

// errTimeLimit is the cancellation cause when one evaluation runs too long.
var errTimeLimit = errors.New("time limit per evaluation reached")

// evalErr turns a cel evaluation error into an EvalError a rule writer can act on.
func evalErr(ctx context.Context, err error, lim Limits) *EvalError {
	var cancelled interpreter.EvalCancelledError
	switch {
	case errors.As(err, &cancelled) && cancelled.Cause == interpreter.CostLimitExceeded:
		return &EvalError{Limit: true, err: err, Message: fmt.Sprintf(
			"the rule needs too much work for one exam (cost limit %s reached) and was stopped; "+
				"it probably loops over a history inside another loop: simplify it, "+
				"for example look only at last(zs, 10)", groupDigits(lim.MaxCost))}
	case errors.Is(context.Cause(ctx), errTimeLimit), errors.Is(err, errTimeLimit):
		return &EvalError{Limit: true, err: err, Message: fmt.Sprintf(
			"the rule took longer than %v for one exam and was stopped; simplify it", lim.MaxTime)}
	case ctx.Err() != nil:
		return &EvalError{Limit: true, err: err, Message: "the evaluation was cancelled (" + context.Cause(ctx).Error() + ")"}
	case errors.Is(err, interpreter.InterruptError{}):
		return &EvalError{Limit: true, err: err, Message: "the evaluation was interrupted"}
	}
	return &EvalError{err: err, Message: runtimeMessage(err.Error())}
}

// groupDigits writes n with thousands separators: 100000 is "100,000".
func groupDigits(n uint64) string {
	s := strconv.FormatUint(n, 10)
	var out []byte
	for i := range len(s) {
		if i > 0 && (len(s)-i)%3 == 0 {
			out = append(out, ',')
		}
		out = append(out, s[i])
	}
	return string(out)
}

// excerpt returns line `line` (1-based) of src with a caret under column
// col (1-based, in runes), cut to a window around the caret when long.
func excerpt(src string, line, col int) string {
	lines := strings.Split(src, "\n")
	if line < 1 || line > len(lines) {
		return ""
	}
	r := []rune(strings.TrimRight(lines[line-1], "\r"))
	c := max(col-1, 0)
	if c > len(r) {
		c = len(r)
	}
	const window = 36
	start, end, prefix, suffix := 0, len(r), "", ""
	if c > window {
		start, prefix = c-window, "…"
	}
	if end-c > window {
		end, suffix = c+window, "…"
	}
	text := prefix + string(r[start:end]) + suffix
	pad := utf8.RuneCountInString(prefix) + (c - start)
	// Tabs keep their width in the caret line.
	var caret strings.Builder
	for _, ch := range []rune(text)[:pad] {
		if ch == '\t' {
			caret.WriteByte('\t')
		} else {
			caret.WriteByte(' ')
		}
	}
	return "  " + text + "\n  " + caret.String() + "^"
}
