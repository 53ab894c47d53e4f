package web

import (
	"bytes"
	"encoding/json"
	"encoding/xml"
	"fmt"
	"html"
	"image/png"
	"io"
	"io/fs"
	"net/http"
	"net/http/httptest"
	"path"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"testing/fstest"

	"veer/functions/catalog"
	"veer/functions/cell"
	"veer/functions/screening"
)

// hostShapes is how each catalogue parameter type reaches the host (type,
// dimensionality): ranges and options (text or a two-column range) as
// matrices, single values as scalars of the host's types.
var hostShapes = map[cell.Type][2]string{
	cell.TypeNumber: {"number", "scalar"}, cell.TypeText: {"string", "scalar"}, cell.TypeBool: {"boolean", "scalar"},
	cell.TypeRange: {"any", "matrix"}, cell.TypeAny: {"any", "matrix"},
}

func listing(t testing.TB) cell.Listing {
	t.Helper()
	return catalog.New().Listing()
}

// TestMetadataCoversCatalogue checks functions.json against the catalogue
// entry by entry: every function, in order, with its id, description,
// parameter count, names, optional flags, host types and dimensionality, its
// result dimensionality and stream/cancelable options, and nothing else.
func TestMetadataCoversCatalogue(t *testing.T) {
	l := listing(t)
	b, err := Metadata(l, "help.html")
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		AllowErrorForDataTypeAny bool `json:"allowErrorForDataTypeAny"`
		Functions                []struct {
			ID, Name, Description, HelpURL string
			Result                         struct{ Type, Dimensionality string }
			Parameters                     []struct {
				Name, Description, Type, Dimensionality string
				Optional                                bool
			}
			Options struct{ Stream, Cancelable bool }
		}
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if !doc.AllowErrorForDataTypeAny {
		t.Error("error cells must reach the server (allowErrorForDataTypeAny)")
	}
	if len(doc.Functions) != len(l.Functions) || len(l.Functions) < 10 {
		t.Fatalf("functions.json has %d functions; the catalogue %d", len(doc.Functions), len(l.Functions))
	}
	idRE := regexp.MustCompile(`^[A-Z0-9.]+$`) // the host allows letters, digits and periods
	seen := map[string]bool{}
	for i, f := range l.Functions {
		m := doc.Functions[i]
		t.Run(f.Name, func(t *testing.T) {
			if want := strings.TrimPrefix(f.Name, "VEER."); m.ID != want || m.Name != want {
				t.Errorf("id %q, name %q; want %q (the namespace VEER comes from the manifest)", m.ID, m.Name, want)
			}
			if !idRE.MatchString(m.ID) || seen[m.ID] {
				t.Errorf("id %q is not a valid unique host id", m.ID)
			}
			seen[m.ID] = true
			if m.Description != f.Summary || m.HelpURL != "help.html#"+f.Name {
				t.Errorf("description %q, help %q", m.Description, m.HelpURL)
			}
			if len(m.Parameters) != len(f.Params) {
				t.Fatalf("%d parameters; the catalogue has %d", len(m.Parameters), len(f.Params))
			}
			req, total := 0, 0
			for j, p := range f.Params {
				mp := m.Parameters[j]
				want := hostShapes[p.Type]
				if mp.Name != p.Name || mp.Optional != p.Optional || mp.Type != want[0] || mp.Dimensionality != want[1] || mp.Description != p.Help {
					t.Errorf("parameter %d: %+v; catalogue %+v", j+1, mp, p)
				}
				total++
				if !p.Optional {
					req++
				}
			}
			if fr, ft := catalog.New().Funcs()[i].Arity(); fr != req || ft != total {
				t.Errorf("arity %d..%d; the catalogue says %d..%d", req, total, fr, ft)
			}
			wantDim := "matrix"
			if f.Result == cell.ShapeValue {
				wantDim = "scalar"
			}
			if m.Result.Dimensionality != wantDim {
				t.Errorf("result dimensionality %q; want %q for a %s result", m.Result.Dimensionality, wantDim, f.Result)
			}
			if m.Options.Stream != f.Streaming || m.Options.Cancelable == f.Streaming {
				t.Errorf("options %+v for streaming=%v (stream and cancelable cannot go together)", m.Options, f.Streaming)
			}
		})
	}
}

func TestFunctionID(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"VEER.ZSCORE", "ZSCORE"},
		{"VEER.RULE.COLS", "RULE.COLS"},
		{"VEER.MY_FUNC", "MY.FUNC"},
		{"veer.x", "VEER.X"}, // not in the namespace: left whole
	} {
		if got := FunctionID(c.in); got != c.want {
			t.Errorf("FunctionID(%q) = %q; want %q", c.in, got, c.want)
		}
	}
}

func TestMetadataRejectsCollisions(t *testing.T) {
	l := cell.Listing{Functions: []cell.FuncInfo{{Name: "VEER.A_B", Summary: "x", Result: cell.ShapeValue}, {Name: "VEER.A.B", Summary: "y", Result: cell.ShapeValue}}}
	if _, err := Metadata(l, ""); err == nil || !strings.Contains(err.Error(), "A.B") {
		t.Errorf("two functions with the host id A.B: err = %v", err)
	}
	l = cell.Listing{Functions: []cell.FuncInfo{{Name: "OTHER.X", Summary: "x", Result: cell.ShapeValue}}}
	if _, err := Metadata(l, ""); err == nil {
		t.Error("a function outside the VEER namespace was accepted")
	}
}

// TestCatalogJS checks the runtime's table: a module whose default export
// lists every function, its parameters and flags.
func TestCatalogJS(t *testing.T) {
	l := listing(t)
	b, err := CatalogJS(l)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	const prefix = "export default "
	i := strings.Index(s, prefix)
	if i < 0 || !strings.HasSuffix(s, ";\n") {
		t.Fatalf("catalog.js does not export the table:\n%.200s", s)
	}
	if strings.ContainsAny(s[i:], "<>") {
		t.Error("catalog.js must not contain < or > (script safety)")
	}
	var tab struct {
		Namespace string
		Functions []runtimeFunc
		Codes     map[string]string
	}
	if err := json.Unmarshal([]byte(strings.TrimSuffix(s[i+len(prefix):], ";\n")), &tab); err != nil {
		t.Fatal(err)
	}
	if tab.Namespace != "VEER" || len(tab.Functions) != len(l.Functions) || len(tab.Codes) != len(l.Codes) {
		t.Fatalf("namespace %q, %d functions, %d codes", tab.Namespace, len(tab.Functions), len(tab.Codes))
	}
	for k, f := range l.Functions {
		r := tab.Functions[k]
		if r.Name != f.Name || r.ID != FunctionID(f.Name) || r.Streaming != f.Streaming || r.Writes != f.Writes || r.Slow != f.Slow || r.Result != f.Result || len(r.Params) != len(f.Params) {
			t.Errorf("%s: %+v", f.Name, r)
			continue
		}
		for j, p := range f.Params {
			if r.Params[j] != (runtimeParam{Name: p.Name, Type: p.Type, Optional: p.Optional}) {
				t.Errorf("%s parameter %d: %+v", f.Name, j+1, r.Params[j])
			}
		}
	}
}

// manifestURLs decodes a manifest, failing on malformed XML, and returns its
// root element name and every URL in it.
func manifestURLs(t *testing.T, b []byte) (root string, urls []string, namespace string) {
	t.Helper()
	d := xml.NewDecoder(bytes.NewReader(b))
	depth := 0
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("the manifest is not well-formed XML: %v", err)
		}
		switch e := tok.(type) {
		case xml.StartElement:
			if depth == 0 {
				root = e.Name.Local
			}
			depth++
			var id string
			for _, a := range e.Attr {
				if a.Name.Local == "id" {
					id = a.Value
				}
				if a.Name.Local == "DefaultValue" && strings.Contains(a.Value, "://") {
					urls = append(urls, a.Value)
				}
				if id == "Functions.Namespace" && a.Name.Local == "DefaultValue" {
					namespace = a.Value
				}
			}
		case xml.EndElement:
			depth--
		}
	}
	if depth != 0 {
		t.Fatalf("unbalanced manifest")
	}
	return root, urls, namespace
}

func TestManifest(t *testing.T) {
	b, err := Manifest("https://localhost:9443/")
	if err != nil {
		t.Fatal(err)
	}
	root, urls, ns := manifestURLs(t, b)
	if root != "OfficeApp" || ns != Namespace || len(urls) < 8 {
		t.Fatalf("root %q, namespace %q, %d URLs", root, ns, len(urls))
	}
	site, err := Site(listing(t), SiteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, u := range urls {
		name, ok := strings.CutPrefix(u, "https://localhost:9443/addin/")
		if !ok {
			t.Errorf("URL %s is not under the add-in's address", u)
			continue
		}
		if _, err := fs.Stat(site, name); err != nil {
			t.Errorf("the manifest refers to %s, which the server does not serve: %v", u, err)
		}
	}
	if !bytes.Contains(b, []byte("<Id>"+AddinID+"</Id>")) || !bytes.Contains(b, []byte("not a diagnosis")) {
		t.Error("the manifest lacks the add-in id or the screening caution")
	}
}

func TestCheckBaseURL(t *testing.T) {
	for _, c := range []struct {
		in, want string
		ok       bool
	}{
		{"https://localhost:7311", "https://localhost:7311", true},
		{" https://127.0.0.1:9000/ ", "https://127.0.0.1:9000", true},
		{"http://localhost:7311", "http://localhost:7311", true},
		{"localhost:7311", "", false},
		{"ftp://localhost", "", false},
		{"https://localhost:7311/addin/", "", false},
		{"https://localhost:7311/?x=1", "", false},
		{"https://user@localhost:7311", "", false},
		{"", "", false},
	} {
		got, err := CheckBaseURL(c.in)
		if (err == nil) != c.ok || got != c.want {
			t.Errorf("CheckBaseURL(%q) = %q, %v", c.in, got, err)
		}
	}
}

// TestSiteServes serves the site as `veer serve` does and fetches every
// kind of file.
func TestSiteServes(t *testing.T) {
	mount := fstest.MapFS{"host.html": {Data: []byte("<p>test</p>")}}
	base := "https://localhost:7400"
	site, err := Site(listing(t), SiteOptions{BaseURL: func() string { return base }, Mount: map[string]fs.FS{"test": mount}})
	if err != nil {
		t.Fatal(err)
	}
	srv := httptest.NewServer(http.StripPrefix("/addin/", http.FileServerFS(site)))
	defer srv.Close()
	for _, c := range []struct {
		path, ctype, contains string
		status                int
	}{
		{"taskpane.html", "text/html", `src="veer.js"`, 200},
		{"veer.js", "text/javascript", "CF.associate(f.id", 200},
		{"client.js", "text/javascript", "export class Client", 200},
		{"unsupported.js", "text/javascript", "cannot run", 200},
		{"taskpane.js", "text/javascript", "export async function showWorker", 200},
		{"taskpane.css", "text/css", "--vermillion", 200},
		{"functions.json", "application/json", `"helpUrl": "` + base + `/addin/help.html#VEER.ZSCORE"`, 200},
		{"catalog.js", "text/javascript", `export default {"namespace":"VEER"`, 200},
		{"help.html", "text/html", `id="VEER.ZSCORE"`, 200},
		{"manifest.xml", "xml", base + "/addin/taskpane.html", 200},
		{"icon-80.png", "image/png", "", 200},
		{"", "text/html", "manifest.xml", 200},
		{"test/host.html", "text/html", "test", 200},
		{"nothing.js", "", "", 404},
		{"test/nothing", "", "", 404},
	} {
		resp, err := http.Get(srv.URL + "/addin/" + c.path)
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != c.status {
			t.Errorf("/addin/%s: status %d; want %d", c.path, resp.StatusCode, c.status)
			continue
		}
		if c.status != 200 {
			continue
		}
		if !strings.Contains(resp.Header.Get("Content-Type"), c.ctype) || !bytes.Contains(body, []byte(c.contains)) {
			t.Errorf("/addin/%s: %s, %d bytes; want %s containing %q", c.path, resp.Header.Get("Content-Type"), len(body), c.ctype, c.contains)
		}
	}
}

// TestIcons checks every icon the manifest names: a PNG file the site
// serves, of the size its name says, drawn in the centre and with cut
// (transparent) corners.
func TestIcons(t *testing.T) {
	b, err := Manifest(DefaultBaseURL)
	if err != nil {
		t.Fatal(err)
	}
	site, err := Site(listing(t), SiteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	_, urls, _ := manifestURLs(t, b)
	iconRE := regexp.MustCompile(`/addin/(icon-([0-9]+)\.png)$`)
	sizes := map[int]bool{}
	for _, u := range urls {
		m := iconRE.FindStringSubmatch(u)
		if m == nil {
			continue
		}
		n, _ := strconv.Atoi(m[2])
		sizes[n] = true
		data, err := fs.ReadFile(site, m[1])
		if err != nil {
			t.Errorf("%s: %v", m[1], err)
			continue
		}
		img, err := png.Decode(bytes.NewReader(data))
		if err != nil {
			t.Errorf("%s: %v", m[1], err)
			continue
		}
		if img.Bounds().Dx() != n || img.Bounds().Dy() != n {
			t.Errorf("%s is %v", m[1], img.Bounds())
		}
		if _, _, _, a := img.At(n/2, n/2).RGBA(); a < 0xff00 {
			t.Errorf("%s: centre not opaque", m[1])
		}
		if _, _, _, a := img.At(0, 0).RGBA(); a > 0x4000 {
			t.Errorf("%s: corner not cut", m[1])
		}
	}
	// The sizes the host asks for: 16, 32 and 80 for the ribbon, 32 and 64
	// for the add-in lists.
	for _, n := range []int{16, 32, 64, 80} {
		if !sizes[n] {
			t.Errorf("the manifest names no %dx%d icon", n, n)
		}
	}
}

func TestHelpListsEveryFunction(t *testing.T) {
	l := listing(t)
	b, err := Help(l)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range l.Functions {
		if !bytes.Contains(b, []byte(`id="`+f.Name+`"`)) {
			t.Errorf("help.html has no section for %s", f.Name)
		}
	}
	for code := range l.Codes {
		if !bytes.Contains(b, []byte("<code>"+code+"</code>")) {
			t.Errorf("help.html does not explain %s", code)
		}
	}
}

// TestPagesReferToServedFiles checks that the pages load only files the
// site serves (besides the host library from the host's address).
func TestPagesReferToServedFiles(t *testing.T) {
	site, err := Site(listing(t), SiteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	ref := regexp.MustCompile(`(?:src|href)="([^"]+)"`)
	for _, page := range []string{"taskpane.html", "index.html", "help.html"} {
		b, err := fs.ReadFile(site, page)
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range ref.FindAllSubmatch(b, -1) {
			u := string(m[1])
			if strings.HasPrefix(u, "#") || u == "https://appsforoffice.microsoft.com/lib/1/hosted/office.js" {
				continue
			}
			if _, err := fs.Stat(site, u); err != nil {
				t.Errorf("%s refers to %s, which is not served", page, u)
			}
		}
	}
}

// TestScriptsLoadAsModules checks how the pane loads the add-in's code:
// the runtime and the pane as modules (each on its own, so that a fault in
// the pane cannot keep the functions from registering), the message for
// webviews without modules as the one plain script, after the host's
// library; and that every module imports only files the site serves.
func TestScriptsLoadAsModules(t *testing.T) {
	site, err := Site(listing(t), SiteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	page, err := fs.ReadFile(site, "taskpane.html")
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, m := range regexp.MustCompile(`<script([^>]*)>`).FindAllSubmatch(page, -1) {
		got = append(got, strings.Join(strings.Fields(string(m[1])), " "))
	}
	want := []string{
		`src="https://appsforoffice.microsoft.com/lib/1/hosted/office.js"`,
		`type="module" src="veer.js"`,
		`type="module" src="taskpane.js"`,
		`nomodule defer src="unsupported.js"`,
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Errorf("taskpane.html loads\n  %s\nwant\n  %s", strings.Join(got, "\n  "), strings.Join(want, "\n  "))
	}

	imports := regexp.MustCompile(`(?m)^import\s+(?:[^"';]*?\s+from\s+)?"([^"]+)";`)
	seen := map[string]bool{}
	var visit func(name string)
	visit = func(name string) {
		if seen[name] {
			return
		}
		seen[name] = true
		b, err := fs.ReadFile(site, name)
		if err != nil {
			t.Errorf("%s is imported but not served: %v", name, err)
			return
		}
		for _, m := range imports.FindAllSubmatch(b, -1) {
			spec := string(m[1])
			if !strings.HasPrefix(spec, "./") {
				t.Errorf("%s imports %q: only files of the add-in (./name.js) can be imported without a build step", name, spec)
				continue
			}
			visit(path.Join(path.Dir(name), spec))
		}
	}
	visit("veer.js")
	visit("taskpane.js")
	for _, name := range []string{"veer.js", "client.js", "catalog.js", "taskpane.js"} {
		if !seen[name] {
			t.Errorf("%s is not reached from the pane's modules", name)
		}
	}
}

// TestUnsupportedIsPlainScript checks that unsupported.js uses no syntax
// later than ES5: it must run in Internet Explorer's webview, which the
// browser tests cannot start.
func TestUnsupportedIsPlainScript(t *testing.T) {
	b, err := fs.ReadFile(Files(), "unsupported.js")
	if err != nil {
		t.Fatal(err)
	}
	code := regexp.MustCompile(`(?s)/\*.*?\*/`).ReplaceAllString(string(b), "")
	for _, later := range []string{"=>", "`", "?.", "??", "const ", "let ", "class ", "import ", "export ", "async ", "await "} {
		if strings.Contains(code, later) {
			t.Errorf("unsupported.js uses %q, which Internet Explorer cannot run", later)
		}
	}
}

func ExampleFunctionID() {
	fmt.Println(FunctionID("VEER.ZSCORE"))
	// Output: ZSCORE
}

func ExampleManifest() {
	b, err := Manifest("https://localhost:7311")
	if err != nil {
		panic(err)
	}
	fmt.Println(bytes.Contains(b, []byte(`<bt:Url id="Functions.Metadata.Url" DefaultValue="https://localhost:7311/addin/functions.json"/>`)))
	// Output: true
}

func ExampleMetadata() {
	l := cell.Listing{Functions: []cell.FuncInfo{{
		Name: "VEER.ZSCORE", Summary: "Standardised score of a reading.", Result: cell.ShapeColumn, Streaming: true,
		Params: []cell.Param{{Name: "model", Type: cell.TypeText, Help: "model name"}, {Name: "ages", Type: cell.TypeRange, Help: "ages"}},
	}}}
	b, err := Metadata(l, "")
	if err != nil {
		panic(err)
	}
	var doc struct {
		Functions []struct {
			ID         string
			Parameters []struct{ Name, Type, Dimensionality string }
			Result     struct{ Dimensionality string }
			Options    struct{ Stream bool }
		}
	}
	json.Unmarshal(b, &doc)
	f := doc.Functions[0]
	fmt.Println(f.ID, f.Parameters[0].Type, f.Parameters[1].Dimensionality, f.Result.Dimensionality, f.Options.Stream)
	// Output: ZSCORE string matrix matrix true
}

func ExampleSite() {
	site, err := Site(catalog.New().Listing(), SiteOptions{BaseURL: func() string { return "https://localhost:7311" }})
	if err != nil {
		panic(err)
	}
	for _, name := range []string{"taskpane.html", "veer.js", "functions.json", "catalog.js", "manifest.xml"} {
		_, err := fs.Stat(site, name)
		fmt.Println(name, err == nil)
	}
	// Output:
	// taskpane.html true
	// veer.js true
	// functions.json true
	// catalog.js true
	// manifest.xml true
}

// TestCautionWordForWord: every page of the add-in that speaks of signals
// carries screening.Caution word for word. The static pages (HTML written
// by hand) are checked here; the generated ones take the constant; the task
// pane's script takes it from catalog.js.
func TestCautionWordForWord(t *testing.T) {
	site, err := Site(listing(t), SiteOptions{BaseURL: func() string { return DefaultBaseURL }})
	if err != nil {
		t.Fatal(err)
	}
	caution := html.EscapeString(screening.Caution)
	for _, name := range []string{"index.html", "taskpane.html", "help.html", "manifest.xml", "catalog.js"} {
		b, err := fs.ReadFile(site, name)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Contains(b, []byte(caution)) {
			t.Errorf("%s does not carry the caution %q word for word", name, screening.Caution)
		}
	}
	// The task pane's worker summary says it through catalog.js, and no
	// script words the caution its own way.
	for _, name := range []string{"taskpane.js", "veer.js", "client.js"} {
		b, err := fs.ReadFile(site, name)
		if err != nil {
			t.Fatal(err)
		}
		code := regexp.MustCompile(`(?s)/\*.*?\*/|//[^\n]*`).ReplaceAll(b, nil) // comments may speak of it
		if bytes.Contains(code, []byte("diagnosis")) {
			t.Errorf("%s words the caution itself; use catalog.caution", name)
		}
	}
	if b, _ := fs.ReadFile(site, "taskpane.js"); !bytes.Contains(b, []byte("${catalog.caution}")) {
		t.Error("taskpane.js does not show catalog.caution with a signal")
	}
}
