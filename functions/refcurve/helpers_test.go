package refcurve

import (
	"math"
	"math/rand/v2"
	"strconv"
)

// Truth of the synthetic cohorts: marker mean and sd against age, per
// group index g: the mean has a trend and a wave (shifted by group), the
// sd grows linearly in group 0 and rises steeply around age 45 in the
// other groups (a curve the sd smoother must follow, not flatten).
func trueMean(t float64, g int) float64 {
	return 120 + 0.5*(t-40) + 4*math.Sin(t/6) + 6*float64(g)
}

func trueSD(t float64, g int) float64 {
	if g == 0 {
		return 8 + 0.15*(t-18)
	}
	return 7 + 6/(1+math.Exp(-(t-45)/4))
}

// cohortRows simulates workers with `per` exams each, first exam at 18-55,
// irregular gaps of 0.5-4 years, values y = μ(t) + σ(t)·(√0.6·s(t) +
// √0.4·e) with s a stationary unit Ornstein-Uhlenbeck process per worker
// (correlation 0.7 after one year) and e independent N(0,1) noise, so that
// y(t) ~ N(μ(t), σ(t)²) exactly for every exam while a worker's exams are
// correlated.
func cohortRows(seed uint64, workersPerGroup, per int, groups []string) []Row {
	rng := rand.New(rand.NewPCG(seed, 99))
	var rows []Row
	for gi, g := range groups {
		for w := 0; w < workersPerGroup; w++ {
			id := g + "-" + strconv.Itoa(w)
			t := 18 + 37*rng.Float64()
			s := rng.NormFloat64()
			for k := 0; k < per && t <= 65; k++ {
				y := trueMean(t, gi) + trueSD(t, gi)*(math.Sqrt(0.6)*s+math.Sqrt(0.4)*rng.NormFloat64())
				rows = append(rows, Row{Worker: id, Time: t, Value: y, Group: g})
				gap := 0.5 + 3.5*rng.Float64()
				r := math.Pow(0.7, gap)
				s = r*s + math.Sqrt(1-r*r)*rng.NormFloat64()
				t += gap
			}
		}
	}
	return rows
}
