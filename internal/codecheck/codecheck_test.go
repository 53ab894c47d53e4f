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

// TestModTidy checks that go.mod and go.sum are what `go mod tidy` makes of
// them: every requirement used, direct imports not marked indirect, and no
// checksum missing or left over. It needs no network once the modules
// go.sum lists are in the module cache (.ci/run downloads them).
func TestModTidy(t *testing.T) {
	goBin, err := exec.LookPath("go")
	if err != nil {
		t.Skip("the go command is not on PATH")
	}
	cmd := exec.Command(goBin, "mod", "tidy", "-diff")
	cmd.Dir = repoRoot(t)
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	err = cmd.Run()
	if err != nil && stdout.Len() == 0 {
		t.Fatalf("go mod tidy -diff could not run: %v\n%s", err, stderr.Bytes())
	}
	if err != nil || stdout.Len() > 0 {
		t.Errorf("go.mod or go.sum is not tidy; run `go mod tidy`. The difference:\n%s%s", stdout.Bytes(), stderr.Bytes())
	}
}

// TestGoLine checks that the go line of go.mod names a release every Go
// 1.26 toolchain satisfies (1.26.0, not a later patch release) and that the
// README asks for the same release.
func TestGoLine(t *testing.T) {
	root := repoRoot(t)
	mod, err := os.ReadFile(filepath.Join(root, "go.mod"))
	if err != nil {
		t.Fatal(err)
	}
	var goLine string
	for _, l := range strings.Split(string(mod), "\n") {
		if v, ok := strings.CutPrefix(strings.TrimSpace(l), "go "); ok {
			goLine = strings.TrimSpace(v)
		}
	}
	major, patch, _ := strings.Cut(goLine, ".")
	minor, patch, _ := strings.Cut(patch, ".")
	if major == "" || minor == "" || (patch != "" && patch != "0") {
		t.Errorf("go.mod says go %q; want a .0 release (e.g. 1.26.0) so that every patch release of it builds veer", goLine)
	}
	readme, err := os.ReadFile(filepath.Join(root, "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	if want := "Go " + major + "." + minor + " installed"; !strings.Contains(string(readme), want) {
		t.Errorf("README.md does not say %q, the release go.mod asks for (go %s)", want, goLine)
	}
}
