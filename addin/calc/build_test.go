package calc

import (
	"archive/zip"
	"bytes"
	"context"
	"encoding/xml"
	"errors"
	"io"
	"log/slog"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"veer/functions/catalog"
	"veer/functions/cell"
	"veer/functions/screening"
	"veer/server"
)

// requireAll reports whether a missing outside component must fail the
// test (CI) instead of skipping it.
func requireAll() bool { return os.Getenv("VEER_REQUIRE_ALL") == "1" }

func skipOrFail(t *testing.T, format string, a ...any) {
	t.Helper()
	if requireAll() {
		t.Fatalf("VEER_REQUIRE_ALL=1 but "+format, a...)
	}
	t.Skipf(format, a...)
}

// findPython returns a Python 3 interpreter; Debian's own first.
func findPython(t *testing.T) string {
	t.Helper()
	for _, p := range []string{"/usr/bin/python3", "python3"} {
		if exe, err := exec.LookPath(p); err == nil {
			return exe
		}
	}
	skipOrFail(t, "python3 is not installed (Debian package python3)")
	return ""
}

func sdkOrSkip(t *testing.T) SDK {
	t.Helper()
	sdk, err := FindSDK("")
	if err != nil {
		skipOrFail(t, "%v", err)
	}
	return sdk
}

func TestMethodName(t *testing.T) {
	for _, c := range []struct {
		name, want string
		bad        bool
	}{
		{"VEER.CHART", "chart", false},
		{"VEER.RULECOLS", "rulecols", false},
		{"VEER.EXAMPLE.TWICE", "example_twice", false},
		{"VEER.Z_2", "z_2", false},
		{"VEER.ANY", "", true},      // a UNO IDL keyword
		{"VEER.RELEASE", "", true},  // every UNO object's method
		{"VEER.LOCALE", "", true},   // an attribute of the Python add-in
		{"SUM", "", true},           // not in the VEER namespace
		{"VEER.2X", "", true},       // not an identifier
		{"VEER.SEQUENCE", "", true}, // keyword
	} {
		got, err := methodName(c.name)
		if (err != nil) != c.bad || got != c.want {
			t.Errorf("methodName(%q) = %q, %v; want %q (error %v)", c.name, got, err, c.want, c.bad)
		}
	}
}

func TestIDLTypes(t *testing.T) {
	for _, c := range []struct {
		p    cell.Param
		want string
	}{
		{cell.Param{Type: cell.TypeRange}, "sequence< sequence< any > >"},
		{cell.Param{Type: cell.TypeRange, Optional: true}, "any"},
		{cell.Param{Type: cell.TypeNumber}, "double"},
		{cell.Param{Type: cell.TypeNumber, Optional: true}, "any"},
		{cell.Param{Type: cell.TypeText}, "string"},
		{cell.Param{Type: cell.TypeText, Optional: true}, "any"},
		{cell.Param{Type: cell.TypeBool}, "any"},
		{cell.Param{Type: cell.TypeAny}, "any"},
	} {
		if got := idlType(c.p); got != c.want {
			t.Errorf("idlType(%+v) = %q, want %q", c.p, got, c.want)
		}
	}
}

// TestFunctionsFollowCatalogue checks that every catalogue function becomes
// one method with the catalogue's name, parameters and help, in order.
func TestFunctionsFollowCatalogue(t *testing.T) {
	l := catalog.New().Listing()
	fs, err := Functions(l)
	if err != nil {
		t.Fatal(err)
	}
	if len(fs) != len(l.Functions)+len(localFuncs()) {
		t.Fatalf("%d extension functions for %d catalogue functions", len(fs), len(l.Functions))
	}
	for i, fi := range l.Functions {
		f := fs[i]
		if f.Name != fi.Name || f.Local || f.Result != fi.Result || f.Writes != fi.Writes {
			t.Errorf("function %d: %+v does not follow %s", i, f, fi.Name)
		}
		if want := strings.ToLower(strings.TrimPrefix(fi.Name, "VEER.")); f.Method != want {
			t.Errorf("%s: method %q, want %q", fi.Name, f.Method, want)
		}
		if !strings.HasPrefix(f.Description, fi.Summary) || (fi.Help != "" && !strings.Contains(f.Description, fi.Help)) {
			t.Errorf("%s: description %q lacks the catalogue's summary or help", fi.Name, f.Description)
		}
		if len(f.Params) != len(fi.Params) {
			t.Fatalf("%s: %d parameters, catalogue has %d", fi.Name, len(f.Params), len(fi.Params))
		}
		for k, p := range fi.Params {
			if f.Params[k].Name != p.Name || f.Params[k].Help != p.Help || f.Params[k].Optional != p.Optional || f.Params[k].IDL != idlType(p) {
				t.Errorf("%s parameter %d: %+v, catalogue %+v", fi.Name, k, f.Params[k], p)
			}
		}
		if strings.Contains(strings.ToLower(fi.Summary+fi.Help), "signal") && !strings.Contains(f.Description, screening.Caution) {
			t.Errorf("%s speaks of signals but its help lacks the caution", fi.Name)
		}
	}
	if last := fs[len(fs)-1]; last.Name != "VEER.ERRORS" || !last.Local {
		t.Errorf("the add-in's own VEER.ERRORS is missing: %+v", last)
	}
}

func TestFunctionsRejectBadCatalogues(t *testing.T) {
	ok := cell.FuncInfo{Name: "VEER.A", Summary: "a", Result: cell.ShapeValue}
	for _, c := range []struct {
		name  string
		funcs []cell.FuncInfo
		words string
	}{
		{"empty", nil, "no functions"},
		{"clash with the add-in's own", []cell.FuncInfo{ok, {Name: "VEER.ERRORS", Summary: "e", Result: cell.ShapeTable}}, "defines itself"},
		{"two names, one method", []cell.FuncInfo{{Name: "VEER.A_B", Summary: "x", Result: cell.ShapeValue}, {Name: "VEER.A.B", Summary: "y", Result: cell.ShapeValue}}, "both give"},
		{"keyword", []cell.FuncInfo{{Name: "VEER.STRING", Summary: "x", Result: cell.ShapeValue}}, "reserved word"},
	} {
		_, err := Functions(cell.Listing{Functions: c.funcs})
		if err == nil || !strings.Contains(err.Error(), c.words) {
			t.Errorf("%s: error %v, want one saying %q", c.name, err, c.words)
		}
	}
	// A parameter named like a keyword is renamed in the IDL only.
	fs, err := Functions(cell.Listing{Functions: []cell.FuncInfo{{Name: "VEER.A", Summary: "a", Result: cell.ShapeValue,
		Params: []cell.Param{{Name: "type", Type: cell.TypeText, Help: "h"}}}}})
	if err != nil {
		t.Fatal(err)
	}
	if p := fs[0].Params[0]; p.Name != "type" || p.IDLName != "arg_type" {
		t.Errorf("keyword parameter: %+v", p)
	}
}

func TestSourcesAreWellFormed(t *testing.T) {
	l := catalog.New().Listing()
	src, err := Sources(l, Options{})
	if err != nil {
		t.Fatal(err)
	}
	fs, _ := Functions(l)
	for _, p := range []string{pathXCU, pathManifest, pathDesc, pathComponents} {
		d := xml.NewDecoder(bytes.NewReader(src[p]))
		for {
			_, err := d.Token()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				t.Fatalf("%s is not well-formed XML: %v", p, err)
			}
		}
	}
	// CalcAddIns.xcu: every function with its display name, description and
	// each parameter, read back with an XML decoder.
	type prop struct {
		Name  string `xml:"name,attr"`
		Value string `xml:"value"`
	}
	type node struct {
		Name  string `xml:"name,attr"`
		Props []prop `xml:"prop"`
		Nodes []node `xml:"node"`
	}
	var root struct {
		Nodes []node `xml:"node"`
	}
	if err := xml.Unmarshal(src[pathXCU], &root); err != nil {
		t.Fatal(err)
	}
	svc := root.Nodes[0].Nodes[0]
	if svc.Name != ServiceName {
		t.Fatalf("CalcAddIns.xcu service node %q, want %q", svc.Name, ServiceName)
	}
	funcs := svc.Nodes[0].Nodes
	if len(funcs) != len(fs) {
		t.Fatalf("CalcAddIns.xcu has %d functions, want %d", len(funcs), len(fs))
	}
	get := func(ps []prop, name string) string {
		for _, p := range ps {
			if p.Name == name {
				return p.Value
			}
		}
		return ""
	}
	for i, f := range fs {
		n := funcs[i]
		if n.Name != f.Method || get(n.Props, "DisplayName") != f.Name || get(n.Props, "Description") != f.Description || get(n.Props, "Category") != "Add-In" {
			t.Errorf("CalcAddIns.xcu function %d: %+v, want %s", i, n, f.Name)
		}
		params := n.Nodes[0].Nodes
		if len(params) != len(f.Params) {
			t.Fatalf("%s: %d parameters in CalcAddIns.xcu, want %d", f.Name, len(params), len(f.Params))
		}
		for k, p := range f.Params {
			if params[k].Name != p.IDLName || get(params[k].Props, "DisplayName") != p.Name || !strings.HasPrefix(get(params[k].Props, "Description"), p.Help) {
				t.Errorf("%s parameter %s in CalcAddIns.xcu: %+v", f.Name, p.Name, params[k])
			}
		}
	}
	idl := string(src[pathIDL])
	for _, f := range fs {
		re := regexp.MustCompile(`(?m)^    ` + regexp.QuoteMeta(f.ReturnIDL()) + ` ` + f.Method + `\(`)
		if !re.MatchString(idl) {
			t.Errorf("the IDL lacks %s as %s %s(...)", f.Name, f.ReturnIDL(), f.Method)
		}
	}
	if !strings.Contains(string(src[pathDescText]), screening.Caution) {
		t.Error("the extension description lacks the screening-aid caution")
	}
	if _, err := Sources(l, Options{Version: "1.x"}); err == nil {
		t.Error("a bad version was accepted")
	}
	// The Python source compiles.
	py := findPython(t)
	dir := t.TempDir()
	f := filepath.Join(dir, pathPython)
	if err := os.WriteFile(f, src[pathPython], 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := exec.Command(py, "-m", "py_compile", f).CombinedOutput(); err != nil {
		t.Fatalf("the generated %s does not compile: %v\n%s", pathPython, err, out)
	}
}

// TestBuildTypeLibrary compiles the IDL with the SDK's unoidl-write and reads
// the type library back with the SDK's unoidl-read, an outside reader: the
// interface must hold every function with the parameter types of the package
// doc.
func TestBuildTypeLibrary(t *testing.T) {
	sdk := sdkOrSkip(t)
	l := catalog.New().Listing()
	oxt, err := Build(context.Background(), l, Options{SDK: &sdk})
	if err != nil {
		t.Fatal(err)
	}
	again, err := Build(context.Background(), l, Options{SDK: &sdk})
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(oxt, again) {
		t.Error("two builds of the same catalogue differ")
	}
	zr, err := zip.NewReader(bytes.NewReader(oxt), int64(len(oxt)))
	if err != nil {
		t.Fatal(err)
	}
	files := map[string][]byte{}
	for i, zf := range zr.File {
		rc, err := zf.Open()
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(rc)
		rc.Close()
		files[zf.Name] = b
		if i == 0 && zf.Name != pathManifest {
			t.Errorf("first entry %s, want %s", zf.Name, pathManifest)
		}
	}
	for _, p := range []string{pathRDB, pathPython, pathXCU, pathComponents, pathManifest, pathDesc, pathDescText} {
		if len(files[p]) == 0 {
			t.Errorf("the .oxt lacks %s", p)
		}
	}
	if _, ok := files[pathIDL]; ok {
		t.Error("the IDL source is shipped; only the type library should be")
	}
	read := filepath.Join(filepath.Dir(sdk.UnoidlWrite), "unoidl-read")
	if _, err := os.Stat(read); err != nil {
		skipOrFail(t, "unoidl-read is not next to %s", sdk.UnoidlWrite)
	}
	rdb := filepath.Join(t.TempDir(), "veer.rdb")
	if err := os.WriteFile(rdb, files[pathRDB], 0o644); err != nil {
		t.Fatal(err)
	}
	args := append(append([]string{}, sdk.Types...), rdb)
	out, err := exec.Command(read, args...).CombinedOutput()
	if err != nil {
		t.Fatalf("unoidl-read: %v\n%s", err, out)
	}
	text := strings.Join(strings.Fields(string(out)), " ")
	fs, _ := Functions(l)
	for _, f := range fs {
		var ps []string
		for _, p := range f.Params {
			ps = append(ps, "[in] "+p.IDL+" "+p.IDLName)
		}
		want := f.ReturnIDL() + " " + f.Method + "(" + strings.Join(ps, ", ") + ");"
		if !strings.Contains(text, want) {
			t.Errorf("unoidl-read does not show %s as %q", f.Name, want)
		}
	}
	if t.Failed() {
		t.Logf("unoidl-read shows: %s", text)
	}
}

func TestFindSDKMissing(t *testing.T) {
	_, err := FindSDK(filepath.Join(t.TempDir(), "no-unoidl-write"))
	if !errors.Is(err, ErrNoSDK) || !strings.Contains(err.Error(), "libreoffice-dev") {
		t.Errorf("FindSDK with a missing path: %v; want ErrNoSDK naming the Debian package", err)
	}
	_, err = Build(context.Background(), catalog.New().Listing(), Options{SDK: &SDK{UnoidlWrite: "/bin/false", Types: []string{"/nonexistent.rdb"}}})
	if err == nil || !strings.Contains(err.Error(), "could not compile") {
		t.Errorf("Build with a failing unoidl-write: %v", err)
	}
}

// TestPythonCore runs the Python core tests (testdata/core_test.py) against
// a real veer server: conversions, error values coded as Calc codes them,
// answers equal to the server's own, messages, settings, a server that is
// not running or does not answer.
func TestPythonCore(t *testing.T) {
	py := findPython(t)
	src, err := Sources(catalog.New().Listing(), Options{})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, pathPython), src[pathPython], 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := server.New(server.Config{DataDir: t.TempDir(), Catalogue: catalog.New(), Logger: slog.New(slog.DiscardHandler)})
	if err != nil {
		t.Fatal(err)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	ctx, stop := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Serve(ctx, ln) }()
	defer func() { stop(); <-done }()
	down, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	downPort := down.Addr().(*net.TCPAddr).Port
	down.Close() // nothing listens there now
	port := ln.Addr().(*net.TCPAddr).Port
	cctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(cctx, py, filepath.Join("testdata", "core_test.py"), dir, strconv.Itoa(port), strconv.Itoa(downPort))
	// TMPDIR: Python's temporary folders go where the test's are removed.
	cmd.Env = append(os.Environ(), "HOME="+t.TempDir(), "TMPDIR="+t.TempDir(), "VEER_TOKEN=", "VEER_PORT=", "VEER_TIMEOUT=")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("Python core tests failed: %v\n%s", err, out)
	}
	t.Logf("%s", bytes.TrimSpace(out))
}
