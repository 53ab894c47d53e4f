package published_test

import (
	"fmt"

	"veer/functions/published"
)

func ExampleLMS() {
	// L −0.5, M 120, S 0.1: the 3rd, 50th and 97th centiles, and the z of
	// a reading of 146.2.
	p := published.LMS{L: -0.5, M: 120, S: 0.1}
	for _, c := range []float64{3, 50, 97} {
		v, _ := p.Centile(c)
		fmt.Printf("centile %g: %.4f\n", c, v)
	}
	z, _ := p.Z(146.2)
	fmt.Printf("z of 146.2: %.3f\n", z)
	_, err := published.LMS{L: 0.5, M: 3, S: 0.1}.Z(0)
	fmt.Println(err)
	// Output:
	// centile 3: 100.2571
	// centile 50: 120.0000
	// centile 97: 146.2052
	// z of 146.2: 1.880
	// the reading 0 is not positive, and this reference (L = 0.5) only describes positive readings
}

func ExampleNewTable() {
	ref, err := published.NewTable([]published.TableRow{
		{Group: "f", Age: 20, L: -0.5, M: 110, S: 0.10},
		{Group: "f", Age: 40, L: -0.3, M: 118, S: 0.11},
		{Group: "f", Age: 60, L: 0.1, M: 130, S: 0.12},
	}, published.Linear)
	if err != nil {
		fmt.Println(err)
		return
	}
	p, _ := ref.At("f", 30, nil, false)
	fmt.Printf("age 30: L %.2f M %.1f S %.3f\n", p.L, p.M, p.S)
	z, _ := ref.Z("f", 30, nil, 140, false)
	fmt.Printf("z of 140 at 30: %.2f\n", z)
	_, err = ref.At("f", 65, nil, false)
	fmt.Println(err)

	_, err = published.NewTable([]published.TableRow{
		{Group: "f", Age: 20, L: 1, M: 110, S: 0.1, Line: 2},
		{Group: "f", Age: 30, L: 1, M: 112, S: -0.1, Line: 3},
	}, published.Linear)
	fmt.Println(err)
	// Output:
	// age 30: L -0.40 M 114.0 S 0.105
	// z of 140 at 30: 1.88
	// age 65 is outside the reference range 20–60 of group "f"
	// data row 2 (line 3), column "S": S (the coefficient of variation) must be positive, not -0.1
}

func ExampleDecodeEquations() {
	doc := `{
	 "format": "veer.equations", "version": 1, "form": "lms",
	 "source": "synthetic example, not a published equation",
	 "covariates": [{"name": "height", "unit": "cm", "min": 140, "max": 200}],
	 "groups": [{"group": "female", "age_min": 20, "age_max": 70,
	   "L": {"terms": [{"term": "1", "coef": 0.9}]},
	   "M": {"link": "log", "terms": [{"term": "1", "coef": -9.6}, {"term": "ln(height)", "coef": 2.1}, {"term": "age", "coef": -0.007}]},
	   "S": {"link": "log", "terms": [{"term": "1", "coef": -2.2}]}}]}`
	ref, err := published.DecodeEquations([]byte(doc))
	if err != nil {
		fmt.Println(err)
		return
	}
	height := []float64{165}
	lln, _ := ref.Centile("female", 45, height, 5, false)
	z, _ := ref.Z("female", 45, height, 2.2, false)
	fmt.Printf("5th centile %.2f L; z of 2.2 L: %.2f\n", lln, z)
	_, err = ref.Z("female", 45, nil, 2.2, false)
	fmt.Println(err)
	// Output:
	// 5th centile 1.84 L; z of 2.2 L: -0.17
	// the height is missing; the reference equation of group "female" needs it
}
