package rules

import (
	"context"
	"fmt"
	"strings"
	"testing"

	"github.com/google/cel-go/cel"
)

// TestEveryHelperHasACost enumerates the functions the rule environment
// declares beyond standard CEL (as this package configures it) and fails
// for any overload that helperTable does not cost: such a helper would run
// uncounted by the cost limit and be invisible to the static estimate.
func TestEveryHelperHasACost(t *testing.T) {
	env, err := newExamEnv(DefaultLimits())
	if err != nil {
		t.Fatal(err)
	}
	// Standard CEL with the same non-helper options as baseEnvOptions:
	// cel-go costs these itself.
	std, err := cel.NewEnv(cel.CrossTypeNumericComparisons(true), cel.DefaultUTCTimeZone(true))
	if err != nil {
		t.Fatal(err)
	}
	stdOverloads := map[string]bool{}
	for _, fn := range std.Functions() {
		for _, o := range fn.OverloadDecls() {
			stdOverloads[o.ID()] = true
		}
	}
	added := 0
	for name, fn := range env.Functions() {
		for _, o := range fn.OverloadDecls() {
			if stdOverloads[o.ID()] {
				continue
			}
			added++
			h, ok := helperOverloads()[o.ID()]
			switch {
			case !ok:
				t.Errorf("%s (overload %s) is declared in the rule environment but not in helperTable, so it has no cost; "+
					"declare it in helperTable with its cost (or, if a cel-go library costs it, add that library to std here)", name, o.ID())
			case h.cost == costUnset:
				t.Errorf("helper %s (overload %s) has no cost in helperTable", name, o.ID())
			}
		}
	}
	for id := range helperOverloads() {
		if !strings.HasPrefix(id, overloadPrefix) {
			t.Errorf("helper overload %s does not start with %q: the cost tracker would pass it over", id, overloadPrefix)
		}
	}
	if want := len(helperOverloads()); added != want {
		t.Errorf("the environment adds %d overloads to standard CEL; helperTable declares %d", added, want)
	}
}

// helperSamples calls every helper overload on exam variables, for
// TestHelperCostsAgree. A new overload needs a sample here.
var helperSamples = map[string]string{
	"rules_last_list_int":  "last(zs, 3).exists(v, v > 9.0)",
	"rules_abs_double":     "abs(z) > 1.0",
	"rules_abs_int":        "abs(exam) > 1",
	"rules_min_list":       "min(zs) > -9.0",
	"rules_max_list":       "max(values) > 0.0",
	"rules_mean_list":      "mean(times) > 0.0",
	"rules_missing_double": "missing(prev_z)",
}

// TestHelperCostsAgree runs every helper on histories of several lengths
// and checks that what the cost tracker charges lies within the static
// estimate for that length, and that a helper costed per item is charged
// per item when it runs. Together with TestEveryHelperHasACost this is
// what keeps a helper from escaping the cost guard: a rule whose estimate
// fits the limit runs untracked (cost.go), which is safe only if the
// estimate bounds what it really costs.
func TestHelperCostsAgree(t *testing.T) {
	lim := DefaultLimits()
	env, err := newExamEnv(lim)
	if err != nil {
		t.Fatal(err)
	}
	for id, o := range helperOverloads() {
		rule, ok := helperSamples[id]
		if !ok {
			t.Errorf("helper overload %s has no sample rule in helperSamples", id)
			continue
		}
		a, iss := env.Compile(rule)
		if iss.Err() != nil {
			t.Fatalf("%s: %v", rule, iss.Err())
		}
		prg, err := env.Program(a, guardedOptions(lim)...)
		if err != nil {
			t.Fatal(err)
		}
		actual := map[int]uint64{}
		for _, n := range []int{1, 10, 200} {
			est, err := env.EstimateCost(a, sizeBound{vars: examSized(), maxList: uint64(n), maxStr: maxStrFast})
			if err != nil {
				t.Fatal(err)
			}
			e := historyExam(n)
			_, det, err := prg.ContextEval(context.Background(), &examActivation{e: &e})
			if err != nil {
				t.Fatalf("%s on %d exams: %v", rule, n, err)
			}
			got := *det.ActualCost()
			if got < est.Min || got > est.Max {
				t.Errorf("%s on %d exams: charged %d, outside the estimate [%d, %d]", rule, n, got, est.Min, est.Max)
			}
			actual[n] = got
		}
		if o.cost == costPerItem && actual[200]-actual[1] < 199 {
			t.Errorf("%s: charged %d for 1 exam and %d for 200; a helper costed per item must be charged per item",
				rule, actual[1], actual[200])
		}
	}
}

// historyExam is the last exam of a worker with n exams.
func historyExam(n int) Exam {
	exams := make([]Exam, n)
	for i := range exams {
		exams[i] = Exam{Worker: "W", Time: 30 + float64(i), Z: float64(i%5) - 2, Value: 120 + float64(i)}
	}
	if err := Link(exams); err != nil {
		panic(fmt.Sprint(err))
	}
	return exams[n-1]
}
