package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat"
)

// BoxCoxLogLik returns the Box-Cox profile log-likelihood of lambda for the
// positive sample y (Box & Cox 1964, with the mean and variance of the
// transformed values profiled out):
//
//	llf(λ) = (λ - 1) Σ log y_i - (n/2) log σ̂²(λ),
//
// where σ̂²(λ) is the variance (divisor n) of the transformed values. This
// is the function scipy.stats.boxcox_llf computes. For numerical safety
// σ̂² is computed from w_i = (exp(λ(log y_i - c)) - 1)/λ, c the largest log y
// for λ > 0 and the smallest for λ < 0 (so no power overflows), using
// σ̂²(λ) = exp(2λc)·var(w).
func BoxCoxLogLik(y []float64, lambda float64) (float64, error) {
	p, err := newProfile(y)
	if err != nil {
		return 0, err
	}
	if math.IsNaN(lambda) || math.IsInf(lambda, 0) {
		return 0, fmt.Errorf("lambda must be a finite number, got %g", lambda)
	}
	return p.llf(lambda), nil
}

// BoxCoxLambda returns the maximum-likelihood Box-Cox lambda for the
// positive sample y: the maximiser of BoxCoxLogLik over
// [-LambdaLimit, LambdaLimit].
//
// The search scans λ = -5, -4, ..., 5, then refines inside the unit
// interval on each side of the best scan point with Brent's method
// (golden section plus parabolic steps; Brent 1973, "Algorithms for
// Minimization without Derivatives", ch. 5), to a tolerance of
// 1.5e-8·|λ| + 1e-10, as fine as the likelihood's rounding allows.
// Brent's method is written out here because gonum/optimize offers no
// bounded one-dimensional minimiser. The scan guards against a second
// local maximum, which the profile likelihood rarely has.
//
// The sample needs at least 3 values, not all equal. A maximum at ±5 is
// reported as an error: the data then do not support a power transform.
func BoxCoxLambda(y []float64) (float64, error) {
	p, err := newProfile(y)
	if err != nil {
		return 0, err
	}
	best, bestF := -LambdaLimit, math.Inf(-1)
	for l := -LambdaLimit; l <= LambdaLimit; l++ {
		if f := p.llf(float64(l)); f > bestF {
			best, bestF = l, f
		}
	}
	lo := math.Max(float64(best-1), -LambdaLimit)
	hi := math.Min(float64(best+1), LambdaLimit)
	lam := brentMin(func(l float64) float64 { return -p.llf(l) }, lo, hi, 1.5e-8, 1e-10)
	if LambdaLimit-math.Abs(lam) < 1e-6 {
		return 0, fmt.Errorf("the most likely Box-Cox lambda lies at or beyond %g; the values are too skewed (or too nearly constant) for a power transform; try log or none", math.Copysign(LambdaLimit, lam))
	}
	return lam, nil
}

type profile struct {
	ly         []float64 // log y
	sumLog     float64
	minL, maxL float64
	buf        []float64
}

func newProfile(y []float64) (*profile, error) {
	if len(y) < 3 {
		return nil, fmt.Errorf("Box-Cox needs at least 3 values, got %d", len(y))
	}
	p := &profile{ly: make([]float64, len(y)), buf: make([]float64, len(y))}
	for i, v := range y {
		if !(v > 0) || math.IsInf(v, 0) {
			return nil, &ValueError{Index: i, Value: v, Transform: BoxCox}
		}
		l := math.Log(v)
		p.ly[i] = l
		p.sumLog += l
	}
	p.minL, p.maxL = p.ly[0], p.ly[0]
	for _, l := range p.ly {
		p.minL, p.maxL = math.Min(p.minL, l), math.Max(p.maxL, l)
	}
	if p.minL == p.maxL {
		return nil, errors.New("Box-Cox needs values that are not all equal")
	}
	return p, nil
}

func (p *profile) llf(lambda float64) float64 {
	var shift float64
	w := p.buf
	switch {
	case lambda == 0:
		copy(w, p.ly)
	default:
		c := p.maxL
		if lambda < 0 {
			c = p.minL
		}
		for i, l := range p.ly {
			w[i] = math.Expm1(lambda*(l-c)) / lambda
		}
		shift = 2 * lambda * c
	}
	_, v := stat.PopMeanVariance(w, nil)
	n := float64(len(p.ly))
	return (lambda-1)*p.sumLog - n/2*(math.Log(v)+shift)
}

// brentMin returns a local minimiser of f in [a, b] by Brent's method
// (Brent 1973, ch. 5, procedure localmin): the tolerance at x is
// eps·|x| + t.
func brentMin(f func(float64) float64, a, b, eps, t float64) float64 {
	c := (3 - math.Sqrt(5)) / 2
	x := a + c*(b-a)
	w, v := x, x
	fx := f(x)
	fw, fv := fx, fx
	var d, e float64
	for range 200 {
		m := 0.5 * (a + b)
		tol := eps*math.Abs(x) + t
		t2 := 2 * tol
		if math.Abs(x-m) <= t2-0.5*(b-a) {
			break
		}
		var p, q, r float64
		if math.Abs(e) > tol {
			r = (x - w) * (fx - fv)
			q = (x - v) * (fx - fw)
			p = (x-v)*q - (x-w)*r
			q = 2 * (q - r)
			if q > 0 {
				p = -p
			} else {
				q = -q
			}
			r = e
			e = d
		}
		if math.Abs(p) < math.Abs(0.5*q*r) && p > q*(a-x) && p < q*(b-x) {
			// Parabolic step.
			d = p / q
			u := x + d
			if u-a < t2 || b-u < t2 {
				d = tol
				if x >= m {
					d = -tol
				}
			}
		} else {
			// Golden-section step.
			if x < m {
				e = b - x
			} else {
				e = a - x
			}
			d = c * e
		}
		u := x + d
		if math.Abs(d) < tol {
			u = x + math.Copysign(tol, d)
		}
		fu := f(u)
		if fu <= fx {
			if u < x {
				b = x
			} else {
				a = x
			}
			v, fv = w, fw
			w, fw = x, fx
			x, fx = u, fu
		} else {
			if u < x {
				a = u
			} else {
				b = u
			}
			if fu <= fw || w == x {
				v, fv = w, fw
				w, fw = u, fu
			} else if fu <= fv || v == x || v == w {
				v, fv = u, fu
			}
		}
	}
	return x
}
