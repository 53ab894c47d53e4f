package limit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/integrate/quad"

	"veer/functions/chart"
)

// MaxMEWMAMarkers is the largest dimension accepted by MEWMAARL and
// SolveMEWMA.
const MaxMEWMAMarkers = 50

// Node counts of the MEWMA integral equations: 1-D in control (geometric
// convergence: 24, 48 and 96 nodes agree to 1e-10 relative at lambda 0.1,
// p 2, h 8.63), and out of control a product rule with about 6 nodes per
// unit of sqrt(H) along the shift (at least 36) (the kernel there is a N(0,1) density on
// [-sqrt(H), sqrt(H)]) and half as many across it: 36 x 18 nodes give
// ARL1 = 10.1214274 at lambda 0.1, p 2, h 8.6336, delta 1, as 48 x 24 do
// to 1e-9, and R spc converges to 10.1214274 with r = 40 (its default
// r = 20 gives 10.132).
const (
	mewmaNodes     = 48
	mewmaMinNodesA = 36
	mewmaMaxNodesA = 64
	mewmaMaxTerm   = 100000
)

// ncChi2PDF returns the density at x > 0 of the noncentral chi-square
// distribution with k degrees of freedom and noncentrality nc >= 0, as the
// Poisson mixture of central chi-square densities
//
//	f(x) = sum_i e^(-nc/2) (nc/2)^i / i! * f_{k+2i}(x),
//
// summed outwards from its largest term (term ratio t_{i+1}/t_i =
// nc x / (4 (i+1) (k/2+i))) until the terms no longer matter. Hand-written:
// gonum has no noncentral chi-square distribution.
func ncChi2PDF(x, k, nc float64) float64 {
	if !(x > 0) {
		return 0
	}
	h := k / 2
	logCentral := func(i float64) float64 {
		lg, _ := math.Lgamma(h + i)
		return (h+i-1)*math.Log(x) - x/2 - (h+i)*math.Ln2 - lg
	}
	if nc == 0 {
		return math.Exp(logCentral(0))
	}
	q := nc * x / 4
	// Largest term: (i+1)(h+i) = q.
	b := h + 1
	i0 := math.Max(0, math.Floor((-b+math.Sqrt(b*b-4*(h-q)))/2))
	lf, _ := math.Lgamma(i0 + 1)
	logT0 := -nc/2 + i0*math.Log(nc/2) - lf + logCentral(i0)
	t0 := math.Exp(logT0)
	sum := t0
	t := t0
	for i := i0; i < i0+mewmaMaxTerm; i++ {
		t *= q / ((i + 1) * (h + i))
		sum += t
		if t < 1e-17*sum {
			break
		}
	}
	t = t0
	for i := i0; i > 0; i-- {
		t *= i * (h + i - 1) / q
		sum += t
		if t < 1e-17*sum {
			break
		}
	}
	return sum
}

func checkMEWMA(lambda float64, p int) error {
	if !(lambda > 0 && lambda <= 1) {
		return &chart.SettingError{Setting: "lambda", Value: lambda, Want: "more than 0 and at most 1"}
	}
	if p < 1 || p > MaxMEWMAMarkers {
		return &chart.SettingError{Setting: "markers", Value: p, Want: fmt.Sprintf("a number of markers from 1 to %d", MaxMEWMAMarkers)}
	}
	return nil
}

// MEWMAARL returns the average run length of the multivariate EWMA chart of
// Lowry, Woodall, Champ & Rigdon (1992, "A multivariate exponentially
// weighted moving average control chart", Technometrics 34),
//
//	E_n = (1-lambda) E_{n-1} + lambda X_n,  E_0 = 0,
//	T2_n = E_n' S^-1 E_n,  S = lambda/(2-lambda) Cov(X),
//
// signalling when T2_n > h, for i.i.d. p-variate normal X whose mean is
// delta covariance-standardised units (Mahalanobis distance) from the
// in-control mean. In control (delta = 0) y = |E/lambda|^2 (in
// decorrelated coordinates) is a Markov chain whose next value is
// noncentral chi-square with p degrees of freedom and noncentrality
// (1-lambda)^2 y, and the ARL solves the one-dimensional integral equation
// of Rigdon (1995a, "An integral equation for the in-control average run
// length of a multivariate exponentially weighted moving average control
// chart", J. Statist. Comput. Simul. 52)
//
//	L(y) = 1 + ∫_0^H L(y') f_p(y'; (1-lambda)^2 y) dy',  H = h/(lambda(2-lambda)),
//
// solved by the Nyström method with Gauss-Legendre nodes in s = sqrt(y')
// (which removes the density's singularity at 0 for p = 1). Out of control
// the state is the component a along the shift, normal given the past, and
// the squared length b across it, noncentral chi-square with p-1 degrees of
// freedom: the double integral equation of Rigdon (1995b, "A double-integral
// equation for the average run length of a multivariate exponentially
// weighted moving average control chart", Statistics & Probability Letters
// 24) over {a^2 + b <= H}, solved by a product Gauss-Legendre rule in theta
// and v with a = sqrt(H) sin(theta) and b = (H - a^2) v^2. For p = 1 the chart is the two-sided EWMA
// with limit sqrt(h) multiples of its asymptotic SD (ARL).
func MEWMAARL(lambda, h float64, p int, delta float64) (float64, error) {
	if err := checkMEWMA(lambda, p); err != nil {
		return 0, err
	}
	if err := chart.ValidateLimit(h); err != nil {
		return 0, err
	}
	if !(delta >= 0) || math.IsInf(delta, 1) {
		return 0, &chart.SettingError{Setting: "shift", Value: delta, Want: "a finite distance 0 or more"}
	}
	if p == 1 {
		return ARL(chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: lambda, Unit: 1}, math.Sqrt(h), delta, 1)
	}
	if delta == 0 {
		return newMEWMA1(mewmaNodes).arl(lambda, h, p), nil
	}
	H := h / (lambda * (2 - lambda))
	na := int(math.Ceil(6 * math.Sqrt(H)))
	na = max(mewmaMinNodesA, min(mewmaMaxNodesA, na))
	return mewmaARL2(lambda, h, p, delta, na, (na+1)/2), nil
}

// mewma1 holds the nodes and workspace of the in-control equation.
type mewma1 struct {
	n       int
	x, w    []float64
	s, y    []float64
	a, b    []float64
	ipiv    []int // pivots of the LU factorisation
	k0      []float64
	lastH   float64
	lastLam float64
}

func newMEWMA1(n int) *mewma1 {
	m := &mewma1{n: n, x: make([]float64, n), w: make([]float64, n), s: make([]float64, n), y: make([]float64, n),
		a: make([]float64, n*n), b: make([]float64, n), ipiv: make([]int, n), k0: make([]float64, n)}
	quad.Legendre{}.FixedLocations(m.x, m.w, -1, 1)
	return m
}

func (m *mewma1) arl(lambda, h float64, p int) float64 {
	n := m.n
	H := h / (lambda * (2 - lambda))
	r := math.Sqrt(H)
	k := float64(p)
	c2 := (1 - lambda) * (1 - lambda)
	for j := range n {
		m.s[j] = r * (m.x[j] + 1) / 2
		m.y[j] = m.s[j] * m.s[j]
	}
	// weight of node j in y: (r/2) w_j * 2 s_j (dy = 2 s ds)
	for i := range n {
		row := m.a[i*n : (i+1)*n]
		nc := c2 * m.y[i]
		for j := range n {
			row[j] = -r * m.w[j] * m.s[j] * ncChi2PDF(m.y[j], k, nc)
		}
		row[i] += 1
		m.b[i] = 1
	}
	solveLU(m.a, m.b, n, m.ipiv)
	l := 1.0
	for j := range n {
		l += r * m.w[j] * m.s[j] * ncChi2PDF(m.y[j], k, 0) * m.b[j]
	}
	return l
}

// mewmaARL2 solves the out-of-control double integral equation with na
// nodes along the shift and nb across it. The squared length across the
// shift is b = H sin^2(psi) and, given b, the component along it is
// a = sqrt(H-b) sin(theta): both maps are smooth where the region
// {a^2 + b <= H} narrows, so the product Gauss-Legendre rule in (theta, psi)
// converges quickly; and the noncentral chi-square part of the kernel
// depends only on the b nodes, so it is evaluated nb^2 times.
func mewmaARL2(lambda, h float64, p int, delta float64, na, nb int) float64 {
	H := h / (lambda * (2 - lambda))
	th, wth := make([]float64, na), make([]float64, na)
	ps, wps := make([]float64, nb), make([]float64, nb)
	quad.Legendre{}.FixedLocations(th, wth, -math.Pi/2, math.Pi/2)
	quad.Legendre{}.FixedLocations(ps, wps, 0, math.Pi/2)
	k := float64(p - 1)
	c := 1 - lambda
	m := na * nb
	bv := make([]float64, nb) // b at psi node j
	wb := make([]float64, nb) // db weight
	av := make([]float64, m)  // a at node (j, i)
	wt := make([]float64, m)  // full weight of node (j, i)
	for j := range nb {
		sn, cs := math.Sincos(ps[j])
		bv[j] = H * sn * sn
		wb[j] = wps[j] * 2 * H * sn * cs
		r := math.Sqrt(H) * cs
		for i := range na {
			q := j*na + i
			sa, ca := math.Sincos(th[i])
			av[q] = r * sa
			wt[q] = wb[j] * wth[i] * r * ca
		}
	}
	fb := make([]float64, nb*nb) // fb[j*nb+j'] = f_{p-1}(b_j'; c^2 b_j)
	for j := range nb {
		for jj := range nb {
			fb[j*nb+jj] = ncChi2PDF(bv[jj], k, c*c*bv[j])
		}
	}
	// kernel from state (a, b = bv[j]) to every node, into out; f0 is the
	// noncentral chi-square row to use (b's row, or the start's).
	kern := func(a float64, f0 []float64, out []float64) {
		mu := c*a + delta
		for jj := range nb {
			for i := range na {
				q := jj*na + i
				out[q] = wt[q] * normPDF(av[q]-mu) * f0[jj]
			}
		}
	}
	a := make([]float64, m*m)
	rhs := make([]float64, m)
	row := make([]float64, m)
	for j := range nb {
		for i := range na {
			q := j*na + i
			kern(av[q], fb[j*nb:(j+1)*nb], row)
			r := a[q*m : (q+1)*m]
			for t := range m {
				r[t] = -row[t]
			}
			r[q] += 1
			rhs[q] = 1
		}
	}
	x, ok := gmres(a, rhs, m, 1e-12)
	if !ok {
		solveLU(a, rhs, m, make([]int, m))
		x = rhs
	}
	f0 := make([]float64, nb)
	for jj := range nb {
		f0[jj] = ncChi2PDF(bv[jj], k, 0)
	}
	kern(0, f0, row)
	l := 1.0
	for q := range m {
		l += row[q] * x[q]
	}
	return l
}

// gmres solves the dense m x m system a x = b by the restarted generalised
// minimal residual method (Saad & Schultz 1986, "GMRES: a generalized
// minimal residual algorithm for solving nonsymmetric linear systems", SIAM
// J. Sci. Stat. Comput. 7) to a relative residual tol, starting from b. It
// reports false if it did not converge within its iteration cap. Used for
// the double integral equation, whose matrix is the identity minus a
// compact kernel, so that a few tens of iterations replace an O(m^3)
// elimination. Hand-written: gonum has no iterative solver.
func gmres(a, b []float64, m int, tol float64) ([]float64, bool) {
	const restart, maxCycles = 60, 20
	x := append([]float64(nil), b...)
	r := make([]float64, m)
	v := make([][]float64, restart+1)
	for i := range v {
		v[i] = make([]float64, m)
	}
	hm := make([][]float64, restart+1) // Hessenberg, hm[i][j]
	for i := range hm {
		hm[i] = make([]float64, restart)
	}
	cs, sn, g := make([]float64, restart), make([]float64, restart), make([]float64, restart+1)
	matvec := func(in, out []float64) {
		for i := range m {
			row := a[i*m : (i+1)*m]
			var s float64
			for j, v := range row {
				s += v * in[j]
			}
			out[i] = s
		}
	}
	norm := func(v []float64) float64 {
		var s float64
		for _, x := range v {
			s += x * x
		}
		return math.Sqrt(s)
	}
	bn := norm(b)
	for range maxCycles {
		matvec(x, r)
		for i := range m {
			r[i] = b[i] - r[i]
		}
		beta := norm(r)
		if beta <= tol*bn {
			return x, true
		}
		for i := range m {
			v[0][i] = r[i] / beta
		}
		clear(g)
		g[0] = beta
		k := 0
		for ; k < restart; k++ {
			w := v[k+1]
			matvec(v[k], w)
			for i := 0; i <= k; i++ { // modified Gram-Schmidt
				var d float64
				for t := range m {
					d += w[t] * v[i][t]
				}
				hm[i][k] = d
				for t := range m {
					w[t] -= d * v[i][t]
				}
			}
			hn := norm(w)
			hm[k+1][k] = hn
			if hn > 0 {
				for t := range m {
					w[t] /= hn
				}
			}
			for i := range k { // earlier rotations
				t := cs[i]*hm[i][k] + sn[i]*hm[i+1][k]
				hm[i+1][k] = -sn[i]*hm[i][k] + cs[i]*hm[i+1][k]
				hm[i][k] = t
			}
			d := math.Hypot(hm[k][k], hm[k+1][k])
			cs[k], sn[k] = hm[k][k]/d, hm[k+1][k]/d
			hm[k][k] = d
			hm[k+1][k] = 0
			g[k+1] = -sn[k] * g[k]
			g[k] = cs[k] * g[k]
			if math.Abs(g[k+1]) <= tol*bn || hn == 0 {
				k++
				break
			}
		}
		// Back-substitute the k x k triangle and update x.
		y := make([]float64, k)
		for i := k - 1; i >= 0; i-- {
			s := g[i]
			for j := i + 1; j < k; j++ {
				s -= hm[i][j] * y[j]
			}
			y[i] = s / hm[i][i]
		}
		for j := range k {
			for t := range m {
				x[t] += y[j] * v[j][t]
			}
		}
	}
	matvec(x, r)
	for i := range m {
		r[i] = b[i] - r[i]
	}
	return x, norm(r) <= 100*tol*bn
}

// SolveMEWMA returns the limit h at which the in-control ARL of the
// p-variate MEWMA chart with smoothing constant lambda (MEWMAARL) equals
// arl0 exams, by Brent's root search on log ARL(h).
func SolveMEWMA(lambda float64, p int, arl0 float64) (float64, error) {
	if err := checkMEWMA(lambda, p); err != nil {
		return 0, err
	}
	if !(arl0 > 1) || math.IsInf(arl0, 1) {
		return 0, reachErrorf(ErrTargetTooShort, "the in-control average run length must be a number above 1 exam, got %v", arl0)
	}
	if p == 1 {
		l, err := Solve(chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: lambda, Unit: 1}, arl0, 1)
		return l * l, err
	}
	m := newMEWMA1(mewmaNodes)
	lt := math.Log(arl0)
	f := func(h float64) float64 { return math.Log(m.arl(lambda, h, p)) - lt }
	const lo, hiMax = 1e-3, 2000.0
	flo := f(lo)
	if flo > 0 {
		return 0, reachErrorf(ErrTargetTooShort, "an average run length of %.4g exams is shorter than this chart can give", arl0)
	}
	// The in-control T2 is close to chi-square with p degrees of freedom,
	// so the limit is of the order of p plus a few SDs.
	a, fa := lo, flo
	b := float64(p) + 3*math.Sqrt(2*float64(p))
	fb := f(b)
	for fb < 0 {
		if b >= hiMax {
			return 0, reachErrorf(ErrTargetTooLong, "an average run length of %.4g exams needs a limit above %v; choose a shorter target", arl0, hiMax)
		}
		a, fa = b, fb
		b = math.Min(hiMax, b*1.5)
		fb = f(b)
	}
	return brent(f, a, b, fa, fb, 1e-10), nil
}
