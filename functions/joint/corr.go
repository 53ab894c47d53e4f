package joint

import (
	"fmt"
	"math"
)

func errNoVariation(what string) error {
	return fmt.Errorf("its %s do not vary in the reference, so its correlation with other markers cannot be estimated", what)
}

// Least numbers of reference exams and workers with both markers of a pair
// measured for their correlation to be estimated.
const (
	MinPairExams   = 20
	MinPairWorkers = 5
)

// Correlation is the correlation matrix of p markers at the same exam,
// estimated from reference workers, with its precision.
type Correlation struct {
	// R is the p x p correlation matrix (1 on the diagonal).
	R [][]float64 `json:"r"`
	// SE holds worker-level sandwich standard errors of R (0 on the
	// diagonal).
	SE [][]float64 `json:"se"`
	// Exams and Workers count, per pair, the exams with both markers
	// measured and the workers they come from (the diagonal: the marker's
	// own readings).
	Exams   [][]int `json:"exams"`
	Workers [][]int `json:"workers"`
}

// Correlate estimates the correlation of the markers' values at the same
// exam from reference workers' series (values NaN where a marker was not
// measured), pair by pair over the exams where both were measured
// (pairwise-complete Pearson correlation, as pandas' DataFrame.corr):
//
//	r = sum (x - xbar)(y - ybar) / sqrt(sum (x - xbar)^2 sum (y - ybar)^2).
//
// Its standard error is the worker-level sandwich (cluster-robust)
// estimate from the influence function of r (Devlin, Gnanadesikan &
// Kettenring 1975, "Robust estimation and outlier detection with
// correlation coefficients", Biometrika 62),
//
//	psi_i = x~_i y~_i - r (x~_i^2 + y~_i^2)/2,  x~ = (x - xbar)/s_x (s_x^2 = sum (x - xbar)^2 / N),
//	SE(r)^2 = G/(G-1) sum over workers g of (sum_{i in g} psi_i)^2 / N^2,
//
// so exams of one worker may be dependent (G workers, N exams). what names
// the values in messages ("standardised readings", "innovations"). A pair
// measured together at fewer than MinPairExams exams or MinPairWorkers
// workers is a *PairError; a matrix that is not positive definite is a
// *CorrelationError naming the marker at which it fails.
func Correlate(markers []string, what string, ws []Series) (Correlation, error) {
	p := len(markers)
	c := Correlation{R: square[float64](p), SE: square[float64](p), Exams: square[int](p), Workers: square[int](p)}
	est := correlatePairs(ws, p)
	for a := range p {
		for b := a; b < p; b++ {
			e := est[a*p+b]
			c.Exams[a][b], c.Exams[b][a] = e.n, e.n
			c.Workers[a][b], c.Workers[b][a] = e.g, e.g
			if a == b {
				c.R[a][a] = 1
				continue
			}
			if e.n < MinPairExams || e.g < MinPairWorkers {
				return c, &PairError{A: markers[a], B: markers[b], Exams: e.n, Workers: e.g, MinExams: MinPairExams, MinWks: MinPairWorkers}
			}
			if !(e.sx > 0) {
				return c, &MarkerError{Marker: markers[a], Err: errNoVariation(what)}
			}
			if !(e.sy > 0) {
				return c, &MarkerError{Marker: markers[b], Err: errNoVariation(what)}
			}
			c.R[a][b], c.R[b][a] = e.r, e.r
			c.SE[a][b], c.SE[b][a] = e.se, e.se
		}
	}
	if err := CheckCorrelation(markers, what, c.R); err != nil {
		return c, err
	}
	return c, nil
}

// CheckCorrelation reports a *CorrelationError if r is not positive
// definite, naming the marker at which the Cholesky factorisation fails
// and the earlier marker most correlated with it.
func CheckCorrelation(markers []string, what string, r [][]float64) error {
	p := len(r)
	flat := make([]float64, p*p)
	for i := range p {
		copy(flat[i*p:], r[i])
	}
	j := choleskyAt(flat, p, 1e-10)
	if j < 0 {
		return nil
	}
	e := &CorrelationError{What: what, Marker: markers[j]}
	for i := range j {
		if e.Partner == "" || math.Abs(r[i][j]) > math.Abs(e.R) {
			e.Partner, e.R = markers[i], r[i][j]
		}
	}
	return e
}

func square[T any](p int) [][]T {
	m := make([][]T, p)
	for i := range m {
		m[i] = make([]T, p)
	}
	return m
}

type pairEst struct {
	n, g       int
	r, se      float64
	sx, sy     float64
	mx, my     float64
	sumX, sumY float64
	sxx, syy   float64
	sxy, meat  float64
}

// correlatePairs estimates the correlation of every pair of markers
// (a <= b, at a*p+b; a == b counts readings only) in three passes over the
// data: sums, centred second moments, and the workers' influence sums.
func correlatePairs(ws []Series, p int) []pairEst {
	est := make([]pairEst, p*p)
	had := make([]bool, p*p)
	for _, w := range ws {
		clear(had)
		for j := range w.Time {
			for a := range p {
				x := w.Z[a][j]
				if math.IsNaN(x) {
					continue
				}
				for b := a; b < p; b++ {
					y := w.Z[b][j]
					if math.IsNaN(y) {
						continue
					}
					e := &est[a*p+b]
					e.n++
					e.sumX += x
					e.sumY += y
					had[a*p+b] = true
				}
			}
		}
		for i, h := range had {
			if h {
				est[i].g++
			}
		}
	}
	for i := range est {
		if e := &est[i]; e.n > 0 {
			e.mx, e.my = e.sumX/float64(e.n), e.sumY/float64(e.n)
		}
	}
	for _, w := range ws {
		for j := range w.Time {
			for a := range p {
				x := w.Z[a][j]
				if math.IsNaN(x) {
					continue
				}
				for b := a + 1; b < p; b++ {
					y := w.Z[b][j]
					if math.IsNaN(y) {
						continue
					}
					e := &est[a*p+b]
					dx, dy := x-e.mx, y-e.my
					e.sxx += dx * dx
					e.syy += dy * dy
					e.sxy += dx * dy
				}
			}
		}
	}
	for i := range est {
		e := &est[i]
		if i/p == i%p || e.n < 2 {
			continue
		}
		n := float64(e.n)
		e.sx, e.sy = math.Sqrt(e.sxx/n), math.Sqrt(e.syy/n)
		if e.sx > 0 && e.sy > 0 {
			e.r = e.sxy / math.Sqrt(e.sxx*e.syy)
		}
	}
	psi := make([]float64, p*p)
	for _, w := range ws {
		clear(psi)
		for j := range w.Time {
			for a := range p {
				x := w.Z[a][j]
				if math.IsNaN(x) {
					continue
				}
				for b := a + 1; b < p; b++ {
					y := w.Z[b][j]
					e := &est[a*p+b]
					if math.IsNaN(y) || !(e.sx > 0 && e.sy > 0) {
						continue
					}
					xs, ys := (x-e.mx)/e.sx, (y-e.my)/e.sy
					psi[a*p+b] += xs*ys - e.r*(xs*xs+ys*ys)/2
				}
			}
		}
		for i, v := range psi {
			est[i].meat += v * v
		}
	}
	for i := range est {
		if e := &est[i]; e.g > 1 && e.n > 0 {
			g, n := float64(e.g), float64(e.n)
			e.se = math.Sqrt(g / (g - 1) * e.meat / (n * n))
		}
	}
	return est
}
