package evaluation_test

import (
	"context"
	"fmt"
	"math"

	"veer/functions/evaluation"
)

func ExampleCohort_Evaluate() {
	// Four workers: "ana" diagnosed at 47, "ben" at 52, "cai" and "dee"
	// never. The method flags ana at 44, ben only at 52 (the diagnosing
	// exam, which is not screening) and cai at 33.
	exams := []evaluation.Exam{
		{"ana", 40}, {"ana", 42}, {"ana", 44}, {"ana", 48},
		{"ben", 45}, {"ben", 48}, {"ben", 52},
		{"cai", 30}, {"cai", 33}, {"cai", 36},
		{"dee", 50}, {"dee", 55},
	}
	flags := []bool{
		false, false, true, true,
		false, false, true,
		false, true, false,
		false, false,
	}
	outcomes := []evaluation.Outcome{
		{Worker: "ana", Diagnosed: "yes", Age: 47},
		{Worker: "ben", Diagnosed: "yes", Age: 52},
		{Worker: "cai", Diagnosed: "no", Age: math.NaN()},
		{Worker: "dee", Diagnosed: "no", Age: math.NaN()},
	}
	c, err := evaluation.NewCohort(context.Background(), exams, outcomes, evaluation.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	r, err := c.Evaluate(context.Background(), flags)
	if err != nil {
		fmt.Println(err)
		return
	}
	s := c.Summary()
	fmt.Printf("%d exams after a diagnosis left out\n", s.AfterDiagnosis)
	fmt.Printf("flagged before diagnosis: %d of %d (95%% interval %.2f to %.2f), %.0f years ahead\n",
		r.Flagged, r.Diagnosed, r.FlaggedShare.Low, r.FlaggedShare.High, r.Lead.MedianFlagged)
	fmt.Printf("false signals: %d in %.0f worker-years, %.1f per 100\n", r.HealthyFlagged, r.YearsAtRisk, r.FalsePer100.Estimate)
	// Output:
	// 2 exams after a diagnosis left out
	// flagged before diagnosis: 1 of 2 (95% interval 0.09 to 0.91), 3 years ahead
	// false signals: 1 in 8 worker-years, 12.5 per 100
}

func ExampleWilson() {
	iv := evaluation.Wilson(7, 20, evaluation.Level)
	fmt.Printf("%.2f (%.3f to %.3f)\n", iv.Estimate, iv.Low, iv.High)
	// Output: 0.35 (0.181 to 0.567)
}

func ExampleKaplanMeier() {
	// Years to a signal; the third worker was followed 4 years without one.
	c := evaluation.KaplanMeier([]float64{1, 3, 4, 6}, []bool{true, true, false, true})
	fmt.Println(c.Surv, c.Quantile(0.5))
	// Output: [0.75 0.5 0] 4.5
}

func ExampleMatchTarget() {
	// A chart swept over targets gave these false-signal rates; the
	// baseline rule gave 3.1 per 100 worker-years.
	targets := []float64{10, 20, 50}
	rates := []float64{9.5, 4.8, 2.1}
	t, ok := evaluation.MatchTarget(targets, rates, 3.1)
	fmt.Printf("%.1f %v\n", t, ok)
	// Output: 32.5 true
}
