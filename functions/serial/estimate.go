package serial

import (
	"context"
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
	"gonum.org/v1/gonum/stat/distuv"
)

// MinPairs is the least number of exam pairs Estimate accepts.
const MinPairs = 20

// TestLevel is the significance level of the test of no serial
// correlation: below it, serial correlation is reported as detected.
const TestLevel = 0.05

// PhiMax is the largest yearly correlation Estimate reports: a persistent
// part that does not decay over the reference follow-up (a fixed personal
// level) is estimated at phi = 1, the edge of the model, and reported as
// PhiMax, which Validate accepts.
const PhiMax = 1 - 1e-9

const (
	// maxSearchIterations caps the Newton iterations on the binned
	// likelihood and maxSearchEvaluations its function evaluations.
	maxSearchIterations  = 200
	maxSearchEvaluations = 2000
	// maxPolishSteps caps the Newton steps on the exact likelihood.
	maxPolishSteps = 4
	// checkEvery is how many exams a pass over the data handles between
	// checks for cancellation (counted at the start of each worker, so a
	// check comes at least every checkEvery exams plus one worker's).
	checkEvery = 8192
)

// CorrelationTest is the test that a worker's consecutive exams are
// uncorrelated, made by Estimate before it fits the model. For each worker
// with two or more exams, U = sum_j z_j z_{j+1} over consecutive exams;
// with standardised residuals (mean 0, SD 1) E U = 0 when consecutive exams
// are uncorrelated, whatever the gaps. T is the one-sample t statistic of
// the U over workers and P its one-sided p-value (Student's t with
// Workers - 1 degrees of freedom; common practice, the same as
// scipy.stats.ttest_1samp(U, 0, alternative="greater")): one-sided because
// the model's correlation c phi^d is never negative. Corr is the lag-1
// correlation sum z_j z_{j+1} / sqrt(sum z_j^2 sum z_{j+1}^2) over the
// Pairs of consecutive exams, which are MeanGap years apart on average.
// All are finite numbers (with no spread in U,
// T is 0 and P is 1, or T is the largest float64 and P is 0 when every U is
// the same positive number).
type CorrelationTest struct {
	Workers, Pairs int
	MeanGap        float64
	Corr, T, P     float64
}

// Detected reports whether the test found serial correlation at TestLevel.
func (t CorrelationTest) Detected() bool { return t.P < TestLevel }

// scan is what one pass over the reference series finds: the counts, the
// range of the pair gaps, and the test of no correlation.
type scan struct {
	workers, pairs int
	dmin, dmax     float64
	test           CorrelationTest
}

// checkSeries returns an error naming the first reference worker whose
// exams are not usable: lengths that differ, times that do not increase,
// values that are not numbers.
func checkSeries(i int, w Series) error {
	if len(w.Time) != len(w.Z) {
		return fmt.Errorf("reference worker %d has %d exam times for %d values", i+1, len(w.Time), len(w.Z))
	}
	if err := CheckTimes(w.Time); err != nil {
		return fmt.Errorf("reference worker %d, %w", i+1, err)
	}
	for j, z := range w.Z {
		if math.IsNaN(z) || math.IsInf(z, 0) {
			return fmt.Errorf("reference worker %d, exam %d: the standardised value is not a number (%v)", i+1, j+1, z)
		}
	}
	return nil
}

// scanSeries checks the series, counts the pairs at lags 1 and 2 within
// workers, finds the range of their gaps and tests for no correlation.
func scanSeries(ctx context.Context, s []Series) (scan, error) {
	sc := scan{dmin: math.Inf(1)}
	var sumU, sumU2, sxy, sxx, syy float64
	var lag1 int
	var gapSum float64
	exams := checkEvery
	for i, w := range s {
		if exams += len(w.Z); exams >= checkEvery {
			exams = 0
			if err := ctx.Err(); err != nil {
				return sc, err
			}
		}
		if err := checkSeries(i, w); err != nil {
			return sc, err
		}
		n := len(w.Z)
		if n < 2 {
			continue
		}
		sc.workers++
		var u float64
		for j := 0; j+1 < n; j++ {
			x, y := w.Z[j], w.Z[j+1]
			u += x * y
			sxx += x * x
			syy += y * y
			d := w.Time[j+1] - w.Time[j]
			sc.dmin, sc.dmax = math.Min(sc.dmin, d), math.Max(sc.dmax, d)
			sc.pairs++
			lag1++
			gapSum += d
			if j+2 < n {
				d := w.Time[j+2] - w.Time[j]
				sc.dmax = math.Max(sc.dmax, d)
				sc.pairs++
			}
		}
		sxy += u
		sumU += u
		sumU2 += u * u
	}
	t := &sc.test
	t.Workers = sc.workers
	t.Pairs = lag1
	if lag1 > 0 {
		t.MeanGap = gapSum / float64(lag1)
	}
	t.Corr = sxy / math.Sqrt(sxx*syy)
	if !(sxx*syy > 0) {
		t.Corr = 0
	}
	t.T, t.P = 0, 1
	if k := float64(sc.workers); k >= 2 {
		mean := sumU / k
		v := (sumU2 - k*mean*mean) / (k - 1)
		switch {
		case v > 0:
			t.T = mean / math.Sqrt(v/k)
			t.P = distuv.StudentsT{Mu: 0, Sigma: 1, Nu: k - 1}.Survival(t.T)
		case mean > 0: // every worker's U is the same positive number
			t.T, t.P = math.MaxFloat64, 0
		}
	}
	return sc, nil
}

// eachPair calls fn for every pair of exams at lags 1 and 2 within a
// worker, with k the index of the worker among those with two or more
// exams, checking for cancellation about every checkEvery exams.
func eachPair(ctx context.Context, s []Series, fn func(k int, x, y, d float64)) error {
	k, exams := -1, checkEvery
	for _, w := range s {
		if exams += len(w.Z); exams >= checkEvery {
			exams = 0
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		n := len(w.Z)
		if n < 2 {
			continue
		}
		k++
		for j := 0; j+1 < n; j++ {
			fn(k, w.Z[j], w.Z[j+1], w.Time[j+1]-w.Time[j])
			if j+2 < n {
				fn(k, w.Z[j], w.Z[j+2], w.Time[j+2]-w.Time[j])
			}
		}
	}
	return nil
}

// Estimate fits phi and c to reference workers' standardised residuals by
// maximum pairwise (composite) likelihood over the pairs of exams at lags 1
// and 2 within each worker, whose values are modelled as bivariate normal
// with unit variances and correlation rho = c*phi^d at gap d years:
//
//	l(phi, c) = sum over pairs of -log(1-rho^2)/2 - (x^2 - 2 rho x y + y^2)/(2 (1-rho^2))
//
// (pairwise likelihood: Varin, Reid & Firth 2011, "An overview of composite
// likelihood methods", Statistica Sinica 21). Lag-2 pairs are used beside the
// consecutive ones so that phi and c stay identifiable when all exams are
// equally spaced (then lag 1 alone gives only c*phi^d).
//
// A pair enters l only through x^2 + y^2, x y and its gap, so the pairs are
// first binned by gap (see gapBins) and the maximum is found on the binned
// likelihood, whose cost does not grow with the number of pairs: a coarse
// grid for the start, then gonum's modified Newton method (optimize.Newton,
// analytic gradient and Hessian) on the scale c = sin^2 u, phi = exp(-w^2),
// where the edges c = 0, c = 1 and phi = 1 are ordinary points (see
// searchScale). When the maximum lies inside the parameter space it is then
// polished by Newton steps on the exact likelihood of all pairs, so the
// answer is the exact maximiser, not the binned one. When no correlation
// fits better than none (the maximum is at c = 0 or phi = 0, where every
// rho is 0 and the other parameter is undefined), the estimate is
// Phi = C = 0 and Independent reports true.
//
// Test reports the test of no correlation between consecutive exams (see
// CorrelationTest), made in the same pass over the data as the checks,
// before the fit; Finding and NoCorrelationDetected put it in words.
//
// Standard errors are the worker-level sandwich (Godambe) estimate
// H^{-1} J H^{-1}, with H the Hessian of l and J the sum over workers of
// the outer products of each worker's score, so within-worker dependence
// between pairs is allowed for; both from analytic derivatives of the exact
// likelihood. At the edge of the parameter space (c or phi near 0, phi at
// PhiMax) the standard errors are only indicative, and NaN where H is not
// negative definite.
//
// Every pass over the data checks ctx between workers, about every
// checkEvery exams; the searches have fixed caps on their iterations.
func Estimate(ctx context.Context, s []Series) (Params, error) {
	sc, err := scanSeries(ctx, s)
	if err != nil {
		return Params{}, err
	}
	if sc.pairs < MinPairs {
		return Params{}, fmt.Errorf("only %d pairs of exams within workers in the reference; at least %d are needed to estimate the serial correlation", sc.pairs, MinPairs)
	}
	if sc.workers < 5 {
		return Params{}, fmt.Errorf("only %d reference workers have two or more exams; at least 5 are needed", sc.workers)
	}
	if sc.dmax < 1.05*sc.dmin {
		return Params{}, fmt.Errorf("every pair of exams is about %.3g years apart and no worker has three exams, so the yearly correlation and the persistent share cannot be told apart", sc.dmin)
	}
	bins, err := newGapBins(sc.dmin, sc.dmax, func(add func(x, y, d float64)) error {
		return eachPair(ctx, s, func(_ int, x, y, d float64) { add(x, y, d) })
	})
	if err != nil {
		return Params{}, err
	}
	p := Params{Pairs: sc.pairs, Workers: sc.workers, Test: sc.test}
	phi, c, err := searchBinned(ctx, bins, float64(sc.pairs))
	if err != nil {
		return Params{}, err
	}
	// No correlation fits as well as the maximum: the edge where rho = 0
	// at every gap, written canonically as phi = c = 0.
	if l0 := bins.logLik(0.5, 0); !(bins.logLik(phi, c)-l0 > 1e-12*float64(sc.pairs)) {
		p.SEPhi, p.SEC = math.NaN(), math.NaN()
		return p, nil
	}
	fit, err := polish(ctx, s, sc.workers, phi, c)
	if err != nil {
		return Params{}, err
	}
	p.Phi, p.C = fit.phi, fit.c
	p.SEPhi, p.SEC = fit.sandwich()
	return p, nil
}

// searchBinned maximises the binned likelihood: the best point of a coarse
// grid, then optimize.Newton on the search scale (see searchScale). The
// objective is the mean log-likelihood per pair, so the thresholds do not
// depend on the number of pairs.
func searchBinned(ctx context.Context, b *gapBins, pairs float64) (phi, c float64, err error) {
	best, bp, bc := math.Inf(-1), 0.5, 0.5
	for i := range 10 {
		for j := range 10 {
			phi, c := 0.05+float64(i)/10, 0.05+float64(j)/10
			if ll := b.logLik(phi, c); ll > best {
				best, bp, bc = ll, phi, c
			}
		}
	}
	scale := -1 / pairs
	prob := optimize.Problem{
		Func: func(x []float64) float64 { return scale * b.searchTerms(x, nil, nil) },
		Grad: func(grad, x []float64) {
			var g [2]float64
			b.searchTerms(x, &g, nil)
			grad[0], grad[1] = scale*g[0], scale*g[1]
		},
		Hess: func(hess *mat.SymDense, x []float64) {
			var h [2][2]float64
			b.searchTerms(x, nil, &h)
			hess.SetSym(0, 0, scale*h[0][0])
			hess.SetSym(0, 1, scale*h[0][1])
			hess.SetSym(1, 1, scale*h[1][1])
		},
		Status: func() (optimize.Status, error) {
			if err := ctx.Err(); err != nil {
				return optimize.Failure, err
			}
			return optimize.NotTerminated, nil
		},
	}
	settings := &optimize.Settings{
		GradientThreshold: 1e-12,
		Converger:         &optimize.FunctionConverge{Absolute: 1e-15, Iterations: 8},
		MajorIterations:   maxSearchIterations,
		FuncEvaluations:   maxSearchEvaluations,
	}
	// A line search that can no longer improve near the maximum ends with
	// an error; the best point found is still the answer, and the grid's
	// best point is kept if the search found nothing better.
	res, _ := optimize.Minimize(prob, searchPoint(bp, bc), settings, &optimize.Newton{})
	if err := ctx.Err(); err != nil {
		return 0, 0, err
	}
	if res == nil || !(res.F/scale >= best) || math.IsNaN(res.X[0]) || math.IsNaN(res.X[1]) {
		return bp, bc, nil
	}
	phi, c = searchScale(res.X)
	return math.Min(phi, PhiMax), c, nil
}

// exactFit holds the gradient and Hessian of the exact pairwise
// log-likelihood in (phi, c) at a point, and each worker's score.
type exactFit struct {
	phi, c float64
	g      [2]float64
	h      [2][2]float64
	score  [][2]float64
}

// evaluate computes the exact likelihood derivatives at (phi, c) over all
// pairs, reusing f.score. With a = phi^d and rho = c a:
//
//	d rho/d phi = c d a/phi,  d rho/d c = a,
//	d2 rho/d phi2 = c d (d-1) a/phi^2,  d2 rho/d phi d c = d a/phi,  d2 rho/d c2 = 0,
//
// and the derivatives of l follow by the chain rule from pairTerms. A pair
// whose rho is capped at rhoMax adds nothing.
func (f *exactFit) evaluate(ctx context.Context, s []Series, phi, c float64) error {
	f.phi, f.c = phi, c
	clear(f.score)
	lphi := math.Log(phi)
	var g0, g1, h00, h01, h11 float64
	err := eachPair(ctx, s, func(k int, x, y, d float64) {
		a := math.Exp(d * lphi)
		rho := c * a
		if rho > rhoMax {
			return
		}
		d1, d2 := pairDerivs(x*x+y*y, x*y, rho)
		rp, rc := c*d*a/phi, a
		gp, gc := d1*rp, d1*rc
		g0 += gp
		g1 += gc
		h00 += d2*rp*rp + d1*c*d*(d-1)*a/(phi*phi)
		h01 += d2*rp*rc + d1*d*a/phi
		h11 += d2 * rc * rc
		f.score[k][0] += gp
		f.score[k][1] += gc
	})
	f.g, f.h = [2]float64{g0, g1}, [2][2]float64{{h00, h01}, {h01, h11}}
	return err
}

// newton returns the Newton step -H^{-1} g of f; ok is false when H is not
// negative definite.
func (f *exactFit) newton() (dphi, dc float64, ok bool) {
	h, g := f.h, f.g
	if !negDef(h) {
		return 0, 0, false
	}
	det := h[0][0]*h[1][1] - h[0][1]*h[1][0]
	return -(h[1][1]*g[0] - h[0][1]*g[1]) / det, -(h[0][0]*g[1] - h[1][0]*g[0]) / det, true
}

// negDef reports whether the 2x2 symmetric h is negative definite.
func negDef(h [2][2]float64) bool {
	return h[0][0] < 0 && h[0][0]*h[1][1]-h[0][1]*h[1][0] > 0
}

// interior reports whether (phi, c) is far enough inside the parameter
// space for Newton steps on the exact likelihood.
func interior(phi, c float64) bool {
	const e = 1e-9
	return phi > e && phi < PhiMax && c > e && c < 1-e
}

// polishTol is the Newton step (in phi and c) below which the polish
// stops: one more step from there changes the estimate by about the
// square of it, far below any digit reported.
const polishTol = 1e-5

// polish starts at the binned maximum (phi, c) and takes Newton steps on
// the exact pairwise likelihood (at most maxPolishSteps). Near the maximum
// Newton's method converges quadratically, and the binned maximum is within
// the binning error of it, so usually the first step is already below
// polishTol and is the last. If a step would leave the parameter space, the
// Hessian is not negative definite, or the steps do not shrink, the binned
// maximum is kept. It returns the exact derivatives at the point chosen
// (at the last point evaluated when the final step was below polishTol),
// for the standard errors.
func polish(ctx context.Context, s []Series, workers int, phi, c float64) (*exactFit, error) {
	start := &exactFit{score: make([][2]float64, workers)}
	if err := start.evaluate(ctx, s, phi, c); err != nil {
		return nil, err
	}
	if !interior(phi, c) {
		return start, nil
	}
	f := start
	last := math.Inf(1)
	for i := range maxPolishSteps {
		dp, dc, ok := f.newton()
		np, nc := f.phi+dp, f.c+dc
		size := math.Max(math.Abs(dp), math.Abs(dc))
		if !ok || !interior(np, nc) || !(size < last) {
			break
		}
		if size < polishTol {
			f.phi, f.c = np, nc
			return f, nil
		}
		if i == 0 {
			f = &exactFit{score: make([][2]float64, workers)}
		}
		if err := f.evaluate(ctx, s, np, nc); err != nil {
			return nil, err
		}
		last = size
	}
	return start, nil
}

// sandwich returns the worker-level sandwich standard errors of (phi, c):
// the square roots of the diagonal of H^{-1} J H^{-1}; NaN when H is not
// negative definite.
func (f *exactFit) sandwich() (sePhi, seC float64) {
	h := f.h
	if !negDef(h) {
		return math.NaN(), math.NaN()
	}
	var j [2][2]float64
	for _, s := range f.score {
		j[0][0] += s[0] * s[0]
		j[0][1] += s[0] * s[1]
		j[1][1] += s[1] * s[1]
	}
	j[1][0] = j[0][1]
	det := h[0][0]*h[1][1] - h[0][1]*h[1][0]
	inv := [2][2]float64{{h[1][1] / det, -h[0][1] / det}, {-h[1][0] / det, h[0][0] / det}}
	var v [2][2]float64
	for a := range 2 {
		for b := range 2 {
			for k := range 2 {
				for l := range 2 {
					v[a][b] += inv[a][k] * j[k][l] * inv[l][b]
				}
			}
		}
	}
	return math.Sqrt(v[0][0]), math.Sqrt(v[1][1])
}

// ErrTooFewExams is wrapped by Diagnose when the reference has too few
// innovations for the normality test.
var ErrTooFewExams = errors.New("too few exams")
