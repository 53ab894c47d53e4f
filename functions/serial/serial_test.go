package serial

import (
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
)

type fixtures struct {
	Source  string
	Phi, C  float64
	Workers []struct{ Time, Z []float64 }
	Innov   [][]float64
	Fit     struct {
		Phi, C, Negll float64
		Pairs         int
	}
	Lag1         struct{ R, P float64 }
	Normal       struct{ K2, P, Skew, Exkurt float64 }
	NormalSkewed struct {
		X                   []float64
		K2, P, Skew, Exkurt float64
	} `json:"normal_skewed"`
	PearsonCorr struct {
		X, Y []float64
		R, P float64
	} `json:"pearson_corr"`
	Sandwich struct {
		Phi   float64 `json:"phi"`
		C     float64 `json:"c"`
		SEPhi float64 `json:"se_phi"`
		SEC   float64 `json:"se_c"`
	}
	TTest struct {
		Workers int
		T, P    float64
	}
	Independent struct {
		Workers   []struct{ Time, Z []float64 }
		Phi, C    float64
		Negll     float64 `json:"negll"`
		NegllNone float64 `json:"negll_none"`
	}
}

func load(t *testing.T) (fixtures, []Series) {
	t.Helper()
	b, err := os.ReadFile("testdata/fixtures.json")
	if err != nil {
		t.Fatal(err)
	}
	var f fixtures
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	s := make([]Series, len(f.Workers))
	for i, w := range f.Workers {
		s[i] = Series{Time: w.Time, Z: w.Z}
	}
	return f, s
}

func relClose(a, b, tol float64) bool { return math.Abs(a-b) <= tol*math.Max(math.Abs(b), 1e-300) }

// Kalman innovations equal the Cholesky whitening computed by numpy/scipy
// (testdata/make_fixtures.py, "innov").
func TestInnovationsMatchCholesky(t *testing.T) {
	f, s := load(t)
	p := Params{Phi: f.Phi, C: f.C}
	for i, w := range s {
		u, err := Innovations(p, w.Time, w.Z, nil)
		if err != nil {
			t.Fatal(err)
		}
		for j := range u {
			if math.Abs(u[j]-f.Innov[i][j]) > 1e-9 {
				t.Fatalf("worker %d exam %d: innovation %v, scipy Cholesky gives %v", i, j, u[j], f.Innov[i][j])
			}
		}
	}
}

// Estimate matches the pairwise-likelihood maximum found by scipy
// (testdata/make_fixtures.py, "fit").
func TestEstimateMatchesScipy(t *testing.T) {
	f, s := load(t)
	p, err := Estimate(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	if p.Pairs != f.Fit.Pairs {
		t.Errorf("pairs = %d, scipy script used %d", p.Pairs, f.Fit.Pairs)
	}
	if math.Abs(p.Phi-f.Fit.Phi) > 1e-6 || math.Abs(p.C-f.Fit.C) > 1e-6 {
		t.Errorf("Estimate = (phi %.6f, c %.6f), scipy L-BFGS-B gives (%.6f, %.6f)", p.Phi, p.C, f.Fit.Phi, f.Fit.C)
	}
	if !(p.SEPhi > 0 && p.SEC > 0) {
		t.Errorf("standard errors not positive: %+v", p)
	}
	t.Logf("fixture fit: %+v", p)
}

// The sandwich standard errors match an independent numpy computation by
// central differences at scipy's optimum (testdata/make_fixtures.py,
// "sandwich"), and the test of no correlation matches scipy's one-sample
// t test ("ttest").
func TestSandwichAndTestMatchScipy(t *testing.T) {
	f, s := load(t)
	p, err := Estimate(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	// The estimates agree to 1e-6 (scipy's tolerance), so the standard
	// errors are compared at 1e-4 relative.
	if !relClose(p.SEPhi, f.Sandwich.SEPhi, 1e-4) || !relClose(p.SEC, f.Sandwich.SEC, 1e-4) {
		t.Errorf("sandwich SEs (%.8f, %.8f), numpy central differences (%.8f, %.8f)", p.SEPhi, p.SEC, f.Sandwich.SEPhi, f.Sandwich.SEC)
	}
	tt := p.Test
	if tt.Workers != f.TTest.Workers || !relClose(tt.T, f.TTest.T, 1e-10) || !relClose(tt.P, f.TTest.P, 1e-8) {
		t.Errorf("test %+v, scipy ttest_1samp t %.10g p %.10g over %d workers", tt, f.TTest.T, f.TTest.P, f.TTest.Workers)
	}
	if !tt.Detected() {
		t.Errorf("correlated fixture workers: correlation not detected (p %v)", tt.P)
	}
}

// On independent readings whose maximum lies at the edge of the parameter
// space (scipy's bounded L-BFGS-B from a grid of starts finds c = 1 with
// phi near 0: correlation at short gaps only, by chance), Estimate finds a
// maximum at least as high ("independent" in testdata/make_fixtures.py).
func TestEstimateAtEdgeMatchesScipy(t *testing.T) {
	f, _ := load(t)
	s := make([]Series, len(f.Independent.Workers))
	for i, w := range f.Independent.Workers {
		s[i] = Series{Time: w.Time, Z: w.Z}
	}
	p, err := Estimate(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	got := -exactLogLik(s, p.Phi, p.C)
	if none := -exactLogLik(s, 0.5, 0); math.Abs(none-f.Independent.NegllNone) > 1e-9 {
		t.Fatalf("negative log-likelihood of no correlation %.12g, numpy %.12g", none, f.Independent.NegllNone)
	}
	if got > f.Independent.Negll+1e-7 {
		t.Errorf("Estimate (phi %.6f, c %.6f) has negative log-likelihood %.10f, scipy's (%.6f, %.6f) %.10f",
			p.Phi, p.C, got, f.Independent.Phi, f.Independent.C, f.Independent.Negll)
	}
	t.Logf("Estimate %+v: %.10f; scipy (%.6f, %.6f): %.10f; none %.10f; %s", p, got, f.Independent.Phi, f.Independent.C, f.Independent.Negll, f.Independent.NegllNone, p.Finding())
}

// Diagnostics p-values match scipy.stats.pearsonr and normaltest.
func TestDiagnosticsMatchScipy(t *testing.T) {
	f, s := load(t)
	d, err := Diagnose(Params{Phi: f.Phi, C: f.C}, s)
	if err != nil {
		t.Fatal(err)
	}
	checks := []struct {
		name      string
		got, want float64
	}{
		{"lag-1 r (scipy pearsonr)", d.Lag1, f.Lag1.R},
		{"lag-1 p (scipy pearsonr)", d.Lag1P, f.Lag1.P},
		{"K2 (scipy normaltest)", d.Normality, f.Normal.K2},
		{"normality p (scipy normaltest)", d.NormalityP, f.Normal.P},
		{"skewness (scipy skew)", d.Skewness, f.Normal.Skew},
		{"excess kurtosis (scipy kurtosis)", d.ExcessKurtosis, f.Normal.Exkurt},
	}
	k2, p, sk, ek := NormalityTest(f.NormalSkewed.X)
	r, pr := PearsonTest(f.PearsonCorr.X, f.PearsonCorr.Y)
	checks = append(checks, []struct {
		name      string
		got, want float64
	}{
		{"skewed K2 (scipy normaltest)", k2, f.NormalSkewed.K2},
		{"skewed p (scipy normaltest)", p, f.NormalSkewed.P},
		{"skewed skewness", sk, f.NormalSkewed.Skew},
		{"skewed excess kurtosis", ek, f.NormalSkewed.Exkurt},
		{"correlated r (scipy pearsonr)", r, f.PearsonCorr.R},
		{"correlated p (scipy pearsonr)", pr, f.PearsonCorr.P},
	}...)
	for _, c := range checks {
		if !relClose(c.got, c.want, 1e-6) {
			t.Errorf("%s = %.10g, want %.10g (%s)", c.name, c.got, c.want, f.Source)
		}
	}
}

// simulateWorkers draws n healthy workers with m exams each at gaps uniform
// on [0.5, 3] years.
func simulateWorkers(p Params, n, m int, rng *rand.Rand) []Series {
	s := make([]Series, n)
	for i := range s {
		t := make([]float64, m)
		t[0] = 20 + 30*rng.Float64()
		for j := 1; j < m; j++ {
			t[j] = t[j-1] + 0.5 + 2.5*rng.Float64()
		}
		s[i] = Series{Time: t, Z: Simulate(p, t, rng, nil)}
	}
	return s
}

// Innovations of simulated healthy workers are N(0,1) and uncorrelated, and
// the simulated z have the model's lag correlation, within sampling error.
func TestSimulatedInnovationsWhite(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, p := range []Params{{Phi: 0.7, C: 0.6}, {Phi: 0.3, C: 0.9}, {Phi: 0.9, C: 1}} {
		s := simulateWorkers(p, 2000, 6, rng)
		d, err := Diagnose(p, s)
		if err != nil {
			t.Fatal(err)
		}
		n := float64(d.Exams)
		if math.Abs(d.Mean) > 4/math.Sqrt(n) || math.Abs(d.SD-1) > 4/math.Sqrt(2*n) {
			t.Errorf("%+v: innovations mean %.4f sd %.4f, want 0 and 1 within 4 SE", p, d.Mean, d.SD)
		}
		if math.Abs(d.Lag1) > 4/math.Sqrt(float64(d.Pairs)) {
			t.Errorf("%+v: lag-1 correlation of innovations %.4f, want 0 within 4 SE", p, d.Lag1)
		}
		// The raw z are correlated: lag-1 correlation is clearly positive.
		var xs, ys []float64
		for _, w := range s {
			xs = append(xs, w.Z[:len(w.Z)-1]...)
			ys = append(ys, w.Z[1:]...)
		}
		if r := stat.Correlation(xs, ys, nil); r < 0.1 {
			t.Errorf("%+v: raw z lag-1 correlation %.3f, expected clearly positive", p, r)
		}
		t.Logf("%+v: innovations mean %.4f sd %.4f lag1 %.4f (p %.3f), normality p %.3f", p, d.Mean, d.SD, d.Lag1, d.Lag1P, d.NormalityP)
	}
}

// phi and c are recovered from simulated reference workers, and the
// sandwich standard errors agree with the spread over replicates.
func TestEstimateRecovers(t *testing.T) {
	truth := Params{Phi: 0.7, C: 0.6}
	rng := rand.New(rand.NewPCG(3, 4))
	var phis, cs, sep, sec []float64
	for range 60 {
		s := simulateWorkers(truth, 150, 6, rng)
		p, err := Estimate(context.Background(), s)
		if err != nil {
			t.Fatal(err)
		}
		phis, cs = append(phis, p.Phi), append(cs, p.C)
		sep, sec = append(sep, p.SEPhi), append(sec, p.SEC)
	}
	mp, sp := stat.MeanStdDev(phis, nil)
	mc, sc := stat.MeanStdDev(cs, nil)
	n := math.Sqrt(float64(len(phis)))
	if math.Abs(mp-truth.Phi) > 4*sp/n || math.Abs(mc-truth.C) > 4*sc/n+0.005 {
		t.Errorf("mean estimates phi %.4f c %.4f over replicates, truth %.2f %.2f", mp, mc, truth.Phi, truth.C)
	}
	for _, c := range []struct {
		name       string
		sd, meanSE float64
	}{{"phi", sp, stat.Mean(sep, nil)}, {"c", sc, stat.Mean(sec, nil)}} {
		if c.meanSE < 0.7*c.sd || c.meanSE > 1.4*c.sd {
			t.Errorf("%s: mean sandwich SE %.4f vs replicate SD %.4f", c.name, c.meanSE, c.sd)
		}
	}
	t.Logf("phi %.4f (sd %.4f, mean SE %.4f); c %.4f (sd %.4f, mean SE %.4f)", mp, sp, stat.Mean(sep, nil), mc, sc, stat.Mean(sec, nil))
	// Equal yearly gaps: identifiable through lag-2 pairs.
	s := make([]Series, 400)
	for i := range s {
		tm := []float64{30, 31, 32, 33, 34, 35}
		s[i] = Series{Time: tm, Z: Simulate(truth, tm, rng, nil)}
	}
	p, err := Estimate(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p.Phi-truth.Phi) > 4*p.SEPhi || math.Abs(p.C-truth.C) > 4*p.SEC {
		t.Errorf("equal gaps: %+v, truth %+v", p, truth)
	}
}

func TestColourInvertsWhiten(t *testing.T) {
	p := Params{Phi: 0.5, C: 0.7}
	rng := rand.New(rand.NewPCG(5, 6))
	a, b := NewFilter(p), NewFilter(p)
	for j := range 50 {
		gap := 0.2 + 3*rng.Float64()
		u := rng.NormFloat64()
		z := a.Colour(gap, u)
		if back := b.Whiten(gap, z); math.Abs(back-u) > 1e-12 {
			t.Fatalf("exam %d: Whiten(Colour(u)) = %v, want %v", j, back, u)
		}
	}
}

func TestBadInput(t *testing.T) {
	p := Params{Phi: 0.5, C: 0.5}
	tests := []struct {
		name    string
		p       Params
		time, z []float64
		want    string
	}{
		{"equal times", p, []float64{30, 30}, []float64{0, 1}, "exam 2"},
		{"decreasing times", p, []float64{30, 31, 29}, []float64{0, 1, 2}, "exam 3"},
		{"NaN time", p, []float64{30, math.NaN()}, []float64{0, 1}, "exam 2"},
		{"NaN value", p, []float64{30, 31}, []float64{0, math.NaN()}, "exam 2"},
		{"length mismatch", p, []float64{30}, []float64{0, 1}, "1 exam times for 2"},
		{"phi 1", Params{Phi: 1, C: 0.5}, []float64{30}, []float64{0}, "phi"},
		{"c > 1", Params{Phi: 0.5, C: 1.5}, []float64{30}, []float64{0}, "share c"},
	}
	for _, tc := range tests {
		_, err := Innovations(tc.p, tc.time, tc.z, nil)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want one mentioning %q", tc.name, err, tc.want)
		}
	}
	// One exam is fine: its innovation is z itself.
	u, err := Innovations(p, []float64{40}, []float64{1.3}, nil)
	if err != nil || len(u) != 1 || u[0] != 1.3 {
		t.Errorf("one exam: %v, %v", u, err)
	}
	// Estimate: too little data, bad times, equal gaps with two exams each.
	if _, err := Estimate(context.Background(), []Series{{Time: []float64{1, 2}, Z: []float64{0, 1}}}); err == nil {
		t.Error("Estimate accepted one pair")
	}
	bad := make([]Series, 30)
	for i := range bad {
		bad[i] = Series{Time: []float64{1, 2}, Z: []float64{0.1 * float64(i), 0.2}}
	}
	if _, err := Estimate(context.Background(), bad); err == nil || !strings.Contains(err.Error(), "told apart") {
		t.Errorf("equal gaps with two exams: %v", err)
	}
	bad[3].Time = []float64{2, 1}
	if _, err := Estimate(context.Background(), bad); err == nil || !strings.Contains(err.Error(), "worker 4") {
		t.Errorf("decreasing times in worker 4: %v", err)
	}
}

func BenchmarkEstimate(b *testing.B) {
	s := simulateWorkers(Params{Phi: 0.7, C: 0.6}, 1000, 6, rand.New(rand.NewPCG(1, 1)))
	for b.Loop() {
		if _, err := Estimate(context.Background(), s); err != nil {
			b.Fatal(err)
		}
	}
}
