package numeric_test

import (
	"fmt"
	"math"

	"veer/internal/numeric"
)

func ExampleFinite() {
	for _, x := range []float64{142.5, math.NaN(), math.Inf(1)} {
		fmt.Println(x, numeric.Finite(x))
	}
	// Output:
	// 142.5 true
	// NaN false
	// +Inf false
}
