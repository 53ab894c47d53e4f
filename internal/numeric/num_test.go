package numeric

import (
	"math"
	"testing"
)

func TestFinite(t *testing.T) {
	for _, c := range []struct {
		x    float64
		want bool
	}{
		{0, true},
		{math.Copysign(0, -1), true},
		{-3.5, true},
		{math.MaxFloat64, true},
		{math.SmallestNonzeroFloat64, true},
		{math.NaN(), false},
		{math.Inf(1), false},
		{math.Inf(-1), false},
	} {
		if got := Finite(c.x); got != c.want {
			t.Errorf("Finite(%v) = %v; want %v", c.x, got, c.want)
		}
	}
}
