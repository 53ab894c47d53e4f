package smooth

import (
	"errors"
	"fmt"
	"math"
)

// MaxGridPoints is the largest grid Bin and LocalLinear accept. It keeps
// the memory of a fit bounded (a few megabytes) whatever the caller asks.
const MaxGridPoints = 1 << 20

// Grid is N equally spaced points from Lo to Hi inclusive.
type Grid struct {
	Lo, Hi float64
	N      int
}

// NewGrid returns the grid of n points from lo to hi, or an error saying
// which argument is unusable.
func NewGrid(lo, hi float64, n int) (Grid, error) {
	g := Grid{Lo: lo, Hi: hi, N: n}
	return g, g.check()
}

func (g Grid) check() error {
	switch {
	case math.IsNaN(g.Lo) || math.IsInf(g.Lo, 0) || math.IsNaN(g.Hi) || math.IsInf(g.Hi, 0):
		return fmt.Errorf("grid ends must be finite numbers, got %g and %g", g.Lo, g.Hi)
	case !(g.Lo < g.Hi):
		return fmt.Errorf("grid start %g must be below grid end %g", g.Lo, g.Hi)
	case g.N < 2:
		return fmt.Errorf("a grid needs at least 2 points, got %d", g.N)
	case g.N > MaxGridPoints:
		return fmt.Errorf("a grid may have at most %d points, got %d", MaxGridPoints, g.N)
	}
	return nil
}

// Step returns the distance between neighbouring grid points.
func (g Grid) Step() float64 { return (g.Hi - g.Lo) / float64(g.N-1) }

// Point returns grid point i (0-based); the last point is exactly Hi.
func (g Grid) Point(i int) float64 {
	if i == g.N-1 {
		return g.Hi
	}
	return g.Lo + float64(i)*g.Step()
}

// Points returns all grid points.
func (g Grid) Points() []float64 {
	p := make([]float64, g.N)
	for i := range p {
		p[i] = g.Point(i)
	}
	return p
}

// locate returns the grid cell k (0 <= k <= N-2) holding x and the position
// r in [0,1] of x inside it. x must lie in [Lo, Hi] (up to rounding).
func (g Grid) locate(x float64) (int, float64) {
	pos := (x - g.Lo) / g.Step()
	k := int(math.Floor(pos))
	if k < 0 {
		return 0, 0
	}
	if k >= g.N-1 {
		return g.N - 2, 1
	}
	return k, pos - float64(k)
}

// Binned holds data linearly binned onto a grid: Weight[k] = Σ_i w_i Λ_k(x_i)
// and Sum[k] = Σ_i w_i y_i Λ_k(x_i), where Λ_k is the hat function that is 1
// at grid point k and falls linearly to 0 at its neighbours (Fan & Marron
// 1994).
type Binned struct {
	Grid   Grid
	Weight []float64
	Sum    []float64
}

// Bin linearly bins the points (x[i], y[i]) with weights w[i] onto g. A nil
// w means every weight is 1. Every x must lie inside [g.Lo, g.Hi]; weights
// must be finite and non-negative; the error names the first bad index
// (0-based).
func Bin(x, y, w []float64, g Grid) (*Binned, error) {
	if err := g.check(); err != nil {
		return nil, err
	}
	if len(y) != len(x) {
		return nil, fmt.Errorf("x has %d values but y has %d", len(x), len(y))
	}
	if w != nil && len(w) != len(x) {
		return nil, fmt.Errorf("x has %d values but the weights have %d", len(x), len(w))
	}
	b := &Binned{Grid: g, Weight: make([]float64, g.N), Sum: make([]float64, g.N)}
	step := g.Step()
	// Points a hair beyond the ends (rounding in the caller's range) are
	// accepted; anything further out is an error.
	slack := 1e-9 * step
	for i, xi := range x {
		yi := y[i]
		if math.IsNaN(xi) || math.IsInf(xi, 0) {
			return nil, fmt.Errorf("x[%d] is %g; expected a finite number", i, xi)
		}
		if math.IsNaN(yi) || math.IsInf(yi, 0) {
			return nil, fmt.Errorf("y[%d] is %g; expected a finite number", i, yi)
		}
		if xi < g.Lo-slack || xi > g.Hi+slack {
			return nil, fmt.Errorf("x[%d] = %g lies outside the grid %g to %g", i, xi, g.Lo, g.Hi)
		}
		wi := 1.0
		if w != nil {
			wi = w[i]
			if !(wi >= 0) || math.IsInf(wi, 0) {
				return nil, fmt.Errorf("weight[%d] is %g; expected a finite number >= 0", i, wi)
			}
		}
		k, r := g.locate(xi)
		a, c := wi*(1-r), wi*r
		b.Weight[k] += a
		b.Weight[k+1] += c
		b.Sum[k] += a * yi
		b.Sum[k+1] += c * yi
	}
	return b, nil
}

// Coarsen re-bins b onto the grid with m times the step, starting at the
// same point (the last coarse point may lie beyond b.Grid.Hi). Because the
// coarse hat functions are piecewise linear between fine grid points, the
// result equals binning the original points directly onto the coarse grid.
func (b *Binned) Coarsen(m int) *Binned {
	if m < 1 {
		panic("smooth: Coarsen factor must be >= 1")
	}
	if m == 1 {
		return b
	}
	n := b.Grid.N
	nc := (n-1+m-1)/m + 1
	if nc < 2 {
		nc = 2
	}
	step := b.Grid.Step() * float64(m)
	c := &Binned{
		Grid:   Grid{Lo: b.Grid.Lo, Hi: b.Grid.Lo + float64(nc-1)*step, N: nc},
		Weight: make([]float64, nc),
		Sum:    make([]float64, nc),
	}
	inv := 1 / float64(m)
	for k := 0; k < n; k++ {
		wk, sk := b.Weight[k], b.Sum[k]
		if wk == 0 && sk == 0 {
			continue
		}
		j, rem := k/m, k%m
		if rem == 0 {
			c.Weight[j] += wk
			c.Sum[j] += sk
			continue
		}
		r := float64(rem) * inv
		c.Weight[j] += (1 - r) * wk
		c.Weight[j+1] += r * wk
		c.Sum[j] += (1 - r) * sk
		c.Sum[j+1] += r * sk
	}
	return c
}

var errNoData = errors.New("no data points")
