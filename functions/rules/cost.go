package rules

import (
	"math"
	"strings"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/checker"
	"github.com/google/cel-go/common/ast"
	"github.com/google/cel-go/common/types"
	"github.com/google/cel-go/common/types/ref"
	"github.com/google/cel-go/common/types/traits"
)

// Two programs per rule.
//
// Runtime cost tracking and a context per evaluation are what make a
// runaway rule stop, but together they cost several times the rule itself
// (cel-go clones a cost tracker, observes every step and derives a context
// per evaluation). So at compile time the rule's worst-case cost is
// estimated with cel-go's static estimator (checker.Cost), assuming every
// history list has at most maxList items and every text at most maxStr
// characters. If that worst case is within Limits.MaxCost, exams whose
// lists and texts fit those sizes run on a plain program: its cost cannot
// exceed the limit, so it needs no tracking. Any other exam, and every
// exam of a rule without such a bound (a loop inside a loop over a long
// history), runs on the guarded program with cel.CostLimit and the time
// limit. The choice never changes a result, only the guards.
//
// Both counts charge the helpers from one statement of their cost
// (helperTable's callCost, read by sizeBound here and by helperCost when
// the guarded program runs), so the estimate that lets a rule run
// unguarded bounds what the helpers really do.

// maxFastCost caps the worst case a rule may have to run unguarded, so
// that the plain program is also quick (a few milliseconds at most) when
// Limits.MaxCost is raised far above the default.
const maxFastCost = DefaultMaxCost

// maxStrFast is the longest text (in bytes, which bounds the CEL size in
// characters) an exam or cell may carry to use the plain program.
const maxStrFast = 4096

// listBoundCandidates are the history lengths tried for the static
// estimate, largest first; the first whose estimate fits is kept.
func listBoundCandidates() []uint64 {
	return []uint64{1 << 30, 100_000, 10_000, 1_000, 200, 50, 10}
}

// sizeBound answers cel-go's estimator: the declared variables are the
// only sizes it supplies; everything else is derived by cel-go or unknown
// (which rules the plain program out).
type sizeBound struct {
	vars    map[string]bool // declared list or text variables
	maxList uint64
	maxStr  uint64
}

func (s sizeBound) EstimateSize(n checker.AstNode) *checker.SizeEstimate {
	p := n.Path()
	if len(p) != 1 || !s.vars[p[0]] || n.Expr().Kind() != ast.IdentKind || n.Expr().AsIdent() != p[0] {
		return nil
	}
	switch n.Type().Kind() {
	case types.ListKind:
		return &checker.SizeEstimate{Min: 0, Max: s.maxList}
	case types.StringKind, types.DynKind:
		return &checker.SizeEstimate{Min: 0, Max: s.maxStr}
	}
	return nil
}

// EstimateCallCost gives the helpers' cost and result size from
// helperTable, as helperCost does when they run; other calls keep
// cel-go's own estimates.
func (s sizeBound) EstimateCallCost(_, overloadID string, _ *checker.AstNode, args []checker.AstNode) *checker.CallEstimate {
	o, ok := helperOverloads()[overloadID]
	if !ok {
		return nil
	}
	return &checker.CallEstimate{CostEstimate: o.cost.estimate(args), ResultSize: o.size.estimate(args)}
}

// helperCost is the runtime cost tracker's estimator: it charges the
// helpers what helperTable says, so the cost limit also bounds work
// hidden inside them; other calls keep cel-go's own charges.
type helperCost struct{}

func (helperCost) CallCost(_, overloadID string, args []ref.Val, _ ref.Val) *uint64 {
	if !strings.HasPrefix(overloadID, overloadPrefix) {
		return nil
	}
	o, ok := helperOverloads()[overloadID]
	if !ok {
		return nil
	}
	c := o.cost.actual(args)
	return &c
}

// callCost is what one call of a helper costs, in CEL cost units. Both
// ways of counting it are written side by side: actual when the rule
// runs (helperCost) and estimate for its worst case (sizeBound).
type callCost uint8

const (
	// costUnset is the zero value: a helper declared without a cost.
	// TestEveryHelperHasACost fails on it; meanwhile its estimate is
	// unbounded, so a rule calling it always runs guarded.
	costUnset callCost = iota
	// costOne is one unit whatever the arguments, as cel-go charges a
	// simple function.
	costOne
	// costPerItem is one unit per item of the list argument (the first),
	// plus one: the helper reads the whole list.
	costPerItem
)

func (c callCost) actual(args []ref.Val) uint64 {
	if c == costPerItem && len(args) > 0 {
		if s, ok := args[0].(traits.Sizer); ok {
			if n, ok := s.Size().(types.Int); ok && n >= 0 {
				return uint64(n) + 1
			}
		}
	}
	return 1
}

func (c callCost) estimate(args []checker.AstNode) checker.CostEstimate {
	switch {
	case c == costUnset:
		return checker.CostEstimate{Min: 1, Max: math.MaxUint64}
	case c == costPerItem && len(args) > 0:
		return argSize(args[0]).Add(checker.FixedSizeEstimate(1)).AsCost()
	}
	return checker.CostEstimate{Min: 1, Max: 1}
}

// resultSize says how long a helper's list result can be.
type resultSize uint8

const (
	// sizeNone: the result is not a list (or its size is not bounded here).
	sizeNone resultSize = iota
	// sizeLastN: at most n items (n the second argument, when a
	// constant) and never more than the list (the first).
	sizeLastN
)

func (r resultSize) estimate(args []checker.AstNode) *checker.SizeEstimate {
	if r != sizeLastN || len(args) < 2 {
		return nil
	}
	out := argSize(args[0])
	if e := args[1].Expr(); e.Kind() == ast.LiteralKind {
		if n, ok := e.AsLiteral().(types.Int); ok && n >= 0 {
			out.Max = min(out.Max, uint64(n))
			out.Min = min(out.Min, out.Max)
		}
	}
	return &out
}

// argSize is the size estimate of an argument, or unknown.
func argSize(n checker.AstNode) checker.SizeEstimate {
	if c := n.ComputedSize(); c != nil {
		return *c
	}
	return checker.UnknownSizeEstimate()
}

// fastBound finds the largest history length for which the rule's
// worst-case cost stays within maxCost (and maxFastCost); ok is false when
// none does.
func fastBound(env *cel.Env, a *cel.Ast, vars map[string]bool, maxCost uint64) (maxList uint64, ok bool) {
	maxCost = min(maxCost, maxFastCost)
	for _, n := range listBoundCandidates() {
		est, err := env.EstimateCost(a, sizeBound{vars: vars, maxList: n, maxStr: maxStrFast})
		if err == nil && est.Max <= maxCost && est.Max != math.MaxUint64 {
			return n, true
		}
	}
	return 0, false
}
