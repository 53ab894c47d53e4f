package limit

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"veer/functions/chart"
)

// Check values quoted in the task, each with its outside source.
func TestMEWMACheckValues(t *testing.T) {
	for _, tc := range []struct {
		p      int
		want   float64
		source string
	}{
		{2, 8.6336, "R spc 0.6.7 mewma.crit(0.1, 200, 2) = 8.633581"},
		{3, 10.78365, "R spc 0.6.7 mewma.crit(0.1, 200, 3) = 10.78365 (task: 10.7837)"},
	} {
		h, err := SolveMEWMA(0.1, tc.p, 200)
		if err != nil || math.Abs(h-tc.want) > 5e-5 {
			t.Errorf("p %d: limit %.5f %v, want %.4f (%s)", tc.p, h, err, tc.want, tc.source)
		}
	}
	a, err := MEWMAARL(0.1, 8.633581, 2, 1)
	// R spc 0.6.7 mewma.arl(0.1, 8.633581, 2, delta = 1) = 10.13196 with its
	// default 20 nodes, 10.12143 with r = 40 (converged).
	if err != nil || math.Abs(a-10.13196) > 0.012 || math.Abs(a-10.12143) > 1e-4 {
		t.Errorf("ARL1 at delta 1, p 2: %.5f %v, want 10.13 (spc default nodes), 10.12143 (spc r = 40)", a, err)
	}
}

// TestMEWMAGrid matches the whole fixture grid of R spc (testdata/make_mewma.R).
func TestMEWMAGrid(t *testing.T) {
	rows := readCSV(t, "testdata/mewma_grid.csv")
	if testing.Short() {
		rows = rows[:len(rows)/3]
	}
	var worstARL, worstH float64
	for _, r := range rows {
		l, p, h, d, want := num(t, r, "lambda"), int(num(t, r, "p")), num(t, r, "h"), num(t, r, "delta"), num(t, r, "arl")
		switch r["what"] {
		case "crit":
			got, err := SolveMEWMA(l, p, want)
			if err != nil {
				t.Fatal(err)
			}
			rel := math.Abs(got/h - 1)
			worstH = math.Max(worstH, rel)
			if rel > 1e-6 {
				t.Errorf("%s: limit %.8g, want %.8g", r["source"], got, h)
			}
		case "arl":
			got, err := MEWMAARL(l, h, p, d)
			if err != nil {
				t.Fatal(err)
			}
			rel := math.Abs(got/want - 1)
			worstARL = math.Max(worstARL, rel)
			if rel > 1e-6 {
				t.Errorf("%s: ARL %.8g, want %.8g", r["source"], got, want)
			}
		}
	}
	t.Logf("%d rows: worst relative difference %.2g in limits, %.2g in ARLs", len(rows), worstH, worstARL)
}

// The in-control ARL agrees with a direct simulation of the chart, and a
// p = 1 MEWMA is the two-sided EWMA with limit sqrt(h).
func TestMEWMASimulation(t *testing.T) {
	const lambda, h, p = 0.2, 10.0, 3
	want, err := MEWMAARL(lambda, h, p, 0.75)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	n := 20000
	if testing.Short() {
		n = 4000
	}
	var s, s2 float64
	e := make([]float64, p)
	for range n {
		clear(e)
		k := 0
		for {
			k++
			var q float64
			for i := range e {
				x := rng.NormFloat64()
				if i == 0 {
					x += 0.75
				}
				e[i] = (1-lambda)*e[i] + lambda*x
				q += e[i] * e[i]
			}
			if q*(2-lambda)/lambda > h || k > 100000 {
				break
			}
		}
		s += float64(k)
		s2 += float64(k * k)
	}
	m := s / float64(n)
	se := math.Sqrt((s2/float64(n) - m*m) / float64(n))
	if math.Abs(m-want) > 4*se {
		t.Errorf("simulated ARL %.3f (SE %.3f), integral equation %.3f", m, se, want)
	}
	one, _ := MEWMAARL(0.1, 9, 1, 0.5)
	ewma, _ := ARL(chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: 0.1, Unit: 1}, 3, 0.5, 1)
	if one != ewma {
		t.Errorf("p = 1: %v, two-sided EWMA %v", one, ewma)
	}
}

func TestMEWMABadInput(t *testing.T) {
	for _, tc := range []struct {
		lambda, h float64
		p         int
		delta     float64
		want      string
	}{
		{0, 8, 2, 0, "lambda"},
		{1.2, 8, 2, 0, "lambda"},
		{0.1, 8, 0, 0, "number of markers"},
		{0.1, 8, MaxMEWMAMarkers + 1, 0, "number of markers"},
		{0.1, -1, 2, 0, "limit"},
		{0.1, 8, 2, -1, "shift"},
		{0.1, 8, 2, math.NaN(), "shift"},
	} {
		if _, err := MEWMAARL(tc.lambda, tc.h, tc.p, tc.delta); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%+v: %v, want an error about %q", tc, err, tc.want)
		}
	}
	if _, err := SolveMEWMA(0.1, 2, 1); !errors.Is(err, ErrTargetTooShort) {
		t.Errorf("ARL0 1: %v", err)
	}
}

func ExampleSolveMEWMA() {
	h, _ := SolveMEWMA(0.1, 3, 200)
	arl, _ := MEWMAARL(0.1, h, 3, 0)
	fmt.Printf("limit %.4f, in-control ARL %.1f\n", h, arl)
	// Output: limit 10.7836, in-control ARL 200.0
}
