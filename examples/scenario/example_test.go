package scenario_test

import (
	"fmt"

	"veer/examples/scenario"
)

func ExampleGenerate() {
	cfg := scenario.DefaultConfig()
	cfg.ReferenceWorkers, cfg.WorkforceWorkers = 3, 2
	s, err := scenario.Generate(cfg)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%s\n%s", s.WorkforceCSV(), s.TruthCSV())
	// Output:
	// worker,group,age,sbp,fev1
	// W00001,tower,23.48,129,4.32
	// W00001,tower,24.45,121,3.46
	// W00001,tower,25.36,114,4.21
	// W00002,tower,26.32,96,4.11
	// W00002,tower,27.15,128,4.08
	// W00002,tower,27.64,126,3.56
	// W00002,tower,28.65,114,4.13
	// W00002,tower,29.84,108,4.43
	// W00002,tower,31.06,122,3.88
	// W00002,tower,32.04,103,4.01
	// W00002,tower,33.53,115,3.32
	// W00002,tower,34.89,106,3.03
	// W00002,tower,35.74,99,2.67
	//
	// worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,slope_sbp,slope_fev1
	// W00001,tower,0,,0,,,
	// W00002,tower,0,,1,28.55,,-0.356
}

func ExampleCurve() {
	for _, age := range []float64{25, 45, 65} {
		mean, sd, _ := scenario.Curve(scenario.SBP, scenario.Tower, age)
		fmt.Printf("tower crew SBP at %v: mean %.1f mmHg, sd %.1f mmHg\n", age, mean, sd)
	}
	// Output:
	// tower crew SBP at 25: mean 115.6 mmHg, sd 9.2 mmHg
	// tower crew SBP at 45: mean 123.4 mmHg, sd 11.6 mmHg
	// tower crew SBP at 65: mean 136.0 mmHg, sd 14.0 mmHg
}

func ExampleOnset_Shift() {
	o := scenario.Onset{Affected: true, Age: 40, Slope: 0.5}
	for _, age := range []float64{39, 42, 50} {
		fmt.Printf("shift at %v: %.1f SD\n", age, o.Shift(age))
	}
	// Output:
	// shift at 39: 0.0 SD
	// shift at 42: 1.0 SD
	// shift at 50: 3.0 SD
}
