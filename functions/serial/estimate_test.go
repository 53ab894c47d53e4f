package serial

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"
	"time"
)

// exactLogLik is the pairwise log-likelihood summed pair by pair, the
// definition Estimate maximises, for checking the fast paths.
func exactLogLik(s []Series, phi, c float64) float64 {
	var ll float64
	eachPair(context.Background(), s, func(_ int, x, y, d float64) {
		l, _, _ := pairTerms(1, x*x+y*y, x*y, math.Min(c*math.Pow(phi, d), rhoMax))
		ll += l
	})
	return ll
}

// The analytic derivatives in rho match central differences of l.
func TestPairTermsDerivatives(t *testing.T) {
	for _, tc := range []struct{ n, s, p, rho float64 }{
		{1, 2.3, 0.4, 0}, {1, 0.5, -0.2, 0.3}, {3, 7.1, 2.9, 0.8}, {2.5, 1.2, 0.55, 0.97}, {1, 4, -1.9, 0.05},
	} {
		l, d1, d2 := pairTerms(tc.n, tc.s, tc.p, tc.rho)
		const h = 1e-5
		lu, d1u, _ := pairTerms(tc.n, tc.s, tc.p, tc.rho+h)
		ld, d1d, _ := pairTerms(tc.n, tc.s, tc.p, tc.rho-h)
		if num := (lu - ld) / (2 * h); math.Abs(num-d1) > 1e-6*math.Max(1, math.Abs(d1)) {
			t.Errorf("%+v: dl/drho %v, central difference %v", tc, d1, num)
		}
		if num := (d1u - d1d) / (2 * h); math.Abs(num-d2) > 1e-5*math.Max(1, math.Abs(d2)) {
			t.Errorf("%+v: d2l/drho2 %v, central difference %v", tc, d2, num)
		}
		if tc.n == 1 {
			e1, e2 := pairDerivs(tc.s, tc.p, tc.rho)
			if e1 != d1 || e2 != d2 {
				t.Errorf("%+v: pairDerivs (%v, %v) differ from pairTerms (%v, %v)", tc, e1, e2, d1, d2)
			}
		}
		_ = l
	}
}

// The gradient and Hessian on the search scale (binned) and in (phi, c)
// (exact, per worker) match central differences of the log-likelihood.
func TestLikelihoodDerivatives(t *testing.T) {
	s := simulateWorkers(Params{Phi: 0.6, C: 0.7}, 300, 5, rand.New(rand.NewPCG(7, 8)))
	sc, err := scanSeries(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	b, err := newGapBins(sc.dmin, sc.dmax, func(add func(x, y, d float64)) error {
		return eachPair(context.Background(), s, func(_ int, x, y, d float64) { add(x, y, d) })
	})
	if err != nil {
		t.Fatal(err)
	}
	const h = 1e-5
	for _, x := range [][]float64{{0.9, 0.6}, {0.3, 1.2}, {1.4, 0.2}} {
		var g [2]float64
		var hs [2][2]float64
		b.searchTerms(x, &g, &hs)
		for a := range 2 {
			up, dn := append([]float64(nil), x...), append([]float64(nil), x...)
			up[a] += h
			dn[a] -= h
			num := (b.searchTerms(up, nil, nil) - b.searchTerms(dn, nil, nil)) / (2 * h)
			if math.Abs(num-g[a]) > 1e-5*math.Max(1, math.Abs(g[a])) {
				t.Errorf("search point %v: gradient[%d] %v, central difference %v", x, a, g[a], num)
			}
			var gu, gd [2]float64
			b.searchTerms(up, &gu, nil)
			b.searchTerms(dn, &gd, nil)
			for k := range 2 {
				num := (gu[k] - gd[k]) / (2 * h)
				if math.Abs(num-hs[k][a]) > 1e-5*math.Max(1, math.Abs(hs[k][a])) {
					t.Errorf("search point %v: Hessian[%d][%d] %v, central difference %v", x, k, a, hs[k][a], num)
				}
			}
		}
	}
	for _, th := range [][2]float64{{0.6, 0.7}, {0.2, 0.4}, {0.95, 0.3}} {
		f := &exactFit{score: make([][2]float64, sc.workers)}
		if err := f.evaluate(context.Background(), s, th[0], th[1]); err != nil {
			t.Fatal(err)
		}
		var total [2]float64
		for _, w := range f.score {
			total[0] += w[0]
			total[1] += w[1]
		}
		for a := range 2 {
			up, dn := th, th
			up[a] += h
			dn[a] -= h
			num := (exactLogLik(s, up[0], up[1]) - exactLogLik(s, dn[0], dn[1])) / (2 * h)
			if math.Abs(num-f.g[a]) > 1e-5*math.Max(1, math.Abs(f.g[a])) {
				t.Errorf("(phi, c) = %v: gradient[%d] %v, central difference %v", th, a, f.g[a], num)
			}
			if math.Abs(total[a]-f.g[a]) > 1e-9*math.Max(1, math.Abs(f.g[a])) {
				t.Errorf("(phi, c) = %v: worker scores add to %v, gradient %v", th, total[a], f.g[a])
			}
			fu := &exactFit{score: make([][2]float64, sc.workers)}
			fd := &exactFit{score: make([][2]float64, sc.workers)}
			fu.evaluate(context.Background(), s, up[0], up[1])
			fd.evaluate(context.Background(), s, dn[0], dn[1])
			for k := range 2 {
				num := (fu.g[k] - fd.g[k]) / (2 * h)
				if math.Abs(num-f.h[k][a]) > 1e-5*math.Max(1, math.Abs(f.h[k][a])) {
					t.Errorf("(phi, c) = %v: Hessian[%d][%d] %v, central difference %v", th, k, a, f.h[k][a], num)
				}
			}
		}
	}
}

// cohort draws n workers with m exams at gaps uniform on [lo, hi] years.
func cohort(p Params, n, m int, lo, hi float64, rng *rand.Rand) []Series {
	s := make([]Series, n)
	for i := range s {
		t := make([]float64, m)
		t[0] = 20 + 30*rng.Float64()
		for j := 1; j < m; j++ {
			t[j] = t[j-1] + lo + (hi-lo)*rng.Float64()
		}
		s[i] = Series{Time: t, Z: Simulate(p, t, rng, nil)}
	}
	return s
}

// Estimates on simulated cohorts with known truth: inside the parameter
// space the truth is within 4 standard errors and the binned search lands
// within the binning error of the exact maximum; with no correlation the
// fitted correlation at any gap is negligible and the test does not
// detect it.
func TestEstimateKnownTruth(t *testing.T) {
	tests := []struct {
		name   string
		truth  Params
		n, m   int
		lo, hi float64
	}{
		{"typical", Params{Phi: 0.7, C: 0.6}, 3000, 6, 0.5, 3},
		{"phi near 0", Params{Phi: 0.02, C: 0.7}, 4000, 6, 0.05, 2},
		{"phi near 1", Params{Phi: 0.98, C: 0.5}, 3000, 6, 0.5, 3},
		{"fixed personal level", Params{Phi: PhiMax, C: 0.4}, 3000, 6, 0.5, 3},
		{"no noise", Params{Phi: 0.5, C: 1}, 2000, 6, 0.5, 3},
		{"weak", Params{Phi: 0.6, C: 0.08}, 5000, 6, 0.5, 3},
		{"independent", Params{}, 3000, 6, 0.5, 3},
		{"independent, short gaps", Params{}, 3000, 6, 0.01, 0.5},
	}
	rng := rand.New(rand.NewPCG(11, 12))
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			s := cohort(tc.truth, tc.n, tc.m, tc.lo, tc.hi, rng)
			p, err := Estimate(context.Background(), s)
			if err != nil {
				t.Fatal(err)
			}
			if err := p.Validate(); err != nil {
				t.Fatal(err)
			}
			if !p.Tested() {
				t.Fatal("no test reported")
			}
			t.Logf("%+v test %+v: %s", p, p.Test, p.Finding())
			if tc.truth.Independent() {
				if p.Test.Detected() {
					t.Errorf("test detected correlation in independent readings: %+v", p.Test)
				}
				if !p.NoCorrelationDetected() {
					t.Error("NoCorrelationDetected is false for independent readings")
				}
				// At the mean gap between consecutive exams the fitted
				// correlation is within sampling error of 0 (the SE of a
				// correlation from n pairs is about 1/sqrt(n)).
				gap := (tc.lo + tc.hi) / 2
				if r := p.Corr(gap); r > 4/math.Sqrt(float64(p.Test.Pairs)) {
					t.Errorf("fitted correlation %.4f at %.2g years for independent readings", r, gap)
				}
				return
			}
			if !p.Test.Detected() || p.NoCorrelationDetected() {
				t.Errorf("correlation %+v not detected: %+v", tc.truth, p.Test)
			}
			for _, c := range []struct {
				name          string
				got, want, se float64
			}{
				{"phi", p.Phi, tc.truth.Phi, p.SEPhi},
				{"c", p.C, tc.truth.C, p.SEC},
			} {
				if c.name == "phi" && c.want == PhiMax && c.got == PhiMax {
					continue // at the edge, where the SE is not defined
				}
				if !(math.Abs(c.got-c.want) <= 4*c.se) {
					t.Errorf("%s = %.4f (SE %.4f), truth %.4f", c.name, c.got, c.se, c.want)
				}
			}
			// The estimate is the exact maximum: no better point nearby,
			// and the binned search ends within binning error of it.
			best := exactLogLik(s, p.Phi, p.C)
			for _, d := range [][2]float64{{1e-4, 0}, {-1e-4, 0}, {0, 1e-4}, {0, -1e-4}} {
				phi, c := p.Phi+d[0], math.Min(1, p.C+d[1])
				if phi <= 0 || phi >= 1 || c <= 0 {
					continue
				}
				if l := exactLogLik(s, phi, c); l > best+1e-9*math.Abs(best) {
					t.Errorf("exact log-likelihood higher at (%v, %v): %v > %v", phi, c, l, best)
				}
			}
			sc, _ := scanSeries(context.Background(), s)
			b, _ := newGapBins(sc.dmin, sc.dmax, func(add func(x, y, d float64)) error {
				return eachPair(context.Background(), s, func(_ int, x, y, d float64) { add(x, y, d) })
			})
			bp, bc, err := searchBinned(context.Background(), b, float64(sc.pairs))
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(bp-p.Phi) > 1e-3*p.SEPhi+1e-7 || math.Abs(bc-p.C) > 1e-3*p.SEC+1e-7 {
				t.Errorf("binned maximum (%.8f, %.8f), exact (%.8f, %.8f)", bp, bc, p.Phi, p.C)
			}
		})
	}
}

// With no correlation the test keeps its level: over many small
// independent cohorts it rejects about TestLevel of the time, and it
// detects a moderate correlation in cohorts of the same size.
func TestCorrelationTestLevel(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	const reps = 400
	rejected, detected := 0, 0
	for range reps {
		s := cohort(Params{}, 60, 5, 0.5, 3, rng)
		sc, err := scanSeries(context.Background(), s)
		if err != nil {
			t.Fatal(err)
		}
		if sc.test.Detected() {
			rejected++
		}
		s = cohort(Params{Phi: 0.7, C: 0.5}, 60, 5, 0.5, 3, rng)
		if sc, _ = scanSeries(context.Background(), s); sc.test.Detected() {
			detected++
		}
	}
	// Binomial(400, 0.05): mean 20, SD 4.4.
	if rejected < 7 || rejected > 35 {
		t.Errorf("rejected %d of %d independent cohorts at level %.2f", rejected, reps, TestLevel)
	}
	if detected < reps*9/10 {
		t.Errorf("detected correlation in %d of %d correlated cohorts", detected, reps)
	}
	t.Logf("rejections %d/%d (independent), detections %d/%d (phi 0.7, c 0.5)", rejected, reps, detected, reps)
}

// Few pairs: the least data Estimate accepts still gives a valid model.
func TestEstimateFewPairs(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for _, truth := range []Params{{Phi: 0.7, C: 0.6}, {}} {
		for rep := range 20 {
			s := cohort(truth, 5, 4, 0.5, 3, rng) // 5 workers, 25 pairs
			p, err := Estimate(context.Background(), s)
			if err != nil {
				t.Fatal(err)
			}
			if err := p.Validate(); err != nil || p.Pairs != 25 || p.Workers != 5 {
				t.Fatalf("truth %+v rep %d: %+v, %v", truth, rep, p, err)
			}
			if math.IsInf(p.SEPhi, 0) || math.IsInf(p.SEC, 0) || p.SEPhi < 0 || p.SEC < 0 {
				t.Errorf("truth %+v rep %d: standard errors %v, %v", truth, rep, p.SEPhi, p.SEC)
			}
		}
	}
}

// The order of the workers does not change the estimate beyond the last
// digits of floating-point sums (the screening model passes the workers
// in a canonical order, so there it is identical).
func TestEstimateOrder(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	for _, truth := range []Params{{Phi: 0.7, C: 0.6}, {}, {Phi: 0.95, C: 0.2}} {
		s := cohort(truth, 800, 5, 0.3, 3, rng)
		a, err := Estimate(context.Background(), s)
		if err != nil {
			t.Fatal(err)
		}
		perm := append([]Series(nil), s...)
		rng.Shuffle(len(perm), func(i, j int) { perm[i], perm[j] = perm[j], perm[i] })
		b, err := Estimate(context.Background(), perm)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(a.Phi-b.Phi) > 1e-9 || math.Abs(a.C-b.C) > 1e-9 || a.Test.P != b.Test.P && math.Abs(a.Test.P-b.Test.P) > 1e-12 {
			t.Errorf("truth %+v: %+v in one order, %+v in another", truth, a, b)
		}
		again, _ := Estimate(context.Background(), s)
		same := func(x, y float64) bool { return x == y || math.IsNaN(x) && math.IsNaN(y) }
		if !same(again.Phi, a.Phi) || !same(again.C, a.C) || !same(again.SEPhi, a.SEPhi) || !same(again.SEC, a.SEC) || again.Test != a.Test {
			t.Errorf("truth %+v: two runs on the same input differ: %+v, %+v", truth, a, again)
		}
	}
}

// A cancelled context stops Estimate with the context's error.
func TestEstimateCancelled(t *testing.T) {
	s := cohort(Params{Phi: 0.7, C: 0.6}, 20000, 6, 0.5, 3, rand.New(rand.NewPCG(51, 52)))
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Estimate(ctx, s); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: error %v", err)
	}
	ctx, cancel = context.WithTimeout(context.Background(), time.Millisecond)
	defer cancel()
	time.Sleep(2 * time.Millisecond)
	if _, err := Estimate(ctx, s); !errors.Is(err, context.DeadlineExceeded) {
		t.Errorf("past its deadline: error %v", err)
	}
}

// stopAfter is a context that reports cancellation from its (after+1)th
// check on, to cancel Estimate at every point where it looks.
type stopAfter struct {
	context.Context
	checks, after int
}

func (c *stopAfter) Err() error {
	c.checks++
	if c.checks > c.after {
		return context.Canceled
	}
	return nil
}

// Cancellation is honoured wherever Estimate checks: in each pass over
// the data and in the search; a context never cancelled gives the same
// answer as no check at all.
func TestEstimateCancelledMidway(t *testing.T) {
	s := cohort(Params{Phi: 0.7, C: 0.6}, 500, 6, 0.5, 3, rand.New(rand.NewPCG(53, 54)))
	want, err := Estimate(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	all := &stopAfter{Context: context.Background(), after: math.MaxInt}
	if got, err := Estimate(all, s); err != nil || got != want {
		t.Fatalf("uncancelled: %+v, %v; want %+v", got, err, want)
	}
	t.Logf("%d checks", all.checks)
	if all.checks < 10 {
		t.Fatalf("only %d checks for cancellation", all.checks)
	}
	for after := range all.checks {
		if _, err := Estimate(&stopAfter{Context: context.Background(), after: after}, s); !errors.Is(err, context.Canceled) {
			t.Fatalf("cancelled at check %d of %d: error %v", after+1, all.checks, err)
		}
	}
}

// Gaps spanning an extreme range are binned on a capped grid and still
// give the exact maximum.
func TestEstimateExtremeGaps(t *testing.T) {
	rng := rand.New(rand.NewPCG(61, 62))
	truth := Params{Phi: 0.6, C: 0.6}
	s := cohort(truth, 1500, 5, 0.3, 3, rng)
	// One worker with exams a second apart and 60 years later.
	tm := []float64{20, 20 + 1e-8, 80}
	s = append(s, Series{Time: tm, Z: Simulate(truth, tm, rng, nil)})
	sc, _ := scanSeries(context.Background(), s)
	b, _ := newGapBins(sc.dmin, sc.dmax, func(add func(x, y, d float64)) error {
		return eachPair(context.Background(), s, func(_ int, x, y, d float64) { add(x, y, d) })
	})
	if len(b.d) > maxBinNodes {
		t.Errorf("%d grid nodes, cap %d", len(b.d), maxBinNodes)
	}
	p, err := Estimate(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(p.Phi-truth.Phi) > 4*p.SEPhi || math.Abs(p.C-truth.C) > 4*p.SEC {
		t.Errorf("%+v, truth %+v", p, truth)
	}
	best := exactLogLik(s, p.Phi, p.C)
	for _, d := range [][2]float64{{1e-4, 0}, {-1e-4, 0}, {0, 1e-4}, {0, -1e-4}} {
		if l := exactLogLik(s, p.Phi+d[0], p.C+d[1]); l > best {
			t.Errorf("exact log-likelihood higher next to the estimate: %v > %v", l, best)
		}
	}
}

// The test's numbers are finite, so a model stays valid JSON, even for
// readings with no spread; the estimate is then still a valid model.
func TestCorrelationTestFinite(t *testing.T) {
	s := make([]Series, 8)
	for i := range s {
		s[i] = Series{Time: []float64{30, 31, 33.5, 34}, Z: []float64{0, 0, 0, 0}}
	}
	sc, err := scanSeries(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	if tt := sc.test; tt.Corr != 0 || tt.T != 0 || tt.P != 1 || tt.Pairs != 24 || tt.MeanGap != 4.0/3 {
		t.Errorf("all-zero readings: %+v", tt)
	}
	p, err := Estimate(context.Background(), s)
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Validate(); err != nil || !p.NoCorrelationDetected() {
		t.Errorf("all-zero readings: %+v, %v", p, err)
	}
	for i := range s {
		s[i].Z = []float64{1, 1, 1, 1}
	}
	if sc, _ = scanSeries(context.Background(), s); sc.test.T != math.MaxFloat64 || sc.test.P != 0 || sc.test.Corr != 1 {
		t.Errorf("equal readings: %+v", sc.test)
	}
}

// BenchmarkEstimate700k: the serial estimate for 100,000 reference workers
// x 7 exams (1.1 million pairs), with and without serial correlation.
func BenchmarkEstimate700k(b *testing.B) {
	for _, bc := range []struct {
		name string
		p    Params
	}{{"correlated", Params{Phi: 0.7, C: 0.6}}, {"independent", Params{}}} {
		b.Run(bc.name, func(b *testing.B) {
			s := simulateWorkers(bc.p, 100_000, 7, rand.New(rand.NewPCG(1, 1)))
			for b.Loop() {
				if _, err := Estimate(context.Background(), s); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
