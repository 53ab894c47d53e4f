package rules

import (
	"math"
	"sync"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common"
	"github.com/google/cel-go/common/ast"
	"github.com/google/cel-go/common/decls"
	"github.com/google/cel-go/common/operators"
	"github.com/google/cel-go/common/types"
	"github.com/google/cel-go/common/types/ref"
	"github.com/google/cel-go/common/types/traits"
	"github.com/google/cel-go/parser"
)

// Helper describes one function this package adds to standard CEL.
type Helper struct {
	Name  string
	Usage string // e.g. "last(list, n)"
	Doc   string
}

// helper is one function added to standard CEL: its documentation, its
// overloads (a function) or its expansion (a macro, such as count).
//
// helperTable is the only place helpers are declared. It feeds the CEL
// declarations (helperOptions), the listing (Helpers) and the cost of
// every overload, which the runtime cost tracker and the static
// estimator both read (cost.go): a helper cannot be declared without a
// cost, nor costed one way when it runs and another way when its worst
// case is estimated. TestEveryHelperHasACost checks the environment for
// functions declared anywhere else.
type helper struct {
	Helper
	overloads []helperOverload
	macro     cel.Macro
}

// helperOverload is one signature of a helper with its Go implementation
// and what one call costs.
type helperOverload struct {
	id     string
	args   []*cel.Type
	result *cel.Type
	unary  func(ref.Val) ref.Val          // set for one argument
	binary func(ref.Val, ref.Val) ref.Val // set for two
	cost   callCost
	size   resultSize
}

// helperTable lists the helpers in documentation order. It is built once;
// the cost tracker looks overloads up in it on every guarded evaluation.
var helperTable = sync.OnceValue(func() []helper {
	tp := cel.TypeParamType("T")
	listT := cel.ListType(tp)
	nums := cel.ListType(cel.DoubleType)
	return []helper{
		{Helper: Helper{"last", "last(list, n)", "the last n items of a list (all of it if shorter), e.g. last(zs, 4)"},
			overloads: []helperOverload{{id: overloadPrefix + "last_list_int", args: []*cel.Type{listT, cel.IntType}, result: listT,
				binary: lastN, cost: costOne, size: sizeLastN}}},
		{Helper: Helper{"count", "list.count(v, condition)", "how many items of a list meet the condition, e.g. last(zs, 4).count(v, v > 2.0)"},
			macro: countMacro()},
		{Helper: Helper{"abs", "abs(x)", "absolute value of a number"},
			overloads: []helperOverload{
				{id: overloadPrefix + "abs_double", args: []*cel.Type{cel.DoubleType}, result: cel.DoubleType, unary: absOf, cost: costOne},
				{id: overloadPrefix + "abs_int", args: []*cel.Type{cel.IntType}, result: cel.IntType, unary: absOf, cost: costOne},
			}},
		{Helper: Helper{"min", "min(list)", "smallest number in a list of numbers (error if empty)"},
			overloads: []helperOverload{{id: overloadPrefix + "min_list", args: []*cel.Type{nums}, result: cel.DoubleType,
				unary: func(v ref.Val) ref.Val { return reduce(v, "min", math.Min) }, cost: costPerItem}}},
		{Helper: Helper{"max", "max(list)", "largest number in a list of numbers (error if empty)"},
			overloads: []helperOverload{{id: overloadPrefix + "max_list", args: []*cel.Type{nums}, result: cel.DoubleType,
				unary: func(v ref.Val) ref.Val { return reduce(v, "max", math.Max) }, cost: costPerItem}}},
		{Helper: Helper{"mean", "mean(list)", "average of a list of numbers (error if empty)"},
			overloads: []helperOverload{{id: overloadPrefix + "mean_list", args: []*cel.Type{nums}, result: cel.DoubleType,
				unary: meanOf, cost: costPerItem}}},
		{Helper: Helper{"missing", "missing(x)", "true when a number is not available (NaN), e.g. missing(prev_z)"},
			overloads: []helperOverload{{id: overloadPrefix + "missing_double", args: []*cel.Type{cel.DoubleType}, result: cel.BoolType,
				unary: missingOf, cost: costOne}}},
	}
})

// overloadPrefix starts the identifier of every helper overload, so the
// cost tracker can pass over cel-go's own functions without a lookup.
const overloadPrefix = "rules_"

// helperOverloads indexes the overloads of helperTable by identifier.
var helperOverloads = sync.OnceValue(func() map[string]*helperOverload {
	out := make(map[string]*helperOverload)
	for _, h := range helperTable() {
		for i := range h.overloads {
			out[h.overloads[i].id] = &h.overloads[i]
		}
	}
	return out
})

// Helpers lists the functions added to standard CEL. Nothing else is added:
// no file, environment, network or clock access exists in a rule.
func Helpers() []Helper {
	t := helperTable()
	out := make([]Helper, len(t))
	for i, h := range t {
		out[i] = h.Helper
	}
	return out
}

// helperOptions declares the helpers to CEL with their Go implementations.
// cel-go's per-call runtime type guards are switched off (they allocate on
// every call of a generic function like last); the checker has already
// matched the types, and each binding still checks what it receives, so a
// dyn argument of the wrong kind gives an error, never a panic.
func helperOptions() []cel.EnvOption {
	var opts []cel.EnvOption
	for _, h := range helperTable() {
		if h.macro != nil {
			opts = append(opts, cel.Macros(h.macro))
			continue
		}
		fn := []cel.FunctionOpt{decls.DisableTypeGuards(true)}
		for _, o := range h.overloads {
			binding := cel.UnaryBinding(o.unary)
			if o.binary != nil {
				binding = cel.BinaryBinding(o.binary)
			}
			fn = append(fn, cel.Overload(o.id, o.args, o.result, binding))
		}
		opts = append(opts, cel.Function(h.Name, fn...))
	}
	return opts
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

func missingOf(v ref.Val) ref.Val {
	d, ok := v.(types.Double)
	if !ok {
		return types.NewErr("missing(x) needs a number")
	}
	return types.Bool(math.IsNaN(float64(d)))
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

// countMacro adds list.count(v, condition): how many items satisfy the
// condition, e.g. last(zs, 4).count(v, v > 2.0) >= 3. It expands, like
// CEL's own filter, into a loop, but keeps a whole-number tally instead of
// building a list, so it is both clearer and cheaper than
// filter(...).size(). cel-go costs the loop like any other.
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
