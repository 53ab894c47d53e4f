package rules

import (
	"fmt"
	"regexp"
	"strings"
	"unicode"
	"unicode/utf8"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common"
	"github.com/google/cel-go/common/ast"
)

// Finding the problems in a rule that does not compile.
//
// The parser's problems (syntax, limits) carry only a position and a
// message, which messages.go words for a rule writer. The type checker's
// problems also name the node of the expression they are about, so they
// are read from the parsed expression itself: an identifier that is no
// declared variable, no loop variable in scope and no type name is an
// unknown name; a call of a function the environment does not declare is
// an unknown function (or a list function such as exists written as a
// plain call); a call written after a value when the function is not
// (or the other way round) is said so. Only the checker's messages about
// kinds (a failed overload, an unexpected type) are translated from
// cel-go's text.

// maxProblems is how many problems a CompileError lists at most.
const maxProblems = 3

// parseError explains the parser's issues with src. When the text has a
// syntax error only the first is kept: later ones are echoes of it.
func parseError(src string, iss *cel.Issues) *CompileError {
	errs := iss.Errors()
	syntax := false
	for _, e := range errs {
		if strings.HasPrefix(e.Message, syntaxPrefix) {
			syntax = true
			break
		}
	}
	c := newCollector(src)
	for _, e := range errs {
		if syntax && !strings.HasPrefix(e.Message, syntaxPrefix) {
			continue
		}
		msg := parseMessage(e.Message)
		if syntax && mentionsIfThen(src) {
			msg += "; write a choice as condition ? answer_if_true : answer_if_false"
		}
		if !c.add(problemAt(src, e.Location, msg)) || syntax {
			break
		}
	}
	return c.compileError(iss)
}

var reIfThen = regexp.MustCompile(`(?i)(^|[^\w.])(if|then|else)([^\w]|$)`)

// mentionsIfThen reports whether the rule's text uses if, then or else as
// words, which CEL does not have.
func mentionsIfThen(src string) bool { return reIfThen.MatchString(src) }

// diagnosis reads a parsed rule to explain the checker's issues.
type diagnosis struct {
	env      *cel.Env
	src      string
	nodes    map[int64]ast.NavigableExpr // by expression id
	vars     map[string]bool             // declared variables
	known    []string                    // variable names for "did you mean", in documentation order
	describe func(string) string
}

// checkError explains the type checker's issues with src, which parses.
func checkError(env *cel.Env, src string, iss *cel.Issues, known []string, describe func(string) string) *CompileError {
	parsed, piss := env.Parse(src)
	if piss.Err() != nil {
		return parseError(src, piss)
	}
	d := &diagnosis{env: env, src: src, nodes: map[int64]ast.NavigableExpr{},
		vars: map[string]bool{}, known: known, describe: describe}
	for _, n := range ast.MatchDescendants(ast.NavigateAST(parsed.NativeRep()), ast.AllMatcher()) {
		d.nodes[n.ID()] = n
	}
	for _, v := range env.Variables() {
		d.vars[v.Name()] = true
	}
	// Inside a list function written as a plain call, exists(zs, v, ...),
	// the loop variable v is not declared either; saying so would only
	// repeat the mistake.
	skip := map[int64]bool{}
	for _, e := range iss.Errors() {
		if n := d.nodes[e.ExprID]; n != nil && d.isMacroAsFunction(n) {
			for _, a := range n.Children() {
				for _, x := range ast.MatchDescendants(a, ast.AllMatcher()) {
					skip[x.ID()] = true
				}
			}
		}
	}
	c := newCollector(src)
	for _, e := range iss.Errors() {
		if skip[e.ExprID] {
			continue
		}
		if !c.add(d.problem(e)) {
			break
		}
	}
	return c.compileError(iss)
}

// problem explains one issue of the checker.
func (d *diagnosis) problem(e *cel.Error) Problem {
	p := problemAt(d.src, e.Location, "")
	n := d.nodes[e.ExprID]
	if n == nil {
		p.Message, _ = translate(checkMessages, e.Message)
		return p
	}
	switch n.Kind() {
	case ast.IdentKind:
		if !d.resolves(n) {
			p.Message = unknownName(n.AsIdent(), d.known, d.describe)
			return p
		}
	case ast.StructKind:
		name := n.AsStruct().TypeName()
		if _, ok := d.env.CELTypeProvider().FindStructType(name); !ok {
			p.Message = unknownName(name, d.known, d.describe)
			return p
		}
	case ast.CallKind:
		call := n.AsCall()
		name := call.FunctionName()
		switch {
		case d.isMacroAsFunction(n):
			return d.atName(p, name, fmt.Sprintf("%s(...) is written after the list, as in zs.%s(v, v > 2.0)", name, name))
		case !d.env.HasFunction(name):
			return d.atName(p, name, unknownFunction(name))
		case !d.hasForm(name, call.IsMemberFunction()) && call.IsMemberFunction():
			hint := usageHint(name)
			if hint == "" {
				hint = fmt.Sprintf("; write %s(...) with the value inside the brackets", name)
			}
			return d.atName(p, name, fmt.Sprintf("%s is not written after a value%s", name, hint))
		case !d.hasForm(name, call.IsMemberFunction()):
			return d.atName(p, name, fmt.Sprintf("%s(...) is written after the value it works on: value.%s(...)", name, name))
		}
	}
	p.Message, _ = translate(checkMessages, e.Message)
	return p
}

// isMacroAsFunction reports a list function (exists, all, count, ...)
// written as a plain call: exists(zs, v, v > 2.0).
func (d *diagnosis) isMacroAsFunction(n ast.NavigableExpr) bool {
	if n.Kind() != ast.CallKind {
		return false
	}
	call := n.AsCall()
	return !call.IsMemberFunction() && isMacroName(call.FunctionName()) && !d.env.HasFunction(call.FunctionName())
}

// hasForm reports whether the declared function name has an overload
// written after a value (member) or, if !member, one written plainly.
func (d *diagnosis) hasForm(name string, member bool) bool {
	fn, ok := d.env.Functions()[name]
	if !ok {
		return false
	}
	for _, o := range fn.OverloadDecls() {
		if o.IsMemberFunction() == member {
			return true
		}
	}
	return false
}

// resolves reports whether an identifier names something: a declared
// variable, a type name (int, double, ...) or the variable of a loop
// around it, as v in zs.exists(v, v > 2.0).
func (d *diagnosis) resolves(n ast.NavigableExpr) bool {
	name := n.AsIdent()
	if d.vars[name] {
		return true
	}
	if _, ok := d.env.CELTypeProvider().FindIdent(name); ok {
		return true
	}
	child := n
	for p, ok := n.Parent(); ok; p, ok = p.Parent() {
		if p.Kind() == ast.ComprehensionKind {
			c := p.AsComprehension()
			inLoop := child.ID() != c.IterRange().ID() && child.ID() != c.AccuInit().ID()
			if inLoop && (name == c.IterVar() || name == c.AccuVar() || (c.HasIterVar2() && name == c.IterVar2())) {
				return true
			}
		}
		child = p
	}
	return false
}

// atName moves a problem reported at a call's "(" to the start of the
// function's name, and sets its message.
func (d *diagnosis) atName(p Problem, name, msg string) Problem {
	p.Message = msg
	lines := strings.Split(d.src, "\n")
	if p.Line < 1 || p.Line > len(lines) {
		return p
	}
	line := []rune(lines[p.Line-1])
	j := min(p.Column-1, len(line))
	for j > 0 && unicode.IsSpace(line[j-1]) {
		j--
	}
	if k := utf8.RuneCountInString(name); j >= k && string(line[j-k:j]) == name {
		p.Column = j - k + 1
		p.Excerpt = excerpt(d.src, p.Line, p.Column)
	}
	return p
}

// problemAt places msg at a cel location (none when loc is unknown).
func problemAt(src string, loc common.Location, msg string) Problem {
	p := Problem{Message: msg}
	if loc != nil && loc.Line() > 0 {
		p.Line, p.Column = loc.Line(), loc.Column()+1
		p.Excerpt = excerpt(src, p.Line, p.Column)
	}
	return p
}

var oneLine = strings.NewReplacer("\r\n", " ", "\n", " ", "\r", " ")

// collector gathers distinct problems, up to maxProblems.
type collector struct {
	ce   *CompileError
	seen map[string]bool
}

func newCollector(src string) *collector {
	return &collector{ce: &CompileError{Rule: src}, seen: map[string]bool{}}
}

// add keeps p unless an identical problem is kept; it reports whether
// there is room for more. A message is one line (a cell shows it), even
// one cel-go wrote with a piece of a multi-line rule in it.
func (c *collector) add(p Problem) bool {
	p.Message = oneLine.Replace(p.Message)
	key := fmt.Sprint(p.Line, p.Column, p.Message)
	if !c.seen[key] {
		c.seen[key] = true
		c.ce.Problems = append(c.ce.Problems, p)
	}
	return len(c.ce.Problems) < maxProblems
}

// compileError returns the problems gathered, or cel-go's own account of
// iss if none was.
func (c *collector) compileError(iss *cel.Issues) *CompileError {
	if len(c.ce.Problems) == 0 {
		c.ce.Problems = []Problem{{Message: iss.String()}}
	}
	return c.ce
}
