package main

import (
	"archive/zip"
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"veer/addin/calc"
	"veer/functions/catalog"
	"veer/functions/screening"
	"veer/internal/table"
	"veer/server/servertest"
)

// calcRun runs the calc-extension command in-process.
func calcRun(args ...string) (error, string, string) {
	var out, errb bytes.Buffer
	err := runCalcExtension(&env{stdout: &out, stderr: &errb, stdin: strings.NewReader("")}, args)
	return err, out.String(), errb.String()
}

func calcRequireAll() bool { return os.Getenv("VEER_REQUIRE_ALL") == "1" }

func calcSkip(t *testing.T, format string, a ...any) {
	t.Helper()
	if calcRequireAll() {
		t.Fatalf("VEER_REQUIRE_ALL=1 but "+format, a...)
	}
	t.Skipf(format, a...)
}

func TestCalcExtensionCommand(t *testing.T) {
	dir := t.TempDir()
	// Usage errors and a missing SDK give clear messages.
	for _, c := range []struct {
		args  []string
		words string
		usage bool
	}{
		{[]string{"--out", ""}, "--out", true},
		{[]string{"--nonsense"}, "nonsense", true},
		{[]string{"--out", filepath.Join(dir, "a.oxt"), "--version", "one"}, "numbers separated by dots", false},
		{[]string{"--out", filepath.Join(dir, "a.oxt"), "--unoidl-write", filepath.Join(dir, "missing")}, "libreoffice-dev", false},
	} {
		err, _, _ := calcRun(c.args...)
		var ue usageError
		if err == nil || !strings.Contains(err.Error(), c.words) || errors.As(err, &ue) != c.usage {
			t.Errorf("calc-extension %q: error %v; want one saying %q (usage error %v)", c.args, err, c.words, c.usage)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "a.oxt")); err == nil {
		t.Error("a failed build left a file behind")
	}
	if _, err := calc.FindSDK(""); err != nil {
		calcSkip(t, "%v", err)
	}
	out := filepath.Join(dir, "veer.oxt")
	src := filepath.Join(dir, "src")
	err, stdout, stderr := calcRun("--out", out, "--sources", src)
	if err != nil {
		t.Fatalf("calc-extension: %v\n%s", err, stderr)
	}
	if strings.TrimSpace(stdout) != out || !strings.Contains(stderr, "unopkg add") || !strings.Contains(stderr, screening.Caution) {
		t.Errorf("calc-extension output: stdout %q, stderr %q", stdout, stderr)
	}
	zr, err := zip.OpenReader(out)
	if err != nil {
		t.Fatal(err)
	}
	defer zr.Close()
	names := map[string]bool{}
	for _, f := range zr.File {
		names[f.Name] = true
	}
	for _, want := range []string{"META-INF/manifest.xml", "description.xml", "CalcAddIns.xcu", "veer.rdb", "veer_calc.py", "veer.components"} {
		if !names[want] {
			t.Errorf("veer.oxt lacks %s (has %v)", want, names)
		}
	}
	idl, err := os.ReadFile(filepath.Join(src, "idl", "org", "veer", "calc", "XFunctions.idl"))
	if err != nil || !bytes.Contains(idl, []byte(" chart(")) {
		t.Errorf("--sources did not write the IDL with the chart method: %v", err)
	}
}

// calcOffice is a headless LibreOffice with the extension installed in a
// throwaway profile, driven by calc_driver.py.
type calcOffice struct {
	t       *testing.T
	soffice *exec.Cmd
	driver  *exec.Cmd
	in      io.WriteCloser
	lines   chan string
	stderr  *bytes.Buffer
	home    string
}

// calcOfficeTools finds soffice, unopkg and a Python with python3-uno.
func calcOfficeTools(t *testing.T) (soffice, unopkg, python string) {
	t.Helper()
	var err error
	if soffice, err = exec.LookPath("soffice"); err != nil {
		calcSkip(t, "LibreOffice is not installed (Debian packages libreoffice-calc libreoffice-dev python3-uno)")
	}
	if unopkg, err = exec.LookPath("unopkg"); err != nil {
		calcSkip(t, "unopkg is not installed (Debian package libreoffice-common, with libreoffice-calc)")
	}
	for _, p := range []string{"/usr/bin/python3", "python3"} {
		exe, err := exec.LookPath(p)
		if err != nil {
			continue
		}
		if exec.Command(exe, "-c", "import uno").Run() == nil {
			return soffice, unopkg, exe
		}
	}
	calcSkip(t, "no Python with `import uno` (Debian package python3-uno; it works with Debian's /usr/bin/python3)")
	return
}

func calcFreePort(t *testing.T) int {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().(*net.TCPAddr).Port
}

// startCalcOffice installs oxt with unopkg add --shared into a throwaway shared
// package cache and user profile (the system installation is not touched;
// as root unopkg only works with --shared) and starts soffice headless.
func startCalcOffice(t *testing.T, oxt string) *calcOffice {
	soffice, unopkg, python := calcOfficeTools(t)
	root := t.TempDir()
	profile := "-env:UserInstallation=file://" + filepath.Join(root, "profile")
	shared := "-env:UNO_SHARED_PACKAGES_CACHE=file://" + filepath.Join(root, "shared")
	home := filepath.Join(root, "home")
	if err := os.MkdirAll(filepath.Join(home, ".config", "veer"), 0o700); err != nil {
		t.Fatal(err)
	}
	tmp := filepath.Join(root, "tmp") // LibreOffice's and Python's temporary files, removed with the test's
	if err := os.MkdirAll(tmp, 0o700); err != nil {
		t.Fatal(err)
	}
	environ := append(os.Environ(), "HOME="+home, "TMPDIR="+tmp, "XDG_CONFIG_HOME="+filepath.Join(home, ".config"),
		"XDG_DATA_HOME="+filepath.Join(home, "data"), "VEER_PORT=", "VEER_TOKEN=", "VEER_TIMEOUT=")
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	inst := exec.CommandContext(ctx, unopkg, "add", "--shared", "-f", profile, shared, oxt)
	inst.Env = environ
	if out, err := inst.CombinedOutput(); err != nil {
		t.Fatalf("unopkg add --shared %s: %v\n%s", oxt, err, out)
	}
	port := calcFreePort(t)
	o := &calcOffice{t: t, home: home, stderr: &bytes.Buffer{}, lines: make(chan string, 4)}
	o.soffice = exec.Command(soffice, profile, shared, "--headless", "--invisible", "--norestore", "--nologo",
		"--nodefault", "--nolockcheck", fmt.Sprintf("--accept=socket,host=127.0.0.1,port=%d;urp;", port))
	o.soffice.Env = environ
	o.soffice.Stdout, o.soffice.Stderr = io.Discard, io.Discard
	if err := o.soffice.Start(); err != nil {
		t.Fatal(err)
	}
	o.driver = exec.Command(python, filepath.Join("..", "..", "addin", "calc", "testdata", "calc_driver.py"), strconv.Itoa(port))
	o.driver.Env = environ
	o.driver.Stderr = o.stderr
	in, err := o.driver.StdinPipe()
	if err != nil {
		t.Fatal(err)
	}
	out, err := o.driver.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	o.in = in
	if err := o.driver.Start(); err != nil {
		t.Fatal(err)
	}
	go func() {
		sc := bufio.NewScanner(out)
		sc.Buffer(make([]byte, 1<<20), 1<<30)
		for sc.Scan() {
			o.lines <- sc.Text()
		}
		close(o.lines)
	}()
	t.Cleanup(o.stop)
	return o
}

// do sends one driver command and decodes its answer into v.
func (o *calcOffice) do(timeout time.Duration, cmd map[string]any, v any) {
	o.t.Helper()
	b, _ := json.Marshal(cmd)
	if _, err := o.in.Write(append(b, '\n')); err != nil {
		o.t.Fatalf("driver: %v\n%s", err, o.stderr)
	}
	select {
	case line, ok := <-o.lines:
		if !ok {
			o.t.Fatalf("the LibreOffice driver stopped during %v:\n%s", cmd["cmd"], o.stderr)
		}
		var st struct {
			OK    bool   `json:"ok"`
			Error string `json:"error"`
			Trace string `json:"trace"`
		}
		if err := json.Unmarshal([]byte(line), &st); err != nil {
			o.t.Fatalf("driver answer: %v: %.200s", err, line)
		}
		if !st.OK {
			o.t.Fatalf("driver %v: %s\n%s", cmd["cmd"], st.Error, st.Trace)
		}
		if v != nil {
			if err := json.Unmarshal([]byte(line), v); err != nil {
				o.t.Fatal(err)
			}
		}
	case <-time.After(timeout):
		o.t.Fatalf("LibreOffice did not finish %v within %v (hung?)\n%s", cmd["cmd"], timeout, o.stderr)
	}
}

func (o *calcOffice) stop() {
	if o.in != nil {
		b, _ := json.Marshal(map[string]any{"cmd": "quit"})
		o.in.Write(append(b, '\n'))
		o.in.Close()
	}
	done := make(chan struct{})
	go func() {
		o.driver.Wait()
		o.soffice.Wait()
		close(done)
	}()
	select {
	case <-done:
	case <-time.After(20 * time.Second):
		o.driver.Process.Kill()
		o.soffice.Process.Kill()
		<-done
	}
}

// settings writes the add-in's settings file (read again on every change).
func (o *calcOffice) settings(port int, token string) {
	b, _ := json.Marshal(map[string]any{"port": port, "token": token})
	if err := os.WriteFile(filepath.Join(o.home, ".config", "veer", "calc.json"), b, 0o600); err != nil {
		o.t.Fatal(err)
	}
}

// startCalcServer runs `veer serve` in-process on port (0: a free one);
// it can be stopped and started again on the same port.
func startCalcServer(t *testing.T, dir string, port int) *liveServer {
	t.Helper()
	s, log := buildLive(t, &serverFlags{addr: "127.0.0.1:" + strconv.Itoa(port), data: dir})
	return (&liveServer{s: s, dir: dir, log: log}).listen(t)
}

// port returns the port the server listens on.
func (ls *liveServer) port() int {
	_, p, _ := net.SplitHostPort(ls.Addr)
	n, _ := strconv.Atoi(p)
	return n
}

// calcArg is one argument of a VEER formula as the driver resolved it.
type calcArg struct {
	Kind   string           `json:"kind"`
	Value  any              `json:"value"`
	Text   string           `json:"text"`
	Sheet  string           `json:"sheet"`
	Range  string           `json:"range"`
	Rows   [][]any          `json:"rows"`
	Errors map[string]int64 `json:"errors"`
}

// calcBlock is one VEER formula of the workbook with the values Calc shows.
type calcBlock struct {
	Sheet   string           `json:"sheet"`
	Range   string           `json:"range"`
	Formula string           `json:"formula"`
	Fn      string           `json:"fn"`
	Args    []calcArg        `json:"args"`
	Rows    int              `json:"rows"`
	Cols    int              `json:"cols"`
	Values  [][]any          `json:"values"`
	Errors  map[string]int64 `json:"errors"`
}

// calcErrorNumbers are Calc's internal error numbers (LibreOffice
// include/formula/errorcodes.hxx, FormulaError) of the spreadsheet errors.
var calcErrorNumbers = map[string]int64{"#NULL!": 521, "#DIV/0!": 532, "#VALUE!": 519, "#REF!": 524, "#NAME?": 525, "#NUM!": 503, "#N/A": 0x7FFF}

func (b calcBlock) errorAt(r, c int) int64 { return b.Errors[fmt.Sprintf("%d,%d", r, c)] }

// calcWireArgs turns the resolved arguments into the JSON arguments of the
// function, independently of the add-in's Python code: a range parameter
// gets the rows (blank cells null), a text or number parameter the one
// value, an optional one a single value or the rows. Calc does not call an
// add-in with a range holding error cells (the cell shows Err:504), so such
// arguments are reported in refused.
func calcWireArgs(t *testing.T, f calc.Func, args []calcArg) (out []any, refused bool) {
	t.Helper()
	out = make([]any, 0, len(args))
	for i, a := range args {
		if i >= len(f.Params) {
			t.Fatalf("%s has %d arguments in the workbook, the catalogue %d", f.Name, len(args), len(f.Params))
		}
		p := f.Params[i]
		switch a.Kind {
		case "missing":
			out = append(out, nil)
		case "text", "number", "bool":
			if p.IDL == "sequence< sequence< any > >" {
				out = append(out, []any{[]any{a.Value}})
			} else {
				out = append(out, a.Value)
			}
		case "ref":
			rows := make([]any, len(a.Rows))
			for r, row := range a.Rows {
				cells := make([]any, len(row))
				for c, v := range row {
					if _, bad := a.Errors[fmt.Sprintf("%d,%d", r, c)]; bad {
						refused = true
					} else if v == "" {
						cells[c] = nil
					} else {
						cells[c] = v
					}
				}
				rows[r] = cells
			}
			single := len(a.Rows) == 1 && len(a.Rows[0]) == 1
			switch {
			case p.IDL == "string" || p.IDL == "double":
				out = append(out, a.Rows[0][0])
			case p.IDL == "any" && single:
				out = append(out, rows[0].([]any)[0])
			default:
				out = append(out, rows)
			}
		default:
			t.Fatalf("%s argument %d: the test cannot evaluate %q", f.Name, i+1, a.Text)
		}
	}
	for len(out) > 0 && out[len(out)-1] == nil {
		out = out[:len(out)-1]
	}
	return out, refused
}

// calcSameCell compares what Calc shows with the server's value: numbers
// exactly (both are the same binary64), TRUE/FALSE as 1/0, blank as an
// empty cell (0 or ""), error cells by their code.
func calcSameCell(calcV any, calcErr int64, server any) bool {
	switch s := server.(type) {
	case map[string]any:
		code, _ := s["error"].(string)
		return calcErrorNumbers[code] == calcErr && calcErr != 0
	case nil:
		return calcErr == 0 && (calcV == 0.0 || calcV == "")
	case bool:
		want := 0.0
		if s {
			want = 1
		}
		return calcErr == 0 && calcV == want
	case float64:
		return calcErr == 0 && calcV == s
	case string:
		return calcErr == 0 && calcV == s
	}
	return false
}

// calcRows shapes a server value like Calc's result block.
func calcRows(v any) [][]any {
	switch x := v.(type) {
	case []any:
		out := make([][]any, len(x))
		for i, r := range x {
			if rr, ok := r.([]any); ok {
				out[i] = rr
			} else {
				out[i] = []any{r}
			}
		}
		return out
	}
	return [][]any{{v}}
}

// calcCompareBlock checks every cell of a Calc block against the server's answer
// to the same call. Cells beyond the answer show #N/A in Calc.
func calcCompareBlock(t *testing.T, b calcBlock, a servertest.Answer) int {
	t.Helper()
	if a.Error != nil {
		want := calcErrorNumbers[string(a.Error.Code)]
		if want == 0 {
			want = calcErrorNumbers["#N/A"] // #BUSY! and other codes Calc lacks
		}
		if got := b.errorAt(0, 0); got != want {
			t.Errorf("%s %s: the server answers %s (%s) but Calc shows error %d", b.Range, b.Fn, a.Error.Code, a.Error.Message, got)
		}
		return 1
	}
	var v any
	if err := json.Unmarshal(a.Value, &v); err != nil {
		t.Fatal(err)
	}
	rows := calcRows(v)
	n, bad := 0, 0
	for r := 0; r < b.Rows; r++ {
		for c := 0; c < b.Cols; c++ {
			n++
			got, gotErr := b.Values[r][c], b.errorAt(r, c)
			if r >= len(rows) || c >= len(rows[r]) {
				if gotErr != calcErrorNumbers["#N/A"] {
					bad++
					if bad <= 5 {
						t.Errorf("%s %s row %d col %d: beyond the answer (%dx%d) Calc shows %v/%d, want #N/A", b.Range, b.Fn, r+1, c+1, len(rows), len(rows[0]), got, gotErr)
					}
				}
				continue
			}
			if !calcSameCell(got, gotErr, rows[r][c]) {
				bad++
				if bad <= 5 {
					t.Errorf("%s %s row %d col %d: Calc shows %v (error %d), the server answers %v", b.Range, b.Fn, r+1, c+1, got, gotErr, rows[r][c])
				}
			}
		}
	}
	if bad > 5 {
		t.Errorf("%s %s: %d of %d cells differ", b.Range, b.Fn, bad, n)
	}
	return n
}

// TestCalcExtensionInLibreOffice is the end-to-end test of the Calc
// extension in a real LibreOffice Calc (headless) against a real veer
// server: it builds veer.oxt with the calc-extension command, installs it
// with unopkg, opens the example workbook (examples/workbooks/screening.ods)
// full of VEER formulas, recalculates, and compares every VEER cell with
// the server's own answer to the same call and the chart columns with
// `veer screen` on the same data; then bad input: text in a numeric range,
// missing arguments, a blank row, 200,000 rows, a server stopped and
// restarted, a wrong token. Skipped without LibreOffice unless
// VEER_REQUIRE_ALL=1.
func TestCalcExtensionInLibreOffice(t *testing.T) {
	calcOfficeTools(t)
	if _, err := calc.FindSDK(""); err != nil {
		calcSkip(t, "%v", err)
	}
	start := time.Now()
	dir := t.TempDir()
	oxt := filepath.Join(dir, "veer.oxt")
	if err, _, stderr := calcRun("--out", oxt); err != nil {
		t.Fatalf("calc-extension: %v\n%s", err, stderr)
	}
	ls := startCalcServer(t, filepath.Join(dir, "data"), 0)
	defer func() { ls.stop(t) }()
	o := startCalcOffice(t, oxt)
	o.settings(ls.port(), ls.s.Token())

	fns, err := calc.Functions(catalog.New().Listing())
	if err != nil {
		t.Fatal(err)
	}
	byName := map[string]calc.Func{}
	for _, f := range fns {
		byName[f.Name] = f
	}

	t.Run("FunctionWizard", func(t *testing.T) {
		var fl struct {
			Functions []struct {
				Name        string `json:"name"`
				Description string `json:"description"`
				Arguments   []struct {
					Name        string `json:"name"`
					Description string `json:"description"`
					Optional    bool   `json:"optional"`
				} `json:"arguments"`
			} `json:"functions"`
		}
		o.do(60*time.Second, map[string]any{"cmd": "functions"}, &fl)
		seen := map[string]bool{}
		for _, g := range fl.Functions {
			f, ok := byName[g.Name]
			if !ok {
				t.Errorf("Calc lists %s, which the catalogue lacks", g.Name)
				continue
			}
			seen[g.Name] = true
			if g.Description != f.Description || len(g.Arguments) != len(f.Params) {
				t.Errorf("Calc's Function Wizard shows %s as %q with %d arguments", g.Name, g.Description, len(g.Arguments))
				continue
			}
			for i, a := range g.Arguments {
				p := f.Params[i]
				if a.Name != p.Name || !strings.HasPrefix(a.Description, p.Help) || a.Optional != p.Optional {
					t.Errorf("%s argument %d in the Function Wizard: %+v, want %s (optional %v)", g.Name, i+1, a, p.Name, p.Optional)
				}
			}
		}
		for _, f := range fns {
			if !seen[f.Name] {
				t.Errorf("Calc's function list lacks %s", f.Name)
			}
		}
	})

	// The example workbook, as .ods and as .xlsx (Calc maps the VEER names
	// of .xlsx files through the add-in's compatibility names).
	for _, kind := range []string{"ods", "xlsx"} {
		t.Run("Workbook/"+kind, func(t *testing.T) {
			calcWorkbook(t, o, ls, filepath.Join("..", "..", "examples", "workbooks", "screening."+kind), fns, kind == "ods")
		})
	}

	t.Run("BadInput", func(t *testing.T) {
		calcBadInput(t, o, ls)
	})
	t.Logf("whole LibreOffice test: %.1f s", time.Since(start).Seconds())
}

// calcWorkbook opens a copy of the workbook in Calc, recalculates and
// compares every VEER cell with the server's own answer to the same call,
// and (withCLI) the chart columns with veer screen on the same data.
func calcWorkbook(t *testing.T, o *calcOffice, ls *liveServer, workbook string, fns []calc.Func, withCLI bool) {
	b, err := os.ReadFile(workbook)
	if err != nil {
		t.Skipf("no example workbook %s yet: %v (the bad-input checks still build their own sheets)", workbook, err)
	}
	byName := map[string]calc.Func{}
	for _, f := range fns {
		byName[f.Name] = f
	}
	book := filepath.Join(t.TempDir(), filepath.Base(workbook))
	if err := os.WriteFile(book, b, 0o644); err != nil {
		t.Fatal(err)
	}
	var load, recalc struct{ Seconds float64 }
	o.do(120*time.Second, map[string]any{"cmd": "load", "path": book}, &load)
	defer o.do(30*time.Second, map[string]any{"cmd": "close"}, nil)
	o.do(120*time.Second, map[string]any{"cmd": "recalc"}, &recalc)
	var vb struct{ Blocks []calcBlock }
	o.do(120*time.Second, map[string]any{"cmd": "veer"}, &vb)
	if len(vb.Blocks) == 0 {
		t.Fatalf("%s has no VEER formulas that LibreOffice recognises", workbook)
	}
	// The server's own answers to the same calls, in one batch.
	var calls []servertest.Call
	var asked []calcBlock
	used := map[string]bool{}
	exams, cells := 0, 0
	for _, bl := range vb.Blocks {
		f, ok := byName[bl.Fn]
		if !ok {
			t.Fatalf("%s: %s is not a catalogue function (formula %s)", bl.Range, bl.Fn, bl.Formula)
		}
		used[bl.Fn] = true
		if f.Result != "value" {
			exams = max(exams, bl.Rows)
		}
		if f.Local {
			continue
		}
		args, refused := calcWireArgs(t, f, bl.Args)
		if refused {
			if e := bl.errorAt(0, 0); e != 504 {
				t.Errorf("%s: an argument range holds error cells, so Calc should show Err:504, not %v/%d", bl.Range, bl.Values[0][0], e)
			}
			continue
		}
		calls = append(calls, servertest.NewCall(bl.Fn, args...))
		asked = append(asked, bl)
	}
	answers := ls.For(t).Batch(calls...)
	for i, bl := range asked {
		cells += calcCompareBlock(t, bl, answers[i])
	}
	var unused []string
	for _, f := range fns {
		if !used[f.Name] && !f.Local {
			unused = append(unused, f.Name)
		}
	}
	t.Logf("%s: %d VEER formulas, %d VEER cells, %d exam rows, all equal to the server's answers (not used in it: %s)",
		filepath.Base(workbook), len(vb.Blocks), cells, exams, strings.Join(unused, ", "))
	if !withCLI {
		t.Logf("timing: LibreOffice opened and first calculated it in %.2f s, recalculated it (calculateAll) in %.2f s", load.Seconds, recalc.Seconds)
		return
	}
	// The CLI on the same data: one veer screen run per VEER.CHART block.
	cliSeconds := screenLikeCalc(t, ls, vb.Blocks)
	t.Logf("timing: LibreOffice opened and first calculated it in %.2f s, recalculated it (calculateAll) in %.2f s; "+
		"veer screen did the chart and rule work of its VEER.CHART and VEER.RULE blocks in %.2f s", load.Seconds, recalc.Seconds, cliSeconds)
}

// screenLikeCalc runs `veer screen` on the data of every VEER.CHART block
// (with the block's options as flags, and the rule of a VEER.RULE block on
// the same data as --rule) and compares its columns with Calc's. It returns
// the seconds the screen runs took.
func screenLikeCalc(t *testing.T, ls *liveServer, blocks []calcBlock) float64 {
	t.Helper()
	dir := t.TempDir()
	total := 0.0
	for _, ch := range blocks {
		if ch.Fn != "VEER.CHART" || len(ch.Args) < 6 {
			continue
		}
		model := fmt.Sprint(ch.Args[0].Rows[0][0])
		resp, err := http.Get(ls.URL + "/v1/models/" + model)
		if err != nil {
			t.Fatal(err)
		}
		doc, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != 200 {
			t.Fatalf("GET /v1/models/%s: %s", model, doc)
		}
		modelFile := filepath.Join(dir, model+".json")
		os.WriteFile(modelFile, doc, 0o644)
		// The exams as Calc holds them.
		var buf bytes.Buffer
		w := csv.NewWriter(&buf)
		w.Write([]string{"worker", "age", "value", "group"})
		for r := range ch.Args[1].Rows {
			rec := make([]string, 4)
			for k, a := range []calcArg{ch.Args[1], ch.Args[2], ch.Args[3], ch.Args[4]} {
				switch v := a.Rows[r][0].(type) {
				case float64:
					rec[k] = strconv.FormatFloat(v, 'g', -1, 64)
				default:
					rec[k] = fmt.Sprint(v)
				}
			}
			w.Write(rec)
		}
		w.Flush()
		in := filepath.Join(dir, model+"-exams.csv")
		os.WriteFile(in, buf.Bytes(), 0o644)
		out := filepath.Join(dir, model+"-screen.csv")
		args := []string{"screen", "--model", modelFile, "--in", in, "--id", "worker", "--time", "age", "--value", "value", "--group", "group", "--out", out}
		for _, row := range ch.Args[5].Rows {
			name, val := fmt.Sprint(row[0]), row[1]
			sval := fmt.Sprint(val)
			if f, ok := val.(float64); ok {
				sval = strconv.FormatFloat(f, 'g', -1, 64)
			}
			flagName := map[string]string{"target": "target", "limit": "limit", "chart": "chart", "side": "side", "allowance": "allowance",
				"lambda": "lambda", "unit": "unit", "serial": "serial", "method": "method", "gap": "gap", "seed": "seed", "reps": "reps",
				"headstart": "headstart", "restart": "restart", "extrapolate": "extrapolate"}[name]
			if flagName == "" {
				t.Fatalf("VEER.CHART option %q has no veer screen flag in this test", name)
			}
			args = append(args, "--"+flagName+"="+sval)
		}
		var rule *calcBlock
		for i := range blocks {
			b := &blocks[i]
			if b.Fn == "VEER.RULE" && len(b.Args) == 7 && b.Args[1].Text == ch.Args[0].Text && b.Args[2].Text == ch.Args[1].Text &&
				b.Args[3].Text == ch.Args[2].Text && b.Args[4].Text == ch.Args[3].Text && b.Args[6].Text == ch.Args[5].Text {
				rule = b
				args = append(args, "--rule", "rule="+fmt.Sprint(b.Args[0].Rows[0][0]))
			}
		}
		var sout, serr bytes.Buffer
		t0 := time.Now()
		code := run(&env{stdout: &sout, stderr: &serr, stdin: strings.NewReader("")}, args)
		total += time.Since(t0).Seconds()
		if code != 0 {
			t.Fatalf("veer %s: exit %d\n%s", strings.Join(args, " "), code, serr.String())
		}
		res, err := table.Read(calcOpen(t, out))
		if err != nil {
			t.Fatal(err)
		}
		col := func(name string) []string {
			c, err := res.Column(name)
			if err != nil {
				t.Fatalf("veer screen output: %v", err)
			}
			return res.Strings(c)
		}
		// Columns of VEER.CHART: z, innovation, chart, limit, signal, first_signal;
		// veer screen writes z, innovation, chart and limit with 4 decimals.
		checks := []struct {
			name string
			col  int
			tol  float64
		}{{"z", 0, 0.5e-4}, {"innovation", 1, 0.5e-4}, {"chart", 2, 0.5e-4}, {"limit", 3, 0.5e-4}, {"signal", 4, 0}, {"first_signal", 5, 1e-9}}
		bad := 0
		for _, c := range checks {
			vals := col(c.name)
			if len(vals) != ch.Rows {
				t.Fatalf("veer screen wrote %d rows, the workbook has %d", len(vals), ch.Rows)
			}
			for r, s := range vals {
				got, gotErr := ch.Values[r][c.col], ch.errorAt(r, c.col)
				ok := false
				switch {
				case gotErr != 0:
				case s == "":
					ok = got == 0.0 || got == ""
				default:
					want, err := strconv.ParseFloat(s, 64)
					g, isNum := got.(float64)
					ok = err == nil && isNum && math.Abs(g-want) <= c.tol*(1+math.Abs(want))
				}
				if !ok {
					bad++
					if bad <= 5 {
						t.Errorf("%s row %d %s: Calc shows %v (error %d), veer screen %q", ch.Range, r+1, c.name, got, gotErr, s)
					}
				}
			}
		}
		if rule != nil {
			for r, s := range col("rule") {
				got := rule.Values[r][0]
				if want := map[string]float64{"1": 1, "0": 0}[s]; got != want || rule.errorAt(r, 0) != 0 {
					bad++
					if bad <= 5 {
						t.Errorf("%s row %d: Calc's VEER.RULE shows %v, veer screen %q", rule.Range, r+1, got, s)
					}
				}
			}
		}
		if bad > 0 {
			t.Errorf("%s: %d cells differ from veer screen", ch.Range, bad)
		}
		t.Logf("%s (%s, %d exams): VEER.CHART columns equal veer screen's (to its 4 decimals)%s", ch.Range, model, ch.Rows, map[bool]string{true: ", and VEER.RULE its rule column", false: ""}[rule != nil])
	}
	return total
}

func calcOpen(t *testing.T, path string) io.Reader {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return bytes.NewReader(b)
}

// calcBadInput builds small sheets of VEER formulas that go wrong and checks
// each cell shows the right error, quickly, with the message in VEER.ERRORS.
func calcBadInput(t *testing.T, o *calcOffice, ls *liveServer) {
	type cellsAnswer struct {
		Values [][]any          `json:"values"`
		Errors map[string]int64 `json:"errors"`
	}
	read := func(rng string) cellsAnswer {
		var a cellsAnswer
		o.do(60*time.Second, map[string]any{"cmd": "read", "range": rng}, &a)
		return a
	}
	errAt := func(a cellsAnswer, r, c int) int64 { return a.Errors[fmt.Sprintf("%d,%d", r, c)] }
	recalc := func(limit time.Duration) float64 {
		var rc struct{ Seconds float64 }
		o.do(limit+30*time.Second, map[string]any{"cmd": "recalc"}, &rc)
		if rc.Seconds > limit.Seconds() {
			t.Errorf("recalculation took %.1f s, more than %v", rc.Seconds, limit)
		}
		return rc.Seconds
	}
	// messages returns VEER.ERRORS' rows (newest first) as "function:
	// message"; the message itself does not repeat the function's name.
	messages := func() []string {
		a := read("K1:O12")
		var out []string
		for r := 1; r < len(a.Values); r++ {
			fn, _ := a.Values[r][1].(string)
			if s, ok := a.Values[r][3].(string); ok && s != "" {
				if fn != "" && strings.Contains(s, fn) {
					t.Errorf("VEER.ERRORS names %s twice: %q", fn, s)
				}
				out = append(out, fn+": "+s)
			}
		}
		return out
	}
	hasMessage := func(words ...string) bool {
		for _, m := range messages() {
			ok := true
			for _, w := range words {
				ok = ok && strings.Contains(m, w)
			}
			if ok {
				return true
			}
		}
		return false
	}

	o.do(60*time.Second, map[string]any{"cmd": "new"}, nil)
	o.do(60*time.Second, map[string]any{"cmd": "set",
		"data": []map[string]any{{"range": "A1:C4", "rows": [][]any{
			{30.0, 120.0, "tower"}, {"abc", 130.0, "tower"}, {45.0, 140.0, "workshop"}, {50.0, "", "workshop"}}},
			{"range": "A6:C8", "rows": [][]any{{30.0, 120.0, "tower"}, {40.0, "", "tower"}, {45.0, 140.0, "workshop"}}}},
		"arrays": []map[string]any{
			{"range": "D1:D4", "formula": `=VEER.ZSCORE("demo-sbp";A1:A4;B1:B4;C1:C4;"extrapolate=true")`},
			{"range": "D6:D8", "formula": `=VEER.ZSCORE("demo-sbp";A6:A8;B6:B8;C6:C8;"extrapolate=true")`},
			{"range": "F1:F3", "formula": `=VEER.ZSCORE("demo-sbp";G1:G3;B1:B3;C1:C3)`},
			{"range": "I1:I3", "formula": `=VEER.ZSCORE("demo-sbp";IFERROR(G1:G3;"");B1:B3;C1:C3)`},
			{"range": "J1:J3", "formula": `=VEER.ZSCORE("demo-sbp";IF(1;G1:G3);B1:B3;C1:C3)`},
			{"range": "K1:O12", "formula": `=VEER.ERRORS(COUNT(D1:H9))`},
		},
		"formulas": []map[string]any{
			{"cell": "G1", "formula": `=30`}, {"cell": "G2", "formula": `=NA()`}, {"cell": "G3", "formula": `=45`},
			{"cell": "E1", "formula": `=VEER.ZSCORE("demo-sbp")`},
			{"cell": "E2", "formula": `=VEER.LIMIT()`},
			{"cell": "E3", "formula": `=VEER.CHART("demo-sbp";A6:A8;A6:A8;B6:B8)`},
			{"cell": "E4", "formula": `=VEER.LIMIT(20;;"gap=1")`},
			{"cell": "E5", "formula": `=VEER.FIT("t-model";C6:C8;A6:A8;B6:B8)`},
		}}, nil)
	recalc(30 * time.Second)
	a := read("D1:J8")
	col := func(vs ...any) []any {
		out := make([]any, len(vs))
		for i, v := range vs {
			out[i] = []any{v}
		}
		return out
	}
	direct := ls.For(t).Batch(
		servertest.NewCall("VEER.ZSCORE", "demo-sbp", col(30.0, nil, 45.0), col(120.0, nil, 140.0), col("tower", "tower", "workshop"), "extrapolate=true"),
		servertest.NewCall("VEER.LIMIT", 20.0, nil, "gap=1"),
		servertest.NewCall("VEER.ZSCORE", "demo-sbp", col(30.0, nil, 45.0), col(120.0, 130.0, 140.0), col("tower", "tower", "workshop")),
	)
	var z, z2 []any
	json.Unmarshal(direct[0].Value, &z)
	var limit float64
	json.Unmarshal(direct[1].Value, &limit)
	json.Unmarshal(direct[2].Value, &z2)
	for _, c := range []struct {
		name     string
		row, col int
		want     any // float64 value or error code
	}{
		{"text in a numeric range", 0, 0, "#VALUE!"},
		{"text in a numeric range (every row of the call)", 3, 0, "#VALUE!"},
		{"a function with too few arguments (Calc's own check)", 0, 1, int64(504)},
		{"a function with no arguments", 1, 1, int64(504)},
		{"a chart without target or limit", 2, 1, "#VALUE!"},
		{"a value", 3, 1, limit},
		{"a blank reading: #N/A in its row only", 6, 0, "#N/A"},
		{"the rows around it", 5, 0, z[0].([]any)[0]},
		{"the rows around it", 7, 0, z[2].([]any)[0]},
		{"an error cell in an input range: Calc refuses the call (Err:504)", 0, 2, int64(504)},
		{"... in every row", 2, 2, int64(504)},
		{"the same range through IFERROR(range;\"\"): #N/A in that row only", 1, 5, "#N/A"},
		{"... and values in the others", 0, 5, z2[0].([]any)[0]},
		{"... and values in the others", 2, 5, z2[2].([]any)[0]},
		{"an error inside a computed array (IF(1;range)): Err:504 as well", 1, 6, int64(504)},
	} {
		got, gotErr := a.Values[c.row][c.col], errAt(a, c.row, c.col)
		switch w := c.want.(type) {
		case string:
			if gotErr != calcErrorNumbers[w] {
				t.Errorf("%s: Calc shows %v (error %d), want %s", c.name, got, gotErr, w)
			}
		case int64:
			if gotErr != w {
				t.Errorf("%s: Calc shows %v (error %d), want Err:%d", c.name, got, gotErr, w)
			}
		case float64:
			if gotErr != 0 || got != w {
				t.Errorf("%s: Calc shows %v (error %d), the server answers %v", c.name, got, gotErr, w)
			}
		}
	}
	for _, words := range [][]string{{"VEER.ZSCORE", "abc"}, {"VEER.CHART", "target"}} {
		if !hasMessage(words...) {
			t.Errorf("VEER.ERRORS lacks a message with %q; it has %q", words, messages())
		}
	}
	// VEER.FIT of three rows fails in the server (too few workers), but not
	// for want of the token.
	if hasMessage("token") {
		t.Errorf("VEER.FIT with the right token was refused: %q", messages())
	}

	// A wrong token: the write is refused with a message saying so.
	o.settings(ls.port(), "not-the-token")
	o.do(30*time.Second, map[string]any{"cmd": "set", "formulas": []map[string]any{{"cell": "E5", "formula": `=VEER.FIT("t-model2";C6:C8;A6:A8;B6:B8)`}}}, nil)
	recalc(30 * time.Second)
	if e := errAt(read("E5:E5"), 0, 0); e != calcErrorNumbers["#VALUE!"] || !hasMessage("VEER.FIT", "token") {
		t.Errorf("a wrong token: E5 shows error %d, messages %q", e, messages())
	}
	o.settings(ls.port(), ls.s.Token())

	// 200,000 exam rows in one call.
	const big = 200_000
	rows := make([][]any, big)
	var ages, vals, groups []any
	for i := range rows {
		g := []string{"tower", "workshop"}[i%2]
		age := 20 + float64(i%4400)/100
		v := 100 + float64((i*37)%60)
		rows[i] = []any{age, v, g}
		ages, vals, groups = append(ages, []any{age}), append(vals, []any{v}), append(groups, []any{g})
	}
	o.do(60*time.Second, map[string]any{"cmd": "new"}, nil)
	o.do(120*time.Second, map[string]any{"cmd": "set", "data": []map[string]any{{"range": fmt.Sprintf("A1:C%d", big), "rows": rows}},
		"arrays": []map[string]any{{"range": fmt.Sprintf("D1:D%d", big), "formula": fmt.Sprintf(`=VEER.ZSCORE("demo-sbp";A1:A%d;B1:B%d;C1:C%d;"extrapolate=true")`, big, big, big)}}}, nil)
	secs := recalc(60 * time.Second)
	bigA := read(fmt.Sprintf("D1:D%d", big))
	want := ls.For(t).Call("VEER.ZSCORE", "demo-sbp", ages, vals, groups, "extrapolate=true")
	var wz []any
	if want.Error != nil || json.Unmarshal(want.Value, &wz) != nil || len(wz) != big {
		t.Fatalf("the server's answer for %d rows: %+v", big, want.Error)
	}
	bad := 0
	for i := range wz {
		if !calcSameCell(bigA.Values[i][0], errAt(bigA, i, 0), wz[i].([]any)[0]) {
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%d rows: %d cells differ from the server's answer", big, bad)
	}
	t.Logf("%d rows in one VEER.ZSCORE: recalculated in %.2f s, all equal to the server's answer", big, secs)

	// The server stopped: every VEER cell shows #N/A at once, the message
	// says what to do; after a restart on the same port the cells compute
	// again (the add-in's kept-alive connection to the old server is dead).
	o.do(60*time.Second, map[string]any{"cmd": "new"}, nil)
	o.do(30*time.Second, map[string]any{"cmd": "set",
		"data":     []map[string]any{{"range": "A1:B2", "rows": [][]any{{30.0, 120.0}, {40.0, 130.0}}}},
		"formulas": []map[string]any{{"cell": "E1", "formula": `=VEER.LIMIT(20;;"gap=1")`}},
		"arrays": []map[string]any{{"range": "D1:D2", "formula": `=VEER.ZSCORE("demo-sbp";A1:A2;B1:B2;"tower")`},
			{"range": "K1:O12", "formula": `=VEER.ERRORS(COUNT(D1:E2))`}}}, nil)
	recalc(30 * time.Second)
	if e := errAt(read("E1:E1"), 0, 0); e != 0 {
		t.Fatalf("with the server running E1 shows error %d", e)
	}
	port := ls.port()
	ls.stop(t)
	secs = recalc(5 * time.Second)
	down := read("D1:E2")
	for _, rc := range [][2]int{{0, 0}, {1, 0}, {0, 1}} {
		if e := errAt(down, rc[0], rc[1]); e != calcErrorNumbers["#N/A"] {
			t.Errorf("server stopped: cell %v shows %v (error %d), want #N/A", rc, down.Values[rc[0]][rc[1]], e)
		}
	}
	if !hasMessage("not running", "veer serve", strconv.Itoa(port)) {
		t.Errorf("server stopped: VEER.ERRORS says %q", messages())
	}
	t.Logf("server stopped: the sheet recalculated in %.2f s with #N/A and the message %q", secs, messages()[0])
	*ls = *startCalcServer(t, ls.dir, port)
	recalc(30 * time.Second)
	up := read("D1:E2")
	if e := errAt(up, 0, 1); e != 0 || up.Values[0][1] != limit {
		t.Errorf("after the restart E1 shows %v (error %d), want %v", up.Values[0][1], e, limit)
	}
	o.do(30*time.Second, map[string]any{"cmd": "close"}, nil)
}
