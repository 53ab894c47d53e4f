package rules

import (
	"math"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/checker"
	"github.com/google/cel-go/common/ast"
	"github.com/google/cel-go/common/types"
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

// EstimateCallCost mirrors helperCost for the helpers: min, max and mean
// cost one unit per item plus one; last costs one unit and gives at most
// n items (n a constant) and never more than its list.
func (s sizeBound) EstimateCallCost(_, overloadID string, _ *checker.AstNode, args []checker.AstNode) *checker.CallEstimate {
	switch overloadID {
	case ovMin, ovMax, ovMean:
		sz := checker.UnknownSizeEstimate()
		if c := args[0].ComputedSize(); c != nil {
			sz = *c
		}
		return &checker.CallEstimate{CostEstimate: sz.Add(checker.FixedSizeEstimate(1)).AsCost()}
	case ovLast:
		out := checker.UnknownSizeEstimate()
		if c := args[0].ComputedSize(); c != nil {
			out = *c
		}
		if e := args[1].Expr(); e.Kind() == ast.LiteralKind {
			if n, ok := e.AsLiteral().(types.Int); ok && n >= 0 {
				out.Max = min(out.Max, uint64(n))
				out.Min = min(out.Min, out.Max)
			}
		}
		return &checker.CallEstimate{CostEstimate: checker.CostEstimate{Min: 1, Max: 1}, ResultSize: &out}
	}
	return nil
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
