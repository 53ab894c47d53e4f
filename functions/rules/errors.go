package rules

import (
	"context"
	"errors"
	"fmt"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/interpreter"
)

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
func evalErr(err error, lim Limits, ctx context.Context) *EvalError {
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

var (
	reIndexRange  = regexp.MustCompile(`^index '(-?\d+)' out of range in list size '(\d+)'$`)
	reIndexBounds = regexp.MustCompile(`^index out of bounds: (-?\d+)$`)
)

func runtimeMessage(msg string) string {
	switch {
	case msg == "no such overload" || strings.HasPrefix(msg, "no such overload"):
		return "a value has the wrong kind for this operation (an empty cell, text where a number is needed, " +
			"or a whole number mixed with a decimal one: write 2.0 instead of 2)"
	case msg == "division by zero":
		return "division by zero (a whole number divided by 0)"
	case msg == "modulus by zero":
		return "remainder (%) by zero"
	case strings.Contains(msg, "overflow"):
		return "a whole-number result is too large: " + msg
	}
	if m := reIndexBounds.FindStringSubmatch(msg); m != nil {
		return fmt.Sprintf("position %s is outside the list here (positions start at 0); "+
			"check size(...) or exam first, or use last(list, n)", m[1])
	}
	if m := reIndexRange.FindStringSubmatch(msg); m != nil {
		return fmt.Sprintf("position %s is outside the list, which has %s item(s) here; "+
			"check size(...) first or use last(list, n)", m[1], m[2])
	}
	return msg
}

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

// ---- compile-time messages ----

var (
	reUndeclared = regexp.MustCompile(`^undeclared reference to '([^']*)'`)
	reOverload   = regexp.MustCompile(`^found no matching overload for '([^']*)' applied to '\((.*)\)'$`)
	reExpected   = regexp.MustCompile(`^expected type '([^']*)' but found '([^']*)'$`)
	reFieldSel   = regexp.MustCompile(`^type '([^']*)' does not support field selection$`)
	reUndefField = regexp.MustCompile(`^undefined field '([^']*)'$`)
	reTokenErr   = regexp.MustCompile(`^token recognition error at: '(.*)'$`)
	reMismatch   = regexp.MustCompile(`^(?:mismatched|extraneous) input '(.*?)' expecting`)
	reMissing    = regexp.MustCompile(`^missing '(.*?)' at '(.*?)'$`)
	reNoViable   = regexp.MustCompile(`^no viable alternative at input '(.*)'$`)
)

// operatorWords maps CEL's internal operator names to what the rule writer typed.
func operatorWords(fn string) string {
	switch fn {
	case "_+_":
		return `"+"`
	case "_-_":
		return `"-"`
	case "_*_":
		return `"*"`
	case "_/_":
		return `"/"`
	case "_%_":
		return `"%"`
	case "_==_":
		return `"=="`
	case "_!=_":
		return `"!="`
	case "_<_":
		return `"<"`
	case "_<=_":
		return `"<="`
	case "_>_":
		return `">"`
	case "_>=_":
		return `">="`
	case "_&&_":
		return `"&&"`
	case "_||_":
		return `"||"`
	case "!_":
		return `"!" (not)`
	case "-_":
		return `"-" (minus sign)`
	case "_?_:_":
		return `"? :"`
	case "@in":
		return `"in"`
	case "_[_]":
		return `"[...]" (item of a list)`
	}
	return fn + "(...)"
}

// splitTypes splits "double, list(double), map(string, int)" at top-level commas.
func splitTypes(s string) []string {
	var out []string
	depth, start := 0, 0
	for i, r := range s {
		switch r {
		case '(':
			depth++
		case ')':
			depth--
		case ',':
			if depth == 0 {
				out = append(out, strings.TrimSpace(s[start:i]))
				start = i + 1
			}
		}
	}
	return append(out, strings.TrimSpace(s[start:]))
}

func withArticle(words string) string {
	switch words {
	case "true/false", "text", "empty (null)":
		return words
	}
	if strings.HasPrefix(words, "a") || strings.HasPrefix(words, "e") {
		return "an " + words
	}
	return "a " + words
}

func joinWords(ws []string) string {
	switch len(ws) {
	case 0:
		return "nothing"
	case 1:
		return ws[0]
	}
	return strings.Join(ws[:len(ws)-1], ", ") + " and " + ws[len(ws)-1]
}

// usageHint gives the correct call form of a helper, for overload mistakes.
func usageHint(fn string) string {
	for _, h := range Helpers() {
		if h.Name == fn {
			return "; use it as " + h.Usage + ": " + h.Doc
		}
	}
	return ""
}

func unknownFunction(name string) string {
	fns := functionNames()
	if sugg := suggest(name, fns, 2); len(sugg) > 0 {
		return fmt.Sprintf("unknown function %q; did you mean %s?", name, quoteOr(sugg, nil))
	}
	return fmt.Sprintf("unknown function %q; the functions you can use are: %s", name, strings.Join(fns, ", "))
}

func isNumericMix(args []string) bool {
	hasD, hasI := false, false
	for _, a := range args {
		switch a {
		case "double":
			hasD = true
		case "int", "uint":
			hasI = true
		}
	}
	return hasD && hasI
}

// functionNames lists the functions a rule may call: the helpers and the
// standard CEL functions most rules need.
func functionNames() []string {
	var out []string
	for _, h := range Helpers() {
		out = append(out, h.Name)
	}
	return append(out, "size", "contains", "startsWith", "endsWith", "matches", "int", "double", "string")
}

// isMacroName reports the list functions written after a list.
func isMacroName(s string) bool {
	switch s {
	case "all", "exists", "exists_one", "filter", "map", "count":
		return true
	}
	return false
}

// checkMessage rewrites one cel compile message; known lists the variable
// names the rule may use, for "did you mean"; called tells that the
// mistake is a name followed by "(".
func checkMessage(msg string, known []string, describe func(string) string, called bool) string {
	if m := reUndeclared.FindStringSubmatch(msg); m != nil {
		switch {
		case called && isMacroName(m[1]):
			return fmt.Sprintf("%s(...) is written after the list, as in zs.%s(v, v > 2.0)", m[1], m[1])
		case called:
			return unknownFunction(m[1])
		}
		return unknownName(m[1], known, describe)
	}
	if m := reOverload.FindStringSubmatch(msg); m != nil {
		fn, args := m[1], splitTypes(m[2])
		words := make([]string, len(args))
		for i, a := range args {
			words[i] = withArticle(typeNameWords(a))
		}
		op := operatorWords(fn)
		switch {
		case fn == "_?_:_" && len(args) == 3 && args[0] != "bool":
			return "the part before ? must be true/false, but it is " + words[0]
		case fn == "_?_:_" && len(args) == 3:
			return fmt.Sprintf("both answers of a ? : choice must be the same kind, but one is %s and the other %s"+
				" (write 2.0 instead of 2 to make a whole number a decimal one)", words[1], words[2])
		case isNumericMix(args):
			return fmt.Sprintf("cannot use %s on %s: whole numbers and decimal numbers do not mix here; "+
				"write 2.0 instead of 2, or convert with double(...)", op, joinWords(words))
		case fn == "!_":
			return `"!" (not) needs true/false, but got ` + words[0]
		}
		return fmt.Sprintf("cannot use %s on %s%s", op, joinWords(words), usageHint(fn))
	}
	if m := reExpected.FindStringSubmatch(msg); m != nil {
		s := fmt.Sprintf("expected %s here, but found %s", typeNameWords(m[1]), withArticle(typeNameWords(m[2])))
		if m[1] == "bool" {
			s += "; use a comparison such as z > 2.0"
		}
		return s
	}
	if m := reFieldSel.FindStringSubmatch(msg); m != nil {
		return fmt.Sprintf("%s has no parts to pick with a dot; a dot is for list functions such as zs.exists(x, x > 2.0)",
			withArticle(typeNameWords(m[1])))
	}
	if m := reUndefField.FindStringSubmatch(msg); m != nil {
		return fmt.Sprintf("there is no part named %q here", m[1])
	}
	if s, ok := strings.CutPrefix(msg, "Syntax error: "); ok {
		return syntaxMessage(s)
	}
	if strings.Contains(msg, "recursion limit") || strings.Contains(msg, "size exceeds limit") {
		return "the rule is too long or too deeply nested"
	}
	return msg
}

func syntaxMessage(s string) string {
	if m := reTokenErr.FindStringSubmatch(s); m != nil {
		tok := m[1]
		switch {
		case strings.HasPrefix(tok, "="):
			return `a single "=" is not allowed; to compare, use "==" (two equals signs)`
		case strings.HasPrefix(tok, `"`) || strings.HasPrefix(tok, `'`):
			return "text in quotes is not closed: add the closing quote"
		case strings.HasPrefix(tok, "&") || strings.HasPrefix(tok, "|"):
			return `write "&&" for and, "||" for or`
		}
		r, _ := utf8.DecodeRuneInString(tok)
		return fmt.Sprintf("the character %q cannot be used here", r)
	}
	if m := reMismatch.FindStringSubmatch(s); m != nil {
		return unexpectedToken(m[1])
	}
	if m := reMissing.FindStringSubmatch(s); m != nil {
		if m[1] == ")" || m[1] == "]" || m[1] == "}" {
			return fmt.Sprintf("a closing %q is missing", m[1])
		}
		return fmt.Sprintf("%q is missing here", m[1])
	}
	if m := reNoViable.FindStringSubmatch(s); m != nil {
		return "this part cannot be read: " + strconv.Quote(lastRunes(m[1], 30))
	}
	if i := strings.Index(s, " expecting "); i >= 0 {
		s = s[:i]
	}
	return s
}

func unexpectedToken(tok string) string {
	switch strings.ToLower(tok) {
	case "<eof>":
		return "the rule ends too early: something is missing at the end"
	case "and":
		return `write "&&" instead of "and"`
	case "or":
		return `write "||" instead of "or"`
	case "not":
		return `write "!" instead of "not"`
	case ",":
		return "a comma is not allowed here; decimals use a point (2.5, not 2,5)"
	case "=":
		return `a single "=" is not allowed; to compare, use "==" (two equals signs)`
	case "if", "then", "else":
		return `write a choice as condition ? answer_if_true : answer_if_false`
	}
	return fmt.Sprintf("%q is not expected here", tok)
}

func lastRunes(s string, n int) string {
	r := []rune(s)
	if len(r) <= n {
		return s
	}
	return "…" + string(r[len(r)-n:])
}

// unknownName builds the message for a name the rule does not know.
func unknownName(name string, known []string, describe func(string) string) string {
	sugg := suggest(name, known, 3)
	if len(sugg) == 0 {
		return fmt.Sprintf("unknown name %q; the names you can use are: %s", name, strings.Join(known, ", ")) +
			`; text needs quotes, as in group == "F"`
	}
	return fmt.Sprintf("unknown name %q; did you mean %s?", name, quoteOr(sugg, describe))
}

// quoteOr formats names as `"a", "b" or "c"`, each followed by its
// description when describe gives one.
func quoteOr(names []string, describe func(string) string) string {
	q := make([]string, len(names))
	for i, s := range names {
		q[i] = strconv.Quote(s)
		if describe != nil {
			if d := describe(s); d != "" {
				q[i] += " (" + d + ")"
			}
		}
	}
	if len(q) == 1 {
		return q[0]
	}
	return strings.Join(q[:len(q)-1], ", ") + " or " + q[len(q)-1]
}

// suggest returns up to max known names closest to name: the same name up
// to case and underscores first, then by edit distance, then names that
// start with it or contain all of its words.
func suggest(name string, known []string, max int) []string {
	norm := func(s string) string { return strings.ReplaceAll(strings.ToLower(s), "_", "") }
	n := norm(name)
	limit := 1
	switch l := utf8.RuneCountInString(n); {
	case l > 6:
		limit = 3
	case l > 3:
		limit = 2
	}
	type cand struct {
		name string
		rank int
	}
	var cs []cand
	for _, k := range known {
		kn := norm(k)
		switch d := editDistance(n, kn); {
		case kn == n:
			cs = append(cs, cand{k, 0})
		case d <= limit:
			cs = append(cs, cand{k, d})
		case len(n) >= 3 && strings.HasPrefix(kn, n), containsWords(k, name):
			cs = append(cs, cand{k, limit + 1})
		}
	}
	slices.SortStableFunc(cs, func(a, b cand) int {
		if a.rank != b.rank {
			return a.rank - b.rank
		}
		return strings.Compare(a.name, b.name)
	})
	var out []string
	for _, c := range cs {
		if len(out) == max {
			break
		}
		if !slices.Contains(out, c.name) {
			out = append(out, c.name)
		}
	}
	return out
}

// containsWords reports whether every word of name (split at "_") is a
// word of known, for names with at least two words: years_since_signal
// finds years_since_first_signal.
func containsWords(known, name string) bool {
	words := strings.FieldsFunc(strings.ToLower(name), func(r rune) bool { return r == '_' })
	if len(words) < 2 {
		return false
	}
	have := strings.Split(strings.ToLower(known), "_")
	for _, w := range words {
		if !slices.Contains(have, w) {
			return false
		}
	}
	return true
}

// editDistance is the optimal-string-alignment distance between a and b,
// in runes: insertions, deletions, substitutions and swaps of neighbours
// each count 1, so "maen" is 1 from "mean". Levenshtein (1966), "Binary
// codes capable of correcting deletions, insertions, and reversals",
// Soviet Physics Doklady 10(8); swaps as in Damerau (1964), "A technique
// for computer detection and correction of spelling errors", CACM 7(3).
// Hand-written: three rows of dynamic programming, nothing to import.
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	prev2 := make([]int, len(rb)+1)
	prev := make([]int, len(rb)+1)
	cur := make([]int, len(rb)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		cur[0] = i
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
			if i > 1 && j > 1 && ra[i-1] == rb[j-2] && ra[i-2] == rb[j-1] {
				cur[j] = min(cur[j], prev2[j-2]+1)
			}
		}
		prev2, prev, cur = prev, cur, prev2
	}
	return prev[len(rb)]
}

var reIfThen = regexp.MustCompile(`(?i)(^|[^\w.])(if|then|else)([^\w]|$)`)

// runeAt returns the character at 1-based line and column of src, or 0.
func runeAt(src string, line, col int) rune {
	lines := strings.Split(src, "\n")
	if line < 1 || line > len(lines) {
		return 0
	}
	r := []rune(lines[line-1])
	if col < 1 || col > len(r) {
		return 0
	}
	return r[col-1]
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
	for i, ch := range []rune(text)[:pad] {
		_ = i
		if ch == '\t' {
			caret.WriteByte('\t')
		} else {
			caret.WriteByte(' ')
		}
	}
	return "  " + text + "\n  " + caret.String() + "^"
}

// issuesError converts cel issues into a CompileError. When the text has a
// syntax error only the first is kept: later ones are echoes of it.
func issuesError(src string, iss *cel.Issues, known []string, describe func(string) string) *CompileError {
	ce := &CompileError{Rule: src}
	errs := iss.Errors()
	syntax := false
	for _, e := range errs {
		if strings.HasPrefix(e.Message, "Syntax error") {
			syntax = true
			break
		}
	}
	seen := map[string]bool{}
	for _, e := range errs {
		if syntax && !strings.HasPrefix(e.Message, "Syntax error") {
			continue
		}
		p := Problem{}
		called := false
		if loc := e.Location; loc != nil && loc.Line() > 0 {
			p.Line, p.Column = loc.Line(), loc.Column()+1
			p.Excerpt = excerpt(src, p.Line, p.Column)
			called = runeAt(src, p.Line, p.Column) == '('
		}
		p.Message = checkMessage(e.Message, known, describe, called)
		if m := reUndeclared.FindStringSubmatch(e.Message); m != nil && called {
			// point at the start of the function's name, not at "("
			p.Column = max(1, p.Column-utf8.RuneCountInString(m[1]))
			p.Excerpt = excerpt(src, p.Line, p.Column)
		}
		if syntax && reIfThen.MatchString(src) {
			p.Message += "; write a choice as condition ? answer_if_true : answer_if_false"
		}
		key := fmt.Sprint(p.Line, p.Column, p.Message)
		if seen[key] {
			continue
		}
		seen[key] = true
		ce.Problems = append(ce.Problems, p)
		if syntax || len(ce.Problems) == 3 {
			break
		}
	}
	if len(ce.Problems) == 0 {
		ce.Problems = []Problem{{Message: iss.String()}}
	}
	return ce
}
