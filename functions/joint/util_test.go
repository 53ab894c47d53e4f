package joint

import (
	"math/rand/v2"
	"strconv"
)

func uniformGap(rng *rand.Rand) float64 { return 0.5 + 2.5*rng.Float64() }

// simulateCohort returns n healthy workers with m exams each (first age
// 20-50, gaps uniform on 0.5-3 years) drawn from the model; marker k is
// missing at an exam with probability miss[k] (nil: never), but every exam
// measures at least one marker.
func simulateCohort(model *Model, n, m int, seed uint64, miss []float64) []Series {
	rng := rand.New(rand.NewPCG(seed, 7))
	p := len(model.Markers)
	out := make([]Series, n)
	for i := range out {
		t := make([]float64, m)
		t[0] = 20 + 30*rng.Float64()
		for j := 1; j < m; j++ {
			t[j] = t[j-1] + uniformGap(rng)
		}
		var meas func(j, k int) bool
		if miss != nil {
			pat := make([]bool, m*p)
			for j := range m {
				some := false
				for k := range p {
					pat[j*p+k] = rng.Float64() >= miss[k]
					some = some || pat[j*p+k]
				}
				if !some {
					pat[j*p+rng.IntN(p)] = true
				}
			}
			meas = func(j, k int) bool { return pat[j*p+k] }
		}
		out[i] = model.Simulate(t, meas, rng)
	}
	return out
}

func ftoa(x float64) string { return strconv.FormatFloat(x, 'f', 2, 64) }
