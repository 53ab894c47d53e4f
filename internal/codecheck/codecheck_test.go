package codecheck

import (
	"bytes"
	"go/format"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

func repoRoot(t *testing.T) string {
	t.Helper()
	dir, err := filepath.Abs("../..")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(dir, "go.mod")); err != nil {
		t.Fatalf("cannot find the repository root: %v", err)
	}
	return dir
}

// TestGofmt checks that every Go file is formatted as gofmt would.
func TestGofmt(t *testing.T) {
	root := repoRoot(t)
	var bad []string
	err := filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && (strings.HasPrefix(d.Name(), ".") || d.Name() == "node_modules" || d.Name() == "testdata") && p != root {
			return filepath.SkipDir
		}
		if d.IsDir() || !strings.HasSuffix(p, ".go") {
			return nil
		}
		src, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		out, err := format.Source(src)
		if err != nil {
			bad = append(bad, p+": "+err.Error())
			return nil
		}
		if !bytes.Equal(src, out) {
			rel, _ := filepath.Rel(root, p)
			bad = append(bad, rel)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(bad) > 0 {
		t.Errorf("files not formatted with gofmt:\n%s", strings.Join(bad, "\n"))
	}
}

// TestVet runs go vet over the module.
func TestVet(t *testing.T) {
	if testing.Short() {
		t.Skip("go vet is skipped in -short mode")
	}
	goBin, err := exec.LookPath("go")
	if err != nil {
		t.Skip("the go command is not on PATH")
	}
	cmd := exec.Command(goBin, "vet", "./...")
	cmd.Dir = repoRoot(t)
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Errorf("go vet ./... failed: %v\n%s", err, out)
	}
}
