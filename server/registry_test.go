package server

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"log/slog"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"

	"veer/functions/cell"
	"veer/internal/atomicfile"
	"veer/server/servertest"
)

func openReg(t *testing.T, dir string) (*Registry, *servertest.LogBuffer) {
	t.Helper()
	logs := &servertest.LogBuffer{}
	r, err := OpenRegistry(dir, slog.New(slog.NewTextHandler(logs, nil)))
	if err != nil {
		t.Fatal(err)
	}
	return r, logs
}

func TestRegistryVersions(t *testing.T) {
	dir := t.TempDir()
	r, _ := openReg(t, dir)
	var events []string
	r.Watch(func(name string) { events = append(events, name) })
	steps := []struct {
		name, doc  string
		wantHandle string
		created    bool
	}{
		{"BP", "a", "BP@v1", true},
		{"bp", "a", "BP@v1", false}, // identical to latest: same handle
		{"bp", "b", "BP@v2", true},
		{"Bp", "a", "BP@v3", true}, // back to old content: new version, it is the latest now
		{"fev1", "x", "fev1@v1", true},
	}
	for _, s := range steps {
		h, created, err := r.Save(s.name, []byte(s.doc))
		if err != nil || h != s.wantHandle || created != s.created {
			t.Fatalf("Save(%s, %s) = %s, %v, %v; want %s, %v", s.name, s.doc, h, created, err, s.wantHandle, s.created)
		}
	}
	if strings.Join(events, ",") != "bp,bp,bp,fev1" {
		t.Errorf("watch events = %v", events)
	}
	for ref, want := range map[string]string{"bp": "a", "BP@v1": "a", "bp@v2": "b", "bp@V3": "a", "FEV1": "x"} {
		m, err := r.Get(ref)
		if err != nil || string(m.Doc) != want {
			t.Errorf("Get(%s) = %q, %v; want %q", ref, m.Doc, err, want)
		}
	}
	if h, ok := r.Resolve("bp"); !ok || h != "BP@v3" {
		t.Errorf("Resolve(bp) = %s, %v", h, ok)
	}
	for _, ref := range []string{"bp@v4", "nope", "bad/name", "bp@x"} {
		if _, err := r.Get(ref); cell.AsError(err).Code != cell.CodeRef {
			t.Errorf("Get(%q) error = %v; want #REF!", ref, err)
		}
	}
	for _, name := range []string{"", "a/b", "../x", ".hidden", "x@v1", strings.Repeat("a", 65), "a b"} {
		if _, _, err := r.Save(name, []byte("z")); err == nil {
			t.Errorf("Save(%q) accepted a bad name", name)
		}
	}

	// A restart sees the same models, handles and documents.
	r2, logs := openReg(t, dir)
	if got, want := r2.List(), r.List(); !equalJSON(got, want) {
		t.Errorf("after reopen List = %+v; want %+v", got, want)
	}
	if h, created, _ := r2.Save("bp", []byte("a")); h != "BP@v3" || created {
		t.Errorf("after reopen, saving the latest content gave %s, %v", h, created)
	}
	if strings.Contains(logs.String(), "WARN") {
		t.Errorf("clean reopen logged warnings: %s", logs)
	}

	// Delete: gone now and after a restart, and numbers are not reused.
	if err := r2.Delete("BP"); err != nil {
		t.Fatal(err)
	}
	if _, err := r2.Get("bp"); cell.AsError(err).Code != cell.CodeRef {
		t.Errorf("deleted model still readable: %v", err)
	}
	if err := r2.Delete("bp"); cell.AsError(err).Code != cell.CodeRef {
		t.Errorf("second delete error = %v", err)
	}
	if err := r2.Delete("fev1@v1"); err == nil {
		t.Error("delete by handle accepted")
	}
	r3, _ := openReg(t, dir)
	if _, err := r3.Get("bp"); err == nil {
		t.Error("deleted model came back after restart")
	}
	if h, _, _ := r3.Save("bp", []byte("new")); h != "bp@v4" {
		t.Errorf("save after delete gave %s; want bp@v4 (numbers never reused)", h)
	}
}

func equalJSON(a, b any) bool {
	x, _ := json.Marshal(a)
	y, _ := json.Marshal(b)
	return bytes.Equal(x, y)
}

// TestRegistryDamagedFiles: damaged and partial files are kept out of use
// with a warning that names no model, listed as damaged, and the rest
// loads.
func TestRegistryDamagedFiles(t *testing.T) {
	dir := t.TempDir()
	r, _ := openReg(t, dir)
	r.Save("good", []byte(`{"v":1}`))
	r.Save("good", []byte(`{"v":2}`))
	r.Save("keep", []byte(`{"k":1}`))
	r.Save("keep", []byte(`{"k":2}`))
	r.Save("flip", []byte(`{"v":1}`))
	r.Save("cut", []byte(`{"v":1}`))
	r.Close()
	// A flipped byte in the document.
	p := filepath.Join(dir, "flip@v1.model")
	b, _ := os.ReadFile(p)
	b[len(b)-2] ^= 0x20
	os.WriteFile(p, b, 0o600)
	// A file cut short.
	p = filepath.Join(dir, "cut@v1.model")
	b, _ = os.ReadFile(p)
	os.WriteFile(p, b[:len(b)-3], 0o600)
	// Garbage, a header only, a misnamed copy and an old temporary file.
	os.WriteFile(filepath.Join(dir, "junk@v1.model"), []byte("not a model"), 0o600)
	os.WriteFile(filepath.Join(dir, "hdr@v1.model"), []byte(`{"format":"veer-model/1","name":"hdr","version":1,"size":5,"sha256":"00"}`), 0o600)
	good, _ := os.ReadFile(filepath.Join(dir, "good@v1.model"))
	os.WriteFile(filepath.Join(dir, "other@v7.model"), good, 0o600)
	// Old temporary files of a save a crash interrupted, in the form
	// atomicfile names them and in the older form.
	tmp := filepath.Join(dir, ".keep@v2.model.tmp-123")
	tmpOld := filepath.Join(dir, ".tmp-123")
	old := time.Now().Add(-2 * time.Hour)
	for _, p := range []string{tmp, tmpOld} {
		os.WriteFile(p, []byte("half"), 0o600)
		os.Chtimes(p, old, old)
	}

	r2, logs := openReg(t, dir)
	list := r2.List()
	var intact, damaged []string
	for _, m := range list {
		for _, v := range m.Versions {
			if v.Damaged != "" {
				damaged = append(damaged, v.Handle)
			} else {
				intact = append(intact, v.Handle)
			}
		}
	}
	if got := strings.Join(intact, " "); got != "good@v1 good@v2 keep@v1 keep@v2" {
		t.Errorf("intact versions after damage: %s", got)
	}
	if got := strings.Join(damaged, " "); got != "cut@v1 flip@v1 hdr@v1 junk@v1 other@v7" {
		t.Errorf("damaged versions listed: %s", got)
	}
	for range 2 { // read from disk, then from the cache of old versions
		if m, err := r2.Get("keep@v1"); err != nil || string(m.Doc) != `{"k":1}` {
			t.Errorf("old version of a good model: %q, %v", m.Doc, err)
		}
	}
	for _, ref := range []string{"flip", "flip@v1", "cut", "other@v7"} {
		_, err := r2.Get(ref)
		if e := cell.AsError(err); e == nil || e.Code != cell.CodeRef || !strings.Contains(e.Message, "damaged") {
			t.Errorf("Get(%s) = %v; want #REF! saying the version is damaged", ref, err)
		}
	}
	warn := strings.Count(logs.String(), "skipping damaged model file")
	if warn != 5 {
		t.Errorf("%d warnings; want 5 (flip, cut, junk, hdr, other): %s", warn, logs)
	}
	for _, name := range []string{"flip", "cut", "junk", "hdr", "other"} {
		if strings.Contains(logs.String(), name+"@") || strings.Contains(logs.String(), `"`+name+`"`) || strings.Contains(logs.String(), "="+name) {
			t.Errorf("the log names the model %s: %s", name, logs)
		}
	}
	for _, p := range []string{tmp, tmpOld} {
		if _, err := os.Stat(p); !os.IsNotExist(err) {
			t.Errorf("old temporary file %s was not removed", filepath.Base(p))
		}
	}
	// An old version damaged after loading is reported, not served.
	p = filepath.Join(dir, "good@v1.model")
	b, _ = os.ReadFile(p)
	b[len(b)-2] ^= 0x20
	os.WriteFile(p, b, 0o600)
	if _, err := r2.Get("good@v1"); cell.AsError(err).Code != cell.CodeRef {
		t.Errorf("damaged old version served: %v", err)
	}
	// Deleting a model with a damaged version removes its file too.
	if err := r2.Delete("flip"); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(dir, "flip@v1.model")); !os.IsNotExist(err) {
		t.Errorf("the damaged version's file is still there after a delete")
	}
	if h, _, _ := r2.Save("flip", []byte("new")); h != "flip@v2" {
		t.Errorf("save after deleting a damaged model gave %s; want flip@v2", h)
	}
}

// TestRegistryDamagedNewest: when the newest version of a model is damaged,
// its bare name fails with a message that says so and names the newest
// intact version, instead of quietly meaning an older version; its handle
// says "damaged" (not "no version"); the next save takes the next number.
func TestRegistryDamagedNewest(t *testing.T) {
	dir := t.TempDir()
	r, _ := openReg(t, dir)
	for _, doc := range []string{`{"v":1}`, `{"v":2}`, `{"v":3}`} {
		r.Save("bp", []byte(doc))
	}
	r.Close()
	p := filepath.Join(dir, "bp@v3.model")
	b, _ := os.ReadFile(p)
	b[len(b)-2] ^= 0x20
	os.WriteFile(p, b, 0o600)

	r2, _ := openReg(t, dir)
	defer r2.Close()
	_, err := r2.Get("bp")
	if e := cell.AsError(err); e == nil || e.Code != cell.CodeRef || !strings.Contains(e.Message, "newest version") ||
		!strings.Contains(e.Message, "bp@v3") || !strings.Contains(e.Message, "damaged") || !strings.Contains(e.Message, "bp@v2 is the newest intact version") {
		t.Errorf("Get(bp) with a damaged newest version = %v", err)
	}
	_, err = r2.Get("bp@v3")
	if e := cell.AsError(err); e == nil || e.Code != cell.CodeRef || !strings.Contains(e.Message, "damaged") || strings.Contains(e.Message, "no version") {
		t.Errorf("Get(bp@v3) = %v; want it called damaged", err)
	}
	if m, err := r2.Get("bp@v2"); err != nil || string(m.Doc) != `{"v":2}` {
		t.Errorf("the intact version by handle: %q, %v", m.Doc, err)
	}
	if h, ok := r2.Resolve("bp"); ok {
		t.Errorf("Resolve(bp) = %s; a bare name whose newest version is damaged resolves to nothing", h)
	}
	if l := r2.List(); len(l) != 1 || l[0].Latest != "bp@v3" || l[0].Versions[2].Damaged == "" {
		t.Errorf("List = %+v", l)
	}
	// Saving the content of v2 again is a new version: v2 is not the newest.
	if h, created, err := r2.Save("bp", []byte(`{"v":2}`)); err != nil || h != "bp@v4" || !created {
		t.Errorf("save after a damaged newest version = %s, %v, %v; want bp@v4, a new version", h, created, err)
	}
	if m, err := r2.Get("bp"); err != nil || m.Handle != "bp@v4" {
		t.Errorf("after a new save, Get(bp) = %s, %v", m.Handle, err)
	}
	// The damaged version stays listed and keeps its number.
	if _, err := r2.Get("bp@v3"); !strings.Contains(fmt.Sprint(err), "damaged") {
		t.Errorf("Get(bp@v3) after the new save = %v", err)
	}
}

// TestRegistryRemovesTemporaryFilesAtOnce: temporary files a crash left
// behind are removed when the registry opens, however young, when no other
// process uses the directory; with another process holding it, young ones
// are kept (that process may be writing them).
func TestRegistryRemovesTemporaryFilesAtOnce(t *testing.T) {
	dir := t.TempDir()
	tmp := filepath.Join(dir, ".bp@v1.model.tmp-42")
	os.WriteFile(tmp, []byte("half a save"), 0o600)
	first, _ := openReg(t, dir)
	if _, err := os.Stat(tmp); !os.IsNotExist(err) {
		t.Errorf("a young temporary file was kept by the only process using the directory")
	}
	os.WriteFile(tmp, []byte("another process is writing this"), 0o600)
	second, _ := openReg(t, dir) // the first still holds the directory
	if _, err := os.Stat(tmp); err != nil {
		t.Errorf("a young temporary file was removed while another registry used the directory: %v", err)
	}
	second.Close()
	first.Close()
	third, _ := openReg(t, dir)
	defer third.Close()
	if _, err := os.Stat(tmp); !os.IsNotExist(err) {
		t.Errorf("the temporary file survived a reopen after the others closed")
	}
}

func TestRegistryBuiltin(t *testing.T) {
	r, _ := openReg(t, t.TempDir())
	h, err := r.AddBuiltin("demo", []byte(`{"demo":true}`))
	if err != nil || h != "demo@v1" {
		t.Fatalf("AddBuiltin = %s, %v", h, err)
	}
	if m, err := r.Get("DEMO"); err != nil || !m.Builtin || string(m.Doc) != `{"demo":true}` {
		t.Errorf("Get(DEMO) = %+v, %v", m, err)
	}
	if _, _, err := r.Save("demo", []byte("x")); cell.AsError(err).Code != cell.CodeRef {
		t.Errorf("saving over a built-in model: %v", err)
	}
	if err := r.Delete("demo"); cell.AsError(err).Code != cell.CodeRef {
		t.Errorf("deleting a built-in model: %v", err)
	}
	if _, err := r.AddBuiltin("demo", nil); err == nil {
		t.Error("second AddBuiltin of the same name accepted")
	}
	if l := r.List(); len(l) != 1 || !l[0].Builtin {
		t.Errorf("List = %+v", l)
	}
}

// helperEnv makes the test binary act as a process that saves models in a
// loop until it is killed.
const helperEnv = "VEER_TEST_SAVE_LOOP_DIR"

// TestHelperSaveLoop is not a test: run by TestRegistrySurvivesKill in a
// child process, it saves models as fast as it can and prints each handle
// after Save returns.
func TestHelperSaveLoop(t *testing.T) {
	dir := os.Getenv(helperEnv)
	if dir == "" {
		t.Skip("helper process only")
	}
	r, err := OpenRegistry(dir, nil)
	if err != nil {
		fmt.Println("open failed:", err)
		os.Exit(3)
	}
	round, _ := strconv.Atoi(os.Getenv(helperEnv + "_ROUND"))
	rng := rand.New(rand.NewPCG(uint64(round), 7))
	w := bufio.NewWriter(os.Stdout)
	for i := 0; ; i++ {
		name := fmt.Sprintf("m%d", i%3)
		doc := killDoc(round, i, rng.IntN(300_000))
		h, _, err := r.Save(name, doc)
		if err != nil {
			fmt.Fprintln(w, "error", err)
			w.Flush()
			os.Exit(4)
		}
		fmt.Fprintln(w, "saved", h)
		w.Flush()
	}
}

// killDoc is a self-checking document: its "pad" has the stated length.
func killDoc(round, i, n int) []byte {
	return []byte(fmt.Sprintf(`{"round":%d,"i":%d,"n":%d,"pad":"%s"}`, round, i, n, strings.Repeat("x", n)))
}

// TestRegistrySurvivesKill kills (SIGKILL) a process in the middle of saving
// models, several times, and checks after each kill that the registry loads
// without error, every version is intact, and every save the process had
// completed (printed) is there.
func TestRegistrySurvivesKill(t *testing.T) {
	if runtime.GOOS == "js" || runtime.GOOS == "wasip1" {
		t.Skip("no subprocesses")
	}
	dir := t.TempDir()
	acked := map[string]bool{}
	rng := rand.New(rand.NewPCG(42, 1))
	for round := 1; round <= 4; round++ {
		cmd := exec.Command(os.Args[0], "-test.run=^TestHelperSaveLoop$", "-test.count=1")
		cmd.Env = append(os.Environ(), helperEnv+"="+dir, helperEnv+"_ROUND="+strconv.Itoa(round))
		out, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		lines := make(chan string, 1024)
		go func() {
			sc := bufio.NewScanner(out)
			for sc.Scan() {
				lines <- sc.Text()
			}
			close(lines)
		}()
		// Let it complete a few saves, then kill it at a random moment.
		want := 5 + rng.IntN(10)
		got := 0
		timeout := time.After(15 * time.Second)
		for got < want {
			select {
			case l, ok := <-lines:
				if !ok {
					t.Fatalf("helper ended early")
				}
				if h, ok := strings.CutPrefix(l, "saved "); ok {
					acked[h] = true
					got++
				} else if strings.HasPrefix(l, "error") {
					t.Fatalf("helper: %s", l)
				}
			case <-timeout:
				t.Fatal("helper made no progress")
			}
		}
		time.Sleep(time.Duration(rng.IntN(3000)) * time.Microsecond)
		if err := cmd.Process.Kill(); err != nil {
			t.Fatal(err)
		}
		for l := range lines {
			if h, ok := strings.CutPrefix(l, "saved "); ok {
				acked[h] = true
			}
		}
		cmd.Wait()

		r, logs := openReg(t, dir)
		if strings.Contains(logs.String(), "damaged") {
			t.Errorf("round %d: damaged files after kill: %s", round, logs)
		}
		// The killed save's temporary file is gone at once (no other
		// process uses the directory).
		entries, _ := os.ReadDir(dir)
		for _, e := range entries {
			if atomicfile.IsTemp(e.Name()) {
				t.Errorf("round %d: temporary file %s left after the reopen", round, e.Name())
			}
		}
		versions := 0
		for _, m := range r.List() {
			for _, v := range m.Versions {
				versions++
				ref, err := r.Get(v.Handle)
				if err != nil {
					t.Fatalf("round %d: %s listed but unreadable: %v", round, v.Handle, err)
				}
				var d struct {
					Round, I, N int
					Pad         string
				}
				if err := json.Unmarshal(ref.Doc, &d); err != nil || len(d.Pad) != d.N {
					t.Fatalf("round %d: %s holds a damaged document (%d bytes): %v", round, v.Handle, len(ref.Doc), err)
				}
			}
		}
		for h := range acked {
			if _, err := r.Get(h); err != nil {
				t.Errorf("round %d: save of %s completed before the kill but is lost: %v", round, h, err)
			}
		}
		if versions < len(acked) {
			t.Errorf("round %d: %d versions on disk but %d saves completed", round, versions, len(acked))
		}
		r.Close()
		t.Logf("round %d: killed after %d acknowledged saves; %d versions on disk", round, got, versions)
	}
}
