package rules

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"unicode/utf8"
)

// NamedRule is one rule of a RuleSet.
type NamedRule struct {
	Name     string `json:"name"`               // letters, digits and _, starting with a letter; unique in the set
	Expr     string `json:"expr"`               // the CEL text
	Severity string `json:"severity,omitempty"` // optional label such as "high"
	Doc      string `json:"doc,omitempty"`      // optional description (the comment lines above the rule in text form)
	Line     int    `json:"-"`                  // line of the rule in its text file; 0 when read from JSON
}

// RuleSet is a named collection of rules, read from a small text format or
// JSON (see ParseRuleSet).
type RuleSet struct {
	Rules []NamedRule `json:"rules"`
}

// Bounds of a rule set.
const (
	MaxRuleSetBytes = 1 << 20 // size of a rule-set file
	MaxRules        = 500     // rules in one set
	MaxNameLength   = 64      // characters in a rule name
	MaxSeverityLen  = 32      // characters in a severity label
)

// ParseError reports a rule-set file that cannot be read.
type ParseError struct {
	Line int // 1-based line in the file; 0 when not tied to one line
	Msg  string
}

func (e *ParseError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("line %d: %s", e.Line, e.Msg)
	}
	return e.Msg
}

// ParseRuleSet reads a rule set. JSON is recognised by a leading "{" or
// "[": {"rules": [{"name": ..., "expr": ..., "severity": ..., "doc": ...}]}
// or just the array. Otherwise the text format is, line by line:
//
//	# comment lines; those right above a rule become its Doc
//	name = expression
//	name [severity] = expression
//	    indented lines continue the expression above
//
// Blank lines are ignored. Lines of an expression are trimmed of
// surrounding spaces and joined with a newline. ParseRuleSet checks the
// form (Validate) but does not compile the expressions (Cache.CompileSet
// does).
func ParseRuleSet(data []byte) (RuleSet, error) {
	if len(data) > MaxRuleSetBytes {
		return RuleSet{}, &ParseError{Msg: fmt.Sprintf("the rule set is %d bytes; the largest allowed is %d", len(data), MaxRuleSetBytes)}
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	if !utf8.Valid(data) {
		return RuleSet{}, &ParseError{Msg: "the rule set is not valid text (UTF-8)"}
	}
	var rs RuleSet
	var err error
	if t := bytes.TrimLeft(data, " \t\r\n"); len(t) > 0 && (t[0] == '{' || t[0] == '[') {
		rs, err = parseJSON(t)
	} else {
		rs, err = parseText(string(data))
	}
	if err != nil {
		return RuleSet{}, err
	}
	if err := rs.Validate(); err != nil {
		return RuleSet{}, err
	}
	return rs, nil
}

func parseJSON(data []byte) (RuleSet, error) {
	var rs RuleSet
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var err error
	if data[0] == '[' {
		err = dec.Decode(&rs.Rules)
	} else {
		err = dec.Decode(&rs)
	}
	if err == nil && dec.More() {
		err = errors.New("extra data after the rule set")
	}
	if err != nil {
		return RuleSet{}, &ParseError{Msg: "the rule set is not valid JSON of the expected shape " +
			`({"rules": [{"name": "...", "expr": "..."}]}): ` + err.Error()}
	}
	for i := range rs.Rules {
		r := &rs.Rules[i]
		r.Expr = normalizeExpr(r.Expr)
		r.Doc = normalizeDoc(r.Doc)
		r.Line = 0
	}
	return rs, nil
}

func parseText(src string) (RuleSet, error) {
	var rs RuleSet
	var doc []string
	var cur *NamedRule
	var exprLines []string
	flush := func() {
		if cur != nil {
			cur.Expr = strings.Join(exprLines, "\n")
			rs.Rules = append(rs.Rules, *cur)
			cur, exprLines = nil, nil
		}
	}
	lines := strings.Split(src, "\n")
	for i, raw := range lines {
		lineNo := i + 1
		line := strings.TrimRight(raw, "\r")
		trimmed := strings.TrimSpace(line)
		switch {
		case trimmed == "":
			doc = nil
			continue
		case strings.HasPrefix(trimmed, "#"):
			doc = append(doc, strings.TrimSpace(trimmed[1:]))
			continue
		case line[0] == ' ' || line[0] == '\t':
			if cur == nil {
				return RuleSet{}, &ParseError{Line: lineNo, Msg: "an indented line continues a rule, but no rule comes before it"}
			}
			exprLines = append(exprLines, trimmed)
			continue
		}
		flush()
		r, err := parseRuleLine(line, lineNo)
		if err != nil {
			return RuleSet{}, err
		}
		r.Doc = strings.Join(doc, "\n")
		doc = nil
		cur = &r
		if e := strings.TrimSpace(r.Expr); e != "" {
			exprLines = []string{e}
		}
		if len(rs.Rules) >= MaxRules {
			return RuleSet{}, &ParseError{Line: lineNo, Msg: fmt.Sprintf("too many rules; at most %d are allowed in one set", MaxRules)}
		}
	}
	flush()
	return rs, nil
}

// parseRuleLine reads "name [severity] = expression".
func parseRuleLine(line string, lineNo int) (NamedRule, error) {
	bad := func(msg string) (NamedRule, error) {
		return NamedRule{}, &ParseError{Line: lineNo, Msg: msg}
	}
	i := 0
	for i < len(line) && isNameByte(line[i]) {
		i++
	}
	name := line[:i]
	if name == "" {
		return bad(`a rule line must look like "name = expression"; a name starts with a letter`)
	}
	rest := strings.TrimLeft(line[i:], " \t")
	r := NamedRule{Name: name, Line: lineNo}
	if strings.HasPrefix(rest, "[") {
		end := strings.IndexByte(rest, ']')
		if end < 0 {
			return bad(fmt.Sprintf("rule %q: the severity label has no closing ]", name))
		}
		r.Severity = strings.TrimSpace(rest[1:end])
		rest = strings.TrimLeft(rest[end+1:], " \t")
	}
	if !strings.HasPrefix(rest, "=") || strings.HasPrefix(rest, "==") {
		return bad(fmt.Sprintf(`rule %q: expected "=" after the name, as in "%s = z > 2.0"; a name has only letters, digits and _`, name, name))
	}
	r.Expr = strings.TrimSpace(rest[1:])
	return r, nil
}

func isNameByte(b byte) bool {
	return b == '_' || (b >= 'a' && b <= 'z') || (b >= 'A' && b <= 'Z') || (b >= '0' && b <= '9')
}

func normalizeExpr(s string) string {
	var out []string
	for _, l := range strings.Split(s, "\n") {
		if t := strings.TrimSpace(l); t != "" {
			out = append(out, t)
		}
	}
	return strings.Join(out, "\n")
}

func normalizeDoc(s string) string {
	if s == "" {
		return ""
	}
	lines := strings.Split(s, "\n")
	for i, l := range lines {
		lines[i] = strings.TrimSpace(l)
	}
	return strings.Join(lines, "\n")
}

// Validate checks names (letters, digits and _, starting with a letter, at
// most MaxNameLength, unique ignoring case), severities (letters, digits,
// space, _ and -, at most MaxSeverityLen), that every rule has an
// expression without blank lines, and the number of rules.
func (rs RuleSet) Validate() error {
	if len(rs.Rules) > MaxRules {
		return &ParseError{Msg: fmt.Sprintf("the set has %d rules; at most %d are allowed", len(rs.Rules), MaxRules)}
	}
	seen := make(map[string]int, len(rs.Rules))
	for i, r := range rs.Rules {
		where := func(msg string, args ...any) error {
			line := r.Line
			if line == 0 {
				msg = fmt.Sprintf("rule %d: ", i+1) + msg
			}
			return &ParseError{Line: line, Msg: fmt.Sprintf(msg, args...)}
		}
		if !validName(r.Name) {
			return where("the name %q is not allowed: use letters, digits and _ (at most %d), starting with a letter", r.Name, MaxNameLength)
		}
		key := strings.ToLower(r.Name)
		if j, dup := seen[key]; dup {
			return where("the name %q is used twice (also by rule %d, %q)", r.Name, j+1, rs.Rules[j].Name)
		}
		seen[key] = i
		if !validSeverity(r.Severity) {
			return where("rule %q: the severity %q is not allowed: use letters, digits, spaces, _ and - (at most %d)", r.Name, r.Severity, MaxSeverityLen)
		}
		if strings.TrimSpace(r.Expr) == "" {
			return where("rule %q has no expression after =", r.Name)
		}
		if normalizeExpr(r.Expr) != r.Expr {
			return where("rule %q: the expression has blank lines or surrounding spaces", r.Name)
		}
		for _, l := range strings.Split(r.Expr, "\n") {
			if strings.HasPrefix(l, "#") {
				return where("rule %q: an expression line cannot start with #", r.Name)
			}
		}
		if normalizeDoc(r.Doc) != r.Doc {
			return where("rule %q: the description has surrounding spaces", r.Name)
		}
	}
	return nil
}

func validName(s string) bool {
	if s == "" || len(s) > MaxNameLength {
		return false
	}
	if c := s[0]; !(c >= 'a' && c <= 'z') && !(c >= 'A' && c <= 'Z') {
		return false
	}
	for i := 0; i < len(s); i++ {
		if !isNameByte(s[i]) {
			return false
		}
	}
	return true
}

func validSeverity(s string) bool {
	if len(s) > MaxSeverityLen || s != strings.TrimSpace(s) {
		return false
	}
	for _, c := range s {
		if !(c == ' ' || c == '_' || c == '-' || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9')) {
			return false
		}
	}
	return true
}

// Format writes the set in the text format; ParseRuleSet reads it back
// to the same rules.
func (rs RuleSet) Format() []byte {
	var b bytes.Buffer
	for i, r := range rs.Rules {
		if i > 0 {
			b.WriteByte('\n')
		}
		if r.Doc != "" {
			for _, l := range strings.Split(r.Doc, "\n") {
				if l == "" {
					b.WriteString("#\n")
				} else {
					b.WriteString("# " + l + "\n")
				}
			}
		}
		b.WriteString(r.Name)
		if r.Severity != "" {
			b.WriteString(" [" + r.Severity + "]")
		}
		lines := strings.Split(r.Expr, "\n")
		b.WriteString(" = " + lines[0] + "\n")
		for _, l := range lines[1:] {
			b.WriteString("    " + l + "\n")
		}
	}
	return b.Bytes()
}

// Lookup returns the rule called name (ignoring case).
func (rs RuleSet) Lookup(name string) (NamedRule, bool) {
	for _, r := range rs.Rules {
		if strings.EqualFold(r.Name, name) {
			return r, true
		}
	}
	return NamedRule{}, false
}

// RuleError is a compile error of one rule of a set.
type RuleError struct {
	Name string
	Line int // line of the rule in its file; 0 if not from a file
	Err  error
}

func (e *RuleError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("rule %q (line %d): %v", e.Name, e.Line, e.Err)
	}
	return fmt.Sprintf("rule %q: %v", e.Name, e.Err)
}

func (e *RuleError) Unwrap() error { return e.Err }

// CompileSet compiles every rule of rs (result kind Any) through the
// cache. The rules come back in the order of rs.Rules. If any rule fails,
// the error joins one *RuleError per failing rule, so all can be fixed at
// once.
func (c *Cache) CompileSet(rs RuleSet) ([]*Rule, error) {
	if err := rs.Validate(); err != nil {
		return nil, err
	}
	out := make([]*Rule, len(rs.Rules))
	var errs []error
	for i, r := range rs.Rules {
		rule, err := c.Compile(r.Expr, Any)
		if err != nil {
			errs = append(errs, &RuleError{Name: r.Name, Line: r.Line, Err: err})
			continue
		}
		out[i] = rule
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return out, nil
}
