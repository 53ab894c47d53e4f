package smooth

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// cohort simulates nsubj subjects with up to per exams each at irregular
// ages in [18, 65]: y = mu(t) + subject effect + noise.
func cohort(seed uint64, nsubj, per int, subjectSD, maxGap float64) CVData {
	rng := rand.New(rand.NewPCG(seed, 11))
	var d CVData
	d.Start = append(d.Start, 0)
	for s := 0; s < nsubj; s++ {
		t := 18 + 40*rng.Float64()
		b := subjectSD * rng.NormFloat64()
		for k := 0; k < per && t <= 65; k++ {
			d.X = append(d.X, t)
			d.Y = append(d.Y, 100+0.4*(t-40)+5*math.Sin(t/4)+b+rng.NormFloat64()*3)
			t += 0.2 + (maxGap-0.2)*rng.Float64()
		}
		d.Start = append(d.Start, len(d.X))
	}
	return d
}

// TestBinnedCVMatchesExact: the binned algorithm must reproduce the
// leave-one-subject-out score computed from raw kernel sums. Binning and
// interpolating the sums perturb each prediction by ~(δ/h)²/8 of the local
// curvature term (δ = h/32), so scores agree to well under 1e-3 relative,
// far finer than the differences between neighbouring candidates.
func TestBinnedCVMatchesExact(t *testing.T) {
	sq := cohort(5, 260, 5, 2, 3)
	if len(sq.X) <= ExactLimit {
		t.Fatalf("need more than %d rows to exercise the binned path", ExactLimit)
	}
	// The same rows scored by the variance deviance on squared deviations
	// from a rough line (stand-ins for squared residuals).
	dev := sq
	dev.Y = make([]float64, len(sq.Y))
	for i, y := range sq.Y {
		e := y - (100 + 0.4*(sq.X[i]-40))
		dev.Y[i] = e * e
	}
	dev.Loss, dev.Floor = VarianceDeviance, 0.1
	for _, tc := range []struct {
		name string
		d    CVData
	}{{"squared error", sq}, {"variance deviance", dev}} {
		t.Run(tc.name, func(t *testing.T) {
			d := tc.d
			hs, err := CandidateBandwidths(18, 65, 12)
			if err != nil {
				t.Fatal(err)
			}
			got, err := CrossValidate(d, hs, nil)
			if err != nil {
				t.Fatal(err)
			}
			xmin, xmax := d.X[0], d.X[0]
			for _, x := range d.X {
				xmin, xmax = math.Min(xmin, x), math.Max(xmax, x)
			}
			kern := newKernelTable()
			for k, h := range hs {
				want := d.exactCV(&kern, h, xmin, xmax, 1, nil)
				g := got[k]
				t.Logf("h=%.3f binned %.6f (%d excl, eligible %v) exact %.6f (%d excl, eligible %v)",
					h, g.Score, g.Excluded, g.Eligible, want.Score, want.Excluded, want.Eligible)
				if g.Bandwidth != h {
					t.Fatalf("score %d is for bandwidth %g, want %g", k, g.Bandwidth, h)
				}
				if diff := g.Excluded - want.Excluded; diff > 2 || diff < -2 {
					t.Errorf("h=%g: binned excluded %d rows, exact %d", h, g.Excluded, want.Excluded)
				}
				if g.Eligible != want.Eligible {
					t.Errorf("h=%g: binned eligible %v, exact %v", h, g.Eligible, want.Eligible)
				}
				if g.Eligible && math.Abs(g.Score-want.Score) > 1e-3*math.Abs(want.Score) {
					t.Errorf("h=%g: binned score %g, exact %g", h, g.Score, want.Score)
				}
			}
		})
	}
}

// TestCrossValidateSubjectsMatter: when a subject's readings wander
// together over a year or two (serially correlated deviations, as in
// repeated exams of one worker) and subjects are few with dense exams,
// leaving out single rows lets a subject's own neighbouring exams predict
// each other, so ordinary CV undersmooths (Altman 1990, "Kernel smoothing
// of data with correlated errors", JASA 85:749-759). Leaving out whole
// subjects must pick a clearly larger bandwidth (Rice & Silverman 1991).
func TestCrossValidateSubjectsMatter(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 3))
	var d CVData
	d.Start = []int{0}
	for s := 0; s < 15; s++ {
		x := 18 + 20*rng.Float64()
		e := 5 * rng.NormFloat64()
		for k := 0; k < 100 && x <= 65; k++ {
			d.X = append(d.X, x)
			d.Y = append(d.Y, 100+0.4*(x-40)+5*math.Sin(x/4)+e+rng.NormFloat64())
			gap := 0.1 + 0.3*rng.Float64()
			r := math.Pow(0.3, gap) // correlation 0.3 after one year
			e = r*e + math.Sqrt(1-r*r)*5*rng.NormFloat64()
			x += gap
		}
		d.Start = append(d.Start, len(d.X))
	}
	hs, _ := CandidateBandwidths(18, 65, 20)
	bySubject, err := CrossValidate(d, hs, nil)
	if err != nil {
		t.Fatal(err)
	}
	rows := d
	rows.Start = make([]int, len(d.X)+1)
	for i := range rows.Start {
		rows.Start[i] = i
	}
	byRow, err := CrossValidate(rows, hs, nil)
	if err != nil {
		t.Fatal(err)
	}
	a, err := BestBandwidth(bySubject)
	if err != nil {
		t.Fatal(err)
	}
	b, err := BestBandwidth(byRow)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("leave-one-subject-out h=%.3f, leave-one-row-out h=%.3f", a.Bandwidth, b.Bandwidth)
	if !(a.Bandwidth > 2*b.Bandwidth) {
		t.Errorf("leave-one-subject-out chose %g, not clearly above leave-one-row-out %g", a.Bandwidth, b.Bandwidth)
	}
}

func TestCrossValidateDeterministicAndProgress(t *testing.T) {
	d := cohort(4, 500, 4, 1, 3)
	hs, _ := CandidateBandwidths(18, 65, 9)
	var calls []int
	a, err := CrossValidate(d, hs, func(done, total int) {
		if total != len(hs) {
			t.Errorf("progress total %d, want %d", total, len(hs))
		}
		calls = append(calls, done)
	})
	if err != nil {
		t.Fatal(err)
	}
	b, err := CrossValidate(d, hs, nil)
	if err != nil {
		t.Fatal(err)
	}
	for k := range a {
		if a[k] != b[k] {
			t.Fatalf("run 1 %+v, run 2 %+v", a[k], b[k])
		}
	}
	if len(calls) != len(hs) || calls[len(calls)-1] != len(hs) {
		t.Errorf("progress calls %v", calls)
	}
}

func TestCrossValidateSparse(t *testing.T) {
	// Two subjects far apart in time: neither predicts the other at any
	// candidate below the gap, so small bandwidths are ineligible.
	d := CVData{
		X:     []float64{20, 21, 22, 50, 51, 52},
		Y:     []float64{1, 2, 3, 4, 5, 6},
		Start: []int{0, 3, 6},
	}
	s, err := CrossValidate(d, []float64{0.5, 1, 40}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if s[0].Eligible || s[1].Eligible || s[0].Excluded != 6 {
		t.Errorf("small bandwidths should be ineligible: %+v", s[:2])
	}
	if !s[2].Eligible {
		t.Errorf("h=40 should be eligible: %+v", s[2])
	}
	if _, err := BestBandwidth(s[:2]); err == nil || !strings.Contains(err.Error(), "too sparse") {
		t.Errorf("BestBandwidth of ineligible scores: %v", err)
	}
}

func TestCrossValidateErrors(t *testing.T) {
	ok := CVData{X: []float64{1, 2, 3, 4}, Y: []float64{1, 2, 3, 4}, Start: []int{0, 2, 4}}
	for _, tc := range []struct {
		name string
		d    CVData
		hs   []float64
		want string
	}{
		{"empty", CVData{}, []float64{1}, "no data"},
		{"one subject", CVData{X: ok.X, Y: ok.Y, Start: []int{0, 4}}, []float64{1}, "at least 2 subjects"},
		{"bad start", CVData{X: ok.X, Y: ok.Y, Start: []int{0, 2, 2, 4}}, []float64{1}, "subject 1 has no rows"},
		{"short y", CVData{X: ok.X, Y: ok.Y[:2], Start: ok.Start}, []float64{1}, "y has 2"},
		{"nan", CVData{X: []float64{1, 2, math.NaN(), 4}, Y: ok.Y, Start: ok.Start}, []float64{1}, "x[2]"},
		{"weights", CVData{X: ok.X, Y: ok.Y, W: []float64{1, 1, 1, -2}, Start: ok.Start}, []float64{1}, "weight[3]"},
		{"no bandwidths", ok, nil, "no candidate"},
		{"bad bandwidth", ok, []float64{1, -1}, "bandwidth"},
		{"constant x", CVData{X: []float64{3, 3, 3, 3}, Y: ok.Y, Start: ok.Start}, []float64{1}, "all x values equal"},
		{"deviance without floor", CVData{X: ok.X, Y: ok.Y, Start: ok.Start, Loss: VarianceDeviance}, []float64{1}, "positive floor"},
		{"deviance of negative", CVData{X: ok.X, Y: []float64{1, -1, 1, 1}, Start: ok.Start, Loss: VarianceDeviance, Floor: 1}, []float64{1}, "y[1]"},
		{"unknown loss", CVData{X: ok.X, Y: ok.Y, Start: ok.Start, Loss: 7}, []float64{1}, "unknown loss"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := CrossValidate(tc.d, tc.hs, nil)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("got %v, want an error containing %q", err, tc.want)
			}
		})
	}
}

func TestChooseBandwidth(t *testing.T) {
	for _, tc := range []struct {
		name string
		d    CVData
	}{
		{"exact sums", cohort(21, 150, 5, 2, 3)},
		{"binned", cohort(22, 1500, 5, 2, 3)},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var last, total int
			best, all, err := ChooseBandwidth(tc.d, Search{Progress: func(done, tot int) { last, total = done, tot }})
			if err != nil {
				t.Fatal(err)
			}
			if last != total || total != CoarseCandidates+2*RefineLevels {
				t.Errorf("progress ended at %d of %d", last, total)
			}
			if len(all) < CoarseCandidates+RefineLevels || len(all) > total {
				t.Errorf("%d scores", len(all))
			}
			for i, s := range all {
				if i > 0 && !(s.Bandwidth > all[i-1].Bandwidth) {
					t.Fatalf("scores not sorted by bandwidth at %d", i)
				}
				if s.Eligible && s.Score < best.Score {
					t.Errorf("h=%g scores %g, below the chosen %g", s.Bandwidth, s.Score, best.Score)
				}
			}
			// The same search over an explicit list gives the same numbers.
			hs := make([]float64, len(all))
			for i, s := range all {
				hs[i] = s.Bandwidth
			}
			again, err := CrossValidate(tc.d, hs, nil)
			if err != nil {
				t.Fatal(err)
			}
			for i := range again {
				if math.Abs(again[i].Score-all[i].Score) > 1e-9*all[i].Score {
					t.Errorf("h=%g: %g from ChooseBandwidth, %g from CrossValidate", hs[i], all[i].Score, again[i].Score)
				}
			}
		})
	}
}

// TestOneStandardError: the rule may only move to a larger bandwidth, and
// only to one whose score is close to the best; on a straight-line truth
// with noisy data it must prefer a smoother fit than the raw minimum when
// the minimum is not clearly better.
func TestOneStandardError(t *testing.T) {
	for _, seed := range []uint64{31, 32, 33} {
		rng := rand.New(rand.NewPCG(seed, 1))
		var d CVData
		d.Start = []int{0}
		for s := 0; s < 300; s++ {
			x := 18 + 40*rng.Float64()
			for k := 0; k < 4; k++ {
				d.X = append(d.X, x)
				d.Y = append(d.Y, 2+0.1*x+3*rng.NormFloat64())
				x += 0.5 + 2*rng.Float64()
			}
			d.Start = append(d.Start, len(d.X))
		}
		raw, all, err := ChooseBandwidth(d, Search{})
		if err != nil {
			t.Fatal(err)
		}
		rule, all2, err := ChooseBandwidth(d, Search{OneStandardError: true})
		if err != nil {
			t.Fatal(err)
		}
		if len(all) != len(all2) {
			t.Fatalf("the rule changed the search: %d vs %d scores", len(all), len(all2))
		}
		t.Logf("seed %d: minimum at h=%.2f (%.5f), rule picks h=%.2f (%.5f)", seed, raw.Bandwidth, raw.Score, rule.Bandwidth, rule.Score)
		if rule.Bandwidth < raw.Bandwidth || !rule.Eligible {
			t.Errorf("rule picked %+v below the minimum %+v", rule, raw)
		}
		if rule.Score > raw.Score*1.01 {
			t.Errorf("rule picked a score %g far above the minimum %g", rule.Score, raw.Score)
		}
		// The truth is a line: the smoothest candidates are as good as
		// any, so the rule should land in the upper part of the range.
		if rule.Bandwidth < 10 {
			t.Errorf("rule picked h=%g for a straight line", rule.Bandwidth)
		}
	}
}

func TestCandidateBandwidths(t *testing.T) {
	hs, err := CandidateBandwidths(18, 65, 30)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(hs[0]-47.0/200) > 1e-12 || math.Abs(hs[29]-47) > 1e-12 {
		t.Errorf("ends %g, %g", hs[0], hs[29])
	}
	for i := 1; i < len(hs); i++ {
		if r := hs[i] / hs[i-1]; math.Abs(r-math.Pow(200, 1.0/29)) > 1e-9 {
			t.Fatalf("ratio %g at %d", r, i)
		}
	}
	if _, err := CandidateBandwidths(5, 5, 3); err == nil {
		t.Error("empty range accepted")
	}
}

// bigCohort is 100,000 workers x 7 exams, the size of the speed targets.
func bigCohort() CVData {
	rng := rand.New(rand.NewPCG(2024, 1))
	const nw, per = 100_000, 7
	d := CVData{X: make([]float64, 0, nw*per), Y: make([]float64, 0, nw*per), Start: make([]int, 1, nw+1)}
	for s := 0; s < nw; s++ {
		t := 18 + 30*rng.Float64()
		b := 5 * rng.NormFloat64()
		for k := 0; k < per; k++ {
			d.X = append(d.X, t)
			d.Y = append(d.Y, 120+0.5*(t-40)+3*math.Sin(t/5)+b+8*rng.NormFloat64())
			t += 0.3 + 4*rng.Float64()*rng.Float64()
		}
		d.Start = append(d.Start, len(d.X))
	}
	return d
}

// BenchmarkLocalLinear700k: one local linear pass (binning included) at a
// fixed bandwidth on a 401-point grid over 700k points. Target: within 2x
// of R KernSmooth locpoly on the same data (testdata/bench_locpoly.R).
func BenchmarkLocalLinear700k(b *testing.B) {
	d := bigCohort()
	lo, hi := d.X[0], d.X[0]
	for _, x := range d.X {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	g := Grid{Lo: lo, Hi: hi, N: 401}
	b.ResetTimer()
	for b.Loop() {
		if _, err := LocalLinear(d.X, d.Y, nil, 2, g); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkChooseBandwidth700k: leave-one-worker-out bandwidth search (20
// bandwidths) for 100,000 workers x 7 exams.
func BenchmarkChooseBandwidth700k(b *testing.B) {
	d := bigCohort()
	b.ResetTimer()
	for b.Loop() {
		if _, _, err := ChooseBandwidth(d, Search{}); err != nil {
			b.Fatal(err)
		}
	}
}
