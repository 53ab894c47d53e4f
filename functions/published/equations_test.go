package published

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"
)

// handDoc is a synthetic equation in the form of current lung-function
// equations (not a published one): for group "female",
//
//	L = 1 − 0.2·ln(age)
//	M = exp(−10 + 2.2·ln(height) − 0.1·ln(age) + Mlookup(age))
//	S = exp(−2.3 + 0.05·ln(age))
//
// with Mlookup 0.02, 0, −0.05 at ages 20, 40, 60 (linear between).
const handDoc = `{
 "format": "veer.equations", "version": 1,
 "name": "hand-check equation", "source": "synthetic, for tests",
 "marker": "fev1", "unit": "L",
 "form": "lms",
 "covariates": [{"name": "height", "unit": "cm", "min": 140, "max": 200}],
 "groups": [
  {"group": "female",
   "L": {"terms": [{"term": "1", "coef": 1}, {"term": "ln(age)", "coef": -0.2}]},
   "M": {"link": "log", "terms": [{"term": "1", "coef": -10}, {"term": "ln(height)", "coef": 2.2}, {"term": "ln(age)", "coef": -0.1}]},
   "S": {"link": "log", "terms": [{"term": "1", "coef": -2.3}, {"term": "ln(age)", "coef": 0.05}]},
   "lookup": {"columns": ["age", "M"], "rows": [[20, 0.02], [40, 0], [60, -0.05]]}}
 ]
}`

// TestEquationByHand evaluates the equation for two people by hand
// (calculator steps in the comments) and compares.
func TestEquationByHand(t *testing.T) {
	ref, err := DecodeEquations([]byte(handDoc))
	if err != nil {
		t.Fatal(err)
	}
	people := []struct {
		age, height, fev1 float64
		l, m, s, z, lln   float64
	}{
		// Woman aged 30, 165 cm, FEV1 2.9 L.
		//   ln 30 = 3.401197, ln 165 = 5.105945; Mlookup(30) = 0.01
		//   L = 1 − 0.2·3.401197 = 0.319761
		//   ln M = −10 + 2.2·5.105945 − 0.1·3.401197 + 0.01 = 0.902960, M = 2.466895
		//   ln S = −2.3 + 0.05·3.401197 = −2.129940, S = 0.118844
		//   (2.9/2.466895)^0.319761 = 1.175567^0.319761 = 1.053082
		//   z = (1.053082 − 1)/(0.319761·0.118844) = 1.396839
		//   5th centile: 2.466895·(1 + 0.319761·0.118844·(−1.644854))^(1/0.319761) = 2.015973
		{30, 165, 2.9, 0.3197605, 2.4668951, 0.1188444, 1.3968387, 2.0159730},
		// Woman aged 52.5, 180 cm, FEV1 2.5 L.
		//   ln 52.5 = 3.960813, ln 180 = 5.192957; Mlookup(52.5) = −0.05·12.5/20 = −0.03125
		//   L = 1 − 0.2·3.960813 = 0.207837
		//   ln M = −10 + 2.2·5.192957 − 0.1·3.960813 − 0.03125 = 0.997174, M = 2.710610
		//   ln S = −2.3 + 0.05·3.960813 = −2.101959, S = 0.122217
		//   (2.5/2.710610)^0.207837 = 0.922302^0.207837 = 0.983330
		//   z = (0.983330 − 1)/(0.207837·0.122217) = −0.656268
		//   5th centile: 2.207421
		{52.5, 180, 2.5, 0.2078374, 2.7106101, 0.1222167, -0.6562684, 2.2074207},
	}
	for _, p := range people {
		cov := []float64{p.height}
		got, err := ref.At("female", p.age, cov, false)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got.L-p.l) > 1e-6 || math.Abs(got.M-p.m) > 1e-6 || math.Abs(got.S-p.s) > 1e-6 {
			t.Errorf("age %g, height %g: L %.7f M %.7f S %.7f, by hand %.7f %.7f %.7f", p.age, p.height, got.L, got.M, got.S, p.l, p.m, p.s)
		}
		z, err := ref.Z("female", p.age, cov, p.fev1, false)
		if err != nil || math.Abs(z-p.z) > 1e-6 {
			t.Errorf("age %g: z %.7f (%v), by hand %.7f", p.age, z, err, p.z)
		}
		lln, err := ref.Centile("female", p.age, cov, 5, false)
		if err != nil || math.Abs(lln-p.lln) > 1e-6 {
			t.Errorf("age %g: 5th centile %.7f (%v), by hand %.7f", p.age, lln, err, p.lln)
		}
	}
	if u, _ := ref.Uses("female"); len(u) != 1 || u[0] != "height" {
		t.Errorf("uses %v", u)
	}
	if info := ref.Info(); info.Marker != "fev1" || info.Unit != "L" || info.Source != "synthetic, for tests" {
		t.Errorf("info %+v", info)
	}
}

// TestMeanSDByHand: an older-style prediction equation, a predicted mean
// and a constant residual SD:
//
//	mean = −1.5 + 0.04·height − 0.025·age,  sd = 0.45.
//
// Man aged 45, 175 cm: mean = −1.5 + 7 − 1.125 = 4.375; FEV1 3.5 L has
// z = (3.5 − 4.375)/0.45 = −1.944444; the 5th centile is
// 4.375 − 1.644854·0.45 = 3.634816.
func TestMeanSDByHand(t *testing.T) {
	doc := `{"format": "veer.equations", "version": 1, "form": "mean-sd",
	 "covariates": [{"name": "Height"}],
	 "groups": [{"group": "", "age_min": 25, "age_max": 70,
	   "mean": {"terms": [{"term": "1", "coef": -1.5}, {"term": "height", "coef": 0.04}, {"term": "AGE", "coef": -0.025}]},
	   "sd": {"terms": [{"term": "1", "coef": 0.45}]}}]}`
	ref, err := DecodeEquations([]byte(doc))
	if err != nil {
		t.Fatal(err)
	}
	z, err := ref.Z("", 45, []float64{175}, 3.5, false)
	if err != nil || math.Abs(z+1.944444444) > 1e-8 {
		t.Errorf("z %.9f %v", z, err)
	}
	c, err := ref.Centile("", 45, []float64{175}, 5, false)
	if err != nil || math.Abs(c-3.634816) > 1e-6 {
		t.Errorf("5th centile %.7f %v", c, err)
	}
	// L = 1: a reading of 0 or below is still scored.
	if z, err := ref.Z("", 45, []float64{175}, 0, false); err != nil || math.Abs(z+4.375/0.45) > 1e-9 {
		t.Errorf("reading 0: %g %v", z, err)
	}
	// No declared range: any height; a blank one is missing.
	if _, err := ref.At("", 45, []float64{400}, false); err != nil {
		t.Errorf("height without a declared range: %v", err)
	}
	_, err = ref.At("", 45, []float64{nan}, false)
	var ce *CovariateError
	if !errors.As(err, &ce) || !errors.Is(err, ErrMissingCovariate) || ce.Name != "height" || !strings.Contains(err.Error(), "the height is missing") {
		t.Errorf("blank height: %v", err)
	}
	if _, err := ref.At("", 45, nil, false); !errors.Is(err, ErrMissingCovariate) {
		t.Errorf("no covariates: %v", err)
	}
}

func TestEquationCovariates(t *testing.T) {
	ref, err := DecodeEquations([]byte(handDoc))
	if err != nil {
		t.Fatal(err)
	}
	// Height outside 140–200: an error, or held at the end.
	_, err = ref.At("female", 30, []float64{210}, false)
	var re *RangeError
	if !errors.As(err, &re) || re.Name != "height" || re.Max != 200 || !strings.Contains(err.Error(), "height 210 is outside the reference range 140–200") {
		t.Errorf("tall: %v", err)
	}
	p, err := ref.At("female", 30, []float64{210}, true)
	q, _ := ref.At("female", 30, []float64{200}, false)
	if err != nil || p != q {
		t.Errorf("held at 200: %+v %v vs %+v", p, err, q)
	}
	if ref.Within("female", 30, []float64{210}) || !ref.Within("female", 30, []float64{180}) || ref.Within("female", 70, []float64{180}) ||
		!ref.Within("female", 30, nil) || ref.Within("male", 30, []float64{180}) {
		t.Errorf("Within")
	}
	// Age outside the lookup's 20–60.
	p, err = ref.At("female", 70, []float64{165}, true)
	q, _ = ref.At("female", 60, []float64{165}, false)
	if err != nil || p != q {
		t.Errorf("age held at 60: %+v %v vs %+v", p, err, q)
	}
	if _, err := ref.At("female", 70, []float64{165}, false); !errors.Is(err, ErrOutOfRange) {
		t.Errorf("age 70: %v", err)
	}
	if _, err := ref.At("female", 30, []float64{math.Inf(1)}, true); !errors.Is(err, ErrCovariate) {
		t.Errorf("infinite height: %v", err)
	}
	// A reading of 0 with L ≠ 1.
	if _, err := ref.Z("female", 30, []float64{165}, 0, false); !errors.Is(err, ErrReading) {
		t.Errorf("reading 0: %v", err)
	}
	// ZMany: per-entry errors, the rest scored.
	ages := []float64{30, 52.5, 30, 30, 90}
	ys := []float64{2.9, 2.5, 2.9, -1, 3}
	heights := []float64{165, 180, nan, 165, 165}
	out := make([]float64, 5)
	err = ref.ZMany([]string{"female"}, ages, ys, [][]float64{heights}, false, out)
	var se *ScoreErrors
	if !errors.As(err, &se) || se.Count != 3 || se.Total != 5 {
		t.Fatalf("ZMany: %v", err)
	}
	if se.First[0].Index != 2 || !errors.Is(se.First[0].Err, ErrMissingCovariate) || se.First[1].Index != 3 ||
		!errors.Is(se.First[1].Err, ErrReading) || !errors.Is(se.First[2].Err, ErrOutOfRange) {
		t.Errorf("entries: %v", err)
	}
	if !errors.Is(err, ErrMissingCovariate) || math.Abs(out[0]-1.3968387) > 1e-6 || math.Abs(out[1]+0.6562684) > 1e-6 || !math.IsNaN(out[2]) {
		t.Errorf("ZMany values %v", out)
	}
}

// TestZManyLarge: the parallel path gives the same as one at a time.
func TestZManyLarge(t *testing.T) {
	ref := smallTable(t, Cubic)
	n := 100_000
	groups := make([]string, n)
	age, y, out := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		groups[i] = []string{"f", "m"}[i%2]
		age[i] = 20 + 40*float64(i)/float64(n)
		y[i] = 100 + float64(i%50)
	}
	age[777] = 99
	err := ref.ZMany(groups, age, y, nil, false, out)
	var se *ScoreErrors
	if !errors.As(err, &se) || se.Count != 1 || se.First[0].Index != 777 {
		t.Fatalf("%v", err)
	}
	for _, i := range []int{0, 1, 50_000, n - 1} {
		z, _ := ref.Z(groups[i], age[i], nil, y[i], false)
		if z != out[i] {
			t.Errorf("entry %d: %g vs %g", i, out[i], z)
		}
	}
}

// TestEquationsBadInput: each bad document names where the problem is.
func TestEquationsBadInput(t *testing.T) {
	const head = `{"format": "veer.equations", "version": 1, "form": "lms", `
	grp := func(body string) string { return head + `"groups": [{"group": "f", ` + body + `}]}` }
	lms := `"L": {"terms": [{"term": "1", "coef": 1}]}, "M": {"terms": [{"term": "1", "coef": 3}]}, "S": {"terms": [{"term": "1", "coef": 0.1}]}`
	cases := []struct {
		name, doc string
		kind      error
		text      string
	}{
		{"not JSON", "{\n \"format\": \"veer.equations\",\n \"version\": 1,\n oops}", ErrFormat, "line 4, column 2: the file is not valid JSON"},
		{"truncated", head, ErrFormat, "not valid JSON"},
		{"format", `{"format": "other", "version": 1}`, ErrFormat, `this is not a veer equations file (format "other"`},
		{"version", `{"format": "veer.equations", "version": 2}`, ErrFormat, "version 2; this program reads version 1"},
		{"unknown field", grp(`"age_min": 20, "age_max": 60, "coeff": 1, ` + lms), ErrFormat, `the field "coeff" is not part of an equations file`},
		{"wrong type", "{\"format\": \"veer.equations\", \"version\": 1, \"form\": \"lms\",\n\"groups\": [{\"group\": \"f\", \"age_min\": \"twenty\"}]}", ErrFormat, "line 2, column"},
		{"form", `{"format": "veer.equations", "version": 1, "form": "gamlss", "groups": []}`, ErrFormat, `form must be "lms"`},
		{"no groups", head + `"groups": []}`, ErrMissing, "no groups"},
		{"L missing", grp(`"age_min": 20, "age_max": 60, "M": {"terms": [{"term": "1", "coef": 3}]}, "S": {"terms": [{"term": "1", "coef": 0.1}]}`), ErrMissing, `group "f", L: L is missing`},
		{"S missing", grp(`"age_min": 20, "age_max": 60, "L": {"terms": [{"term": "1", "coef": 1}]}, "M": {"terms": [{"term": "1", "coef": 3}]}`), ErrMissing, `S: S is missing`},
		{"no ages", grp(lms), ErrMissing, "give the ages the equations are valid for"},
		{"empty ages", grp(`"age_min": 60, "age_max": 20, ` + lms), ErrFormat, "the age range is empty"},
		{"mean in lms", grp(`"age_min": 20, "age_max": 60, "mean": {}, ` + lms), ErrFormat, `a reference of form "lms" gives L, M, S, not mean`},
		{"unknown variable", grp(`"age_min": 20, "age_max": 60, ` + strings.Replace(lms, `"term": "1", "coef": 3`, `"term": "ln(hieght)", "coef": 3`, 1)), ErrFormat, `M term 1, column "term": the term "ln(hieght)" cannot be read: unknown variable "hieght"; the variables are age`},
		{"bad power", grp(`"age_min": 20, "age_max": 60, ` + strings.Replace(lms, `"term": "1", "coef": 3`, `"term": "age^7", "coef": 3`, 1)), ErrFormat, "a power must be a whole number"},
		{"duplicate term", grp(`"age_min": 20, "age_max": 60, ` + strings.Replace(lms, `{"term": "1", "coef": 3}`, `{"term": "age*age", "coef": 3}, {"term": "age^2", "coef": 1}`, 1)), ErrDuplicate, "the term age^2 is also term 1"},
		{"no coef", grp(`"age_min": 20, "age_max": 60, ` + strings.Replace(lms, `"term": "1", "coef": 3`, `"term": "age"`, 1)), ErrMissing, "the term age has no coefficient"},
		{"link", grp(`"age_min": 20, "age_max": 60, ` + strings.Replace(lms, `"M": {`, `"M": {"link": "logit", `, 1)), ErrFormat, `link must be "identity" or "log"`},
		{"M negative somewhere", grp(`"age_min": 20, "age_max": 60, ` + strings.Replace(lms, `{"term": "1", "coef": 3}`, `{"term": "1", "coef": 3}, {"term": "age", "coef": -0.1}`, 1)), ErrInvalidParams, "M and S must be positive (check the coefficients) at age 30"},
		{"ln of a negative age", grp(`"age_min": -1, "age_max": 60, ` + strings.Replace(lms, `"term": "1", "coef": 3`, `"term": "ln(age)", "coef": 3`, 1)), ErrFormat, "the equations take ln(age), so ages must be positive"},
		{"lookup null", grp(lms + `, "lookup": {"columns": ["age", "S"], "rows": [[20, 0.01], [30, null], [40, 0.01]]}`), ErrMissing, `group "f", lookup, lookup row 2, column "S": the value is blank`},
		{"lookup unsorted", grp(lms + `, "lookup": {"columns": ["age", "S"], "rows": [[20, 0.01], [40, 0.01], [30, 0.01]]}`), ErrUnsorted, `lookup rows 2 and 3, column "age": age 30 comes after age 40`},
		{"lookup duplicate", grp(lms + `, "lookup": {"columns": ["age", "S"], "rows": [[20, 0.01], [20, 0.01]]}`), ErrDuplicate, "two rows at age 20"},
		{"lookup short row", grp(lms + `, "lookup": {"columns": ["age", "S"], "rows": [[20, 0.01], [30]]}`), ErrFormat, "lookup row 2: the row has 1 values for 2 columns"},
		{"lookup column", grp(lms + `, "lookup": {"columns": ["age", "Q"], "rows": [[20, 0.01], [30, 0.1]]}`), ErrFormat, `unknown column "Q"`},
		{"lookup S not positive", head + `"groups": [{"group": "f", "lookup": {"columns": ["age", "L", "M", "S"], "rows": [[20, 1, 3, 0.1], [30, 1, 3, 0]]}}]}`, ErrNotPositive, `lookup row 2, column "S": S must be positive, not 0`},
		{"age_min below lookup", grp(`"age_min": 10, ` + lms + `, "lookup": {"columns": ["age", "S"], "rows": [[20, 0.01], [30, 0.1]]}`), ErrOutOfRange, "age_min 10 is below the lookup's first age 20"},
		{"duplicate group", head + `"groups": [{"group": "f", "age_min": 20, "age_max": 60, ` + lms + `}, {"group": "f", "age_min": 20, "age_max": 60, ` + lms + `}]}`, ErrDuplicate, "the group appears twice"},
		{"covariate named age", head + `"covariates": [{"name": "age"}], "groups": []}`, ErrFormat, "age is always a variable"},
		{"covariate twice", head + `"covariates": [{"name": "height"}, {"name": "Height"}], "groups": []}`, ErrDuplicate, `the covariate "height" is declared twice`},
		{"covariate range", head + `"covariates": [{"name": "height", "min": 200, "max": 100}], "groups": []}`, ErrFormat, "the range of height is empty"},
		{"ln of a covariate that can be 0", head + `"covariates": [{"name": "height", "min": 0, "max": 200}], "groups": [{"group": "f", "age_min": 20, "age_max": 60, ` + strings.Replace(lms, `{"term": "1", "coef": 3}`, `{"term": "1", "coef": 3}, {"term": "ln(height)", "coef": 0.1}`, 1) + `}]}`, ErrFormat, "the equations take ln(height) but its declared range reaches 0"},
		{"trailing", head + `"groups": [{"group": "f", "age_min": 20, "age_max": 60, ` + lms + `}]} {}`, ErrFormat, "more after the equations document"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ref, err := DecodeEquations([]byte(c.doc))
			if err == nil || ref != nil {
				t.Fatal("accepted")
			}
			if !errors.Is(err, c.kind) {
				t.Errorf("kind: %v", err)
			}
			if !strings.Contains(err.Error(), c.text) {
				t.Errorf("message %q lacks %q", err, c.text)
			}
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Errorf("not an InputError: %T", err)
			}
		})
	}
}

// TestEncodeRoundTrip: a table and an equations document are written and
// read back to the same reference, byte-stable.
func TestEncodeRoundTrip(t *testing.T) {
	eq, err := DecodeEquations([]byte(handDoc))
	if err != nil {
		t.Fatal(err)
	}
	for _, ref := range []*Reference{smallTable(t, Linear), smallTable(t, Cubic), eq} {
		b, err := ref.Encode()
		if err != nil {
			t.Fatal(err)
		}
		back, err := DecodeEquations(b)
		if err != nil {
			t.Fatalf("%v\n%s", err, b)
		}
		b2, _ := back.Encode()
		if !bytes.Equal(b, b2) {
			t.Errorf("not byte-stable:\n%s\n%s", b, b2)
		}
		if back.Interpolation() != ref.Interpolation() || back.Info() != ref.Info() {
			t.Errorf("settings changed")
		}
		for _, g := range ref.Groups() {
			lo, hi, _ := ref.Range(g)
			for a := lo; a <= hi; a += (hi - lo) / 37 {
				for _, h := range []float64{150, 181} {
					p, err1 := ref.At(g, a, []float64{h}, false)
					q, err2 := back.At(g, a, []float64{h}, false)
					if p != q || err1 != nil || err2 != nil {
						t.Errorf("%s at %g: %+v vs %+v (%v %v)", g, a, p, q, err1, err2)
					}
				}
			}
		}
	}
	named := smallTable(t, Linear).WithInfo(Info{Name: "t", Source: "synthetic"})
	if named.Info().Source != "synthetic" {
		t.Errorf("WithInfo")
	}
}

// FuzzDecodeEquations: any bytes give a reference or an *InputError,
// never a panic; a reference encodes, decodes back and answers lookups.
func FuzzDecodeEquations(f *testing.F) {
	f.Add([]byte(handDoc))
	f.Add([]byte(`{"format": "veer.equations", "version": 1, "form": "mean-sd", "groups": [{"group": "", "age_min": 1, "age_max": 2, "mean": {"terms": [{"term": "1", "coef": 1}]}, "sd": {"terms": [{"term": "1", "coef": 0.1}]}}]}`))
	if b, err := smallTable(&testing.T{}, Cubic).Encode(); err == nil {
		f.Add(b)
	}
	f.Add([]byte(`{"format": "veer.equations", "version": 1, "form": "lms", "groups": [{"group": "f", "lookup": {"columns": ["age", "L", "M", "S"], "rows": [[20, 1, 3, 0.1], [30, 1, 3, 0.2]]}}]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		ref, err := DecodeEquations(data)
		if err != nil {
			mustBeInputError(t, err)
			return
		}
		b, err := ref.Encode()
		if err != nil {
			t.Fatal(err)
		}
		back, err := DecodeEquations(b)
		if err != nil {
			t.Fatalf("re-read: %v\n%s", err, b)
		}
		cov := make([]float64, len(ref.Covariates()))
		for k, c := range ref.Covariates() {
			cov[k] = 170
			if !math.IsNaN(c.Min) {
				cov[k] = c.Min
			}
		}
		for _, g := range ref.Groups() {
			lo, hi, _ := ref.Range(g)
			for _, a := range []float64{lo, (lo + hi) / 2, hi, hi + 1} {
				p, err1 := ref.At(g, a, cov, true)
				q, err2 := back.At(g, a, cov, true)
				if (err1 == nil) != (err2 == nil) || (err1 == nil && p != q) {
					t.Fatalf("%s at %g: %+v %v vs %+v %v", g, a, p, err1, q, err2)
				}
			}
		}
	})
}

// mustBeInputError fails unless err is an *InputError or *InputErrors.
func mustBeInputError(t *testing.T, err error) {
	t.Helper()
	var ie *InputError
	var all *InputErrors
	if !errors.As(err, &ie) && !errors.As(err, &all) {
		t.Fatalf("%T %v", err, err)
	}
}

// TestEncodeLayout: leaf arrays and objects are written on one line, and
// text holding brackets, quotes and escapes survives.
func TestEncodeLayout(t *testing.T) {
	ref := smallTable(t, Linear).WithInfo(Info{Name: `odd "name" [1, 2] {x}`, Source: "a\\b\nc, d"})
	b, err := ref.Encode()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(b, []byte("\n     [20, -0.5, 110, 0.1],\n")) || !bytes.Contains(b, []byte(`"columns": ["age", "L", "M", "S"]`)) {
		t.Errorf("layout:\n%s", b)
	}
	back, err := DecodeEquations(b)
	if err != nil {
		t.Fatal(err)
	}
	if back.Info() != ref.Info() {
		t.Errorf("info %+v", back.Info())
	}
}
