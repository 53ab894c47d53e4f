package scenario

import (
	"math"
	"testing"
)

// zExam is an exam with its standardised readings under the documented
// curves.
type zExam struct {
	Exam
	z [2]float64 // indexed by Marker
}

func standardiseAll(t *testing.T, exams []Exam) []zExam {
	t.Helper()
	out := make([]zExam, len(exams))
	for i, e := range exams {
		out[i].Exam = e
		for _, m := range []Marker{SBP, FEV1} {
			y := e.SBP
			if m == FEV1 {
				y = e.FEV1
			}
			z, err := Standardise(m, e.Group, e.Age, y)
			if err != nil {
				t.Fatalf("exam %d (%+v): %v", i, e, err)
			}
			out[i].z[m] = z
		}
	}
	return out
}

// clusterMean returns the mean of vals and its cluster-robust standard
// error with one cluster per worker,
//
//	se² = G/(G-1) · Σ_g (Σ_{i∈g} (v_i - mean))² / n²,
//
// the usual sandwich estimator of a mean (common practice); the same
// formula is used in testdata/make_fixtures.py.
func clusterMean(vals []float64, workers []string) (mean, se float64) {
	n := float64(len(vals))
	for _, v := range vals {
		mean += v
	}
	mean /= n
	sums := map[string]float64{}
	for i, v := range vals {
		sums[workers[i]] += v - mean
	}
	var ss float64
	for _, s := range sums {
		ss += s * s
	}
	g := float64(len(sums))
	return mean, math.Sqrt(ss / (n * n) * g / (g - 1))
}

// lagPairs returns, for consecutive exams of the same worker, the gap d in
// years and the product of their standardised readings of marker m.
func lagPairs(ex []zExam, m Marker) (d, p []float64) {
	for i := 1; i < len(ex); i++ {
		if ex[i].Worker == ex[i-1].Worker {
			d = append(d, ex[i].Age-ex[i-1].Age)
			p = append(p, ex[i].z[m]*ex[i-1].z[m])
		}
	}
	return d, p
}

// fitSerial fits E[z_j z_{j+1}] = c·φ^d to lag pairs by least squares. For
// a fixed φ the best c is Σ p f / Σ f² with f = φ^d, so the fit is a 1-D
// search over φ: a grid of 99 points, then golden-section refinement
// around the best one. Hand-written because the profile is one-dimensional
// and smooth; it matches scipy.optimize.curve_fit on the same criterion.
func fitSerial(d, p []float64) (c, phi float64) {
	profile := func(phi float64) (sse, c float64) {
		var spf, sff, spp float64
		for i := range d {
			f := math.Pow(phi, d[i])
			spf += p[i] * f
			sff += f * f
			spp += p[i] * p[i]
		}
		return spp - spf*spf/sff, spf / sff
	}
	best, bestSSE := 0.5, math.Inf(1)
	for k := 1; k < 100; k++ {
		if sse, _ := profile(float64(k) / 100); sse < bestSSE {
			best, bestSSE = float64(k)/100, sse
		}
	}
	lo, hi := math.Max(1e-6, best-0.01), math.Min(1-1e-9, best+0.01)
	g := (math.Sqrt(5) - 1) / 2
	for hi-lo > 1e-10 {
		a, b := hi-g*(hi-lo), lo+g*(hi-lo)
		sa, _ := profile(a)
		sb, _ := profile(b)
		if sa < sb {
			hi = b
		} else {
			lo = a
		}
	}
	phi = (lo + hi) / 2
	_, c = profile(phi)
	return c, phi
}

// correlation returns the Pearson correlation of x and y.
func correlation(x, y []float64) float64 {
	n := float64(len(x))
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= n
	my /= n
	var sxy, sxx, syy float64
	for i := range x {
		sxy += (x[i] - mx) * (y[i] - my)
		sxx += (x[i] - mx) * (x[i] - mx)
		syy += (y[i] - my) * (y[i] - my)
	}
	return sxy / math.Sqrt(sxx*syy)
}
