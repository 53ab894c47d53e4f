package refcurve_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"

	"veer/functions/refcurve"
)

// exampleRows simulates systolic blood pressure of 300 healthy workers
// per sex, 4 exams each, rising with age.
func exampleRows() []refcurve.Row {
	rng := rand.New(rand.NewPCG(42, 1))
	var rows []refcurve.Row
	for _, sex := range []string{"F", "M"} {
		shift := 0.0
		if sex == "M" {
			shift = 6
		}
		for w := 0; w < 300; w++ {
			id := sex + strconv.Itoa(w)
			age := 20 + 35*rng.Float64()
			for k := 0; k < 4; k++ {
				sbp := 112 + shift + 0.5*(age-20) + 4*math.Sin(age/8) + 10*rng.NormFloat64()
				rows = append(rows, refcurve.Row{Worker: id, Time: age, Value: sbp, Group: sex})
				age += 1 + 2*rng.Float64()
			}
		}
	}
	return rows
}

func ExampleFit() {
	m, err := refcurve.Fit(exampleRows(), refcurve.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, c := range m.Curves {
		d := c.Diagnostics
		fmt.Printf("group %s: %d workers, %d exams, ages %.0f-%.0f, %.0f%% of exams inside the 95%% band\n",
			c.Group, d.Workers, d.Exams, d.TimeMin, d.TimeMax, 100*d.Coverage95)
	}
	// Output:
	// group F: 300 workers, 1200 exams, ages 20-63, 95% of exams inside the 95% band
	// group M: 300 workers, 1200 exams, ages 20-61, 95% of exams inside the 95% band
}

func ExampleModel_At() {
	m, err := refcurve.Fit(exampleRows(), refcurve.Options{Bandwidth: 4, SDBandwidth: 10})
	if err != nil {
		fmt.Println(err)
		return
	}
	mean, sd, err := m.At("F", 40, false)
	fmt.Printf("mean %.0f, sd %.0f, %v\n", mean, sd, err)
	_, _, err = m.At("F", 70, false)
	fmt.Println(err)
	mean, _, _ = m.At("F", 70, true) // held at the value for the oldest exam
	fmt.Printf("extrapolated mean %.0f\n", mean)
	// Output:
	// mean 119, sd 10, <nil>
	// age 70 is outside the reference range 20.0044–62.7043 of group "F"
	// extrapolated mean 140
}

func ExampleModel_Centile() {
	m, err := refcurve.Fit(exampleRows(), refcurve.Options{Bandwidth: 4, SDBandwidth: 10})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, p := range []float64{2.5, 50, 97.5} {
		c, _ := m.Centile("M", 50, p, false)
		fmt.Printf("%g%%: %.0f mmHg\n", p, c)
	}
	// Output:
	// 2.5%: 115 mmHg
	// 50%: 133 mmHg
	// 97.5%: 152 mmHg
}

func ExampleModel_Z() {
	m, err := refcurve.Fit(exampleRows(), refcurve.Options{Bandwidth: 4, SDBandwidth: 10})
	if err != nil {
		fmt.Println(err)
		return
	}
	z, _ := m.Z("M", 50, 160, false)
	fmt.Printf("a reading of 160 mmHg at 50 is %.1f sd above the reference mean\n", z)
	// Output:
	// a reading of 160 mmHg at 50 is 2.8 sd above the reference mean
}
