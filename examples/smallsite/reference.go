package smallsite

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"veer/functions/published"
)

// Sexes are the groups of the site and of both references.
func Sexes() []string { return []string{Female, Male} }

// The groups.
const (
	Female = "female"
	Male   = "male"
)

// Ages the synthetic references cover.
const (
	TableMinAge, TableMaxAge         = 18, 75
	EquationsMinAge, EquationsMaxAge = 18, 80
	HeightMin, HeightMax             = 140, 200
)

// sbpLMS is the synthetic systolic blood pressure reference at age a
// (years) for sex: L, M (mmHg) and S as smooth functions of u = a − 18,
//
//	female: L = −1.2 + 0.012u,  M = 109 + 0.30u + 0.0065u²,  S = 0.092 + 0.0007u
//	male:   L = −1.0 + 0.012u,  M = 119 + 0.25u + 0.0050u²,  S = 0.088 + 0.0006u
//
// It is invented for the demo, not taken from any publication.
func sbpLMS(sex string, a float64) published.LMS {
	u := a - 18
	if sex == Female {
		return published.LMS{L: -1.2 + 0.012*u, M: 109 + 0.30*u + 0.0065*u*u, S: 0.092 + 0.0007*u}
	}
	return published.LMS{L: -1.0 + 0.012*u, M: 119 + 0.25*u + 0.0050*u*u, S: 0.088 + 0.0006*u}
}

// SBPTableCSV is the synthetic SBP reference as a published LMS table
// would print it: columns group, age, L, M, S, one row per sex and whole
// year of age from 18 to 75, L to 4 decimals, M to 2 and S to 5.
func SBPTableCSV() []byte {
	var b strings.Builder
	b.WriteString("group,age,L,M,S\n")
	for _, sex := range Sexes() {
		for a := TableMinAge; a <= TableMaxAge; a++ {
			p := sbpLMS(sex, float64(a))
			fmt.Fprintf(&b, "%s,%d,%s,%s,%s\n", sex, a, fixed(p.L, 4), fixed(p.M, 2), fixed(p.S, 5))
		}
	}
	return []byte(b.String())
}

// fev1Intercept is the constant of ln M in the FEV1 equations.
var fev1Intercept = map[string]float64{Female: -10.0275, Male: -9.907}

// fev1Spline is the age lookup added to ln M in the FEV1 equations: flat
// at 22, falling ever faster after it and a little before it.
func fev1Spline(a float64) float64 {
	if a >= 22 {
		return -0.00018 * (a - 22) * (a - 22)
	}
	return -0.0006 * (22 - a) * (22 - a)
}

// FEV1EquationsJSON is the synthetic FEV1 reference equation (in litres)
// in the form of current lung-function equations, written as a veer
// equations document: for each sex,
//
//	L = 1.5 − 0.15·ln(age)
//	M = exp(a₀ + 2.2·ln(height) + spline(age))     a₀ = −10.0275 (female), −9.907 (male)
//	S = exp(−2.46 + 0.1·ln(age))
//
// with spline(age) tabulated every year from 18 to 80 (5 decimals) and
// height in cm, valid from 140 to 200. It is invented for the demo, not
// taken from any publication; it gives a 30-year-old woman of 164 cm a
// median FEV1 of 3.26 L and a man of 177 cm 4.34 L.
func FEV1EquationsJSON() []byte {
	var b strings.Builder
	b.WriteString(`{"format": "veer.equations", "version": 1,
 "name": "FEV1, synthetic example",
 "source": "synthetic example for the veer demo; not a published equation, do not use for people",
 "marker": "fev1", "unit": "L", "form": "lms", "interpolation": "linear",
 "covariates": [{"name": "height", "unit": "cm", "min": ` + strconv.Itoa(HeightMin) + `, "max": ` + strconv.Itoa(HeightMax) + `}],
 "groups": [`)
	for i, sex := range Sexes() {
		if i > 0 {
			b.WriteString(",")
		}
		fmt.Fprintf(&b, `{"group": %q,
  "L": {"terms": [{"term": "1", "coef": 1.5}, {"term": "ln(age)", "coef": -0.15}]},
  "M": {"link": "log", "terms": [{"term": "1", "coef": %s}, {"term": "ln(height)", "coef": 2.2}]},
  "S": {"link": "log", "terms": [{"term": "1", "coef": -2.46}, {"term": "ln(age)", "coef": 0.1}]},
  "lookup": {"columns": ["age", "M"], "rows": [`, sex, strconv.FormatFloat(fev1Intercept[sex], 'f', -1, 64))
		for a := EquationsMinAge; a <= EquationsMaxAge; a++ {
			if a > EquationsMinAge {
				b.WriteString(", ")
			}
			fmt.Fprintf(&b, "[%d, %s]", a, fixed(fev1Spline(float64(a)), 5))
		}
		b.WriteString("]}}")
	}
	b.WriteString("]}")
	// The canonical layout, written by the package that reads it.
	ref, err := published.DecodeEquations([]byte(b.String()))
	if err != nil {
		panic("smallsite: the synthetic equations do not read back: " + err.Error())
	}
	out, err := ref.Encode()
	if err != nil {
		panic("smallsite: " + err.Error())
	}
	return out
}

// fixed formats v with d decimals, without a negative zero.
func fixed(v float64, d int) string {
	s := strconv.FormatFloat(v, 'f', d, 64)
	if strings.Trim(s, "-0.") == "" {
		return strconv.FormatFloat(math.Abs(v), 'f', d, 64)
	}
	return s
}
