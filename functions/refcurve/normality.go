package refcurve

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// MinNormalityN is the smallest sample DAgostinoPearson accepts (the
// skewness approximation needs n >= 8).
const MinNormalityN = 8

// DAgostinoPearson tests whether x comes from a normal distribution with
// the omnibus K² test of D'Agostino & Pearson (1973, "Tests for departure
// from normality. Empirical results for the distributions of b2 and √b1",
// Biometrika 60:613-622), in the form of D'Agostino, Belanger & D'Agostino
// (1990, "A suggestion for using powerful and informative tests of
// normality", The American Statistician 44:316-321), the form scipy's
// normaltest computes.
//
// With the sample moments m_k = Σ(x_i - x̄)^k / n, √b1 = m3/m2^(3/2) and
// b2 = m4/m2²:
//
// Skewness (D'Agostino 1970):
//
//	Y  = √b1 √((n+1)(n+3) / (6(n-2)))
//	β2 = 3(n²+27n-70)(n+1)(n+3) / ((n-2)(n+5)(n+7)(n+9))
//	W² = √(2(β2-1)) - 1,  δ = 1/√(log W),  α = √(2/(W²-1))
//	Z1 = δ log(Y/α + √((Y/α)² + 1))
//
// Kurtosis (Anscombe & Glynn 1983):
//
//	E = 3(n-1)/(n+1),  Var = 24n(n-2)(n-3) / ((n+1)²(n+3)(n+5)),  x = (b2-E)/√Var
//	√β1 = 6(n²-5n+2)/((n+7)(n+9)) √(6(n+3)(n+5) / (n(n-2)(n-3)))
//	A  = 6 + 8/√β1 (2/√β1 + √(1 + 4/β1))
//	Z2 = ((1 - 2/(9A)) - ∛((1 - 2/A) / (1 + x√(2/(A-4))))) / √(2/(9A))
//
// K² = Z1² + Z2², referred to χ² with 2 degrees of freedom.
//
// With hundreds of thousands of residuals the test rejects even harmless
// departures; read Skewness and ExcessKurtosis for their size.
func DAgostinoPearson(x []float64) (Normality, error) {
	n := len(x)
	if n < MinNormalityN {
		return Normality{}, fmt.Errorf("the normality test needs at least %d values, got %d", MinNormalityN, n)
	}
	var mean float64
	for _, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return Normality{}, fmt.Errorf("the normality test needs finite values, got %g", v)
		}
		mean += v
	}
	fn := float64(n)
	mean /= fn
	var m2, m3, m4 float64
	for _, v := range x {
		d := v - mean
		d2 := d * d
		m2 += d2
		m3 += d2 * d
		m4 += d2 * d2
	}
	m2, m3, m4 = m2/fn, m3/fn, m4/fn
	if !(m2 > 0) {
		return Normality{}, fmt.Errorf("the normality test needs values that are not all equal")
	}
	sb1 := m3 / math.Pow(m2, 1.5)
	b2 := m4 / (m2 * m2)

	// Skewness.
	y := sb1 * math.Sqrt((fn+1)*(fn+3)/(6*(fn-2)))
	beta2 := 3 * (fn*fn + 27*fn - 70) * (fn + 1) * (fn + 3) / ((fn - 2) * (fn + 5) * (fn + 7) * (fn + 9))
	w2 := math.Sqrt(2*(beta2-1)) - 1
	delta := 1 / math.Sqrt(0.5*math.Log(w2))
	alpha := math.Sqrt(2 / (w2 - 1))
	ya := y / alpha
	z1 := delta * math.Log(ya+math.Sqrt(ya*ya+1))

	// Kurtosis.
	e := 3 * (fn - 1) / (fn + 1)
	varb2 := 24 * fn * (fn - 2) * (fn - 3) / ((fn + 1) * (fn + 1) * (fn + 3) * (fn + 5))
	xk := (b2 - e) / math.Sqrt(varb2)
	sbeta1 := 6 * (fn*fn - 5*fn + 2) / ((fn + 7) * (fn + 9)) * math.Sqrt(6*(fn+3)*(fn+5)/(fn*(fn-2)*(fn-3)))
	a := 6 + 8/sbeta1*(2/sbeta1+math.Sqrt(1+4/(sbeta1*sbeta1)))
	term1 := 1 - 2/(9*a)
	denom := 1 + xk*math.Sqrt(2/(a-4))
	if denom == 0 {
		return Normality{}, fmt.Errorf("the kurtosis part of the normality test is undefined for this sample")
	}
	term2 := math.Copysign(math.Cbrt((1-2/a)/math.Abs(denom)), denom)
	z2 := (term1 - term2) / math.Sqrt(2/(9*a))

	k2 := z1*z1 + z2*z2
	p := distuv.ChiSquared{K: 2}.Survival(k2)
	return Normality{
		Test:           "D'Agostino-Pearson K2",
		N:              n,
		Skewness:       sb1,
		ExcessKurtosis: b2 - 3,
		ZSkewness:      z1,
		ZKurtosis:      z2,
		Statistic:      k2,
		PValue:         p,
	}, nil
}
