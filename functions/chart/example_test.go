package chart_test

import (
	"fmt"

	"veer/functions/chart"
)

func ExampleRun() {
	spec := chart.DefaultSpec() // upward CUSUM, k = 0.5
	u := []float64{0.2, 1.1, 1.8, 2.0, 1.6}
	gaps := []float64{0, 1, 0.7, 2.5, 1}
	for _, p := range chart.Run(spec, 4, gaps, u, nil) {
		fmt.Printf("%.1f %v\n", p.Stat, p.Signal)
	}
	// Output:
	// 0.0 false
	// 0.6 false
	// 1.9 false
	// 3.4 false
	// 4.5 true
}

func ExampleSpec_Validate() {
	fmt.Println(chart.Spec{Kind: "ewma", Side: "both", Lambda: 1.5}.Validate())
	// Output:
	// lambda must be more than 0 and at most 1, got 1.5
}

func ExampleSpec_Weight() {
	s := chart.Spec{Kind: "ewma", Side: "both", Lambda: 0.2, Unit: 1}
	fmt.Printf("%.3f %.3f %.3f\n", s.Weight(0.5), s.Weight(1), s.Weight(3))
	// Output:
	// 0.106 0.200 0.488
}
