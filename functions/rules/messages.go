package rules

import (
	"fmt"
	"regexp"
	"strconv"
	"strings"
	"unicode/utf8"
)

// Translation of cel-go's messages into words a rule writer acts on.
//
// Unknown names and functions are not found here: diagnose.go finds them
// in the parsed expression. What is left has no other source than the
// text of cel-go's message: the kinds in a failed overload or type check,
// and the parser's syntax errors. The patterns below were written against
// cel-go celGoVersion. TestCelGoMessages makes cel-go produce every
// message a pattern relies on and fails, naming the pattern, when a
// release words one differently; TestCelGoVersion fails when go.mod moves
// to another release, so that this statement stays true. A message no
// pattern knows is shown as cel-go wrote it.

// celGoVersion is the cel-go release the translations were written against.
const celGoVersion = "v0.31.0"

// syntaxPrefix starts every message of cel-go's parser about the form of
// the text (as opposed to its limits or macros).
const syntaxPrefix = "Syntax error: "

// translation rewrites one kind of cel-go message.
type translation struct {
	name string         // what the message is about, for tests
	re   *regexp.Regexp // cel-go's message
	say  func(m []string) string
}

// translate rewrites msg with the first translation of table that matches
// it; ok is false (and msg returned) when none does.
func translate(table []translation, msg string) (out string, ok bool) {
	for _, t := range table {
		if m := t.re.FindStringSubmatch(msg); m != nil {
			return t.say(m), true
		}
	}
	return msg, false
}

// parseMessage words a message of the parser. A syntax error of a kind
// parseMessages does not know is shown without its prefix and without the
// list of tokens the parser expected.
func parseMessage(msg string) string {
	if out, ok := translate(parseMessages, msg); ok {
		return out
	}
	if s, ok := strings.CutPrefix(msg, syntaxPrefix); ok {
		s, _, _ = strings.Cut(s, " expecting ")
		return s
	}
	return msg
}

// parseMessages are the parser's messages: syntax errors and limits. The
// text they quote from the rule may span lines ((?s)).
var parseMessages = []translation{
	{"token recognition", regexp.MustCompile(`(?s)^Syntax error: token recognition error at: '(.*)'$`),
		func(m []string) string { return unreadableToken(m[1]) }},
	{"unexpected input", regexp.MustCompile(`(?s)^Syntax error: (?:mismatched|extraneous) input '(.*?)' expecting`),
		func(m []string) string { return unexpectedToken(m[1]) }},
	{"missing token", regexp.MustCompile(`(?s)^Syntax error: missing '(.*?)' at '(.*?)'$`),
		func(m []string) string {
			if m[1] == ")" || m[1] == "]" || m[1] == "}" {
				return fmt.Sprintf("a closing %q is missing", m[1])
			}
			return fmt.Sprintf("%q is missing here", m[1])
		}},
	{"no viable alternative", regexp.MustCompile(`(?s)^Syntax error: no viable alternative at input '(.*)'$`),
		func(m []string) string { return "this part cannot be read: " + strconv.Quote(lastRunes(m[1], 30)) }},
	{"recursion limit", regexp.MustCompile(`^expression recursion limit exceeded`),
		func([]string) string { return "the rule is too long or too deeply nested" }},
	{"size limit", regexp.MustCompile(`^expression code point size exceeds limit`),
		func([]string) string { return "the rule is too long or too deeply nested" }},
}

// checkMessages are the type checker's messages about kinds.
var checkMessages = []translation{
	{"no matching overload", regexp.MustCompile(`^found no matching overload for '([^']*)' applied to '\((.*)\)'$`),
		func(m []string) string { return overloadMessage(m[1], splitTypes(m[2])) }},
	{"expected type", regexp.MustCompile(`^expected type '([^']*)' but found '([^']*)'$`),
		func(m []string) string {
			s := fmt.Sprintf("expected %s here, but found %s", typeNameWords(m[1]), withArticle(typeNameWords(m[2])))
			if m[1] == "bool" {
				s += "; use a comparison such as z > 2.0"
			}
			return s
		}},
	{"no field selection", regexp.MustCompile(`^type '([^']*)' does not support field selection$`),
		func(m []string) string {
			return fmt.Sprintf("%s has no parts to pick with a dot; a dot is for list functions such as zs.exists(x, x > 2.0)",
				withArticle(typeNameWords(m[1])))
		}},
}

// runtimeMessages are the messages of an evaluation that failed on one
// exam or row. cel-go's interpreter checks list positions before it reads
// an item; our history lists give the same message should they be asked
// for a position they do not have (listIndex).
var runtimeMessages = []translation{
	{"no such overload", regexp.MustCompile(`^no such overload`),
		func([]string) string {
			return "a value has the wrong kind for this operation (an empty cell, text where a number is needed, " +
				"or a whole number mixed with a decimal one: write 2.0 instead of 2)"
		}},
	{"division by zero", regexp.MustCompile(`^division by zero$`),
		func([]string) string { return "division by zero (a whole number divided by 0)" }},
	{"modulus by zero", regexp.MustCompile(`^modulus by zero$`),
		func([]string) string { return "remainder (%) by zero" }},
	{"overflow", regexp.MustCompile(`^.*\boverflow$`),
		func(m []string) string { return "a whole-number result is too large: " + m[0] }},
	{"index out of bounds", regexp.MustCompile(`^index out of bounds: (-?\d+)$`),
		func(m []string) string {
			return fmt.Sprintf("position %s is outside the list here (positions start at 0); "+
				"check size(...) or exam first, or use last(list, n)", m[1])
		}},
}

// runtimeMessage words an evaluation error's message.
func runtimeMessage(msg string) string {
	out, _ := translate(runtimeMessages, msg)
	return out
}

// overloadMessage words a call whose arguments fit none of the function's
// signatures: fn is cel-go's name of the function or operator, args the
// argument types.
func overloadMessage(fn string, args []string) string {
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

// unreadableToken words a character the parser cannot read.
func unreadableToken(tok string) string {
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

// unexpectedToken words a word or sign the parser did not expect.
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
