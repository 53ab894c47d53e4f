package joint

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"veer/functions/chart"
)

var nan = math.NaN()

// handR is the correlation of the hand-worked cases: r = 0.5, so
// R^-1 = (4/3) [[1, -0.5], [-0.5, 1]].
var handR = [][]float64{{1, 0.5}, {0.5, 1}}

// Three exams of two markers at ages 40, 41 and 43 (gaps 1 and 2 years);
// marker 2 is not measured at the second exam.
var (
	handGaps = []float64{0, 1, 2}
	handX    = []float64{
		1, 0.5,
		2, nan,
		0.5, 1.5,
	}
)

// runHand charts the hand-worked exams with limit 0.1, so that every exam
// signals and names its leading marker (no restart).
func runHand(t *testing.T, spec Spec, x []float64) []Point {
	t.Helper()
	c, err := NewChart(spec, handR)
	if err != nil {
		t.Fatal(err)
	}
	return c.Run(0.1, handGaps, x, nil)
}

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// TestMEWMAHandWorked works the joint MEWMA out by hand, lambda 0.2, unit 1.
func TestMEWMAHandWorked(t *testing.T) {
	got := runHand(t, Spec{Kind: MEWMA, Lambda: 0.2, Unit: 1}, handX)
	// V_0 = lambda/(2-lambda) R = R/9.
	// Exam 1 (first, w = (0.2, 0.2)): E = 0.2 (1, 0.5) = (0.2, 0.1);
	//   V_1 = 0.64 R/9 + 0.04 R = R/9 (unchanged: the textbook chart);
	//   T2 = 9 E' R^-1 E = 9 (4/3)(0.04 - 0.02 + 0.01) = 0.36.
	// Exam 2 (marker 1 one year on: w1 = 1 - 0.8 = 0.2; marker 2 not
	//   measured: w2 = 0): E = (0.8*0.2 + 0.2*2, 0.1) = (0.56, 0.1);
	//   V11 = 0.64/9 + 0.04 = 1/9, V22 = 1/9, V12 = 0.8 * 1/18 = 2/45;
	//   det = 1/81 - 4/2025 = 21/2025;
	//   T2 = (0.56^2/9 - 2 (2/45) 0.056 + 0.01/9) * 2025/21 = 2.98714.
	// Exam 3 (marker 1 two years on: w1 = 1 - 0.8^2 = 0.36; marker 2 three
	//   years after its last reading: w2 = 1 - 0.8^3 = 0.488):
	//   E = (0.64*0.56 + 0.36*0.5, 0.512*0.1 + 0.488*1.5) = (0.5384, 0.7832);
	//   V11 = 0.64^2/9 + 0.36^2 = 0.1751111, V22 = 0.512^2/9 + 0.488^2 = 0.2672711,
	//   V12 = 0.64*0.512*(2/45) + 0.36*0.488*0.5 = 0.1024036;
	//   T2 = (V22 E1^2 - 2 V12 E1 E2 + V11 E2^2) / (V11 V22 - V12^2)
	//      = (0.077475 - 0.086363 + 0.107412) / 0.0363153 = 2.71306.
	want := []float64{0.36, 2.987142857, 2.713062}
	for j, w := range want {
		if !near(got[j].Stat, w, 2e-6) {
			t.Errorf("exam %d: T2 %.7f, want %.7f", j+1, got[j].Stat, w)
		}
	}
	// Contributions at exam 3 (Runger, Alt & Montgomery 1996): with
	// Q = V^-1, d_m = (Q E)_m^2 / Q_mm = (0.418, 1.058): marker 2 leads.
	if got[2].Top != 1 {
		t.Errorf("exam 3: top marker %d, want 2 (index 1)", got[2].Top)
	}
	c, _ := NewChart(Spec{Kind: MEWMA, Lambda: 0.2, Unit: 1}, handR)
	c.Run(1e9, handGaps, handX, nil)
	d := c.Contributions(make([]float64, 2))
	if !near(d[0], 0.418006, 1e-5) || !near(d[1], 1.057687, 1e-5) {
		t.Errorf("contributions %v, want (0.418006, 1.057687)", d)
	}
}

// TestEWMAHandWorked: the directed EWMA, both sides up; at exam 2 marker 1
// falls below 0, so E is projected onto the cone {mu >= 0} in the metric
// V^-1.
func TestEWMAHandWorked(t *testing.T) {
	x := append([]float64(nil), handX...)
	x[2] = -2
	got := runHand(t, Spec{Kind: EWMA, Sides: []chart.Side{chart.Up, chart.Up}, Lambda: 0.2, Unit: 1}, x)
	// Exam 1: E = (0.2, 0.1) is in the cone: T2 = 0.36 as for MEWMA.
	// Exam 2: E = (0.8*0.2 - 0.2*2, 0.1) = (-0.24, 0.1), V as above.
	//   Active set {1}: mu1 = 0, mu2 = E2 - V21/V11 E1 = 0.1 + 0.4*0.24 = 0.196;
	//   multiplier y = E1/V11 = -2.16 <= 0 and mu2 >= 0: optimal.
	//   T2 = mu2^2 (V^-1)_22 = 0.196^2 (1/9) (2025/21) = 0.4116.
	// Exam 3 starts from the projected E = (0, 0.196):
	//   E = (0.36*0.5, 0.512*0.196 + 0.488*1.5) = (0.18, 0.832352), in the cone;
	//   T2 with V of exam 3 (as in TestMEWMAHandWorked) =
	//   (0.0086596 - 0.0306857 + 0.1213180) / 0.0363153 = 2.73418.
	v11, v22, v12 := 0.1751111, 0.2672711, 0.1024036
	e1, e2 := 0.18, 0.512*0.196+0.488*1.5
	t3 := (v22*e1*e1 - 2*v12*e1*e2 + v11*e2*e2) / (v11*v22 - v12*v12)
	want := []float64{0.36, 0.4116, t3}
	for j, w := range want {
		if !near(got[j].Stat, w, 1e-5) {
			t.Errorf("exam %d: T2 %.6f, want %.6f", j+1, got[j].Stat, w)
		}
	}
	if !near(t3, 2.73418, 1e-4) {
		t.Errorf("hand value %.5f", t3)
	}
}

// TestMCUSUMHandWorked: Crosier's MCUSUM with k = 0.5.
func TestMCUSUMHandWorked(t *testing.T) {
	got := runHand(t, Spec{Kind: MCUSUM, Allowance: 0.5}, handX)
	// |a|_R^2 = (4/3)(a1^2 - a1 a2 + a2^2).
	// Exam 1: S + x = (1, 0.5), C^2 = (4/3)(0.75) = 1, C = 1 > k:
	//   S = (1, 0.5)(1 - 0.5) = (0.5, 0.25), Y = 0.5.
	// Exam 2: marker 2 enters as its conditional mean 0.5*2 = 1, x = (2, 1),
	//   and one of two markers was measured, so k' = 0.25;
	//   S + x = (2.5, 1.25), C^2 = (4/3)(6.25 - 3.125 + 1.5625) = 6.25, C = 2.5:
	//   S = (2.5, 1.25)(1 - 0.25/2.5) = (2.25, 1.125), Y = 2.25.
	// Exam 3: S + x = (2.75, 2.625), C^2 = (4/3)(7.5625 - 7.21875 + 6.890625)
	//   = 9.6458333, Y = C - k = 3.1057742 - 0.5 = 2.6057742.
	want := []float64{0.5, 2.25, math.Sqrt(4.0/3*7.234375) - 0.5}
	for j, w := range want {
		if !near(got[j].Stat, w, 1e-12) {
			t.Errorf("exam %d: Y %.9f, want %.9f", j+1, got[j].Stat, w)
		}
	}
	if !near(want[2], 2.6057742, 1e-7) {
		t.Errorf("hand value %.8f", want[2])
	}
}

// TestCUSUMHandWorked: the directed CUSUM, marker 1 up and marker 2 down,
// k = 0.5: the MCUSUM step, then the projection onto {mu1 >= 0, mu2 <= 0}
// in the metric R^-1 (with mu2 = 0: mu1 = S1 - 0.5 S2, Y = |mu1| sqrt(4/3)).
func TestCUSUMHandWorked(t *testing.T) {
	got := runHand(t, Spec{Kind: CUSUM, Sides: []chart.Side{chart.Up, chart.Down}, Allowance: 0.5}, handX)
	// Exam 1: S = (0.5, 0.25) as for MCUSUM; S2 > 0 is harmless, so
	//   S = (0.5 - 0.125, 0) = (0.375, 0) (multiplier S2/R22 = 0.25 >= 0),
	//   Y = 0.375 sqrt(4/3) = 0.4330127.
	// Exam 2: x = (2, 1) (completed), k' = 0.25; S + x = (2.375, 1),
	//   C^2 = (4/3)(5.640625 - 2.375 + 1) = 5.6875, C = 2.3848480;
	//   S = (2.375, 1)(1 - 0.25/C) = (2.1260313, 0.8951711);
	//   projected: (2.1260313 - 0.4475856, 0) = (1.6784458, 0), Y = 1.9381032.
	// Exam 3: S + x = (2.1784458, 1.5), C^2 = (4/3)(4.7456262 - 3.2676687 + 2.25)
	//   = 4.9706367, C = 2.2294925; S = (S + x)(1 - 0.5/C) = (1.6898870, 1.1636020);
	//   projected: (1.6898870 - 0.5818010, 0) = (1.1080860, 0), Y = 1.2795161.
	for j, w := range []float64{0.4330127, 1.9381032, 1.2795161} {
		if !near(got[j].Stat, w, 1e-6) {
			t.Errorf("exam %d: Y %.7f, want %.7f", j+1, got[j].Stat, w)
		}
	}
}

// TestAnyHandWorked: each marker's own CUSUM, marker 1 up, marker 2 down.
func TestAnyHandWorked(t *testing.T) {
	got := runHand(t, Spec{Kind: Any, Sides: []chart.Side{chart.Up, chart.Down}, Allowance: 0.5}, handX)
	// Marker 1 up: 0.5, 0.5 + 2 - 0.5 = 2, 2 + 0.5 - 0.5 = 2.
	// Marker 2 down: max(0, -0.5 - 0.5) = 0; not measured; max(0, -1.5 - 0.5) = 0.
	for j, w := range []float64{0.5, 2, 2} {
		if got[j].Stat != w || got[j].Top != 0 {
			t.Errorf("exam %d: %+v, want statistic %v from marker 1", j+1, got[j], w)
		}
	}
}

// With every marker measured at gaps of one unit the joint MEWMA is
// Lowry's chart, T2 = E' (lambda/(2-lambda) R)^-1 E, and a single marker
// with side up is the single-marker reflected EWMA (squared).
func TestTextbookReductions(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	r := [][]float64{{1, 0.3, -0.2}, {0.3, 1, 0.4}, {-0.2, 0.4, 1}}
	const lambda = 0.15
	c, err := NewChart(Spec{Kind: MEWMA, Lambda: lambda, Unit: 1}, r)
	if err != nil {
		t.Fatal(err)
	}
	flat, _ := flatten(r)
	cholesky(flat, 3)
	e := make([]float64, 3)
	for j := range 200 {
		x := []float64{rng.NormFloat64(), rng.NormFloat64() + 0.5, rng.NormFloat64()}
		for k := range e {
			e[k] = (1-lambda)*e[k] + lambda*x[k]
		}
		want := cholQuad(flat, 3, e, make([]float64, 3)) * (2 - lambda) / lambda
		if got := c.Next(1, x); !near(got, want, 1e-9*want) {
			t.Fatalf("exam %d: T2 %v, Lowry's %v", j+1, got, want)
		}
	}
	one, _ := NewChart(Spec{Kind: EWMA, Sides: []chart.Side{chart.Up}, Lambda: lambda, Unit: 1}, [][]float64{{1}})
	spec := chart.Spec{Kind: chart.EWMA, Side: chart.Up, Lambda: lambda, Unit: 1}
	u := make([]float64, 100)
	gaps := make([]float64, 100)
	for j := range u {
		u[j], gaps[j] = rng.NormFloat64(), 1
	}
	pts := chart.Run(spec, 1e9, gaps, u, nil)
	for j := range u {
		got := math.Sqrt(one.Next(1, u[j:j+1]))
		if !near(got, pts[j].Up, 1e-9) {
			t.Fatalf("exam %d: one marker's EWMA %v, single-marker EWMA %v", j+1, got, pts[j].Up)
		}
	}
	cu, _ := NewChart(Spec{Kind: CUSUM, Sides: []chart.Side{chart.Down}, Allowance: 0.5}, [][]float64{{1}})
	pts = chart.Run(chart.Spec{Kind: chart.CUSUM, Side: chart.Down, Allowance: 0.5}, 1e9, gaps, u, nil)
	for j := range u {
		if got := cu.Next(1, u[j:j+1]); !near(got, pts[j].Down, 1e-12) {
			t.Fatalf("exam %d: one marker's CUSUM %v, single-marker CUSUM %v", j+1, got, pts[j].Down)
		}
	}
}

// The projection is the constrained minimiser: compare the active-set
// answer with every active set tried in turn, on random matrices.
func TestProjection(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 2))
	for trial := range 2000 {
		p := 2 + rng.IntN(5)
		sides := make([]chart.Side, p)
		for k := range sides {
			sides[k] = []chart.Side{chart.Up, chart.Down, chart.Both}[rng.IntN(3)]
		}
		c, err := NewChart(Spec{Kind: EWMA, Sides: sides, Lambda: 0.2, Unit: 1}, identity(p))
		if err != nil {
			t.Fatal(err)
		}
		// A random positive definite V and a random E.
		a := make([]float64, p*p)
		for i := range a {
			a[i] = rng.NormFloat64()
		}
		for i := range p {
			for j := range p {
				var s float64
				for k := range p {
					s += a[i*p+k] * a[j*p+k]
				}
				c.v[i*p+j] = s
			}
			c.v[i*p+i] += 0.1
		}
		for k := range p {
			c.e[k] = 2 * rng.NormFloat64()
		}
		e0 := append([]float64(nil), c.e...)
		c.project()
		fast := append([]float64(nil), c.e...)
		copy(c.e, e0)
		c.enumerate()
		for k := range p {
			if !near(fast[k], c.e[k], 1e-9) {
				t.Fatalf("trial %d (p %d, sides %v): active set %v, enumeration %v", trial, p, sides, fast, c.e)
			}
		}
		if !c.feasible(fast) {
			t.Fatalf("trial %d: projection %v outside the cone", trial, fast)
		}
	}
}

func TestChartBadInput(t *testing.T) {
	ok := [][]float64{{1, 0.2}, {0.2, 1}}
	for _, tc := range []struct {
		name string
		spec Spec
		r    [][]float64
		want string
	}{
		{"unknown kind", Spec{Kind: "hotelling", Lambda: 0.1}, ok, "chart must be"},
		{"sides count", Spec{Kind: EWMA, Sides: []chart.Side{chart.Up}, Lambda: 0.1}, ok, "2 markers need 2 sides"},
		{"no sides", Spec{Kind: Any, Allowance: 0.5}, ok, "need 2 sides"},
		{"bad side", Spec{Kind: CUSUM, Sides: []chart.Side{chart.Up, "upward"}, Allowance: 0.5}, ok, "side 2"},
		{"sides on mewma", Spec{Kind: MEWMA, Sides: []chart.Side{chart.Up, chart.Up}, Lambda: 0.1}, ok, "watches every direction"},
		{"lambda", Spec{Kind: MEWMA, Lambda: 0}, ok, "lambda"},
		{"allowance", Spec{Kind: MCUSUM, Allowance: -1}, ok, "allowance"},
		{"too many", Spec{Kind: MEWMA, Lambda: 0.1}, identity(MaxMarkers + 1), "from 1 to 8"},
		{"not square", Spec{Kind: MEWMA, Lambda: 0.1}, [][]float64{{1, 0}, {0}}, "square"},
		{"diagonal", Spec{Kind: MEWMA, Lambda: 0.1}, [][]float64{{1, 0}, {0, 2}}, "diagonal"},
		{"not symmetric", Spec{Kind: MEWMA, Lambda: 0.1}, [][]float64{{1, 0.1}, {0.2, 1}}, "symmetric"},
		{"singular", Spec{Kind: MEWMA, Lambda: 0.1}, [][]float64{{1, 1}, {1, 1}}, "not positive definite"},
	} {
		_, err := NewChart(tc.spec, tc.r)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v, want an error about %q", tc.name, err, tc.want)
		}
	}
}
