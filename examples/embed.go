package examples

import (
	"embed"
	"fmt"
)

//go:embed data/*.csv
var data embed.FS // read-only; accessors hand out copies

func mustRead(name string) []byte {
	b, err := data.ReadFile("data/" + name)
	if err != nil {
		// The files are embedded at build time; a missing one is a build
		// mistake, not a user error.
		panic(fmt.Sprintf("examples: embedded file %s is missing: %v", name, err))
	}
	return b
}

// ReferenceCSV returns a copy of data/reference.csv: the healthy reference
// cohort, columns worker,group,age,sbp,fev1 (age in years, SBP in mmHg,
// FEV1 in litres), one row per exam, ordered by worker and age.
func ReferenceCSV() []byte { return mustRead("reference.csv") }

// WorkforceCSV returns a copy of data/workforce.csv: the screened
// workforce, with the same columns as ReferenceCSV.
func WorkforceCSV() []byte { return mustRead("workforce.csv") }

// TruthCSV returns a copy of data/truth.csv: one row per workforce worker,
// columns worker,group,affected_sbp,onset_sbp,affected_fev1,onset_fev1,
// slope_sbp,slope_fev1,plateau_sbp,plateau_fev1 (affected 1/0; onset age in
// years, the rate the drift grows at in SD per year and the sustained shift
// it grows to in SD; empty when not affected).
func TruthCSV() []byte { return mustRead("truth.csv") }

// OutcomesCSV returns a copy of data/outcomes.csv: one row per workforce
// worker, columns worker,hypertension,hypertension_age,obstruction,
// obstruction_age: whether raised blood pressure and airflow obstruction
// were later diagnosed (yes/no) and the age at diagnosis (empty when not
// diagnosed). It is the labelled history veer evaluate and the demo score
// methods on.
func OutcomesCSV() []byte { return mustRead("outcomes.csv") }
