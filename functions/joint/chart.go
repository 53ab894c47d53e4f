package joint

import (
	"fmt"
	"math"
	"slices"

	"veer/functions/chart"
)

// Chart follows one worker's chart over p markers, exam by exam. Create it
// with NewChart; Reset starts a new worker. It is not safe for concurrent
// use.
//
// Each exam brings a vector x of the markers' charted values (Kalman
// innovations, or standardised readings), NaN for a marker not measured at
// that exam; R is the correlation of x at the same exam for a healthy
// worker, which the chart removes.
//
// EWMA kinds (EWMA, MEWMA) keep a vector E with one weight per marker, from
// the years since that marker's own previous measurement,
//
//	w_m = 1 - (1-lambda)^(d_m/unit)  (lambda at its first measurement; 0 when not measured),
//	E_m = (1 - w_m) E_m + w_m x_m,
//
// so each component is the single-marker EWMA of its marker's own sequence,
// and track the covariance V that E would have for a healthy worker had the
// chart been running for ever,
//
//	V = (I - W) V (I - W) + W R W,  V_0 = lambda/(2-lambda) R,  W = diag(w).
//
// The statistic is T2 = E' V^-1 E. If E was N(0, V) before an exam, it is
// N(0, V) after it whichever markers were measured and at whatever gaps, so
// T2 is chi-square with p degrees of freedom at every exam once the start
// is forgotten: its law does not depend on how many markers an exam
// measured (TestMissingMarkers). With every marker measured at gaps of one
// unit, W = lambda I and V = V_0 at every exam, and MEWMA is the chart of
// Lowry, Woodall, Champ & Rigdon (1992, "A multivariate exponentially
// weighted moving average control chart", Technometrics 34) exactly, whose
// limits package limit computes (SolveMEWMA).
//
// CUSUM kinds (CUSUM, MCUSUM) follow Crosier (1988, "Multivariate
// generalizations of cumulative sum quality-control schemes",
// Technometrics 30),
//
//	C = |S + x|_R,  S = 0 if C <= k', else (S + x)(1 - k'/C),  Y = |S|_R,
//
// with |a|_R = sqrt(a' R^-1 a), ignoring gaps as the single-marker CUSUM
// does. A marker not measured at an exam enters x as its conditional mean
// given the markers M measured there, x = R[:,M] R[M,M]^-1 x_M, which adds
// nothing in the direction only it would have shown (|x|_R^2 is then
// chi-square with |M| degrees of freedom), and the allowance is charged in
// proportion, k' = k |M|/p: an exam measuring |M| of p markers counts as
// |M|/p of an exam, so the statistic's in-control drift and spread per
// exam shrink together and its law after an exam does not depend on how
// many markers it measured (TestMissingMarkers); with complete exams
// k' = k.
//
// CUSUM and EWMA then project their vector (S or E) onto the cone of
// harmful shifts {mu: mu_m >= 0 for side up, mu_m <= 0 for side down,
// free for both} in the metric R^-1 or V^-1 (a small quadratic programme,
// solved by an active-set method), before the statistic is taken: the
// chart can only build up evidence of harmful drifts, as the one-sided
// multivariate charts of Testik & Runger (2006, "Multivariate one-sided
// control charts", IIE Transactions 38), with a reflection at the cone's
// boundary like the single-marker one-sided charts' reflection at 0. For
// one marker with side up or down, CUSUM is the single-marker one-sided
// CUSUM (Page 1954) and sqrt(T2) of EWMA the single-marker one-sided EWMA
// (Crowder & Hamilton 1992) at unit gaps.
//
// Any runs each marker's own CUSUM (Page 1954) with allowance k on its own
// values, upward, downward or both per side, skipping exams where the
// marker was not measured, and its statistic is the largest of them.
type Chart struct {
	spec   Spec
	p      int
	decay  float64   // log(1-lambda)/unit: the weight after d years is 1 - exp(d decay)
	r      []float64 // correlation
	rL     []float64 // Cholesky factor of r
	v0     []float64
	signs  []float64 // +1 up, -1 down, 0 both
	signed bool      // some side is not both

	e, v        []float64
	since       []float64
	seen        []bool
	first       bool
	stat        float64
	up, dn      []float64
	w, vl, work []float64
	mu, y, buf  []float64
	idx, act    []int
	comp        [][]float64 // MCUSUM completion matrix per mask of measured markers
	fbuf        []float64
	contrib     []float64
}

// NewChart returns a chart for spec over the markers whose correlation at
// the same exam is corr (p x p, symmetric, unit diagonal, positive
// definite).
func NewChart(spec Spec, corr [][]float64) (*Chart, error) {
	p := len(corr)
	if err := spec.Validate(p); err != nil {
		return nil, err
	}
	r, err := flatten(corr)
	if err != nil {
		return nil, err
	}
	c := &Chart{spec: spec, p: p, r: r}
	if ewmaKind(spec.Kind) {
		c.decay = math.Log1p(-spec.Lambda) / spec.ewma().UnitOrDefault()
	}
	c.rL = append([]float64(nil), r...)
	if !cholesky(c.rL, p) {
		return nil, fmt.Errorf("the correlation matrix of the markers is not positive definite: %w", ErrNotPositiveDefinite)
	}
	c.v0 = make([]float64, p*p)
	scale := spec.Lambda / (2 - spec.Lambda)
	for i := range r {
		c.v0[i] = scale * r[i]
	}
	c.signs = make([]float64, p)
	for i, s := range spec.Sides {
		switch s {
		case chart.Up:
			c.signs[i] = 1
		case chart.Down:
			c.signs[i] = -1
		}
		if c.signs[i] != 0 {
			c.signed = true
		}
	}
	c.e, c.v = make([]float64, p), make([]float64, p*p)
	c.since, c.seen = make([]float64, p), make([]bool, p)
	c.up, c.dn = make([]float64, p), make([]float64, p)
	c.w, c.vl, c.work = make([]float64, p), make([]float64, p*p), make([]float64, p)
	c.mu, c.y, c.buf = make([]float64, p), make([]float64, p), make([]float64, p*p)
	c.idx, c.act = make([]int, 0, p), make([]int, 0, p)
	c.fbuf, c.contrib = make([]float64, p), make([]float64, p)
	if !ewmaKind(spec.Kind) && spec.Kind != Any {
		c.comp = make([][]float64, 1<<p)
	}
	c.Reset()
	return c, nil
}

// flatten checks that m is a correlation matrix and returns it row major.
func flatten(m [][]float64) ([]float64, error) {
	p := len(m)
	r := make([]float64, p*p)
	for i, row := range m {
		if len(row) != p {
			return nil, fmt.Errorf("the correlation matrix must be square: row %d has %d entries for %d markers", i+1, len(row), p)
		}
		for j, x := range row {
			if !(x >= -1 && x <= 1) || (i == j && x != 1) {
				return nil, fmt.Errorf("entry (%d, %d) of the correlation matrix is %v: correlations lie in [-1, 1], with 1 on the diagonal", i+1, j+1, x)
			}
			r[i*p+j] = x
		}
	}
	for i := range p {
		for j := range i {
			if r[i*p+j] != r[j*p+i] {
				return nil, fmt.Errorf("the correlation matrix is not symmetric at (%d, %d)", i+1, j+1)
			}
		}
	}
	return r, nil
}

// Markers returns p.
func (c *Chart) Markers() int { return c.p }

// Reset starts a new worker.
func (c *Chart) Reset() {
	clear(c.e)
	copy(c.v, c.v0)
	clear(c.since)
	clear(c.seen)
	clear(c.up)
	clear(c.dn)
	c.first, c.stat = true, 0
}

// Stat returns the statistic after the last exam (0 before the first).
func (c *Chart) Stat() float64 { return c.stat }

// Next takes the next exam, gap years after the worker's previous exam
// (ignored for the first), with charted values x (length p, NaN for a
// marker not measured), and returns the statistic. An exam with no marker
// measured leaves the statistic as it was (time still passes).
func (c *Chart) Next(gap float64, x []float64) float64 {
	if len(x) != c.p {
		panic(fmt.Sprintf("joint.Chart.Next: %d values for %d markers", len(x), c.p))
	}
	if !c.first {
		for m := range c.since {
			c.since[m] += gap
		}
	}
	c.first = false
	measured := false
	for _, v := range x {
		if !math.IsNaN(v) {
			measured = true
			break
		}
	}
	if !measured {
		return c.stat
	}
	switch c.spec.Kind {
	case EWMA, MEWMA:
		c.stat = c.nextEWMA(x)
	case CUSUM, MCUSUM:
		c.stat = c.nextCUSUM(x)
	case Any:
		c.stat = c.nextAny(x)
	}
	return c.stat
}

func (c *Chart) nextEWMA(x []float64) float64 {
	p := c.p
	for m, v := range x {
		if math.IsNaN(v) {
			c.w[m] = 0
			continue
		}
		if c.seen[m] && c.since[m] > 0 && c.spec.Lambda < 1 {
			c.w[m] = -math.Expm1(c.since[m] * c.decay) // chart.Spec.Weight
		} else {
			c.w[m] = c.spec.Lambda
		}
		c.since[m], c.seen[m] = 0, true
		c.e[m] = (1-c.w[m])*c.e[m] + c.w[m]*v
	}
	for i := range p {
		for j := range p {
			c.v[i*p+j] = (1-c.w[i])*(1-c.w[j])*c.v[i*p+j] + c.w[i]*c.w[j]*c.r[i*p+j]
		}
	}
	copy(c.vl, c.v)
	if !cholesky(c.vl, p) {
		// Only when lambda = 1 leaves a marker never measured with a
		// degenerate row; keep the last statistic.
		return c.stat
	}
	if c.spec.Kind == EWMA && c.signed {
		c.project()
	}
	return cholQuad(c.vl, p, c.e, c.work)
}

// feasible reports whether a satisfies every side.
func (c *Chart) feasible(a []float64) bool {
	for m, s := range c.signs {
		if s*a[m] < 0 {
			return false
		}
	}
	return true
}

// project replaces E by its projection onto the cone of harmful shifts in
// the metric V^-1:
//
//	minimise (mu - E)' V^-1 (mu - E)  subject to  s_m mu_m >= 0.
//
// With the active set A (mu_A = 0) the minimiser over the rest F is the
// regression mu_F = E_F - V_FA V_AA^-1 E_A, and the Karush-Kuhn-Tucker
// conditions are s_m mu_m >= 0 on F and s_m y_m <= 0 on A for
// y = V_AA^-1 E_A (the gradient V^-1 (mu - E) is (0, -y)). A primal
// active-set loop adds the most violated side and drops the most violated
// multiplier; should it not settle within its cap, every active set is
// tried in order of size (at most 2^MaxMarkers).
func (c *Chart) project() {
	if c.feasible(c.e) {
		return
	}
	act := c.act[:0]
	for m, s := range c.signs {
		if s*c.e[m] < 0 {
			act = append(act, m)
		}
	}
	for range 4*c.p + 4 {
		c.solveActive(act)
		worst, wm := 0.0, -1
		for m, s := range c.signs {
			if s != 0 && !slices.Contains(act, m) && s*c.mu[m] < worst {
				worst, wm = s*c.mu[m], m
			}
		}
		if wm >= 0 {
			act = append(act, wm)
			continue
		}
		worst, wi := 0.0, -1
		for i, m := range act {
			if d := c.signs[m] * c.y[i]; d > worst {
				worst, wi = d, i
			}
		}
		if wi >= 0 {
			act = append(act[:wi], act[wi+1:]...)
			continue
		}
		copy(c.e, c.mu)
		c.act = act
		return
	}
	c.act = act
	c.enumerate()
}

// enumerate tries every active set of constrained markers in order of size
// and keeps the first that satisfies the optimality conditions.
func (c *Chart) enumerate() {
	var cons []int
	for m, s := range c.signs {
		if s != 0 {
			cons = append(cons, m)
		}
	}
	n := len(cons)
	for size := 0; size <= n; size++ {
		for mask := 0; mask < 1<<n; mask++ {
			if popcount(mask) != size {
				continue
			}
			act := c.act[:0]
			for b, m := range cons {
				if mask&(1<<b) != 0 {
					act = append(act, m)
				}
			}
			c.solveActive(act)
			ok := c.feasible(c.mu)
			for i, m := range act {
				if c.signs[m]*c.y[i] > 1e-12 {
					ok = false
				}
			}
			if ok {
				copy(c.e, c.mu)
				return
			}
		}
	}
	// Unreachable for a positive definite V (the problem has a unique
	// solution); fall back to the origin, which is always feasible.
	clear(c.e)
}

// solveActive sets mu to the minimiser with mu_A = 0 and y = V_AA^-1 E_A.
func (c *Chart) solveActive(act []int) {
	p := c.p
	copy(c.mu, c.e)
	k := len(act)
	if k == 0 {
		return
	}
	vaa := sub(c.metric(), p, act, c.buf)
	if !cholesky(vaa, k) {
		return
	}
	y := c.y[:k]
	for i, m := range act {
		y[i] = c.e[m]
	}
	cholSolve(vaa, k, y)
	for f := range p {
		if slices.Contains(act, f) {
			c.mu[f] = 0
			continue
		}
		s := c.e[f]
		for i, m := range act {
			s -= c.metric()[f*p+m] * y[i]
		}
		c.mu[f] = s
	}
}

// metric is the covariance whose inverse measures distances for the
// projection: V for the EWMA kinds, R for the CUSUM kinds.
func (c *Chart) metric() []float64 {
	if !ewmaKind(c.spec.Kind) {
		return c.r
	}
	return c.v
}

func popcount(x int) int {
	n := 0
	for ; x != 0; x &= x - 1 {
		n++
	}
	return n
}

// completion returns the p x k matrix R[:,M] R[M,M]^-1 for the markers
// measured at this exam (mask), cached per mask.
func (c *Chart) completion(mask int, meas []int) []float64 {
	if m := c.comp[mask]; m != nil {
		return m
	}
	p, k := c.p, len(meas)
	rmm := sub(c.r, p, meas, make([]float64, k*k))
	cholesky(rmm, k) // a principal submatrix of a positive definite matrix
	out := make([]float64, p*k)
	row := make([]float64, k)
	for i := range p {
		for a, m := range meas {
			row[a] = c.r[i*p+m]
		}
		cholSolve(rmm, k, row) // R[M,M]^-1 R[M,i] = (R[i,M] R[M,M]^-1)'
		copy(out[i*k:(i+1)*k], row)
	}
	c.comp[mask] = out
	return out
}

func (c *Chart) nextCUSUM(x []float64) float64 {
	p := c.p
	meas := c.idx[:0]
	mask := 0
	for m, v := range x {
		if !math.IsNaN(v) {
			meas = append(meas, m)
			mask |= 1 << m
		}
	}
	xs := c.fbuf
	if len(meas) == p {
		copy(xs, x)
	} else {
		cm := c.completion(mask, meas)
		k := len(meas)
		for i := range p {
			var s float64
			for a, m := range meas {
				s += cm[i*k+a] * x[m]
			}
			xs[i] = s
		}
	}
	for m := range p {
		c.e[m] += xs[m]
	}
	cn := math.Sqrt(cholQuad(c.rL, p, c.e, c.work))
	k := c.spec.Allowance * float64(len(meas)) / float64(p)
	if cn <= k {
		clear(c.e)
		return 0
	}
	f := 1 - k/cn
	for m := range p {
		c.e[m] *= f
	}
	if c.spec.Kind == CUSUM && c.signed {
		c.project()
		return math.Sqrt(cholQuad(c.rL, p, c.e, c.work))
	}
	return cn - k
}

func (c *Chart) nextAny(x []float64) float64 {
	k := c.spec.Allowance
	var g float64
	for m, v := range x {
		if !math.IsNaN(v) {
			switch c.signs[m] {
			case 1:
				c.up[m] = math.Max(0, c.up[m]+v-k)
			case -1:
				c.dn[m] = math.Max(0, c.dn[m]-v-k)
			default:
				c.up[m] = math.Max(0, c.up[m]+v-k)
				c.dn[m] = math.Max(0, c.dn[m]-v-k)
			}
		}
		g = math.Max(g, math.Max(c.up[m], c.dn[m]))
	}
	return g
}

// Contributions writes into out (length p) how much each marker adds to the
// statistic now: for the EWMA kinds and MCUSUM the drop in the quadratic
// form when the marker is left out (Runger, Alt & Montgomery 1996,
// "Contributors to a multivariate statistical process control chart
// signal", Communications in Statistics — Theory and Methods 25),
//
//	d_m = T2 - T2_(-m) = (Q a)_m^2 / Q_mm,  Q = V^-1 (MCUSUM: R^-1), a = E (S),
//
// and for Any each marker's own CUSUM. It returns out.
func (c *Chart) Contributions(out []float64) []float64 {
	p := c.p
	out = out[:p]
	switch c.spec.Kind {
	case Any:
		for m := range p {
			out[m] = math.Max(c.up[m], c.dn[m])
		}
		return out
	case CUSUM, MCUSUM:
		copy(c.vl, c.rL)
	default:
		copy(c.vl, c.v)
		if !cholesky(c.vl, p) {
			clear(out)
			return out
		}
	}
	qa := c.work
	copy(qa, c.e)
	cholSolve(c.vl, p, qa)
	col := c.mu
	for m := range p {
		clear(col)
		col[m] = 1
		cholSolve(c.vl, p, col)
		out[m] = qa[m] * qa[m] / col[m]
	}
	return out
}

// Top returns the marker that contributes most to the statistic now (see
// Contributions), or -1 when the statistic is 0.
func (c *Chart) Top() int {
	if !(c.stat > 0) {
		return -1
	}
	d := c.Contributions(c.contrib)
	best := 0
	for m := range d {
		if d[m] > d[best] {
			best = m
		}
	}
	return best
}

// Point is the chart after one exam: the statistic, whether it crossed the
// limit, and at a signal the marker contributing most (otherwise -1).
type Point struct {
	Stat   float64
	Signal bool
	Top    int
}

// Run charts one worker's time-ordered exams against limit h and appends
// one Point per exam to out. gaps[j] is the years since exam j-1 (gaps[0]
// unused); x holds the exams' charted values exam by exam (exam j's
// marker m at x[j*p+m], NaN when not measured). With spec.Restart the
// chart starts afresh after a signal. Run panics if the lengths do not
// match (a programmer error).
func (c *Chart) Run(h float64, gaps, x []float64, out []Point) []Point {
	if len(x) != len(gaps)*c.p {
		panic(fmt.Sprintf("joint.Chart.Run: %d values for %d exams of %d markers", len(x), len(gaps), c.p))
	}
	c.Reset()
	for j := range gaps {
		s := c.Next(gaps[j], x[j*c.p:(j+1)*c.p])
		pt := Point{Stat: s, Signal: s > h, Top: -1}
		if pt.Signal {
			pt.Top = c.Top()
		}
		out = append(out, pt)
		if pt.Signal && c.spec.Restart {
			c.Reset()
			c.first = false
		}
	}
	return out
}
