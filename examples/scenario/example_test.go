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
	// W00001,tower,23.48,116,4.61
	// W00001,tower,24.45,111,4.69
	// W00001,tower,25.36,114,4.46
	// W00001,tower,27.98,123,4.45
	// W00001,tower,28.47,114,4.95
	// W00002,tower,26.32,97,4.06
	// W00002,tower,27.15,118,4.04
	// W00002,tower,27.64,119,3.68
	// W00002,tower,28.65,111,3.91
	// W00002,tower,29.84,102,4.16
	// W00002,tower,31.06,113,3.95
	// W00002,tower,32.04,102,4.15
	// W00002,tower,33.53,110,3.83
	// W00002,tower,34.89,108,3.84
	// W00002,tower,35.74,100,3.54
	// W00002,tower,37.20,108,4.10
	//
	// worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,slope_sbp,slope_fev1,plateau_sbp,plateau_fev1
	// W00001,tower,0,,0,,,,,
	// W00002,tower,0,,0,,,,,
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
	// Onset at 40, growing 0.5 SD a year up to a sustained shift of 1.25 SD.
	o := scenario.Onset{Affected: true, Age: 40, Slope: 0.5, Plateau: 1.25}
	for _, age := range []float64{39, 41, 42, 50} {
		fmt.Printf("shift at %v: %.2f SD\n", age, o.Shift(age))
	}
	// Output:
	// shift at 39: 0.00 SD
	// shift at 41: 0.50 SD
	// shift at 42: 1.00 SD
	// shift at 50: 1.25 SD
}
