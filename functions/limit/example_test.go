package limit_test

import (
	"fmt"
	"math/rand/v2"

	"veer/functions/chart"
	"veer/functions/limit"
)

func ExampleARL() {
	spec := chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 0.5}
	in, _ := limit.ARL(spec, 5, 0, 1)  // healthy
	out, _ := limit.ARL(spec, 5, 1, 1) // 1-SD shift
	fmt.Printf("%.2f %.2f\n", in, out)
	// Output:
	// 930.89 10.38
}

func ExampleSolve() {
	// A limit for one false signal per 465 exams, two-sided CUSUM.
	spec := chart.Spec{Kind: chart.CUSUM, Side: chart.Both, Allowance: 0.5}
	h, _ := limit.Solve(spec, 465.44, 1)
	fmt.Printf("%.3f\n", h)
	// Output:
	// 5.000
}

type white struct{ rng *rand.Rand }

func (w white) Next() (float64, float64) { return 1, w.rng.NormFloat64() }

func ExampleMonteCarlo_Calibrate() {
	spec := chart.DefaultSpec()
	mc := limit.MonteCarlo{Paths: 4000, Seed: 1}
	c, _ := mc.Calibrate(spec, 100, func(rng *rand.Rand) limit.Stream { return white{rng} }, 0)
	exact, _ := limit.Solve(spec, 100, 1)
	fmt.Printf("simulated %.2f (SE %.2f), exact %.2f\n", c.H, c.SEH, exact)
	// Output:
	// simulated 2.89 (SE 0.02), exact 2.85
}
