package atomicfile

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"
)

// leftovers lists the temporary files in dir.
func leftovers(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range es {
		if IsTemp(e.Name()) {
			out = append(out, e.Name())
		}
	}
	return out
}

func TestWriteFile(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "out.csv")
	for i, c := range []struct {
		data string
		perm fs.FileMode
	}{
		{"first\n", 0o600},
		{"second, longer than the first\n", 0o644},
		{"", 0o640},
	} {
		if err := WriteFile(p, []byte(c.data), c.perm); err != nil {
			t.Fatalf("write %d: %v", i, err)
		}
		got, err := os.ReadFile(p)
		if err != nil || string(got) != c.data {
			t.Fatalf("write %d: read back %q, %v; want %q", i, got, err, c.data)
		}
		if runtime.GOOS != "windows" {
			if fi, _ := os.Stat(p); fi.Mode().Perm() != c.perm {
				t.Errorf("write %d: mode %v; want %v", i, fi.Mode().Perm(), c.perm)
			}
		}
	}
	if l := leftovers(t, dir); len(l) > 0 {
		t.Errorf("temporary files left: %v", l)
	}
}

func TestWriteFileFailures(t *testing.T) {
	dir := t.TempDir()
	// A folder that does not exist: nothing is written, the error names it.
	missing := filepath.Join(dir, "no-such-folder", "out.csv")
	if err := WriteFile(missing, []byte("x"), 0o600); err == nil || !strings.Contains(err.Error(), "no-such-folder") || !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("write into a missing folder: %v", err)
	}
	// The destination is a folder: the rename fails, the folder and its
	// content stay, no temporary file is left.
	sub := filepath.Join(dir, "sub")
	os.MkdirAll(filepath.Join(sub, "inner"), 0o755)
	if err := WriteFile(sub, []byte("x"), 0o600); err == nil || !strings.Contains(err.Error(), "cannot replace") {
		t.Errorf("write over a folder: %v", err)
	}
	if fi, err := os.Stat(filepath.Join(sub, "inner")); err != nil || !fi.IsDir() {
		t.Errorf("the folder was damaged: %v", err)
	}
	if l := leftovers(t, dir); len(l) > 0 {
		t.Errorf("temporary files left: %v", l)
	}
	// A read-only folder (not for root, who may write anyway).
	if runtime.GOOS != "windows" && os.Geteuid() != 0 {
		ro := filepath.Join(dir, "ro")
		os.Mkdir(ro, 0o755)
		os.WriteFile(filepath.Join(ro, "keep.csv"), []byte("old"), 0o644)
		os.Chmod(ro, 0o555)
		defer os.Chmod(ro, 0o755)
		err := WriteFile(filepath.Join(ro, "keep.csv"), []byte("new"), 0o644)
		if !errors.Is(err, fs.ErrPermission) || !strings.Contains(err.Error(), "cannot write in the folder") {
			t.Errorf("write into a read-only folder: %v", err)
		}
		if b, _ := os.ReadFile(filepath.Join(ro, "keep.csv")); string(b) != "old" {
			t.Errorf("the old file changed: %q", b)
		}
	}
}

func TestCreate(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "token")
	if err := Create(p, []byte("one\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	err := Create(p, []byte("two\n"), 0o600)
	if !errors.Is(err, fs.ErrExist) {
		t.Errorf("second Create: %v; want fs.ErrExist", err)
	}
	if b, _ := os.ReadFile(p); string(b) != "one\n" {
		t.Errorf("an existing file was replaced: %q", b)
	}
	if l := leftovers(t, dir); len(l) > 0 {
		t.Errorf("temporary files left: %v", l)
	}
}

func TestFile(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "big.csv")
	os.WriteFile(p, []byte("old"), 0o644)

	// Aborted: the old file stays.
	f, err := New(p, 0o644)
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintln(f, "half of it")
	f.Abort()
	f.Abort() // twice is harmless
	if b, _ := os.ReadFile(p); string(b) != "old" {
		t.Errorf("after Abort: %q", b)
	}
	if err := f.Commit(); err == nil {
		t.Error("Commit after Abort succeeded")
	}

	// Streamed and committed.
	f, err = New(p, 0o644)
	if err != nil {
		t.Fatal(err)
	}
	if f.Path() != p {
		t.Errorf("Path = %s", f.Path())
	}
	w := bufio.NewWriter(f)
	for i := range 10_000 {
		fmt.Fprintf(w, "%d\n", i)
	}
	w.Flush()
	if b, _ := os.ReadFile(p); string(b) != "old" {
		t.Errorf("the destination changed before Commit: %.20q", b)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	f.Abort() // after Commit: does nothing
	b, _ := os.ReadFile(p)
	if n := bytes.Count(b, []byte("\n")); n != 10_000 {
		t.Errorf("%d lines after Commit", n)
	}
	if l := leftovers(t, dir); len(l) > 0 {
		t.Errorf("temporary files left: %v", l)
	}
}

func TestIsTemp(t *testing.T) {
	for _, c := range []struct {
		name string
		want bool
	}{
		{".out.csv.tmp-123456", true},
		{".tmp-123", true}, // the older form
		{".model@v1.model.tmp-9", true},
		{"out.csv", false},
		{"out.tmp-1", false},
		{".~lock.book.xlsx#", false},
		{".hidden", false},
	} {
		if got := IsTemp(c.name); got != c.want {
			t.Errorf("IsTemp(%q) = %v; want %v", c.name, got, c.want)
		}
	}
	// The names New makes are recognised.
	f, err := New(filepath.Join(t.TempDir(), "x.json"), 0o600)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	if !IsTemp(filepath.Base(f.Name())) {
		t.Errorf("IsTemp(%q) = false for a name New made", filepath.Base(f.Name()))
	}
}

// helperEnv makes the test binary act as a process that rewrites files in
// a loop until it is killed.
const helperEnv = "VEER_TEST_ATOMICFILE_DIR"

// doc is a self-checking file content: a header with the round, the step
// and the length of the padding that follows.
func doc(round, i, n int) []byte {
	return []byte(fmt.Sprintf("%d %d %d\n%s", round, i, n, strings.Repeat("x", n)))
}

// checkDoc reports whether b is a complete doc and returns its step.
func checkDoc(b []byte) (step int, ok bool) {
	head, pad, found := bytes.Cut(b, []byte("\n"))
	if !found {
		return 0, false
	}
	var round, n int
	if _, err := fmt.Sscan(string(head), &round, &step, &n); err != nil {
		return 0, false
	}
	return step, len(pad) == n && bytes.Count(pad, []byte("x")) == n
}

// TestHelperWriteLoop is not a test: run by TestSurvivesKill in a child
// process, it replaces "replaced" with WriteFile, streams "streamed" through
// a File, and creates "created-N" with Create, printing each step after the
// call returns.
func TestHelperWriteLoop(t *testing.T) {
	dir := os.Getenv(helperEnv)
	if dir == "" {
		t.Skip("helper process only")
	}
	round, _ := strconv.Atoi(os.Getenv(helperEnv + "_ROUND"))
	rng := rand.New(rand.NewPCG(uint64(round), 3))
	out := bufio.NewWriter(os.Stdout)
	for i := 0; ; i++ {
		d := doc(round, i, rng.IntN(400_000))
		var err error
		switch i % 3 {
		case 0:
			err = WriteFile(filepath.Join(dir, "replaced"), d, 0o600)
		case 1:
			var f *File
			if f, err = New(filepath.Join(dir, "streamed"), 0o600); err == nil {
				for len(d) > 0 && err == nil { // in small pieces
					k := min(len(d), 4096)
					_, err = f.Write(d[:k])
					d = d[k:]
				}
				if err == nil {
					err = f.Commit()
				}
				f.Abort()
			}
		case 2:
			err = Create(filepath.Join(dir, fmt.Sprintf("created-%d-%d", round, i)), d, 0o600)
		}
		if err != nil {
			fmt.Fprintln(out, "error", err)
			out.Flush()
			os.Exit(4)
		}
		fmt.Fprintln(out, "done", i)
		out.Flush()
	}
}

// TestSurvivesKill kills (SIGKILL) a process in the middle of writing
// files, several times, and checks after each kill that every file is
// complete (old or new, never a mix or a part), that every write the
// process had finished is there, and that only temporary files are left
// over (which IsTemp recognises).
func TestSurvivesKill(t *testing.T) {
	if runtime.GOOS == "js" || runtime.GOOS == "wasip1" {
		t.Skip("no subprocesses")
	}
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(42, 2))
	rounds := 6
	if testing.Short() {
		rounds = 2
	}
	for round := 1; round <= rounds; round++ {
		cmd := exec.Command(os.Args[0], "-test.run=^TestHelperWriteLoop$", "-test.count=1")
		cmd.Env = append(os.Environ(), helperEnv+"="+dir, helperEnv+"_ROUND="+strconv.Itoa(round))
		stdout, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		lines := make(chan string, 1024)
		go func() {
			sc := bufio.NewScanner(stdout)
			for sc.Scan() {
				lines <- sc.Text()
			}
			close(lines)
		}()
		last := -1
		ack := func(l string) {
			if s, ok := strings.CutPrefix(l, "done "); ok {
				last, _ = strconv.Atoi(s)
			} else if strings.HasPrefix(l, "error") {
				t.Fatalf("helper: %s", l)
			}
		}
		want := 6 + rng.IntN(12)
		timeout := time.After(20 * time.Second)
		for last < want {
			select {
			case l, ok := <-lines:
				if !ok {
					t.Fatal("helper ended early")
				}
				ack(l)
			case <-timeout:
				t.Fatal("helper made no progress")
			}
		}
		time.Sleep(time.Duration(rng.IntN(3000)) * time.Microsecond)
		if err := cmd.Process.Kill(); err != nil {
			t.Fatal(err)
		}
		for l := range lines {
			ack(l)
		}
		cmd.Wait()

		// The replaced files hold a complete step, no older than the last
		// one finished.
		for _, c := range []struct {
			name string
			mod  int
		}{{"replaced", 0}, {"streamed", 1}} {
			b, err := os.ReadFile(filepath.Join(dir, c.name))
			if err != nil {
				t.Fatalf("round %d: %s: %v", round, c.name, err)
			}
			step, ok := checkDoc(b)
			if !ok {
				t.Fatalf("round %d: %s is damaged (%d bytes)", round, c.name, len(b))
			}
			lastOf := last - ((last-c.mod)%3+3)%3
			if step%3 != c.mod || step < lastOf {
				t.Errorf("round %d: %s holds step %d; the last finished write of it was step %d", round, c.name, step, lastOf)
			}
		}
		// Every created file is complete; every finished one is there.
		es, _ := os.ReadDir(dir)
		created := map[int]bool{}
		for _, e := range es {
			name := e.Name()
			switch {
			case IsTemp(name):
				os.Remove(filepath.Join(dir, name)) // what a killed writer leaves
			case strings.HasPrefix(name, fmt.Sprintf("created-%d-", round)):
				b, _ := os.ReadFile(filepath.Join(dir, name))
				step, ok := checkDoc(b)
				if !ok {
					t.Fatalf("round %d: %s is damaged (%d bytes)", round, name, len(b))
				}
				created[step] = true
			case name == "replaced" || name == "streamed" || strings.HasPrefix(name, "created-"):
			default:
				t.Errorf("round %d: unexpected file %s", round, name)
			}
		}
		for i := 2; i <= last; i += 3 {
			if !created[i] {
				t.Errorf("round %d: created-%d-%d was finished before the kill but is missing", round, round, i)
			}
		}
		t.Logf("round %d: killed after %d finished writes", round, last+1)
	}
}
