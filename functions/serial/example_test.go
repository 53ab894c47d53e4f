package serial_test

import (
	"context"
	"fmt"
	"math/rand/v2"

	"veer/functions/serial"
)

func ExampleInnovations() {
	p := serial.Params{Phi: 0.7, C: 0.6}
	u, err := serial.Innovations(p, []float64{40, 41, 43.5}, []float64{1, 2, 1.5}, nil)
	fmt.Printf("%.3f %v\n", u, err)
	_, err = serial.Innovations(p, []float64{40, 40}, []float64{1, 2}, nil)
	fmt.Println(err)
	// Output:
	// [1.000 1.741 1.029] <nil>
	// exam 2: its time 40 is not after the previous exam's time 40; a worker's exam times must strictly increase (two exams at the same time are not allowed)
}

func ExampleEstimate() {
	truth := serial.Params{Phi: 0.7, C: 0.6}
	rng := rand.New(rand.NewPCG(1, 2))
	ref := make([]serial.Series, 500)
	for i := range ref {
		t := []float64{30}
		for range 5 {
			t = append(t, t[len(t)-1]+0.5+2.5*rng.Float64())
		}
		ref[i] = serial.Series{Time: t, Z: serial.Simulate(truth, t, rng, nil)}
	}
	p, _ := serial.Estimate(context.Background(), ref)
	fmt.Printf("phi %.2f (SE %.2f), c %.2f (SE %.2f), %d pairs\n", p.Phi, p.SEPhi, p.C, p.SEC, p.Pairs)
	d, _ := serial.Diagnose(p, ref)
	fmt.Printf("innovations: sd %.2f, lag-1 p %.2f, normality p %.2f\n", d.SD, d.Lag1P, d.NormalityP)
	// Output:
	// phi 0.70 (SE 0.04), c 0.62 (SE 0.06), 4500 pairs
	// innovations: sd 0.99, lag-1 p 0.02, normality p 0.88
}

func ExampleParams_Finding() {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, truth := range []serial.Params{{Phi: 0.7, C: 0.6}, {}} {
		ref := make([]serial.Series, 400)
		for i := range ref {
			t := []float64{30}
			for range 4 {
				t = append(t, t[len(t)-1]+0.5+2.5*rng.Float64())
			}
			ref[i] = serial.Series{Time: t, Z: serial.Simulate(truth, t, rng, nil)}
		}
		p, _ := serial.Estimate(context.Background(), ref)
		fmt.Println(p.Finding())
	}
	// Output:
	// serial correlation detected (consecutive exams, 1.74 years apart on average, correlate 0.352, p < 0.001): phi 0.725 per year, persistent share c 0.584
	// no serial correlation detected (consecutive exams, 1.72 years apart on average, correlate -0.012, p = 0.683); readings of a worker are treated as independent
}
