package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"veer/examples/scenario"
	"veer/internal/atomicfile"
)

func main() {
	if err := run(os.Args[1:], os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

// run parses args, generates the scenario and writes the four files;
// progress goes to talk.
func run(args []string, talk io.Writer) error {
	fs := flag.NewFlagSet("gen", flag.ContinueOnError)
	fs.SetOutput(talk)
	out := fs.String("out", filepath.Join("examples", "data"), "folder to write reference.csv, workforce.csv, truth.csv and outcomes.csv into")
	seed := fs.Uint64("seed", scenario.DefaultSeed, "seed of the generator; the default gives the committed files")
	if err := fs.Parse(args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return fmt.Errorf("unexpected argument %q; use -out FOLDER and -seed N", fs.Arg(0))
	}
	cfg := scenario.DefaultConfig()
	cfg.Seed = *seed
	s, err := scenario.Generate(cfg)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return fmt.Errorf("cannot create the output folder: %w", err)
	}
	files := []struct {
		name string
		data []byte
	}{
		{"reference.csv", s.ReferenceCSV()},
		{"workforce.csv", s.WorkforceCSV()},
		{"truth.csv", s.TruthCSV()},
		{"outcomes.csv", s.OutcomesCSV()},
	}
	for _, f := range files {
		if err := atomicfile.WriteFile(filepath.Join(*out, f.name), f.data, 0o644); err != nil {
			return err
		}
	}
	fmt.Fprintf(talk, "wrote %s: %d reference exams, %d workforce exams, %d workers in the truth (seed %d)\n",
		*out, len(s.Reference), len(s.Workforce), len(s.Truth), cfg.Seed)
	return nil
}
