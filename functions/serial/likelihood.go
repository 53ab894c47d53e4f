package serial

import "math"

// rhoMax caps the model correlation of a pair, so that 1 - rho^2 stays away
// from 0 when c is 1 and phi^d is 1 to machine precision.
const rhoMax = 0.9999

// pairTerms returns, for pairs of N(0,1) values with correlation rho, the
// log density (up to a constant) and its first two derivatives in rho,
// summed over pairs through their sufficient statistics: n pairs with
// s = sum(x^2 + y^2) and p = sum(x y). With q = 1 - rho^2:
//
//	l         = -n/2 log q - (s - 2 rho p) / (2 q)
//	dl/drho   = n rho/q + p (1 + rho^2)/q^2 - rho s/q^2
//	d2l/drho2 = n (1 + rho^2)/q^2 + (2 rho (3 + rho^2) p - (1 + 3 rho^2) s)/q^3
//
// (differentiating l; the tests check both against numerical derivatives).
// At rho = 0 the expected d2l/drho2 is -n: the Fisher information of a
// correlation at 0 is 1 per pair.
func pairTerms(n, s, p, rho float64) (l, d1, d2 float64) {
	r2 := rho * rho
	q := 1 - r2
	q2 := q * q
	l = -0.5*n*math.Log(q) - (s-2*rho*p)/(2*q)
	d1 = n*rho/q + (p*(1+r2)-rho*s)/q2
	d2 = n*(1+r2)/q2 + (2*rho*(3+r2)*p-(1+3*r2)*s)/(q2*q)
	return l, d1, d2
}

// pairDerivs returns the derivatives of pairTerms for one pair (n = 1),
// without the log-likelihood itself.
func pairDerivs(s, p, rho float64) (d1, d2 float64) {
	r2 := rho * rho
	q := 1 - r2
	q2 := q * q
	d1 = rho/q + (p*(1+r2)-rho*s)/q2
	d2 = (1+r2)/q2 + (2*rho*(3+r2)*p-(1+3*r2)*s)/(q2*q)
	return d1, d2
}

// gapBins hold the pairwise sufficient statistics (count, sum of x^2+y^2,
// sum of x y) linearly binned on a geometric grid of gaps. The pairwise
// likelihood depends on a pair only through these and its gap, so the
// likelihood over all pairs is a sum over the bins' nodes with each node's
// weights: its cost no longer grows with the number of pairs.
//
// Linear binning (Fan & Marron 1994, "Fast implementations of nonparametric
// curve estimators", J. Comput. Graph. Statist. 3) shares a pair between the
// two nodes g_k <= d < g_{k+1} in proportion to its distance from each, so
// the counts and sums are kept exactly and every term f(d) of the
// likelihood is replaced by its linear interpolation between nodes, with
// error at most (g_{k+1} - g_k)^2/8 max |d2f/dd2|. A term is f(rho(d)) with
// rho = c phi^d, whose derivatives in d are bounded for every phi:
// |d rho/dd| = rho |log phi| <= c/(e d) and |d2rho/dd2| = rho (log phi)^2
// <= c (2/(e d))^2. On a grid whose spacing is a fixed fraction h of the gap
// the error per pair is therefore at most
//
//	h^2/(8 e^2) (4 c |f_rho| + c^2 |f_rhorho|),
//
// uniformly in phi: with h = 1/1024, below 2e-8 times the term's
// derivatives in rho. The estimate is then polished on the exact
// likelihood (see Estimate), so binning decides where the search ends up,
// not the digits of the answer.
type gapBins struct {
	d, n, s, p []float64 // nodes that received pairs: gap, count, sum x^2+y^2, sum x y
}

// binSpacing is the relative spacing of the gap grid; maxBinNodes caps
// the nodes when the gaps span an extreme range (the spacing then widens).
const (
	binSpacing  = 1.0 / 1024
	maxBinNodes = 1 << 15
)

// newGapBins bins the pairs given by each(func(x, y, d)) on a geometric
// grid from dmin to dmax (0 < dmin < dmax).
func newGapBins(dmin, dmax float64, each func(add func(x, y, d float64)) error) (*gapBins, error) {
	span := math.Log(dmax / dmin)
	k := int(math.Ceil(span/binSpacing)) + 1
	k = max(2, min(k, maxBinNodes))
	step := span / float64(k-1)
	node := make([]float64, k)
	for i := range node {
		node[i] = dmin * math.Exp(float64(i)*step)
	}
	node[k-1] = dmax
	n := make([]float64, k)
	s := make([]float64, k)
	p := make([]float64, k)
	inv := 1 / step
	err := each(func(x, y, d float64) {
		i := int(math.Log(d/dmin) * inv)
		i = max(0, min(i, k-2))
		// Guard against rounding in the log: the pair belongs between
		// node[i] and node[i+1].
		for i > 0 && d < node[i] {
			i--
		}
		for i < k-2 && d >= node[i+1] {
			i++
		}
		w := (d - node[i]) / (node[i+1] - node[i])
		w = math.Max(0, math.Min(1, w))
		ss, pp := x*x+y*y, x*y
		n[i] += 1 - w
		s[i] += (1 - w) * ss
		p[i] += (1 - w) * pp
		n[i+1] += w
		s[i+1] += w * ss
		p[i+1] += w * pp
	})
	if err != nil {
		return nil, err
	}
	b := &gapBins{}
	for i := range node {
		if n[i] > 0 {
			b.d = append(b.d, node[i])
			b.n = append(b.n, n[i])
			b.s = append(b.s, s[i])
			b.p = append(b.p, p[i])
		}
	}
	return b, nil
}

// logLik returns the binned pairwise log-likelihood at (phi, c).
func (b *gapBins) logLik(phi, c float64) float64 {
	lphi := math.Log(phi)
	var ll float64
	for i, d := range b.d {
		rho := math.Min(c*math.Exp(d*lphi), rhoMax)
		l, _, _ := pairTerms(b.n[i], b.s[i], b.p[i], rho)
		ll += l
	}
	return ll
}

// searchScale maps the search coordinates x = (u, w) to the parameters:
//
//	c = sin^2 u,  phi = exp(-w^2),  so  rho = sin^2 u exp(-w^2 d),
//
// on which both ends of c (0 and 1) and phi = 1 are reached at finite
// points where the likelihood is smooth, and phi -> 0 is approached as
// w grows (phi = 0 is the same model as c = 0: no correlation at any gap).
// On logit scales the same boundaries sit at infinity, where an optimiser
// can only crawl towards them.
func searchScale(x []float64) (phi, c float64) {
	su := math.Sin(x[0])
	return math.Exp(-x[1] * x[1]), su * su
}

// searchPoint is the inverse of searchScale for 0 < phi <= 1, 0 <= c <= 1.
func searchPoint(phi, c float64) []float64 {
	return []float64{math.Asin(math.Sqrt(c)), math.Sqrt(-math.Log(phi))}
}

// searchTerms returns the binned log-likelihood at the search point x and,
// when g or h are not nil, its gradient and Hessian in x.
func (b *gapBins) searchTerms(x []float64, g *[2]float64, h *[2][2]float64) float64 {
	u, w := x[0], x[1]
	su, cu := math.Sin(u), math.Cos(u)
	c := su * su
	cu2, su2 := 2*su*cu, cu*cu-su*su // sin 2u, cos 2u
	w2 := w * w
	var ll float64
	var gu, gw, huu, huw, hww float64
	for i, d := range b.d {
		a := math.Exp(-w2 * d)
		rho := c * a
		capped := rho > rhoMax
		if capped {
			rho = rhoMax
		}
		l, d1, d2 := pairTerms(b.n[i], b.s[i], b.p[i], rho)
		ll += l
		if capped || (g == nil && h == nil) {
			continue
		}
		ru := cu2 * a
		rw := -2 * w * d * rho
		gu += d1 * ru
		gw += d1 * rw
		huu += d2*ru*ru + d1*2*su2*a
		huw += d2*ru*rw + d1*(-2*w*d*cu2*a)
		hww += d2*rw*rw + d1*(4*w2*d*d-2*d)*rho
	}
	if g != nil {
		*g = [2]float64{gu, gw}
	}
	if h != nil {
		*h = [2][2]float64{{huu, huw}, {huw, hww}}
	}
	return ll
}
