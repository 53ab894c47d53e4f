package evaluation_test

import (
	"context"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"

	"veer/functions/evaluation"
)

// BenchmarkEvaluate1M: a cohort of 1,000,000 exams of 125,000 workers, a
// fifth diagnosed; NewCohort once, then one method's flags scored.
func BenchmarkEvaluate1M(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 2))
	var exams []evaluation.Exam
	var outs []evaluation.Outcome
	for w := 0; len(exams) < 1_000_000; w++ {
		id := "W" + strconv.Itoa(w)
		age := 20 + 30*rng.Float64()
		for range 8 {
			exams = append(exams, evaluation.Exam{Worker: id, Age: age})
			age += 0.5 + 2*rng.Float64()
		}
		o := evaluation.Outcome{Worker: id, Diagnosed: "no", Age: math.NaN()}
		if rng.Float64() < 0.2 {
			o.Diagnosed, o.Age = "yes", age-3*rng.Float64()
		}
		outs = append(outs, o)
	}
	flags := make([]bool, len(exams))
	for i := range flags {
		flags[i] = rng.Float64() < 0.03
	}
	ctx := context.Background()
	b.Run("cohort", func(b *testing.B) {
		for range b.N {
			if _, err := evaluation.NewCohort(ctx, exams, outs, evaluation.Options{}); err != nil {
				b.Fatal(err)
			}
		}
	})
	c, err := evaluation.NewCohort(ctx, exams, outs, evaluation.Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.Run("method", func(b *testing.B) {
		for range b.N {
			if _, err := c.Evaluate(ctx, flags); err != nil {
				b.Fatal(err)
			}
		}
	})
}
