package smooth

import (
	"encoding/csv"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"strings"
	"testing"
)

// readCSV reads a numeric CSV with a header line, skipping lines that
// start with '#'.
func readCSV(t testing.TB, path string) (header []string, cols [][]float64) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.Comment = '#'
	header, err = r.Read()
	if err != nil {
		t.Fatal(err)
	}
	cols = make([][]float64, len(header))
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		for j, s := range rec {
			v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
			if err != nil {
				t.Fatalf("%s: %v", path, err)
			}
			cols[j] = append(cols[j], v)
		}
	}
	return header, cols
}

// TestLocalLinearMatchesKernSmooth compares LocalLinear with R KernSmooth
// locpoly (degree 1, Gaussian kernel, gridsize 401, range 18-65) at every
// grid point, for three bandwidths (source: testdata/locpoly_fit.csv, made
// by testdata/make_locpoly_fixture.R).
//
// Tolerance 1e-9 relative to the data's scale: both programs compute the
// same binned estimator in double precision (same linear binning, same
// kernel table exp(-(jδ/h)²/2) truncated at ⌊4h/δ⌋ steps, same 2x2 normal
// equations), so they differ only by summation order and the solver
// (LINPACK dgefa/dgesl against a closed form): a few hundred roundings of
// values ~1e2, i.e. ~1e-12. 1e-9 leaves room for that and would still
// catch any difference in binning, truncation or kernel (those move the
// fit by 1e-4 or more).
func TestLocalLinearMatchesKernSmooth(t *testing.T) {
	_, data := readCSV(t, "testdata/locpoly_data.csv")
	x, y := data[0], data[1]
	_, fit := readCSV(t, "testdata/locpoly_fit.csv")
	g, err := NewGrid(18, 65, 401)
	if err != nil {
		t.Fatal(err)
	}
	type ref struct{ x, y []float64 }
	byH := map[float64]*ref{}
	var hs []float64
	for i, h := range fit[0] {
		r := byH[h]
		if r == nil {
			r = &ref{}
			byH[h] = r
			hs = append(hs, h)
		}
		r.x = append(r.x, fit[1][i])
		r.y = append(r.y, fit[2][i])
	}
	if len(hs) != 3 {
		t.Fatalf("fixture has %d bandwidths, want 3", len(hs))
	}
	const tol = 1e-9 * 100 // data values are ~1e2
	for _, h := range hs {
		r := byH[h]
		got, err := LocalLinear(x, y, nil, h, g)
		if err != nil {
			t.Fatalf("h=%g: %v", h, err)
		}
		if len(r.y) != g.N {
			t.Fatalf("h=%g: fixture has %d grid points", h, len(r.y))
		}
		worst := 0.0
		for j := range got {
			if d := math.Abs(g.Point(j) - r.x[j]); d > 1e-12 {
				t.Fatalf("h=%g: grid point %d is %g, R has %g", h, j, g.Point(j), r.x[j])
			}
			worst = math.Max(worst, math.Abs(got[j]-r.y[j]))
		}
		t.Logf("h=%g: largest difference from locpoly %.3g", h, worst)
		if worst > tol {
			t.Errorf("h=%g: largest difference from locpoly %g exceeds %g", h, worst, tol)
		}
	}
}

// directLocalLinear is the unbinned local linear estimate at x with a
// Gaussian kernel truncated at 4h, straight from the definition.
func directLocalLinear(x, y, w []float64, h, at float64) float64 {
	var s0, s1, s2, t0, t1 float64
	for i := range x {
		u := (x[i] - at) / h
		if math.Abs(u) > Truncation {
			continue
		}
		k := math.Exp(-0.5 * u * u)
		if w != nil {
			k *= w[i]
		}
		s0 += k
		s1 += k * u
		s2 += k * u * u
		t0 += k * y[i]
		t1 += k * u * y[i]
	}
	return (s2*t0 - s1*t1) / (s0*s2 - s1*s1)
}

func synth(seed uint64, n int) (x, y, w []float64) {
	rng := rand.New(rand.NewPCG(seed, 7))
	x, y, w = make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range x {
		x[i] = 20 + 40*rng.Float64()
		y[i] = math.Sin(x[i]/5)*10 + rng.NormFloat64()
		w[i] = 0.5 + rng.Float64()
	}
	return
}

// TestBinnedCloseToDirect checks that binning costs only the accuracy
// Fan & Marron (1994) state: an error of order δ² times the curvature of
// the curve. The true curve 10 sin(x/5) has |m”| <= 0.4, so the binned fit
// must stay within δ²·0.4 (+1e-3 for the noise's share) of the unbinned
// one, far below the noise sd of 1.
func TestBinnedCloseToDirect(t *testing.T) {
	x, y, w := synth(1, 4000)
	for _, tc := range []struct {
		name string
		w    []float64
		h    float64
	}{{"unweighted", nil, 2}, {"weighted", w, 2}, {"weighted wide", w, 8}} {
		t.Run(tc.name, func(t *testing.T) {
			g := Grid{Lo: 20, Hi: 60, N: int(40/(tc.h/20)) + 1}
			got, err := LocalLinear(x, y, tc.w, tc.h, g)
			if err != nil {
				t.Fatal(err)
			}
			for j := 0; j < g.N; j += 7 {
				want := directLocalLinear(x, y, tc.w, tc.h, g.Point(j))
				tol := g.Step()*g.Step()*0.4 + 1e-3
				if d := math.Abs(got[j] - want); d > tol {
					t.Errorf("at %g: binned %g, direct %g", g.Point(j), got[j], want)
				}
			}
		})
	}
}

// TestWeightsAreReplication: a weight of 2 must act exactly like the point
// given twice.
func TestWeightsAreReplication(t *testing.T) {
	x, y, _ := synth(2, 500)
	w := make([]float64, len(x))
	var xr, yr []float64
	for i := range x {
		w[i] = float64(1 + i%3)
		for range int(w[i]) {
			xr = append(xr, x[i])
			yr = append(yr, y[i])
		}
	}
	g := Grid{Lo: 20, Hi: 60, N: 201}
	a, err := LocalLinear(x, y, w, 1.5, g)
	if err != nil {
		t.Fatal(err)
	}
	b, err := LocalLinear(xr, yr, nil, 1.5, g)
	if err != nil {
		t.Fatal(err)
	}
	for j := range a {
		if math.Abs(a[j]-b[j]) > 1e-10 {
			t.Fatalf("at %g: weighted %g, replicated %g", g.Point(j), a[j], b[j])
		}
	}
}

func TestCoarsenEqualsDirectBinning(t *testing.T) {
	x, y, w := synth(3, 2000)
	fine := Grid{Lo: 20, Hi: 60, N: 841}
	b, err := Bin(x, y, w, fine)
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range []int{1, 2, 3, 7, 840, 1000} {
		c := b.Coarsen(m)
		direct, err := Bin(x, y, w, c.Grid)
		if err != nil {
			t.Fatal(err)
		}
		if c.Grid.Lo != fine.Lo || c.Grid.Hi < fine.Hi-1e-12 {
			t.Fatalf("m=%d: coarse grid %+v does not cover %+v", m, c.Grid, fine)
		}
		for k := range c.Weight {
			if math.Abs(c.Weight[k]-direct.Weight[k]) > 1e-9 || math.Abs(c.Sum[k]-direct.Sum[k]) > 1e-9 {
				t.Fatalf("m=%d node %d: coarsened (%g,%g), direct (%g,%g)", m, k, c.Weight[k], c.Sum[k], direct.Weight[k], direct.Sum[k])
			}
		}
	}
}

func TestLocalLinearErrors(t *testing.T) {
	g := Grid{Lo: 0, Hi: 10, N: 11}
	x := []float64{1, 2, 3, 4, 5, 6}
	y := []float64{1, 2, 3, 4, 5, 6}
	for _, tc := range []struct {
		name    string
		x, y, w []float64
		h       float64
		g       Grid
		want    string
	}{
		{"empty", nil, nil, nil, 1, g, "no data"},
		{"length", x, y[:3], nil, 1, g, "y has 3"},
		{"weights length", x, y, []float64{1}, 1, g, "weights have 1"},
		{"nan x", []float64{1, math.NaN()}, []float64{1, 2}, nil, 1, g, "x[1]"},
		{"inf y", []float64{1, 2}, []float64{1, math.Inf(1)}, nil, 1, g, "y[1]"},
		{"outside", []float64{1, 11}, []float64{1, 2}, nil, 1, g, "outside the grid"},
		{"negative weight", x, y, []float64{1, 1, -1, 1, 1, 1}, 1, g, "weight[2]"},
		{"zero bandwidth", x, y, nil, 0, g, "bandwidth"},
		{"nan bandwidth", x, y, nil, math.NaN(), g, "bandwidth"},
		{"tiny bandwidth", x, y, nil, 0.05, g, "too small"},
		{"gap", x, y, nil, 0.3, Grid{Lo: 0, Hi: 100, N: 1001}, "too small"},
		{"enormous bandwidth", x, y, nil, 1e9, g, "too large for data spanning 10"},
		{"one point grid", x, y, nil, 1, Grid{Lo: 0, Hi: 10, N: 1}, "at least 2"},
		{"reversed grid", x, y, nil, 1, Grid{Lo: 10, Hi: 0, N: 5}, "below"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := LocalLinear(tc.x, tc.y, tc.w, tc.h, tc.g)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("got error %v, want one containing %q", err, tc.want)
			}
		})
	}
}

func TestInterpolate(t *testing.T) {
	g := Grid{Lo: 0, Hi: 4, N: 5}
	v := []float64{0, 10, 20, 0, 5}
	for _, tc := range []struct{ x, want float64 }{
		{-1, 0}, {0, 0}, {0.5, 5}, {2.25, 15}, {3.5, 2.5}, {4, 5}, {9, 5},
	} {
		if got := Interpolate(g, v, tc.x); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("Interpolate(%g) = %g, want %g", tc.x, got, tc.want)
		}
	}
}
