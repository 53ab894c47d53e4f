package published

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// LMS are the three parameters of the LMS method at one age (Cole, T. J.
// and Green, P. J. (1992), "Smoothing reference centile curves: the LMS
// method and penalized likelihood", Statistics in Medicine 11, 1305–1319):
// L the Box-Cox power that removes the skewness, M the median and S the
// coefficient of variation. A reading y has the standard normal deviate
//
//	z = ((y/M)^L − 1) / (L·S)   (L ≠ 0),    z = ln(y/M) / S   (L = 0),
//
// and the centile with deviate z is
//
//	C(z) = M·(1 + L·S·z)^(1/L)   (L ≠ 0),    C(z) = M·exp(S·z)   (L = 0).
//
// With L = 1 the reading is normal with mean M and SD M·S, and any real
// reading can be scored; otherwise readings must be positive.
type LMS struct {
	L, M, S float64
}

// Validate reports whether L is finite and M and S are positive.
func (p LMS) Validate() error {
	switch {
	case isNaNOrInf(p.L) || isNaNOrInf(p.M) || isNaNOrInf(p.S):
		return fmt.Errorf("L, M and S must be finite numbers, got L %s, M %s, S %s: %w", num(p.L), num(p.M), num(p.S), ErrNotFinite)
	case !(p.M > 0):
		return fmt.Errorf("M (the median) must be positive, got %s: %w", num(p.M), ErrNotPositive)
	case !(p.S > 0):
		return fmt.Errorf("S (the coefficient of variation) must be positive, got %s: %w", num(p.S), ErrNotPositive)
	}
	return nil
}

// Z returns the standard normal deviate of reading y (see LMS). For L
// near 0 it uses expm1(L·ln(y/M))/(L·S), which equals the formula above
// and tends continuously to ln(y/M)/S. A reading that is not finite, or
// not positive while L ≠ 1, is a *ReadingError.
func (p LMS) Z(y float64) (float64, error) {
	if isNaNOrInf(y) {
		return 0, &ReadingError{Value: y, L: p.L}
	}
	if p.L == 1 {
		return (y/p.M - 1) / p.S, nil
	}
	if !(y > 0) {
		return 0, &ReadingError{Value: y, L: p.L}
	}
	r := math.Log(y / p.M)
	if p.L == 0 {
		return r / p.S, nil
	}
	return math.Expm1(p.L*r) / (p.L * p.S), nil
}

// At returns the centile with standard normal deviate z, M·(1+L·S·z)^(1/L)
// (M·exp(S·z) for L = 0). Where 1 + L·S·z ≤ 0 the distribution has no
// such centile (the Box-Cox normal is truncated) and the error wraps
// ErrNoCentile.
func (p LMS) At(z float64) (float64, error) {
	if isNaNOrInf(z) {
		return 0, fmt.Errorf("the deviate %s is not a finite number: %w", num(z), ErrNotFinite)
	}
	if p.L == 0 {
		return p.M * math.Exp(p.S*z), nil
	}
	if p.L == 1 {
		return p.M * (1 + p.S*z), nil
	}
	b := p.L * p.S * z
	if !(b > -1) {
		return 0, fmt.Errorf("there is no reading with deviate %s when L = %s and S = %s (1 + L·S·z = %s is not positive): %w",
			num(z), num(p.L), num(p.S), num(1+b), ErrNoCentile)
	}
	y := p.M * math.Exp(math.Log1p(b)/p.L)
	if isNaNOrInf(y) {
		return 0, fmt.Errorf("the reading with deviate %s is too large to represent (L = %s, S = %s): %w",
			num(z), num(p.L), num(p.S), ErrNoCentile)
	}
	return y, nil
}

// Centile returns the c-th centile (0 < c < 100): At(Φ⁻¹(c/100)).
func (p LMS) Centile(c float64) (float64, error) {
	if !(c > 0 && c < 100) {
		return 0, fmt.Errorf("centile %s must lie strictly between 0 and 100: %w", num(c), ErrNoCentile)
	}
	return p.At(distuv.UnitNormal.Quantile(c / 100))
}

func isNaNOrInf(x float64) bool { return math.IsNaN(x) || math.IsInf(x, 0) }
