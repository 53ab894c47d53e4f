package smooth

import (
	"fmt"
	"math"
)

// Truncation is where the Gaussian kernel is cut, in bandwidths: points
// farther than Truncation·h from x get no weight at x. KernSmooth uses the
// same cut (tau = 4); the weight lost there is exp(-8) ≈ 3e-4 of the peak.
const Truncation = 4

// minSpread is the smallest kernel-weighted variance of (x_i - x)/h that
// local linear regression accepts at x. Below it the local line is not
// determined (all weight sits at one place) and the estimate would be
// rounding noise.
const minSpread = 1e-8

// sums5 holds the kernel sums S0, S1, S2, T0, T1 at one point.
type sums5 struct{ s0, s1, s2, t0, t1 float64 }

// kernelSums returns, for every node j of b's grid, the binned kernel sums
// S0, S1, S2, T0, T1 at g_j with u = (g_k - g_j)/h.
//
//	S_r(g_j) = Σ_k K(u_kj) u_kj^r Weight_k,  T_r(g_j) = Σ_k K(u_kj) u_kj^r Sum_k.
//
// Direct summation over the at most 2L+1 neighbours, L = ⌊4h/δ⌋: for the
// grid sizes used here (hundreds to a few thousand nodes) this is faster
// and simpler than an FFT and has no wrap-around to guard against.
func (b *Binned) kernelSums(h float64) []sums5 {
	n := b.Grid.N
	du := b.Grid.Step() / h
	L := int(math.Floor(Truncation / du))
	if L > n-1 {
		L = n - 1
	}
	// Kernel tables indexed by d+L, d = k-j.
	kt := make([]float64, 2*L+1)
	k1 := make([]float64, 2*L+1)
	k2 := make([]float64, 2*L+1)
	for d := -L; d <= L; d++ {
		u := float64(d) * du
		e := math.Exp(-0.5 * u * u)
		kt[d+L], k1[d+L], k2[d+L] = e, e*u, e*u*u
	}
	out := make([]sums5, n)
	wt, sm := b.Weight, b.Sum
	for j := 0; j < n; j++ {
		lo, hi := j-L, j+L
		if lo < 0 {
			lo = 0
		}
		if hi > n-1 {
			hi = n - 1
		}
		var s0, s1, s2, t0, t1 float64
		off := L - j
		for k := lo; k <= hi; k++ {
			c, s := wt[k], sm[k]
			e, e1 := kt[k+off], k1[k+off]
			s0 += e * c
			s1 += e1 * c
			s2 += k2[k+off] * c
			t0 += e * s
			t1 += e1 * s
		}
		out[j] = sums5{s0, s1, s2, t0, t1}
	}
	return out
}

// localLinearFromSums returns (S2 T0 - S1 T1)/(S0 S2 - S1²) and whether
// the local line is determined: S0 > 0 and the kernel-weighted variance of
// u, (S0 S2 - S1²)/S0², at least spread.
func localLinearFromSums(s0, s1, s2, t0, t1, spread float64) (float64, bool) {
	if !(s0 > 0) {
		return 0, false
	}
	det := s0*s2 - s1*s1
	if !(det > spread*s0*s0) {
		return 0, false
	}
	return (s2*t0 - s1*t1) / det, true
}

func checkBandwidth(h float64) error {
	if !(h > 0) || math.IsInf(h, 0) {
		return fmt.Errorf("bandwidth must be a positive finite number, got %g", h)
	}
	return nil
}

// LocalLinear returns the local linear estimate with Gaussian kernel and
// bandwidth h at every point of the binned data's grid (formula in the
// package comment). It fails, naming the grid point, where no data lie
// within 4h or the data near it do not determine a line.
func (b *Binned) LocalLinear(h float64) ([]float64, error) {
	if err := checkBandwidth(h); err != nil {
		return nil, err
	}
	sums := b.kernelSums(h)
	est := make([]float64, b.Grid.N)
	for j := range est {
		s := &sums[j]
		v, ok := localLinearFromSums(s.s0, s.s1, s.s2, s.t0, s.t1, minSpread)
		if !ok {
			if span := b.Grid.Hi - b.Grid.Lo; h > span {
				// Every point lies within the window, yet the kernel is so
				// flat next to the data's spread that the local line is
				// lost in rounding.
				return nil, fmt.Errorf("bandwidth %.4g is too large for data spanning %.4g: the local line cannot be told apart from rounding; use a bandwidth below %.4g", h, span, span)
			}
			return nil, fmt.Errorf("bandwidth %.4g is too small: too few data within %.4g of %.6g to fit a local line; use a larger bandwidth", h, Truncation*h, b.Grid.Point(j))
		}
		est[j] = v
	}
	return est, nil
}

// LocalLinear bins the points (x[i], y[i]) with weights w[i] (nil: all 1)
// onto g and returns the local linear estimate with bandwidth h at every
// grid point. See Bin and Binned.LocalLinear.
func LocalLinear(x, y, w []float64, h float64, g Grid) ([]float64, error) {
	if len(x) == 0 {
		return nil, errNoData
	}
	b, err := Bin(x, y, w, g)
	if err != nil {
		return nil, err
	}
	return b.LocalLinear(h)
}

// Interpolate returns the value at x of the piecewise linear function
// through (g.Point(k), v[k]); x outside the grid takes the end value.
func Interpolate(g Grid, v []float64, x float64) float64 {
	if x <= g.Lo {
		return v[0]
	}
	if x >= g.Hi {
		return v[g.N-1]
	}
	k, r := g.locate(x)
	return v[k] + r*(v[k+1]-v[k])
}
