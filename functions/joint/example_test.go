package joint_test

import (
	"fmt"
	"math"

	"veer/functions/chart"
	"veer/functions/joint"
	"veer/functions/monitor"
)

// The textbook limit of a three-marker MEWMA for i.i.d. N(0, I) vectors,
// exams one year apart, for 200 years to a false signal.
func ExampleLimit() {
	c := joint.Calibration{
		Settings: joint.Settings{Chart: joint.Spec{Kind: joint.MEWMA, Lambda: 0.1, Unit: 1}, Mode: monitor.Whiten, Model: joint.Independent(3)},
		Method:   monitor.Normal,
		Gap:      1,
	}
	lr, _ := joint.Limit(c, 200)
	fmt.Printf("limit %.4f (exact %v)\n", lr.H, lr.Exact)
	// Output: limit 10.7836 (exact true)
}

// A worker's two markers charted together: blood pressure (harmful rise)
// and lung function (harmful fall), the second not measured at the second
// exam. The chart removes the markers' correlation at the same exam.
func ExampleChart() {
	spec := joint.Spec{Kind: joint.CUSUM, Sides: []chart.Side{chart.Up, chart.Down}, Allowance: 0.5}
	c, _ := joint.NewChart(spec, [][]float64{{1, -0.3}, {-0.3, 1}})
	gaps := []float64{0, 1.5, 2}
	x := []float64{
		1.2, -0.4,
		1.8, math.NaN(),
		1.5, -1.1,
	}
	for j, p := range c.Run(3, gaps, x, nil) {
		fmt.Printf("exam %d: statistic %.3f", j+1, p.Stat)
		if p.Signal {
			fmt.Printf(", signal led by marker %d", p.Top+1)
		}
		fmt.Println()
	}
	// Output:
	// exam 1: statistic 0.701
	// exam 2: statistic 2.250
	// exam 3: statistic 3.316, signal led by marker 1
}
