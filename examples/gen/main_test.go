package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestRunWritesCommittedFiles runs the command with the default seed into a
// temporary folder and compares the files with the committed ones.
func TestRunWritesCommittedFiles(t *testing.T) {
	dir := t.TempDir()
	var talk bytes.Buffer
	if err := run([]string{"-out", dir}, &talk); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(talk.String(), "wrote "+dir) {
		t.Errorf("progress message %q does not name the folder", talk.String())
	}
	for _, name := range []string{"reference.csv", "workforce.csv", "truth.csv", "outcomes.csv"} {
		got, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		want, err := os.ReadFile(filepath.Join("..", "data", name))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("%s differs from examples/data/%s; rerun `go run ./examples/gen`", name, name)
		}
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 4 {
		t.Errorf("%d files in the output folder, want 4 (no temporary files left)", len(entries))
	}
}

func TestRunOtherSeedAndErrors(t *testing.T) {
	dir := t.TempDir()
	if err := run([]string{"-out", dir, "-seed", "5"}, new(bytes.Buffer)); err != nil {
		t.Fatal(err)
	}
	got, _ := os.ReadFile(filepath.Join(dir, "workforce.csv"))
	committed, _ := os.ReadFile(filepath.Join("..", "data", "workforce.csv"))
	if len(got) == 0 || bytes.Equal(got, committed) {
		t.Error("seed 5 gave no file or the committed default-seed file")
	}

	tests := []struct {
		args []string
		want string
	}{
		{[]string{"extra"}, `unexpected argument "extra"`},
		{[]string{"-seed", "minus"}, "invalid value"},
		{[]string{"-out", filepath.Join(dir, "workforce.csv", "sub")}, "cannot create the output folder"},
	}
	for _, tc := range tests {
		err := run(tc.args, new(bytes.Buffer))
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("run(%q) error = %v; want it to contain %q", tc.args, err, tc.want)
		}
	}
}
