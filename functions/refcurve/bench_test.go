package refcurve

import (
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// bigRows is a synthetic cohort of 100,000 workers x 7 exams (700k rows),
// the size of the speed targets: first exam between 18 and 48, then gaps
// of 0.3 to 4.3 years (mostly short), a persistent worker effect and
// exam noise.
func bigRows() []Row {
	rng := rand.New(rand.NewPCG(2024, 1))
	const nw, per = 100_000, 7
	rows := make([]Row, 0, nw*per)
	for w := 0; w < nw; w++ {
		id := "W" + strconv.Itoa(w)
		t := 18 + 30*rng.Float64()
		b := 5 * rng.NormFloat64()
		for k := 0; k < per; k++ {
			rows = append(rows, Row{Worker: id, Time: t, Value: 120 + 0.5*(t-40) + 3*math.Sin(t/5) + b + 8*rng.NormFloat64()})
			t += 0.3 + 4*rng.Float64()*rng.Float64()
		}
	}
	return rows
}

// BenchmarkFit700k: the whole fit (checks, canonical order, data hash, mean
// and sd bandwidths by leave-one-worker-out cross-validation, curves,
// diagnostics, content hash) for 100,000 workers x 7 exams. Target <= 1.5 s.
func BenchmarkFit700k(b *testing.B) {
	rows := bigRows()
	b.ResetTimer()
	for b.Loop() {
		if _, err := Fit(rows, Options{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkZMany1M: one million standardised scores from a decoded model
// (two groups, Box-Cox transform). Target <= 0.2 s.
func BenchmarkZMany1M(b *testing.B) {
	rows := cohortRows(7, 400, 6, []string{"F", "M"})
	m0, err := Fit(rows, Options{Transform: "boxcox"})
	if err != nil {
		b.Fatal(err)
	}
	doc, err := m0.Encode()
	if err != nil {
		b.Fatal(err)
	}
	m, err := Decode(doc)
	if err != nil {
		b.Fatal(err)
	}
	const n = 1_000_000
	rng := rand.New(rand.NewPCG(1, 1))
	groups := make([]string, n)
	t := make([]float64, n)
	y := make([]float64, n)
	for i := range t {
		groups[i] = []string{"F", "M"}[(i/7)%2]
		t[i] = 20 + 40*rng.Float64()
		y[i] = 100 + 30*rng.Float64()
	}
	out := make([]float64, n)
	b.ResetTimer()
	for b.Loop() {
		if err := m.ZMany(groups, t, y, true, out); err != nil {
			b.Fatal(err)
		}
	}
}
