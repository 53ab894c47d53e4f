package rules

import (
	"context"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// syntheticExams builds workers × perWorker exams with seeded random
// readings, linked. The statistics are only plausible, not from a model:
// the benchmark measures rule evaluation, not screening.
func syntheticExams(tb testing.TB, workers, perWorker int, seed uint64) []Exam {
	rng := rand.New(rand.NewPCG(seed, 1))
	exams := make([]Exam, 0, workers*perWorker)
	for w := range workers {
		id := "W" + strconv.Itoa(w)
		age := 20 + 30*rng.Float64()
		s := 0.0
		for range perWorker {
			age += 0.3 + 3*rng.Float64()
			z := rng.NormFloat64()
			s = math.Max(0, s+z-0.5)
			exams = append(exams, Exam{
				Worker: id, Group: []string{"F", "M"}[w%2], Time: age,
				Value: 120 + 15*z, Mean: 120, SD: 15, Z: z,
				Centile:    100 * 0.5 * math.Erfc(-z/math.Sqrt2),
				Innovation: z, ChartUp: s, Chart: s, Limit: 4,
				Signal: s > 4, InRange: true,
			})
		}
	}
	if err := Link(exams); err != nil {
		tb.Fatal(err)
	}
	return exams
}

const typicalRule = `chart > limit || (centile > 99.0 && times.filter(t, t >= time - 5.0).size() >= 2)`

func BenchmarkRule100k(b *testing.B) {
	exams := syntheticExams(b, 10_000, 10, 7)
	out := make([]Value, len(exams))
	for _, bc := range []struct{ name, expr string }{
		{"typical", typicalRule},
		{"simple", `chart > limit`},
		{"3of4", `last(zs, 4).filter(v, v > 2.0).size() >= 3`},
		{"3of4count", `last(zs, 4).count(v, v > 2.0) >= 3`},
		{"severity", `chart > limit ? "high" : (z > 2.0 ? "watch" : "none")`},
	} {
		r, err := Compile(bc.expr, Any)
		if err != nil {
			b.Fatal(err)
		}
		b.Run(bc.name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if err := EvalAll(context.Background(), r, exams, out); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/1e6, "ms/100k")
		})
	}
}

// BenchmarkCompile compares compiling a rule with fetching it from a Cache.
func BenchmarkCompile(b *testing.B) {
	b.Run("fresh", func(b *testing.B) {
		for b.Loop() {
			if _, err := Compile(typicalRule, Bool); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("cached", func(b *testing.B) {
		c := NewCache(0, Limits{})
		for b.Loop() {
			if _, err := c.Compile(typicalRule, Bool); err != nil {
				b.Fatal(err)
			}
		}
		if c.Compilations() != 1 {
			b.Fatalf("%d compilations", c.Compilations())
		}
	})
}

// BenchmarkColumns100k evaluates a rule over 100,000 rows of plain columns.
func BenchmarkColumns100k(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 4))
	rows := make([][]Value, 100_000)
	for i := range rows {
		rows[i] = []Value{NumberValue(110 + 30*rng.Float64()), NumberValue(70 + 25*rng.Float64()), BoolValue(rng.IntN(5) == 0)}
	}
	r, err := CompileColumnsTyped("systolic_bp >= 140.0 || diastolic_bp >= 90.0 || smoker",
		[]Column{{"Systolic BP", Number}, {"Diastolic BP", Number}, {"Smoker", Bool}}, Bool)
	if err != nil {
		b.Fatal(err)
	}
	out := make([]Value, len(rows))
	b.ReportAllocs()
	for b.Loop() {
		if err := EvalRows(context.Background(), r, rows, out); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/1e6, "ms/100k")
}
