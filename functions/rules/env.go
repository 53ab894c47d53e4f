package rules

import (
	"math"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common"
	"github.com/google/cel-go/common/ast"
	"github.com/google/cel-go/common/decls"
	"github.com/google/cel-go/common/operators"
	"github.com/google/cel-go/common/types"
	"github.com/google/cel-go/common/types/ref"
	"github.com/google/cel-go/common/types/traits"
	"github.com/google/cel-go/interpreter"
	"github.com/google/cel-go/parser"
)

// Variable describes one name a rule can use, for help text and listings.
type Variable struct {
	Name string // CEL name, snake_case
	Type string // "number", "whole number", "true/false", "text", "list of numbers", "list of true/false"
	Doc  string // one line for rule writers
}

// Helper describes one function this package adds to standard CEL.
type Helper struct {
	Name  string
	Usage string // e.g. "last(list, n)"
	Doc   string
}

// examVar is a declared exam variable: its documentation and CEL type.
type examVar struct {
	Variable
	typ *cel.Type
}

func examVars() []examVar {
	num, whole, flag, text := cel.DoubleType, cel.IntType, cel.BoolType, cel.StringType
	nums, flags := cel.ListType(cel.DoubleType), cel.ListType(cel.BoolType)
	v := func(name string, t *cel.Type, doc string) examVar {
		return examVar{Variable{name, typeWords(t), doc}, t}
	}
	return []examVar{
		v("value", num, "the reading, in its own units"),
		v("time", num, "age at the exam, in years"),
		v("group", text, `reference group of the worker (sex, job group, ...); "" if none`),
		v("worker", text, "worker identifier"),
		v("z", num, "standardised reading: (value - mean) / sd for this age and group"),
		v("mean", num, "reference mean at this age and group"),
		v("sd", num, "reference standard deviation at this age and group"),
		v("centile", num, "the reading's centile in the reference, 0 to 100"),
		v("innovation", num, "the charted residual for this exam"),
		v("chart_up", num, "upward chart statistic (readings drifting high); 0 when the chart watches only a fall"),
		v("chart_down", num, "downward chart statistic (readings drifting low); 0 when the chart watches only a rise"),
		v("chart", num, "the chart statistic compared with the limit: the larger of chart_up and chart_down"),
		v("limit", num, "the chart's control limit"),
		v("signal", flag, "true when the chart signals at this exam"),
		v("in_range", flag, "true when the age lies inside the age range of the reference data"),
		v("exam", whole, "number of this exam for the worker: 1 for the first, in time order"),
		v("exams", whole, "number of exams of this worker in the data (exam == exams on the latest)"),
		v("has_previous", flag, "true from the worker's second exam on (same as exam > 1)"),
		v("gap", num, "years since the worker's previous exam; 0 on the first exam"),
		v("prev_z", num, "z at the previous exam; NaN on the first exam (comparisons with NaN are false)"),
		v("prev_value", num, "value at the previous exam; NaN on the first exam"),
		v("has_signalled", flag, "true if the chart has signalled at this exam or an earlier one"),
		v("years_since_first_signal", num, "years since the worker's first signal, counting up to this exam; NaN if none yet"),
		v("zs", nums, "the worker's z values up to and including this exam, oldest first"),
		v("values", nums, "the worker's readings up to and including this exam, oldest first"),
		v("times", nums, "the worker's ages at each exam up to and including this one, oldest first"),
		v("signals", flags, "the chart's signal at each exam up to and including this one, oldest first"),
	}
}

// Variables lists the names an exam rule can use, in documentation order.
func Variables() []Variable {
	ev := examVars()
	out := make([]Variable, len(ev))
	for i := range ev {
		out[i] = ev[i].Variable
	}
	return out
}

// Helpers lists the functions added to standard CEL. Nothing else is added:
// no file, environment, network or clock access exists in a rule.
func Helpers() []Helper {
	return []Helper{
		{"last", "last(list, n)", "the last n items of a list (all of it if shorter), e.g. last(zs, 4)"},
		{"count", "list.count(v, condition)", "how many items of a list meet the condition, e.g. last(zs, 4).count(v, v > 2.0)"},
		{"abs", "abs(x)", "absolute value of a number"},
		{"min", "min(list)", "smallest number in a list of numbers (error if empty)"},
		{"max", "max(list)", "largest number in a list of numbers (error if empty)"},
		{"mean", "mean(list)", "average of a list of numbers (error if empty)"},
		{"missing", "missing(x)", "true when a number is not available (NaN), e.g. missing(prev_z)"},
	}
}

// examActivation is the cel Activation over one Exam. It binds names with
// a switch rather than a map, and keeps the history list views inside
// itself, so EvalAll, which reuses one activation for every exam, allocates
// nothing per exam beyond the boxed numbers CEL itself needs.
type examActivation struct {
	e                 *Exam
	zs, values, times floatList
	signals           boolList
}

func (a *examActivation) Parent() interpreter.Activation { return nil }

func (a *examActivation) ResolveName(name string) (any, bool) {
	e := a.e
	switch name {
	case "value":
		return types.Double(e.Value), true
	case "time":
		return types.Double(e.Time), true
	case "group":
		return types.String(e.Group), true
	case "worker":
		return types.String(e.Worker), true
	case "z":
		return types.Double(e.Z), true
	case "mean":
		return types.Double(e.Mean), true
	case "sd":
		return types.Double(e.SD), true
	case "centile":
		return types.Double(e.Centile), true
	case "innovation":
		return types.Double(e.Innovation), true
	case "chart_up":
		return types.Double(e.ChartUp), true
	case "chart_down":
		return types.Double(e.ChartDown), true
	case "chart":
		return types.Double(e.Chart), true
	case "limit":
		return types.Double(e.Limit), true
	case "signal":
		return types.Bool(e.Signal), true
	case "in_range":
		return types.Bool(e.InRange), true
	case "exam":
		return types.Int(e.Exam), true
	case "exams":
		return types.Int(e.Exams), true
	case "has_previous":
		return types.Bool(e.Exam > 1), true
	case "gap":
		return types.Double(e.Gap), true
	case "prev_z":
		return types.Double(e.PrevZ), true
	case "prev_value":
		return types.Double(e.PrevValue), true
	case "has_signalled":
		return types.Bool(!math.IsNaN(e.YearsSinceFirstSignal)), true
	case "years_since_first_signal":
		return types.Double(e.YearsSinceFirstSignal), true
	case "zs":
		a.zs.v = e.Zs
		return &a.zs, true
	case "values":
		a.values.v = e.Values
		return &a.values, true
	case "times":
		a.times.v = e.Times
		return &a.times, true
	case "signals":
		a.signals.v = e.Signals
		return &a.signals, true
	}
	return nil, false
}

func (v Value) celVal() ref.Val {
	switch v.kind {
	case Bool:
		return types.Bool(v.b)
	case Number:
		return types.Double(v.n)
	case String:
		return types.String(v.s)
	}
	return types.NullValue
}

// Overload identifiers of the helpers; the cost estimator keys on them.
const (
	ovLast    = "rules_last_list_int"
	ovAbsD    = "rules_abs_double"
	ovAbsI    = "rules_abs_int"
	ovMin     = "rules_min_list"
	ovMax     = "rules_max_list"
	ovMean    = "rules_mean_list"
	ovMissing = "rules_missing_double"
)

// helperOptions declares the helper functions with their Go implementations.
// cel-go's per-call runtime type guards are switched off (they allocate on
// every call of a generic function like last); the checker has already
// matched the types, and each binding still checks what it receives, so a
// dyn argument of the wrong kind gives an error, never a panic.
func helperOptions() []cel.EnvOption {
	tp := cel.TypeParamType("T")
	listT := cel.ListType(tp)
	nums := cel.ListType(cel.DoubleType)
	noGuard := decls.DisableTypeGuards(true)
	return []cel.EnvOption{
		cel.Macros(countMacro()),
		cel.Function("last", noGuard, cel.Overload(ovLast, []*cel.Type{listT, cel.IntType}, listT,
			cel.BinaryBinding(lastN))),
		cel.Function("abs", noGuard,
			cel.Overload(ovAbsD, []*cel.Type{cel.DoubleType}, cel.DoubleType, cel.UnaryBinding(absOf)),
			cel.Overload(ovAbsI, []*cel.Type{cel.IntType}, cel.IntType, cel.UnaryBinding(absOf))),
		cel.Function("min", noGuard, cel.Overload(ovMin, []*cel.Type{nums}, cel.DoubleType,
			cel.UnaryBinding(func(v ref.Val) ref.Val { return reduce(v, "min", math.Min) }))),
		cel.Function("max", noGuard, cel.Overload(ovMax, []*cel.Type{nums}, cel.DoubleType,
			cel.UnaryBinding(func(v ref.Val) ref.Val { return reduce(v, "max", math.Max) }))),
		cel.Function("mean", noGuard, cel.Overload(ovMean, []*cel.Type{nums}, cel.DoubleType,
			cel.UnaryBinding(meanOf))),
		cel.Function("missing", noGuard, cel.Overload(ovMissing, []*cel.Type{cel.DoubleType}, cel.BoolType,
			cel.UnaryBinding(func(v ref.Val) ref.Val {
				d, ok := v.(types.Double)
				if !ok {
					return types.NewErr("missing(x) needs a number")
				}
				return types.Bool(math.IsNaN(float64(d)))
			}))),
	}
}

func absOf(v ref.Val) ref.Val {
	switch x := v.(type) {
	case types.Double:
		return types.Double(math.Abs(float64(x)))
	case types.Int:
		if x == math.MinInt64 {
			return types.NewErr("abs of %d does not fit in a whole number", x)
		}
		if x < 0 {
			return -x
		}
		return x
	}
	return types.NewErr("abs(x) needs a number")
}

// lastN implements last(list, n).
func lastN(lv, nv ref.Val) ref.Val {
	ni, ok := nv.(types.Int)
	if !ok {
		return types.NewErr("last(list, n) needs a whole number n")
	}
	n := int64(ni)
	if n < 0 {
		return types.NewErr("last(list, n) needs n of 0 or more, got %d", n)
	}
	switch l := lv.(type) {
	case *floatList:
		return &floatList{v: l.v[len(l.v)-int(min(n, int64(len(l.v)))):]}
	case *boolList:
		return &boolList{v: l.v[len(l.v)-int(min(n, int64(len(l.v)))):]}
	}
	l, ok := lv.(traits.Lister)
	if !ok {
		return types.NewErr("last(list, n) needs a list")
	}
	sz, ok := l.Size().(types.Int)
	if !ok {
		return types.NewErr("last(list, n) needs a list")
	}
	size := int64(sz)
	k := min(n, size)
	out := make([]ref.Val, 0, k)
	for i := size - k; i < size; i++ {
		out = append(out, l.Get(types.Int(i)))
	}
	return types.NewRefValList(types.DefaultTypeAdapter, out)
}

// eachDouble calls f for each element of a list(double).
func eachDouble(v ref.Val, f func(float64)) (int, ref.Val) {
	if l, ok := v.(*floatList); ok {
		for _, x := range l.v {
			f(x)
		}
		return len(l.v), nil
	}
	l, ok := v.(traits.Lister)
	if !ok {
		return 0, types.NewErr("expected a list of numbers")
	}
	sz, ok := l.Size().(types.Int)
	if !ok {
		return 0, types.NewErr("expected a list of numbers")
	}
	n := int(sz)
	for i := 0; i < n; i++ {
		d, ok := l.Get(types.Int(i)).(types.Double)
		if !ok {
			return 0, types.NewErr("expected a list of numbers")
		}
		f(float64(d))
	}
	return n, nil
}

func reduce(v ref.Val, name string, op func(a, b float64) float64) ref.Val {
	acc, first := 0.0, true
	n, err := eachDouble(v, func(x float64) {
		if first {
			acc, first = x, false
			return
		}
		acc = op(acc, x)
	})
	if err != nil {
		return err
	}
	if n == 0 {
		return types.NewErr("%s of an empty list", name)
	}
	return types.Double(acc)
}

func meanOf(v ref.Val) ref.Val {
	sum := 0.0
	n, err := eachDouble(v, func(x float64) { sum += x })
	if err != nil {
		return err
	}
	if n == 0 {
		return types.NewErr("mean of an empty list")
	}
	return types.Double(sum / float64(n))
}

// helperCost charges the list helpers one unit per element they read, so
// the cost limit also bounds work hidden inside them; other calls keep
// cel-go's own charges.
type helperCost struct{}

func (helperCost) CallCost(_, overloadID string, args []ref.Val, _ ref.Val) *uint64 {
	switch overloadID {
	case ovMin, ovMax, ovMean:
		if len(args) == 1 {
			if s, ok := args[0].(traits.Sizer); ok {
				if n, ok := s.Size().(types.Int); ok {
					c := uint64(n) + 1
					return &c
				}
			}
		}
	}
	return nil
}

// typeWords names a CEL type in words a spreadsheet user knows.
func typeWords(t *cel.Type) string {
	if t == nil {
		return "value"
	}
	return typeNameWords(t.String())
}

func typeNameWords(s string) string {
	switch s {
	case "double":
		return "number"
	case "int", "uint":
		return "whole number"
	case "bool":
		return "true/false"
	case "string":
		return "text"
	case "null_type":
		return "empty (null)"
	case "dyn", "":
		return "value"
	case "bytes":
		return "bytes"
	case "list(double)":
		return "list of numbers"
	case "list(int)", "list(uint)":
		return "list of whole numbers"
	case "list(bool)":
		return "list of true/false"
	case "list(string)":
		return "list of text"
	case "google.protobuf.Timestamp":
		return "timestamp"
	case "google.protobuf.Duration":
		return "duration"
	}
	if len(s) > 5 && s[:5] == "list(" {
		return "list"
	}
	if len(s) > 4 && s[:4] == "map(" {
		return "map"
	}
	if len(s) > 5 && s[:5] == "type(" {
		return "type name " + s[5:len(s)-1]
	}
	return s
}

// countMacro adds list.count(v, condition): how many items satisfy the
// condition, e.g. last(zs, 4).count(v, v > 2.0) >= 3. It expands, like
// CEL's own filter, into a loop, but keeps a whole-number tally instead of
// building a list, so it is both clearer and cheaper than
// filter(...).size().
func countMacro() cel.Macro {
	return cel.ReceiverMacro("count", 2, func(eh cel.MacroExprFactory, target ast.Expr, args []ast.Expr) (ast.Expr, *common.Error) {
		if args[0].Kind() != ast.IdentKind {
			return nil, eh.NewError(args[0].ID(), "the first argument of count must be a simple name, as in zs.count(v, v > 2.0)")
		}
		v, accu := args[0].AsIdent(), eh.AccuIdentName()
		if v == accu || v == parser.AccumulatorName {
			return nil, eh.NewError(args[0].ID(), "choose another name for the item in count(...)")
		}
		step := eh.NewCall(operators.Conditional, args[1],
			eh.NewCall(operators.Add, eh.NewAccuIdent(), eh.NewLiteral(types.Int(1))),
			eh.NewAccuIdent())
		return eh.NewComprehension(target, v, accu, eh.NewLiteral(types.Int(0)),
			eh.NewLiteral(types.True), step, eh.NewAccuIdent()), nil
	})
}
