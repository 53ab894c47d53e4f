package rules

import (
	"context"
	"fmt"
	"math"
	"strings"
	"sync/atomic"
	"time"
	"unicode/utf8"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common/types"
	"github.com/google/cel-go/common/types/ref"
	"github.com/google/cel-go/interpreter"
)

// Limits bound what one rule may cost. A zero field takes its default.
type Limits struct {
	// MaxLength is the longest rule text accepted, in characters.
	MaxLength int
	// MaxCost bounds the work of one evaluation in CEL cost units (about
	// one unit per variable read, comparison or loop step; helpers such as
	// mean(list) count one unit per list item).
	MaxCost uint64
	// MaxTime bounds the wall-clock time of one evaluation. The cost limit
	// normally stops a runaway rule first; this is the second guard.
	MaxTime time.Duration
}

// Default limits: a 4,000-character rule, 100,000 cost units (a loop inside
// a loop over a history of about 150 exams; some 20 ms of work) and 250 ms
// per evaluation, generous so that on a busy machine the cost limit, which
// does not depend on load, is what normally stops a runaway rule.
const (
	DefaultMaxLength = 4000
	DefaultMaxCost   = 100_000
	DefaultMaxTime   = 250 * time.Millisecond
)

// DefaultLimits returns the default limits.
func DefaultLimits() Limits {
	return Limits{MaxLength: DefaultMaxLength, MaxCost: DefaultMaxCost, MaxTime: DefaultMaxTime}
}

func (l Limits) withDefaults() Limits {
	if l.MaxLength <= 0 {
		l.MaxLength = DefaultMaxLength
	}
	if l.MaxCost == 0 {
		l.MaxCost = DefaultMaxCost
	}
	if l.MaxTime <= 0 {
		l.MaxTime = DefaultMaxTime
	}
	return l
}

// program is a compiled rule, shared by exam rules and column rules.
type program struct {
	expr    string
	want    ResultKind
	kind    ResultKind  // result kind known at compile time; Any if only known when run
	guarded cel.Program // with cost limit and interrupt checks
	fast    cel.Program // without; nil when no size bound keeps the cost under the limit (see cost.go)
	maxList int         // fast applies when every history list has at most maxList items
	lim     Limits
}

// Rule is a compiled rule over exams. It is safe for concurrent use.
type Rule struct{ p program }

// Expr returns the rule's text.
func (r *Rule) Expr() string { return r.p.expr }

// Want returns the result kind the rule was compiled for.
func (r *Rule) Want() ResultKind { return r.p.want }

// Kind returns the result kind known at compile time (Bool, String or
// Number); Any when the text only fixes it at evaluation time.
func (r *Rule) Kind() ResultKind { return r.p.kind }

// ColumnRule is a compiled rule over plain columns (see CompileColumns).
// It is safe for concurrent use.
type ColumnRule struct {
	p       program
	cols    []Column // sanitised names, in column order
	headers []string // the names as given
	index   map[string]int
}

// Expr returns the rule's text.
func (r *ColumnRule) Expr() string { return r.p.expr }

// Want returns the result kind the rule was compiled for.
func (r *ColumnRule) Want() ResultKind { return r.p.want }

// Kind returns the result kind known at compile time, or Any.
func (r *ColumnRule) Kind() ResultKind { return r.p.kind }

// Names returns the identifiers the columns go by in the rule, in column
// order (see SanitizeNames).
func (r *ColumnRule) Names() []string {
	out := make([]string, len(r.cols))
	for i, c := range r.cols {
		out[i] = c.Name
	}
	return out
}

// Column declares one input column of a column rule: its header text and
// the kind of its cells. Kind Any accepts any cell, checked when the rule
// runs; a fixed kind lets mistakes such as comparing text with a number be
// found at compile time.
type Column struct {
	Name string
	Kind ResultKind
}

// Compile compiles a rule over exams that must give a result of kind want
// (Any accepts true/false, a number or text), with the default limits. It
// builds a fresh environment on every call; use a Cache to compile each
// text once.
//
// A mistake in the text gives a *CompileError.
func Compile(expr string, want ResultKind) (*Rule, error) {
	lim := DefaultLimits()
	env, err := newExamEnv(lim)
	if err != nil {
		return nil, err
	}
	return compileExam(env, expr, want, lim)
}

// CompileColumns compiles a rule over plain columns named by a header row,
// e.g. "Systolic BP" becomes systolic_bp (see SanitizeNames). Every column
// accepts any cell (number, text, true/false; an empty cell is null), so
// kind mistakes surface per row; CompileColumnsTyped checks them up front.
func CompileColumns(expr string, names []string, want ResultKind) (*ColumnRule, error) {
	cols := make([]Column, len(names))
	for i, n := range names {
		cols[i] = Column{Name: n, Kind: Any}
	}
	return CompileColumnsTyped(expr, cols, want)
}

// CompileColumnsTyped is CompileColumns with a declared kind per column
// (ColumnKinds infers them from data). An empty cell reads as NaN in a
// Number column, "" in a String column, false in a Bool column and null in
// an Any column.
func CompileColumnsTyped(expr string, cols []Column, want ResultKind) (*ColumnRule, error) {
	return compileColumns(expr, cols, want, DefaultLimits())
}

func baseEnvOptions(lim Limits) []cel.EnvOption {
	return append([]cel.EnvOption{
		cel.CrossTypeNumericComparisons(true),
		cel.DefaultUTCTimeZone(true),
		cel.ParserExpressionSizeLimit(lim.MaxLength),
		cel.ParserRecursionLimit(100),
	}, helperOptions()...)
}

func newExamEnv(lim Limits) (*cel.Env, error) {
	opts := baseEnvOptions(lim)
	for _, v := range examVars() {
		opts = append(opts, cel.Variable(v.Name, v.typ))
	}
	return cel.NewEnv(opts...)
}

// examSized names the exam variables whose size varies: lists and texts.
func examSized() map[string]bool {
	return map[string]bool{"zs": true, "values": true, "times": true, "signals": true, "group": true, "worker": true}
}

func examKnown() []string {
	var known []string
	for _, v := range examVars() {
		known = append(known, v.Name)
	}
	return known
}

func compileExam(env *cel.Env, expr string, want ResultKind, lim Limits) (*Rule, error) {
	p, err := compileProgram(env, expr, want, lim, examKnown(), nil, examSized())
	if err != nil {
		return nil, err
	}
	return &Rule{p: *p}, nil
}

func compileColumns(expr string, in []Column, want ResultKind, lim Limits) (*ColumnRule, error) {
	headers := make([]string, len(in))
	for i, c := range in {
		headers[i] = c.Name
		if c.Kind > Number {
			return nil, fmt.Errorf("column %d (%q): unknown kind %d", i+1, c.Name, c.Kind)
		}
	}
	names := SanitizeNames(headers)
	r := &ColumnRule{cols: make([]Column, len(in)), headers: headers, index: make(map[string]int, len(in))}
	opts := baseEnvOptions(lim)
	sized := make(map[string]bool)
	for i, n := range names {
		r.cols[i] = Column{Name: n, Kind: in[i].Kind}
		r.index[n] = i
		opts = append(opts, cel.Variable(n, kindType(in[i].Kind)))
		if in[i].Kind == String || in[i].Kind == Any {
			sized[n] = true
		}
	}
	env, err := cel.NewEnv(opts...)
	if err != nil {
		return nil, fmt.Errorf("cannot declare the columns: %w", err)
	}
	known := append([]string(nil), names...)
	describe := func(name string) string {
		if i, ok := r.index[name]; ok && headers[i] != name {
			return fmt.Sprintf("column %q", headers[i])
		}
		return ""
	}
	p, err := compileProgram(env, expr, want, lim, known, describe, sized)
	if err != nil {
		return nil, err
	}
	r.p = *p
	return r, nil
}

func kindType(k ResultKind) *cel.Type {
	switch k {
	case Bool:
		return cel.BoolType
	case String:
		return cel.StringType
	case Number:
		return cel.DoubleType
	}
	return cel.DynType
}

func compileProgram(env *cel.Env, expr string, want ResultKind, lim Limits, known []string,
	describe func(string) string, sized map[string]bool) (*program, error) {
	if want > Number {
		return nil, fmt.Errorf("unknown result kind %d", want)
	}
	fail := func(msg string) error {
		return &CompileError{Rule: expr, Problems: []Problem{{Message: msg}}}
	}
	if !utf8.ValidString(expr) {
		return nil, fail("the rule contains bytes that are not valid text (UTF-8)")
	}
	if n := utf8.RuneCountInString(expr); n > lim.MaxLength {
		return nil, fail(fmt.Sprintf("the rule is %s characters long; the longest allowed is %s",
			groupDigits(uint64(n)), groupDigits(uint64(lim.MaxLength))))
	}
	if strings.TrimSpace(expr) == "" {
		return nil, fail("the rule is empty")
	}
	parsed, iss := env.Parse(expr)
	if iss.Err() != nil {
		return nil, parseError(expr, iss)
	}
	ast, iss := env.Check(parsed)
	if iss.Err() != nil {
		return nil, checkError(env, expr, iss, known, describe)
	}
	kind, ok := kindOf(ast.OutputType())
	if !ok {
		return nil, fail(fmt.Sprintf("a rule must give true/false, a number or text, but this one gives %s",
			withArticle(typeWords(ast.OutputType()))))
	}
	if want != Any && kind != Any && kind != want {
		return nil, fail(fmt.Sprintf("this rule must give %s, but it gives %s%s",
			want, kindWords(kind), kindHint(want, kind)))
	}
	p := &program{expr: expr, want: want, kind: kind, lim: lim}
	var err error
	p.guarded, err = env.Program(ast, guardedOptions(lim)...)
	if err != nil {
		// OptOptimize checks constant regular expressions here.
		return nil, fail("the rule cannot be prepared: " + runtimeMessage(err.Error()))
	}
	if n, ok := fastBound(env, ast, sized, lim.MaxCost); ok {
		p.fast, err = env.Program(ast, cel.EvalOptions(cel.OptOptimize))
		if err != nil {
			return nil, fail("the rule cannot be prepared: " + runtimeMessage(err.Error()))
		}
		p.maxList = int(min(n, math.MaxInt32))
	}
	return p, nil
}

// guardedOptions are the program options of the guarded program: the cost
// limit, with the helpers charged as helperTable says, and interrupt
// checks inside loops.
func guardedOptions(lim Limits) []cel.ProgramOption {
	return []cel.ProgramOption{
		cel.CostLimit(lim.MaxCost),
		cel.CostTracking(helperCost{}),
		cel.InterruptCheckFrequency(64),
		cel.EvalOptions(cel.OptOptimize),
	}
}

func kindOf(t *cel.Type) (ResultKind, bool) {
	switch t.String() {
	case "bool":
		return Bool, true
	case "string":
		return String, true
	case "double", "int", "uint":
		return Number, true
	case "dyn":
		return Any, true
	}
	return Any, false
}

func kindWords(k ResultKind) string {
	if k == String {
		return "text"
	}
	return k.String()
}

func kindHint(want, got ResultKind) string {
	switch {
	case want == Bool && got == Number:
		return " (compare it, for example z > 2.0)"
	case want == Bool && got == String:
		return ` (compare it, for example group == "F")`
	case want == String && got == Bool:
		return ` (choose labels with ? :, for example z > 3.0 ? "high" : "normal")`
	}
	return ""
}

// result converts a CEL result to a Value of the wanted kind.
func (p *program) result(v ref.Val) (Value, error) {
	var out Value
	switch x := v.(type) {
	case types.Bool:
		out = BoolValue(bool(x))
	case types.Double:
		out = NumberValue(float64(x))
	case types.Int:
		out = NumberValue(float64(x))
	case types.Uint:
		out = NumberValue(float64(x))
	case types.String:
		out = StringValue(string(x))
	default:
		return Value{}, &EvalError{Message: fmt.Sprintf(
			"a rule must give true/false, a number or text, but here it gives %s",
			withArticle(typeNameWords(v.Type().TypeName())))}
	}
	if p.want != Any && out.kind != p.want {
		return Value{}, &EvalError{Message: fmt.Sprintf("this rule must give %s, but here it gives %s",
			p.want, kindWords(out.kind))}
	}
	return out, nil
}

// sizedActivation is an activation that can tell whether its lists and
// texts fit the plain program's bounds.
type sizedActivation interface {
	interpreter.Activation
	fits(maxList int) bool
}

func (a *examActivation) fits(maxList int) bool {
	e := a.e
	return len(e.Zs) <= maxList && len(e.Values) <= maxList && len(e.Times) <= maxList &&
		len(e.Signals) <= maxList && len(e.Group) <= maxStrFast && len(e.Worker) <= maxStrFast
}

func (a *rowActivation) fits(int) bool {
	for _, v := range a.row {
		if len(v.s) > maxStrFast {
			return false
		}
	}
	return true
}

func (p *program) useFast(act sizedActivation) bool {
	return p.fast != nil && act.fits(p.maxList)
}

// evalFast runs the plain program (see cost.go); ctx only labels errors.
func (p *program) evalFast(ctx context.Context, act sizedActivation) (Value, error) {
	out, _, err := p.fast.Eval(act)
	if err != nil {
		return Value{}, evalErr(ctx, err, p.lim)
	}
	return p.result(out)
}

// evalGuarded runs the program with cost tracking; ctx must carry the
// time limit.
func (p *program) evalGuarded(ctx context.Context, act sizedActivation) (Value, error) {
	out, _, err := p.guarded.ContextEval(ctx, act)
	if err != nil {
		return Value{}, evalErr(ctx, err, p.lim)
	}
	return p.result(out)
}

func (p *program) runOne(ctx context.Context, act sizedActivation) (Value, error) {
	if err := ctx.Err(); err != nil {
		return Value{}, evalErr(ctx, err, p.lim)
	}
	if p.useFast(act) {
		return p.evalFast(ctx, act)
	}
	ctx, cancel := context.WithTimeoutCause(ctx, p.lim.MaxTime, errTimeLimit)
	defer cancel()
	return p.evalGuarded(ctx, act)
}

// Eval evaluates the rule on one exam, within the rule's cost and time
// limits; ctx may cancel it. Errors are *EvalError.
func (r *Rule) Eval(ctx context.Context, e *Exam) (Value, error) {
	v, err := r.p.runOne(ctx, &examActivation{e: e})
	if ee, ok := err.(*EvalError); ok {
		ee.Worker = e.Worker
	}
	return v, err
}

// EvalAll evaluates r on every exam under ctx and writes out[i] for
// exams[i]; out must be at least as long as exams. Use Link first so that the worker
// fields and histories are filled.
//
// A row on which the rule fails (for example a list position that does not
// exist for that worker) gets the empty Value and the run goes on; the
// error returned is then a *RowErrors naming those rows. When a limit
// stops the rule (cost or time per evaluation, or ctx cancelled), the run
// stops at once and the error is an *EvalError with Limit set: the rule
// itself needs fixing.
func EvalAll(ctx context.Context, r *Rule, exams []Exam, out []Value) error {
	if len(out) < len(exams) {
		return fmt.Errorf("room for %d results but %d exams", len(out), len(exams))
	}
	act := &examActivation{}
	return r.p.batch(ctx, len(exams), act, func(i int) { act.e = &exams[i] },
		func(i int) string { return exams[i].Worker }, out)
}

// EvalRow evaluates a column rule on one row of cells, given in the order
// of the names the rule was compiled with (missing trailing cells are
// empty); ctx may cancel it. Errors are *EvalError.
func (r *ColumnRule) EvalRow(ctx context.Context, row []Value) (Value, error) {
	return r.p.runOne(ctx, r.activation(row))
}

// EvalRows evaluates a column rule on every row, with the same error
// behaviour as EvalAll.
func EvalRows(ctx context.Context, r *ColumnRule, rows [][]Value, out []Value) error {
	if len(out) < len(rows) {
		return fmt.Errorf("room for %d results but %d rows", len(out), len(rows))
	}
	act := r.activation(nil)
	return r.p.batch(ctx, len(rows), act, func(i int) { act.row = rows[i] },
		func(int) string { return "" }, out)
}

func (r *ColumnRule) activation(row []Value) *rowActivation {
	return &rowActivation{rule: r, row: row}
}

// rowActivation binds column variables to one row of cells.
type rowActivation struct {
	rule *ColumnRule
	row  []Value
}

func (a *rowActivation) ResolveName(name string) (any, bool) {
	i, ok := a.rule.index[name]
	if !ok {
		return nil, false
	}
	var v Value
	if i < len(a.row) {
		v = a.row[i]
	}
	want := a.rule.cols[i].Kind
	switch {
	case v.kind == Any: // empty cell
		switch want {
		case Number:
			return types.Double(math.NaN()), true
		case String:
			return types.String(""), true
		case Bool:
			return types.False, true
		}
		return types.NullValue, true
	case want != Any && v.kind != want:
		return types.NewErr("column %q should hold %s, but this row holds %s %q",
			a.rule.headers[i], kindWords(want), kindWords(v.kind), v.String()), true
	}
	return v.celVal(), true
}

func (a *rowActivation) Parent() interpreter.Activation { return nil }

// batch runs the program over n rows; bind(i) points act at row i.
func (p *program) batch(ctx context.Context, n int, act sizedActivation, bind func(int),
	worker func(int) string, out []Value) error {
	var wd *watchdog // started at the first row that needs the guarded program
	defer func() {
		if wd != nil {
			wd.stop()
		}
	}()
	var failed []*EvalError
	for i := range n {
		if i&1023 == 0 && ctx.Err() != nil {
			ee := evalErr(ctx, context.Cause(ctx), p.lim)
			ee.Row, ee.Worker = i+1, worker(i)
			return ee
		}
		bind(i)
		var v Value
		var err error
		if p.useFast(act) {
			v, err = p.evalFast(ctx, act)
		} else {
			if wd == nil {
				wd = startWatchdog(ctx, p.lim.MaxTime)
			}
			wd.begin()
			v, err = p.evalGuarded(wd.ctx, act)
			wd.end()
		}
		if err != nil {
			ee := err.(*EvalError)
			ee.Row, ee.Worker = i+1, worker(i)
			if ee.Limit {
				return ee
			}
			failed = append(failed, ee)
			out[i] = Value{}
			continue
		}
		out[i] = v
	}
	if len(failed) > 0 {
		return &RowErrors{Total: n, Rows: failed}
	}
	return nil
}

// watchdog enforces the per-evaluation time limit over a batch with one
// goroutine and one context, instead of a timer per row: it cancels the
// batch's context when the evaluation in progress has run longer than the
// limit. cel-go checks the context inside loops (comprehensions), which is
// the only place a rule can spend long.
type watchdog struct {
	ctx    context.Context
	cancel context.CancelCauseFunc
	base   time.Time
	limit  time.Duration
	start  atomic.Int64 // nanoseconds after base when the running evaluation began; -1 when idle
	done   chan struct{}
}

func startWatchdog(parent context.Context, limit time.Duration) *watchdog {
	ctx, cancel := context.WithCancelCause(parent)
	w := &watchdog{ctx: ctx, cancel: cancel, base: time.Now(), limit: limit, done: make(chan struct{})}
	w.start.Store(-1)
	go w.loop()
	return w
}

func (w *watchdog) loop() {
	t := time.NewTicker(max(w.limit/4, time.Millisecond))
	defer t.Stop()
	for {
		select {
		case <-w.done:
			return
		case <-w.ctx.Done():
			return
		case <-t.C:
			if s := w.start.Load(); s >= 0 && time.Since(w.base)-time.Duration(s) > w.limit {
				w.cancel(errTimeLimit)
				return
			}
		}
	}
}

func (w *watchdog) begin() { w.start.Store(int64(time.Since(w.base))) }
func (w *watchdog) end()   { w.start.Store(-1) }
func (w *watchdog) stop() {
	close(w.done)
	w.cancel(nil)
}
