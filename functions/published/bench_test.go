package published

import (
	"math/rand/v2"
	"testing"
)

// zInputs are one million exams of two groups at ages 20–60.
func zInputs(height bool) (groups []string, age, y []float64, cov [][]float64) {
	const n = 1_000_000
	rng := rand.New(rand.NewPCG(1, 1))
	groups = make([]string, n)
	age, y = make([]float64, n), make([]float64, n)
	h := make([]float64, n)
	for i := range age {
		groups[i] = []string{"f", "m"}[(i/7)%2]
		age[i] = 20 + 40*rng.Float64()
		y[i] = 100 + 30*rng.Float64()
		h[i] = 150 + 40*rng.Float64()
	}
	if height {
		for i := range y {
			groups[i] = "female"
			y[i] = 2 + 2*rng.Float64()
		}
		cov = [][]float64{h}
	}
	return groups, age, y, cov
}

// BenchmarkZManyTable1M: one million z from an LMS table of two groups
// tabulated every year (the figure to compare with refcurve's
// BenchmarkZMany1M, target 0.2 s, in the same run).
func BenchmarkZManyTable1M(b *testing.B) {
	var rows []TableRow
	for _, g := range []string{"f", "m"} {
		for a := 18.0; a <= 75; a++ {
			p := truthLMS(a)
			rows = append(rows, TableRow{Group: g, Age: a, L: p.L, M: p.M, S: p.S})
		}
	}
	ref, err := NewTable(rows, Linear)
	if err != nil {
		b.Fatal(err)
	}
	groups, age, y, _ := zInputs(false)
	out := make([]float64, len(y))
	b.ResetTimer()
	for b.Loop() {
		if err := ref.ZMany(groups, age, y, nil, false, out); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkZManyEquation1M: one million z from a reference equation in
// age and height with an age lookup (handDoc).
func BenchmarkZManyEquation1M(b *testing.B) {
	ref, err := DecodeEquations([]byte(handDoc))
	if err != nil {
		b.Fatal(err)
	}
	groups, age, y, cov := zInputs(true)
	out := make([]float64, len(y))
	b.ResetTimer()
	for b.Loop() {
		if err := ref.ZMany(groups[:1], age, y, cov, false, out); err != nil {
			b.Fatal(err)
		}
	}
}
