package limit

import (
	"math"

	"gonum.org/v1/gonum/integrate/quad"
	lapackgonum "gonum.org/v1/gonum/lapack/gonum"

	"veer/functions/chart"
)

// Number of Gauss-Legendre nodes. The CUSUM kernel is a N(0,1) density, so
// its solution is analytic on [0,h] and Nyström converges geometrically;
// cusumNodes keeps the relative error below 1e-6 for h <= 12 (24 nodes give
// ARL0 = 930.8870121 at k = 0.5, h = 5, the same to 10 digits as 80 nodes;
// checked in TestNodesConverge). The EWMA kernel has width sqrt(lambda(2-lambda)) in the
// standardised scale, so the node count grows as lambda shrinks.
const (
	cusumNodes   = 24
	cusumPerUnit = 3 // extra nodes per unit of h beyond 10
	ewmaMinNodes = 40
	ewmaMaxNodes = 240
	ewmaPerWidth = 6 // nodes per kernel width across the interval
)

// kernel describes a Markov chart recursion on i.i.d. X ~ N(mu,1):
//
//	next = alpha*x + beta*X + gamma, reflected at 0 when reflect,
//
// with continuation region [lo, hi].
type kernel struct {
	alpha, beta, gamma, mu float64
	lo, hi                 float64
	reflect                bool
	// fold: the chart is symmetric about 0 (two-sided EWMA, mu = 0), so
	// L(x) = L(-x) and the equation is solved on [0, hi] with kernel
	// p(z|x) + p(-z|x), a quarter of the work of the full system.
	fold bool
	// alpha1, beta1 replace alpha, beta for the first step from the start
	// value when beta1 > 0 (EWMA: the first exam has weight lambda, later
	// exams the gap weight).
	alpha1, beta1 float64
}

// solver holds the Gauss-Legendre nodes and workspace of one Nyström system;
// it is reused across the evaluations of a root search.
type solver struct {
	n    int
	x, w []float64 // nodes on [-1,1] scaled per call into y
	y    []float64
	a    []float64 // (m x m) system matrix, row major
	b    []float64
	ipiv []int // pivots of the LU factorisation
	m    int
}

func newSolver(n int) *solver {
	s := &solver{n: n, x: make([]float64, n), w: make([]float64, n), y: make([]float64, n)}
	quad.Legendre{}.FixedLocations(s.x, s.w, -1, 1)
	s.m = n
	s.a = make([]float64, (n+1)*(n+1))
	s.b = make([]float64, n+1)
	s.ipiv = make([]int, n+1)
	return s
}

// arl solves the integral equation of Crowder (1987, "A simple method for
// studying run-length distributions of exponentially weighted moving average
// charts", Technometrics 29) / the CUSUM equation of Page (1954),
//
//	L(x) = 1 + [reflect] L(lo) P(next <= lo | x) + ∫_lo^hi L(z) p(z | x) dz,
//	p(z | x) = phi((z - alpha x - gamma)/beta - mu) / beta,
//
// by the Nyström method with Gauss-Legendre nodes, and returns L(start).
// The atom at 0 of a reflected chart is an extra unknown L(lo), as in
// Brook & Evans (1972) and R spc.
func (s *solver) arl(k kernel, start float64) float64 {
	n := s.n
	half, mid := (k.hi-k.lo)/2, (k.hi+k.lo)/2
	for j := range n {
		s.y[j] = mid + half*s.x[j]
	}
	off := 0
	if k.reflect {
		off = 1
	}
	m := n + off
	s.m = m
	a := s.a[:m*m]
	b := s.b[:m]
	row := func(i int, x float64) {
		r := a[i*m : (i+1)*m]
		c := k.alpha*x + k.gamma
		if k.reflect {
			r[0] = -normCDF((k.lo-c)/k.beta - k.mu)
		}
		for j := range n {
			p := normPDF((s.y[j]-c)/k.beta - k.mu)
			if k.fold {
				p += normPDF((-s.y[j]-c)/k.beta - k.mu)
			}
			r[off+j] = -half * s.w[j] * p / k.beta
		}
		r[i] += 1
		b[i] = 1
	}
	if k.reflect {
		row(0, k.lo)
	}
	for i := range n {
		row(off+i, s.y[i])
	}
	solveLU(a, b, m, s.ipiv)
	// Nyström interpolation at the start value (first step possibly with
	// its own kernel).
	a1, b1 := k.alpha, k.beta
	if k.beta1 > 0 {
		a1, b1 = k.alpha1, k.beta1
	}
	c := a1*start + k.gamma
	l := 1.0
	if k.reflect {
		l += b[0] * normCDF((k.lo-c)/b1-k.mu)
	}
	for j := range n {
		p := normPDF((s.y[j]-c)/b1 - k.mu)
		if k.fold {
			p += normPDF((-s.y[j]-c)/b1 - k.mu)
		}
		l += half * s.w[j] * p / b1 * b[off+j]
	}
	return l
}

// solveLU solves the dense m x m system a x = b (a row major) by LU
// factorisation with partial pivoting (LAPACK dgesv, in gonum's pure-Go
// implementation), leaving x in b. It works in the caller's slices (ipiv,
// of length at least m, is the pivot workspace) and allocates nothing, so a
// root search reuses one workspace. A singular system (which I - K of a
// chart's integral equation never is in exact arithmetic) leaves NaN in b.
func solveLU(a, b []float64, m int, ipiv []int) {
	if !(lapackgonum.Implementation{}).Dgesv(m, 1, a[:m*m], m, ipiv[:m], b[:m], 1) {
		for i := range b[:m] {
			b[i] = math.NaN()
		}
	}
}

func normPDF(x float64) float64 { return math.Exp(-x*x/2) / math.Sqrt(2*math.Pi) }
func normCDF(x float64) float64 { return 0.5 * math.Erfc(-x/math.Sqrt2) }

// calc evaluates ARLs of one chart at one gap, reusing its solver.
type calc struct {
	spec chart.Spec
	gap  float64
	sv   *solver
	fold bool // current two-sided EWMA evaluation is folded
	// sameFirst gives the first exam the gap weight too (as R spc run with
	// the effective lambda); used by the fixture tests. Otherwise the first
	// exam has weight lambda, as in chart.Run.
	sameFirst bool
}

// ewmaKernel returns the EWMA kernel at the calc's gap, with the first step
// at weight lambda unless sameFirst.
func (c *calc) ewmaKernel(mu, lo, hi float64, reflect bool) kernel {
	s := c.spec
	w := s.Weight(c.gap)
	k := kernel{alpha: 1 - w, beta: w / s.EWMAScale(), mu: mu, lo: lo, hi: hi, reflect: reflect}
	if !c.sameFirst && w != s.Lambda {
		k.alpha1, k.beta1 = 1-s.Lambda, s.Lambda/s.EWMAScale()
	}
	return k
}

func newCalc(spec chart.Spec, gap float64) (*calc, error) {
	if err := spec.Validate(); err != nil {
		return nil, err
	}
	if gap == 0 {
		gap = spec.UnitOrDefault()
	}
	if !(gap > 0) || math.IsInf(gap, 1) {
		return nil, &chart.SettingError{Setting: "gap", Value: gap, Want: "a positive number of years"}
	}
	return &calc{spec: spec, gap: gap}, nil
}

func (c *calc) nodes(h float64) int {
	if c.spec.Kind == chart.CUSUM {
		return cusumNodes + int(math.Max(0, math.Ceil(cusumPerUnit*(h-10))))
	}
	w := c.spec.Weight(c.gap)
	if !c.sameFirst {
		w = math.Min(w, c.spec.Lambda)
	}
	width := w / c.spec.EWMAScale()
	span := h // one-sided, or two-sided folded
	if c.spec.Side == chart.Both && !c.fold {
		span = 2 * h
	}
	n := int(math.Ceil(ewmaPerWidth * span / width))
	return max(ewmaMinNodes, min(ewmaMaxNodes, n))
}

func (c *calc) solverFor(h float64) *solver {
	n := c.nodes(h)
	if c.sv == nil || c.sv.n != n {
		c.sv = newSolver(n)
	}
	return c.sv
}

// oneSided returns the ARL of the upper one-sided chart for N(mu,1) values,
// from 0 and from the head start.
func (c *calc) oneSided(h, mu float64) (fromZero, fromStart float64) {
	sv := c.solverFor(h)
	var k kernel
	if c.spec.Kind == chart.CUSUM {
		k = kernel{alpha: 1, beta: 1, gamma: -c.spec.Allowance, mu: mu, lo: 0, hi: h, reflect: true}
	} else {
		k = c.ewmaKernel(mu, 0, h, true)
	}
	fromZero = sv.arl(k, 0)
	fromStart = fromZero
	if c.spec.HeadStart > 0 {
		fromStart = sv.arl(k, c.spec.HeadStart*h)
	}
	return fromZero, fromStart
}

// arl returns the ARL of the chart for limit h and N(mu,1) values.
func (c *calc) arl(h, mu float64) float64 {
	s := c.spec
	switch {
	case s.Side == chart.Up:
		_, l := c.oneSided(h, mu)
		return l
	case s.Side == chart.Down:
		_, l := c.oneSided(h, -mu)
		return l
	case s.Kind == chart.EWMA:
		k := c.ewmaKernel(mu, -h, h, false)
		if mu == 0 {
			k.lo, k.fold = 0, true
		}
		c.fold = k.fold
		return c.solverFor(h).arl(k, 0)
	}
	// Two-sided CUSUM from two one-sided ones.
	up0, upS := c.oneSided(h, mu)
	dn0, dnS := up0, upS
	if mu != 0 {
		dn0, dnS = c.oneSided(h, -mu)
	}
	return twoSided(up0, upS, dn0, dnS)
}

// twoSided combines one-sided CUSUM ARLs into the two-sided one,
//
//	L = (L+(s) L-(0) + L-(s) L+(0) - L+(0) L-(0)) / (L+(0) + L-(0)),
//
// which for no head start (s = 0) is 1/L = 1/L+ + 1/L- (Lucas & Crosier 1982,
// after van Dobben de Bruyn 1968). It is exact when the upper and lower sums
// can never be positive together, which holds for a zero start with h <= 2k
// (one sum can turn positive only by a value below -k, which takes the other
// down by more than 2k); otherwise it is the standard approximation, whose
// error is negligible for in-control ARLs (common practice). The head-start
// form is the one R spc's xcusum.arl(sided = "two") returns (checked in the
// fixture grid).
func twoSided(up0, upS, dn0, dnS float64) float64 {
	return (upS*dn0 + dnS*up0 - up0*dn0) / (up0 + dn0)
}

// ARL returns the average run length (expected number of exams up to and
// including the first signal) of the chart spec with limit h when the
// charted values are i.i.d. N(mu,1) at equal gaps of gap years. The gap
// matters only for EWMA (weight 1-(1-lambda)^(gap/unit) from the second exam
// on; the first exam has weight lambda, as in chart.Run); 0 means the spec's
// unit. The chart starts at its head start.
//
// Methods: one-sided CUSUM and one-sided (reflected) EWMA by the integral
// equation with an atom at 0 (Brook & Evans 1972, "An approach to the
// probability distribution of CUSUM run length", Biometrika 59); two-sided
// EWMA by Crowder (1987); two-sided CUSUM combined from the one-sided ARLs
// (see twoSided). All are solved by the Nyström method with Gauss-Legendre
// nodes.
func ARL(spec chart.Spec, h, mu, gap float64) (float64, error) {
	c, err := newCalc(spec, gap)
	if err != nil {
		return 0, err
	}
	if err := chart.ValidateLimit(h); err != nil {
		return 0, err
	}
	if math.IsNaN(mu) || math.IsInf(mu, 0) {
		return 0, &chart.SettingError{Setting: "shift", Value: mu, Want: "a finite number of SDs"}
	}
	return c.arl(h, mu), nil
}

// Bounds on the limit searched by Solve.
const (
	minH = 1e-3
	maxH = 60
)

// Solve returns the limit h at which the in-control ARL (i.i.d. N(0,1)
// values at equal gaps of gap years, 0 meaning the spec's unit) equals arl0
// exams, by Brent's root search on log ARL(h) (ARL is increasing in h). The
// result is accurate to about 1e-9 in h.
func Solve(spec chart.Spec, arl0, gap float64) (float64, error) {
	c, err := newCalc(spec, gap)
	if err != nil {
		return 0, err
	}
	if !(arl0 > 1) || math.IsInf(arl0, 1) {
		return 0, reachErrorf(ErrTargetTooShort, "the in-control average run length must be a number above 1 exam, got %v", arl0)
	}
	lt := math.Log(arl0)
	f := func(h float64) float64 { return math.Log(c.arl(h, 0)) - lt }
	fmin := f(minH)
	if fmin > 0 {
		return 0, reachErrorf(ErrTargetTooShort, "an average run length of %.4g exams is shorter than this chart can give (%.4g exams at the smallest limit)", arl0, math.Exp(fmin+lt))
	}
	// Initial bracket around a rough guess.
	h0, width := guess(spec, arl0)
	a, b := math.Max(minH, h0*(1-width)), math.Min(maxH, h0*(1+width))
	fa, fb := f(a), f(b)
	for fa > 0 {
		b, fb = a, fa
		a = math.Max(minH, a*0.5)
		fa = f(a)
	}
	for fb < 0 {
		if b >= maxH {
			return 0, reachErrorf(ErrTargetTooLong, "an average run length of %.4g exams needs a limit above %v; choose a shorter target", arl0, maxH)
		}
		a, fa = b, fb
		b = math.Min(maxH, b*1.6)
		fb = f(b)
	}
	return brent(f, a, b, fa, fb, 1e-10), nil
}

// guess is a starting limit: for CUSUM Siegmund's (1985) approximation
// ARL0 ~ (exp(2kb)-2kb-1)/(2k^2), b = h+1.166, inverted for b by a few
// Newton steps (good to about 1% near k = 0.5); for EWMA a fixed start.
// It also returns the relative half-width of the first bracket.
func guess(spec chart.Spec, arl0 float64) (float64, float64) {
	if spec.Kind != chart.CUSUM {
		return 2.5, 0.25
	}
	if spec.Side == chart.Both {
		arl0 *= 2
	}
	k := math.Max(spec.Allowance, 0.05)
	b := math.Log(2*k*k*arl0) / (2 * k)
	for range 6 {
		e := math.Exp(2 * k * b)
		g := (e-2*k*b-1)/(2*k*k) - arl0
		d := (2*k*e - 2*k) / (2 * k * k)
		if d <= 0 {
			break
		}
		b -= g / d
	}
	h := b - 1.166
	if !(h > minH) || math.IsNaN(h) {
		return 1, 0.25
	}
	return h, 0.04
}

// brent finds a root of f in [a,b] (f(a) <= 0 <= f(b)) by Brent's method
// (Brent 1973, "Algorithms for minimization without derivatives", ch. 4).
// Hand-written: gonum has no scalar root finder.
func brent(f func(float64) float64, a, b, fa, fb, tol float64) float64 {
	if fa == 0 {
		return a
	}
	if fb == 0 {
		return b
	}
	c, fc := a, fa
	d := b - a
	e := d
	for range 100 {
		if (fb > 0) == (fc > 0) {
			c, fc = a, fa
			d = b - a
			e = d
		}
		if math.Abs(fc) < math.Abs(fb) {
			a, b, c = b, c, b
			fa, fb, fc = fb, fc, fb
		}
		tol1 := 2*1e-16*math.Abs(b) + 0.5*tol
		xm := 0.5 * (c - b)
		if math.Abs(xm) <= tol1 || fb == 0 {
			return b
		}
		if math.Abs(e) >= tol1 && math.Abs(fa) > math.Abs(fb) {
			s := fb / fa
			var p, q float64
			if a == c {
				p = 2 * xm * s
				q = 1 - s
			} else {
				q = fa / fc
				r := fb / fc
				p = s * (2*xm*q*(q-r) - (b-a)*(r-1))
				q = (q - 1) * (r - 1) * (s - 1)
			}
			if p > 0 {
				q = -q
			}
			p = math.Abs(p)
			if 2*p < math.Min(3*xm*q-math.Abs(tol1*q), math.Abs(e*q)) {
				e = d
				d = p / q
			} else {
				d = xm
				e = d
			}
		} else {
			d = xm
			e = d
		}
		a, fa = b, fb
		if math.Abs(d) > tol1 {
			b += d
		} else {
			b += math.Copysign(tol1, xm)
		}
		fb = f(b)
	}
	return b
}
