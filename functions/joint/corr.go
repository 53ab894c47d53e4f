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
	for a := range p {
		for b := a; b < p; b++ {
			est := correlatePair(ws, a, b)
			c.Exams[a][b], c.Exams[b][a] = est.n, est.n
			c.Workers[a][b], c.Workers[b][a] = est.g, est.g
			if a == b {
				c.R[a][a] = 1
				continue
			}
			if est.n < MinPairExams || est.g < MinPairWorkers {
				return c, &PairError{A: markers[a], B: markers[b], Exams: est.n, Workers: est.g, MinExams: MinPairExams, MinWks: MinPairWorkers}
			}
			if !(est.sx > 0) {
				return c, &MarkerError{Marker: markers[a], Err: errNoVariation(what)}
			}
			if !(est.sy > 0) {
				return c, &MarkerError{Marker: markers[b], Err: errNoVariation(what)}
			}
			c.R[a][b], c.R[b][a] = est.r, est.r
			c.SE[a][b], c.SE[b][a] = est.se, est.se
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
}

// correlatePair estimates the correlation of markers a and b (a == b counts
// readings only).
func correlatePair(ws []Series, a, b int) pairEst {
	var e pairEst
	for _, w := range ws {
		had := false
		for j := range w.Time {
			x, y := w.Z[a][j], w.Z[b][j]
			if math.IsNaN(x) || math.IsNaN(y) {
				continue
			}
			e.n++
			e.sumX += x
			e.sumY += y
			had = true
		}
		if had {
			e.g++
		}
	}
	if a == b || e.n < 2 {
		return e
	}
	n := float64(e.n)
	e.mx, e.my = e.sumX/n, e.sumY/n
	var sxx, syy, sxy float64
	for _, w := range ws {
		for j := range w.Time {
			x, y := w.Z[a][j], w.Z[b][j]
			if math.IsNaN(x) || math.IsNaN(y) {
				continue
			}
			dx, dy := x-e.mx, y-e.my
			sxx += dx * dx
			syy += dy * dy
			sxy += dx * dy
		}
	}
	e.sx, e.sy = math.Sqrt(sxx/n), math.Sqrt(syy/n)
	if !(e.sx > 0) || !(e.sy > 0) {
		return e
	}
	e.r = sxy / math.Sqrt(sxx*syy)
	var meat float64
	for _, w := range ws {
		var s float64
		for j := range w.Time {
			x, y := w.Z[a][j], w.Z[b][j]
			if math.IsNaN(x) || math.IsNaN(y) {
				continue
			}
			xs, ys := (x-e.mx)/e.sx, (y-e.my)/e.sy
			s += xs*ys - e.r*(xs*xs+ys*ys)/2
		}
		meat += s * s
	}
	if e.g > 1 {
		g := float64(e.g)
		e.se = math.Sqrt(g / (g - 1) * meat / (n * n))
	}
	return e
}
