package joint

import (
	"context"
	"fmt"
	"math/rand/v2"
	"testing"

	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/serial"
)

// BenchmarkLimit: speed target SE <= 2% of the target in <= 2 s on 2 cores,
// three markers, the default chart, a reference of 1000 workers x 6 exams
// with a fifth of the readings of two markers missing.
func BenchmarkLimit(b *testing.B) {
	model := testModel()
	ref := simulateCohort(model, 1000, 6, 31, []float64{0, 0.2, 0.2})
	est, err := Estimate(context.Background(), model.Markers, ref, nil)
	if err != nil {
		b.Fatal(err)
	}
	spec := DefaultSpec(3)
	spec.Sides = []chart.Side{chart.Up, chart.Up, chart.Down}
	for _, method := range []monitor.Method{monitor.Normal, monitor.Bootstrap} {
		for _, horizon := range []monitor.Horizon{monitor.HorizonFollowUp, monitor.HorizonLong} {
			for _, target := range []float64{20, 100, 1000} {
				c := Calibration{Settings: Settings{Chart: spec, Mode: monitor.Whiten, Model: est}, Method: method, Reference: ref, Seed: 1, Horizon: horizon}
				b.Run(fmt.Sprintf("%s/%s/target=%v", method, horizon, target), func(b *testing.B) {
					var lr monitor.LimitResult
					for b.Loop() {
						var err error
						if lr, err = Limit(c, target); err != nil {
							b.Fatal(err)
						}
					}
					b.ReportMetric(100*lr.SE/target, "SE%")
				})
			}
		}
	}
}

// BenchmarkChart charts 100000 workers x 10 exams x 3 markers (1M exams)
// per iteration with each kind.
func BenchmarkChart(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	gaps := make([]float64, 10)
	x := make([]float64, 30)
	for j := range gaps {
		gaps[j] = 0.5 + 2.5*rng.Float64()
		for k := range 3 {
			x[j*3+k] = rng.NormFloat64()
		}
	}
	x[13] = nan
	r := testModel().Innovation.R
	for _, kind := range Kinds {
		spec := DefaultSpec(3)
		spec.Kind = kind
		if !sided(kind) {
			spec.Sides = nil
		}
		c, err := NewChart(spec, r)
		if err != nil {
			b.Fatal(err)
		}
		b.Run(string(kind), func(b *testing.B) {
			var pts []Point
			for b.Loop() {
				for range 100000 {
					pts = c.Run(5, gaps, x, pts[:0])
				}
			}
		})
	}
}

// BenchmarkEstimate: the joint model of 100000 workers x 7 exams x 3
// markers, against the serial model of one of its markers (the
// single-marker fit's share of this work), same run.
func BenchmarkEstimate(b *testing.B) {
	model := testModel()
	ref := simulateCohort(model, 100000, 7, 51, []float64{0, 0.1, 0.1})
	ctx := context.Background()
	b.Run("one marker serial", func(b *testing.B) {
		one := make([]serial.Series, len(ref))
		for i, w := range ref {
			one[i] = w.marker(0)
		}
		for b.Loop() {
			if _, err := serial.Estimate(ctx, one); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("three markers joint", func(b *testing.B) {
		for b.Loop() {
			if _, err := Estimate(ctx, model.Markers, ref, nil); err != nil {
				b.Fatal(err)
			}
		}
	})
	b.Run("three markers joint, serial given", func(b *testing.B) {
		for b.Loop() {
			if _, err := Estimate(ctx, model.Markers, ref, model.Serial); err != nil {
				b.Fatal(err)
			}
		}
	})
}
