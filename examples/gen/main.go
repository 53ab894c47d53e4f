package main

import (
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"veer/examples/scenario"
)

func main() {
	if err := run(os.Args[1:], os.Stderr); err != nil {
		fmt.Fprintln(os.Stderr, "gen:", err)
		os.Exit(1)
	}
}

// run parses args, generates the scenario and writes the three files;
// progress goes to talk.
func run(args []string, talk io.Writer) error {
	fs := flag.NewFlagSet("gen", flag.ContinueOnError)
	fs.SetOutput(talk)
	out := fs.String("out", filepath.Join("examples", "data"), "folder to write reference.csv, workforce.csv and truth.csv into")
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
	}
	for _, f := range files {
		if err := writeAtomic(filepath.Join(*out, f.name), f.data); err != nil {
			return err
		}
	}
	fmt.Fprintf(talk, "wrote %s: %d reference exams, %d workforce exams, %d workers in the truth (seed %d)\n",
		*out, len(s.Reference), len(s.Workforce), len(s.Truth), cfg.Seed)
	return nil
}

// writeAtomic writes data to a temporary file beside path and renames it
// into place, so a crash never leaves a half-written file.
func writeAtomic(path string, data []byte) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*")
	if err != nil {
		return fmt.Errorf("cannot write %s: %w", path, err)
	}
	defer os.Remove(tmp.Name()) // no-op after a successful rename
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		return fmt.Errorf("cannot write %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("cannot write %s: %w", path, err)
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return fmt.Errorf("cannot write %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("cannot write %s: %w", path, err)
	}
	return nil
}
