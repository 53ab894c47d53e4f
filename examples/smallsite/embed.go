package smallsite

import (
	"embed"
	"fmt"
)

//go:embed data/*
var data embed.FS

func mustRead(name string) []byte {
	b, err := data.ReadFile("data/" + name)
	if err != nil {
		panic(fmt.Sprintf("smallsite: embedded file %s is missing: %v", name, err))
	}
	return b
}

// File names in data/ (and in the folder gen writes).
const (
	SBPTableFile      = "sbp-lms.csv"
	FEV1EquationsFile = "fev1-equations.json"
	ExamsFile         = "exams.csv"
	TruthFile         = "truth.csv"
)

// Files returns the committed files by name, as gen writes them.
func Files() map[string][]byte {
	out := map[string][]byte{}
	for _, n := range []string{SBPTableFile, FEV1EquationsFile, ExamsFile, TruthFile} {
		out[n] = mustRead(n)
	}
	return out
}

// Generated returns the files the generator makes from seed, by name.
func Generated(seed uint64) (map[string][]byte, error) {
	s, err := Generate(seed)
	if err != nil {
		return nil, err
	}
	return map[string][]byte{
		SBPTableFile:      SBPTableCSV(),
		FEV1EquationsFile: FEV1EquationsJSON(),
		ExamsFile:         s.ExamsCSV(),
		TruthFile:         s.TruthCSV(),
	}, nil
}
