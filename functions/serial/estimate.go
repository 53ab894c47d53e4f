package serial

import (
	"errors"
	"fmt"
	"math"
)

// MinPairs is the least number of exam pairs Estimate accepts.
const MinPairs = 20

type pair struct {
	x, y, d float64
	w       int
}

// collectPairs returns the within-worker pairs at lags 1 and 2.
func collectPairs(s []Series) ([]pair, int, error) {
	var ps []pair
	workers := 0
	for i, w := range s {
		if len(w.Time) != len(w.Z) {
			return nil, 0, fmt.Errorf("serial: reference worker %d has %d exam times for %d values", i+1, len(w.Time), len(w.Z))
		}
		if err := CheckTimes(w.Time); err != nil {
			return nil, 0, fmt.Errorf("serial: reference worker %d, %w", i+1, err)
		}
		for j, z := range w.Z {
			if math.IsNaN(z) || math.IsInf(z, 0) {
				return nil, 0, fmt.Errorf("serial: reference worker %d, exam %d: the standardised value is not a number (%v)", i+1, j+1, z)
			}
		}
		n := len(w.Z)
		if n >= 2 {
			workers++
		}
		for j := 0; j+1 < n; j++ {
			ps = append(ps, pair{w.Z[j], w.Z[j+1], w.Time[j+1] - w.Time[j], workers - 1})
			if j+2 < n {
				ps = append(ps, pair{w.Z[j], w.Z[j+2], w.Time[j+2] - w.Time[j], workers - 1})
			}
		}
	}
	return ps, workers, nil
}

const rhoMax = 0.9999

// pairLogLik returns the bivariate N(0,1) log density (up to a constant) of
// one pair with correlation rho, and its derivative in rho.
func pairLogLik(x, y, rho float64) (l, dl float64) {
	q := 1 - rho*rho
	s := x*x - 2*rho*x*y + y*y
	l = -0.5*math.Log(q) - s/(2*q)
	dl = rho/q + x*y/q - rho*s/(q*q)
	return l, dl
}

// pairScores adds each pair's log-likelihood to ll and its gradient in
// (phi, c) to the per-worker scores (when score != nil) and to grad.
func pairScores(ps []pair, phi, c float64, grad *[2]float64, score [][2]float64) float64 {
	var ll float64
	lphi := math.Log(phi)
	for _, p := range ps {
		a := math.Exp(p.d * lphi)
		rho := math.Min(c*a, rhoMax)
		l, dl := pairLogLik(p.x, p.y, rho)
		ll += l
		var gp float64
		if phi > 0 {
			gp = dl * c * p.d * a / phi
		}
		gc := dl * a
		if grad != nil {
			grad[0] += gp
			grad[1] += gc
		}
		if score != nil {
			score[p.w][0] += gp
			score[p.w][1] += gc
		}
	}
	return ll
}

func logistic(x float64) float64 { return 1 / (1 + math.Exp(-x)) }

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
// Standard errors are the worker-level sandwich (Godambe) estimate
// H^{-1} J H^{-1}, with H the observed Hessian of l and J the sum over
// workers of the outer products of each worker's score, so within-worker
// dependence between pairs is allowed for. At the edge of the parameter
// space (c or phi near 0) the standard errors are only indicative.
func Estimate(s []Series) (Params, error) {
	ps, workers, err := collectPairs(s)
	if err != nil {
		return Params{}, err
	}
	if len(ps) < MinPairs {
		return Params{}, fmt.Errorf("serial: only %d pairs of exams within workers in the reference; at least %d are needed to estimate the serial correlation", len(ps), MinPairs)
	}
	if workers < 5 {
		return Params{}, fmt.Errorf("serial: only %d reference workers have two or more exams; at least 5 are needed", workers)
	}
	dmin, dmax := math.Inf(1), 0.0
	for _, p := range ps {
		dmin, dmax = math.Min(dmin, p.d), math.Max(dmax, p.d)
	}
	if dmax < 1.05*dmin {
		return Params{}, fmt.Errorf("serial: every pair of exams is about %.3g years apart and no worker has three exams, so the yearly correlation and the persistent share cannot be told apart", dmin)
	}
	// Coarse grid for a start, then Newton steps on logit scales.
	bestLL, bp, bc := math.Inf(-1), 0.5, 0.5
	for i := range 10 {
		for j := range 10 {
			phi, c := 0.05+float64(i)/10, 0.05+float64(j)/10
			if ll := pairScores(ps, phi, c, nil, nil); ll > bestLL {
				bestLL, bp, bc = ll, phi, c
			}
		}
	}
	phi, c := maximise(ps, bp, bc)
	p := Params{Phi: phi, C: c, Pairs: len(ps), Workers: workers}
	p.SEPhi, p.SEC = sandwich(ps, workers, phi, c)
	return p, nil
}

// sandwich returns the worker-level sandwich standard errors of (phi, c).
func sandwich(ps []pair, workers int, phi, c float64) (sePhi, seC float64) {
	score := make([][2]float64, workers)
	pairScores(ps, phi, c, nil, score)
	var j [2][2]float64
	for _, s := range score {
		for a := range 2 {
			for b := range 2 {
				j[a][b] += s[a] * s[b]
			}
		}
	}
	// Observed Hessian by central differences of the analytic gradient.
	var h [2][2]float64
	th := [2]float64{phi, c}
	for a := range 2 {
		step := 1e-5
		up, dn := th, th
		up[a] = math.Min(th[a]+step, 1-1e-9)
		dn[a] = math.Max(th[a]-step, 1e-9)
		var gu, gd [2]float64
		pairScores(ps, up[0], up[1], &gu, nil)
		pairScores(ps, dn[0], dn[1], &gd, nil)
		for b := range 2 {
			h[b][a] = (gu[b] - gd[b]) / (up[a] - dn[a])
		}
	}
	det := h[0][0]*h[1][1] - h[0][1]*h[1][0]
	if !(det > 0) || !(h[0][0] < 0) {
		return math.NaN(), math.NaN()
	}
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

// maximise climbs the pairwise log-likelihood from (phi, c) by damped Newton
// steps on the logit scales with a backtracking line search. Hand-written:
// gonum's optimize package would pull in a module this project does not
// carry, and a two-parameter smooth problem needs no more than this.
func maximise(ps []pair, phi, c float64) (float64, float64) {
	x := [2]float64{logit(phi), logit(c)}
	f := func(x [2]float64) float64 { return pairScores(ps, logistic(x[0]), logistic(x[1]), nil, nil) }
	grad := func(x [2]float64) [2]float64 {
		p, q := logistic(x[0]), logistic(x[1])
		var g [2]float64
		pairScores(ps, p, q, &g, nil)
		return [2]float64{g[0] * p * (1 - p), g[1] * q * (1 - q)}
	}
	fx := f(x)
	for range 100 {
		g := grad(x)
		// Numerical Hessian from gradient differences.
		var h [2][2]float64
		const e = 1e-4
		for a := range 2 {
			up, dn := x, x
			up[a] += e
			dn[a] -= e
			gu, gd := grad(up), grad(dn)
			for b := range 2 {
				h[b][a] = (gu[b] - gd[b]) / (2 * e)
			}
		}
		h[0][1] = (h[0][1] + h[1][0]) / 2
		h[1][0] = h[0][1]
		det := h[0][0]*h[1][1] - h[0][1]*h[1][0]
		var d [2]float64
		if h[0][0] < 0 && det > 0 {
			d = [2]float64{-(h[1][1]*g[0] - h[0][1]*g[1]) / det, -(-h[1][0]*g[0] + h[0][0]*g[1]) / det}
		} else {
			d = g // ascent direction when the Hessian is not negative definite
		}
		for a := range 2 {
			d[a] = math.Max(-3, math.Min(3, d[a]))
		}
		step, moved := 1.0, false
		for range 40 {
			y := [2]float64{x[0] + step*d[0], x[1] + step*d[1]}
			for a := range 2 {
				y[a] = math.Max(-30, math.Min(30, y[a]))
			}
			if fy := f(y); fy >= fx {
				moved = fy-fx > 1e-12 || math.Abs(y[0]-x[0])+math.Abs(y[1]-x[1]) > 1e-10
				x, fx = y, fy
				break
			}
			step /= 2
		}
		if !moved || math.Abs(g[0])+math.Abs(g[1]) < 1e-9 {
			break
		}
	}
	return logistic(x[0]), logistic(x[1])
}

func logit(p float64) float64 { return math.Log(p / (1 - p)) }
