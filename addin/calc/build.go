package calc

import (
	"archive/zip"
	"bytes"
	"context"
	_ "embed"
	"encoding/json"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"veer/functions/cell"
	"veer/functions/screening"
	"veer/internal/version"
)

// Names of the extension and its UNO component.
const (
	// Identifier is the extension's identifier for unopkg (unopkg remove org.veer.calc).
	Identifier = "org.veer.calc"
	// ServiceName is what the add-in's XServiceName returns; Calc stores a
	// function as ServiceName.method, so it must stay "veer" (see package doc).
	ServiceName = "veer"
	// ImplementationName is the UNO implementation of the add-in.
	ImplementationName = "org.veer.calc.Functions"
	// InterfaceName is the generated IDL interface.
	InterfaceName = "org.veer.calc.XFunctions"
	// DefaultVersion is the extension version written to description.xml:
	// veer's release.
	DefaultVersion = version.Release
	// DefaultPort is where the component looks for the server unless told.
	DefaultPort = 7311
)

// Paths inside the .oxt.
const (
	pathIDL        = "idl/org/veer/calc/XFunctions.idl" // compiled, not shipped
	pathRDB        = "veer.rdb"
	pathPython     = "veer_calc.py"
	pathComponents = "veer.components"
	pathXCU        = "CalcAddIns.xcu"
	pathManifest   = "META-INF/manifest.xml"
	pathDesc       = "description.xml"
	pathDescText   = "description/description-en.txt"
)

//go:embed veer_calc.py
var pythonTemplate string

// catalogueMarker is the line of the template the builder replaces.
const catalogueMarker = "CATALOGUE = []  # @@CATALOGUE@@"

// Param is one parameter of an extension function.
type Param struct {
	Name     string    `json:"name"`     // the catalogue's name, shown in the Function Wizard
	Type     cell.Type `json:"type"`     // the catalogue's type (number, text, bool, range, any)
	Optional bool      `json:"optional"` // may be left out
	Help     string    `json:"help"`
	IDL      string    `json:"idl"`      // UNO type of the IDL parameter
	IDLName  string    `json:"idl_name"` // identifier in the IDL and CalcAddIns.xcu
}

// Func is one cell function of the extension.
type Func struct {
	Name        string     `json:"name"`        // VEER.CHART
	Method      string     `json:"method"`      // chart
	Summary     string     `json:"summary"`     // one line
	Description string     `json:"description"` // the Function Wizard text
	Params      []Param    `json:"params"`
	Result      cell.Shape `json:"result"`
	Writes      bool       `json:"writes"`
	Slow        bool       `json:"slow"`
	// Local functions are answered by the add-in itself, not the server.
	Local bool `json:"local"`
}

// ReturnIDL is the UNO return type of f's method.
func (f Func) ReturnIDL() string {
	if f.Result == cell.ShapeValue {
		return "any"
	}
	return "sequence< sequence< any > >"
}

// localFuncs are the add-in's own functions. Calc cannot show an error
// message in a cell, so VEER.ERRORS shows the recent ones.
func localFuncs() []cell.FuncInfo {
	return []cell.FuncInfo{{
		Name:    "VEER.ERRORS",
		Summary: "The latest error messages of VEER cells in this LibreOffice session, newest first.",
		Help: "Calc shows only the kind of error in a cell (#N/A, #VALUE!, ...); this table gives the message behind it, " +
			"with columns time, function, error, message and times (how often in a row). Recalculate (Ctrl+Shift+F9) to refresh it.",
		Params: []cell.Param{{Name: "after", Type: cell.TypeAny, Optional: true,
			Help: "a value computed from your VEER cells, e.g. COUNT(D2:N5042), so the table is made after them " +
				"(not the range itself: Calc gives Err:504 for a range holding errors)"}},
		Result: cell.ShapeTable,
	}}
}

var (
	methodRE = regexp.MustCompile(`^[a-z][a-z0-9_]*$`)
	// Reserved words of UNO IDL (unoidl's lexer), which cannot name a
	// method or parameter, and the methods every UNO object already has.
	idlReserved = map[string]bool{
		"any": true, "attribute": true, "boolean": true, "bound": true, "byte": true, "char": true,
		"const": true, "constants": true, "constrained": true, "double": true, "enum": true,
		"exception": true, "float": true, "get": true, "hyper": true, "in": true, "inout": true,
		"interface": true, "long": true, "maybeambiguous": true, "maybedefault": true, "maybevoid": true,
		"module": true, "needs": true, "observes": true, "oneway": true, "optional": true, "out": true,
		"property": true, "published": true, "raises": true, "readonly": true, "removable": true,
		"sequence": true, "service": true, "set": true, "short": true, "singleton": true, "string": true,
		"struct": true, "transient": true, "typedef": true, "type": true, "unsigned": true, "void": true,
		"true": true, "false": true,
		// UNO's own methods and the attributes of the Python add-in object.
		"acquire": true, "release": true, "ctx": true, "locale": true, "functions": true,
	}
)

// methodName maps VEER.X to the UNO method x. Further dots become '_' (a
// method name cannot hold a dot), so such a function is stored in .ods
// files as VEER.X_Y while it is typed VEER.X.Y.
func methodName(name string) (string, error) {
	rest, ok := strings.CutPrefix(name, "VEER.")
	if !ok {
		return "", fmt.Errorf("calc: function %q is not in the VEER namespace", name)
	}
	m := strings.ReplaceAll(strings.ToLower(rest), ".", "_")
	if !methodRE.MatchString(m) {
		return "", fmt.Errorf("calc: function %s gives the method name %q, which is not a UNO identifier", name, m)
	}
	if idlReserved[m] {
		return "", fmt.Errorf("calc: function %s gives the method name %q, a reserved word of UNO IDL; rename the function in the catalogue", name, m)
	}
	return m, nil
}

// idlType is the UNO type of a parameter (see the package doc).
func idlType(p cell.Param) string {
	if p.Optional {
		return "any"
	}
	switch p.Type {
	case cell.TypeRange:
		return "sequence< sequence< any > >"
	case cell.TypeNumber:
		return "double"
	case cell.TypeText:
		return "string"
	}
	return "any" // bool and any: Calc has no boolean argument type
}

// Functions returns the extension's functions: every function of the
// catalogue listing, in its order, then the add-in's own (VEER.ERRORS).
func Functions(l cell.Listing) ([]Func, error) {
	if len(l.Functions) == 0 {
		return nil, errors.New("calc: the catalogue has no functions")
	}
	var out []Func
	seen := map[string]string{}
	add := func(fi cell.FuncInfo, local bool) error {
		m, err := methodName(fi.Name)
		if err != nil {
			return err
		}
		if other, dup := seen[m]; dup {
			return fmt.Errorf("calc: functions %s and %s both give the method name %q", other, fi.Name, m)
		}
		seen[m] = fi.Name
		f := Func{Name: fi.Name, Method: m, Summary: fi.Summary, Params: []Param{}, Result: fi.Result, Writes: fi.Writes, Slow: fi.Slow, Local: local}
		f.Description = describe(fi)
		for _, p := range fi.Params {
			n := p.Name
			if idlReserved[n] || !methodRE.MatchString(n) {
				n = "arg_" + n
			}
			f.Params = append(f.Params, Param{Name: p.Name, Type: p.Type, Optional: p.Optional, Help: p.Help, IDL: idlType(p), IDLName: n})
		}
		out = append(out, f)
		return nil
	}
	for _, fi := range l.Functions {
		if err := add(fi, false); err != nil {
			return nil, err
		}
	}
	for _, fi := range localFuncs() {
		if _, clash := seen[strings.ToLower(strings.TrimPrefix(fi.Name, "VEER."))]; clash {
			return nil, fmt.Errorf("calc: the catalogue now has a function %s, which the Calc add-in defines itself; rename one of them", fi.Name)
		}
		if err := add(fi, true); err != nil {
			return nil, err
		}
	}
	return out, nil
}

// describe is the Function Wizard text: summary, help, how to enter the
// result, the token note for functions that write.
func describe(fi cell.FuncInfo) string {
	parts := []string{strings.TrimSpace(fi.Summary)}
	if h := strings.TrimSpace(fi.Help); h != "" {
		parts = append(parts, h)
	}
	switch fi.Result {
	case cell.ShapeColumn:
		parts = append(parts, "The result is one value per input row: enter the formula as an array formula (Ctrl+Shift+Enter) over as many rows as the input.")
	case cell.ShapeTable:
		parts = append(parts, "The result is a table: enter the formula as an array formula (Ctrl+Shift+Enter) over the rows and columns it fills.")
	}
	if fi.Writes {
		parts = append(parts, "It saves on the veer server, so it needs the install token (veer token) in the add-in settings.")
	}
	if strings.Contains(strings.ToLower(fi.Summary+fi.Help), "signal") && !strings.Contains(fi.Help, "licensed clinician") {
		parts = append(parts, screening.Caution)
	}
	return strings.Join(parts, "\n\n")
}

// Options configure Sources and Build.
type Options struct {
	// Version of the extension (numbers separated by dots); default DefaultVersion.
	Version string
	// SDK to compile the IDL with; nil: FindSDK().
	SDK *SDK
}

var versionRE = regexp.MustCompile(`^[0-9]+(\.[0-9]+){0,3}$`)

func (o Options) version() (string, error) {
	if o.Version == "" {
		return DefaultVersion, nil
	}
	if !versionRE.MatchString(o.Version) {
		return "", fmt.Errorf("calc: version %q must be numbers separated by dots, e.g. 1.2.0", o.Version)
	}
	return o.Version, nil
}

// Sources returns the generated text files of the extension by their path
// inside the .oxt (the IDL, under idl/, is compiled rather than shipped).
// It needs no outside tools.
func Sources(l cell.Listing, o Options) (map[string][]byte, error) {
	fs, err := Functions(l)
	if err != nil {
		return nil, err
	}
	ver, err := o.version()
	if err != nil {
		return nil, err
	}
	py, err := pythonSource(fs)
	if err != nil {
		return nil, err
	}
	xcu, err := xcuSource(fs)
	if err != nil {
		return nil, err
	}
	return map[string][]byte{
		pathIDL:        idlSource(fs),
		pathPython:     py,
		pathXCU:        xcu,
		pathComponents: []byte(componentsSource),
		pathManifest:   []byte(manifestSource),
		pathDesc:       []byte(fmt.Sprintf(descriptionSource, Identifier, ver)),
		pathDescText:   []byte(descriptionText(fs)),
	}, nil
}

const generatedNote = "Generated by `veer calc-extension` from veer's function catalogue; do not edit."

func idlComment(s string) string {
	s = strings.ReplaceAll(s, "*/", "* /")
	return strings.ReplaceAll(s, "\n", " ")
}

func idlSource(fs []Func) []byte {
	var b bytes.Buffer
	fmt.Fprintf(&b, "// %s\n\n", generatedNote)
	b.WriteString("#include <com/sun/star/uno/XInterface.idl>\n\n")
	b.WriteString("module org { module veer { module calc {\n\n")
	b.WriteString("/** The veer cell functions for LibreOffice Calc; each method forwards one call to the local veer server. */\n")
	b.WriteString("interface XFunctions : com::sun::star::uno::XInterface\n{\n")
	for _, f := range fs {
		fmt.Fprintf(&b, "    /** %s: %s */\n", f.Name, idlComment(f.Summary))
		fmt.Fprintf(&b, "    %s %s(", f.ReturnIDL(), f.Method)
		for i, p := range f.Params {
			if i > 0 {
				b.WriteString(", ")
			}
			fmt.Fprintf(&b, "[in] %s %s", p.IDL, p.IDLName)
		}
		b.WriteString(");\n\n")
	}
	b.WriteString("};\n\n}; }; };\n")
	return b.Bytes()
}

func pythonSource(fs []Func) ([]byte, error) {
	if strings.Count(pythonTemplate, catalogueMarker) != 1 {
		return nil, errors.New("calc: the Python template has lost its catalogue marker line")
	}
	js, err := json.Marshal(fs)
	if err != nil {
		return nil, err
	}
	line := "# " + generatedNote + "\nCATALOGUE = json.loads(" + strconv.QuoteToASCII(string(js)) + ")"
	return []byte(strings.Replace(pythonTemplate, catalogueMarker, line, 1)), nil
}

func xcuSource(fs []Func) ([]byte, error) {
	var b bytes.Buffer
	b.WriteString(`<?xml version="1.0" encoding="UTF-8"?>` + "\n")
	fmt.Fprintf(&b, "<!-- %s -->\n", generatedNote)
	b.WriteString(`<oor:component-data xmlns:oor="http://openoffice.org/2001/registry" xmlns:xs="http://www.w3.org/2001/XMLSchema" oor:name="CalcAddIns" oor:package="org.openoffice.Office">` + "\n")
	b.WriteString(` <node oor:name="AddInInfo">` + "\n")
	fmt.Fprintf(&b, "  <node oor:name=%q oor:op=\"replace\">\n", ServiceName)
	b.WriteString("   <node oor:name=\"AddInFunctions\">\n")
	prop := func(indent, name, value string, localized bool) {
		lang := ""
		if localized {
			lang = ` xml:lang="en"`
		}
		fmt.Fprintf(&b, "%s<prop oor:name=%q><value%s>", indent, name, lang)
		xml.EscapeText(&b, []byte(value)) // writes to a bytes.Buffer cannot fail
		b.WriteString("</value></prop>\n")
	}
	for _, f := range fs {
		fmt.Fprintf(&b, "    <node oor:name=%q oor:op=\"replace\">\n", f.Method)
		prop("     ", "DisplayName", f.Name, true)
		prop("     ", "Description", f.Description, true)
		prop("     ", "Category", "Add-In", false)
		prop("     ", "CompatibilityName", f.Name, true)
		b.WriteString("     <node oor:name=\"Parameters\">\n")
		for _, p := range f.Params {
			fmt.Fprintf(&b, "      <node oor:name=%q oor:op=\"replace\">\n", p.IDLName)
			prop("       ", "DisplayName", p.Name, true)
			h := p.Help
			if p.Optional {
				h += " (optional)"
			}
			prop("       ", "Description", h, true)
			b.WriteString("      </node>\n")
		}
		b.WriteString("     </node>\n")
		b.WriteString("    </node>\n")
	}
	b.WriteString("   </node>\n  </node>\n </node>\n</oor:component-data>\n")
	// Check it is well-formed XML: a message here beats a silent failure
	// inside LibreOffice's configuration layer.
	d := xml.NewDecoder(bytes.NewReader(b.Bytes()))
	for {
		if _, err := d.Token(); err != nil {
			if errors.Is(err, io.EOF) {
				break
			}
			return nil, fmt.Errorf("calc: generated CalcAddIns.xcu is not well-formed: %v", err)
		}
	}
	return b.Bytes(), nil
}

const componentsSource = `<?xml version="1.0" encoding="UTF-8"?>
<components xmlns="http://openoffice.org/2010/uno-components">
  <component loader="com.sun.star.loader.Python" uri="` + pathPython + `">
    <implementation name="` + ImplementationName + `">
      <service name="com.sun.star.sheet.AddIn"/>
      <service name="` + ServiceName + `"/>
    </implementation>
  </component>
</components>
`

const manifestSource = `<?xml version="1.0" encoding="UTF-8"?>
<manifest:manifest xmlns:manifest="http://openoffice.org/2001/manifest">
  <manifest:file-entry manifest:full-path="` + pathRDB + `" manifest:media-type="application/vnd.sun.star.uno-typelibrary;type=RDB"/>
  <manifest:file-entry manifest:full-path="` + pathComponents + `" manifest:media-type="application/vnd.sun.star.uno-components"/>
  <manifest:file-entry manifest:full-path="` + pathXCU + `" manifest:media-type="application/vnd.sun.star.configuration-data"/>
</manifest:manifest>
`

const descriptionSource = `<?xml version="1.0" encoding="UTF-8"?>
<description xmlns="http://openoffice.org/extensions/description/2006"
             xmlns:d="http://openoffice.org/extensions/description/2006"
             xmlns:l="http://libreoffice.org/extensions/description/2011"
             xmlns:xlink="http://www.w3.org/1999/xlink">
  <identifier value="%s"/>
  <version value="%s"/>
  <display-name>
    <name lang="en">veer: screening functions for LibreOffice Calc</name>
  </display-name>
  <extension-description>
    <src lang="en" xlink:href="` + pathDescText + `"/>
  </extension-description>
  <dependencies>
    <l:LibreOffice-minimal-version value="7.0" d:name="LibreOffice 7.0"/>
  </dependencies>
</description>
`

func descriptionText(fs []Func) string {
	var names []string
	for _, f := range fs {
		names = append(names, f.Name)
	}
	return "veer cell functions for LibreOffice Calc: " + strings.Join(names, ", ") + ".\n\n" +
		"They screen workers' medical exams against reference curves from healthy workers. " +
		"The statistics run in the local veer server (start it with `veer serve`); the functions call it on " +
		"127.0.0.1, port " + strconv.Itoa(DefaultPort) + " unless VEER_PORT or the settings file says otherwise. " +
		"Health data do not leave this computer.\n\n" + screening.Caution + "\n"
}

// SDK is what Build needs from the LibreOffice SDK.
type SDK struct {
	// UnoidlWrite is the path of unoidl-write.
	UnoidlWrite string
	// Types are the type libraries the IDL refers to (LibreOffice's types.rdb).
	Types []string
}

// ErrNoSDK is returned (wrapped) when unoidl-write or LibreOffice's type
// library cannot be found.
var ErrNoSDK = errors.New("the LibreOffice SDK's unoidl-write is needed to build the Calc extension: install the Debian package libreoffice-dev (it puts unoidl-write in /usr/lib/libreoffice/sdk/bin) or give its path")

// FindSDK looks for unoidl-write (path given, then PATH, then the usual
// LibreOffice SDK folders) and LibreOffice's types.rdb next to it.
func FindSDK(unoidlWrite string) (SDK, error) {
	var cands []string
	if unoidlWrite != "" {
		cands = []string{unoidlWrite}
	} else {
		if p, err := exec.LookPath("unoidl-write"); err == nil {
			cands = append(cands, p)
		}
		cands = append(cands, "/usr/lib/libreoffice/sdk/bin/unoidl-write")
		for _, pat := range []string{"/usr/lib64/libreoffice/sdk/bin/unoidl-write", "/opt/libreoffice*/sdk/bin/unoidl-write"} {
			m, _ := filepath.Glob(pat)
			cands = append(cands, m...)
		}
	}
	var exe string
	for _, c := range cands {
		if st, err := os.Stat(c); err == nil && !st.IsDir() && st.Mode()&0o111 != 0 {
			exe = c
			break
		}
	}
	if exe == "" {
		if unoidlWrite != "" {
			return SDK{}, fmt.Errorf("%w (%s is not an executable file)", ErrNoSDK, unoidlWrite)
		}
		return SDK{}, ErrNoSDK
	}
	real, err := filepath.EvalSymlinks(exe)
	if err != nil {
		real = exe
	}
	var types []string
	for _, dir := range []string{
		filepath.Join(filepath.Dir(real), "..", "..", "program"), // <office>/sdk/bin -> <office>/program
		"/usr/lib/libreoffice/program",
		"/usr/lib64/libreoffice/program",
	} {
		p := filepath.Clean(filepath.Join(dir, "types.rdb"))
		if _, err := os.Stat(p); err == nil {
			types = append(types, p)
			break
		}
	}
	if len(types) == 0 {
		return SDK{}, fmt.Errorf("%w: found %s but not LibreOffice's types.rdb (is LibreOffice itself installed? Debian package libreoffice-core)", ErrNoSDK, exe)
	}
	return SDK{UnoidlWrite: exe, Types: types}, nil
}

// compileIDL runs unoidl-write on the IDL and returns the type library.
func (s SDK) compileIDL(ctx context.Context, idl []byte) ([]byte, error) {
	dir, err := os.MkdirTemp("", "veer-calc-idl-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	src := filepath.Join(dir, "XFunctions.idl")
	if err := os.WriteFile(src, idl, 0o644); err != nil {
		return nil, err
	}
	out := filepath.Join(dir, "veer.rdb")
	ctx, cancel := context.WithTimeout(ctx, 2*time.Minute)
	defer cancel()
	args := append(append([]string{}, s.Types...), src, out)
	cmd := exec.CommandContext(ctx, s.UnoidlWrite, args...)
	msg, err := cmd.CombinedOutput()
	if err != nil {
		return nil, fmt.Errorf("calc: %s could not compile the generated IDL: %v\n%s", s.UnoidlWrite, err, strings.TrimSpace(string(msg)))
	}
	return os.ReadFile(out)
}

// Build generates the extension's files from the catalogue listing, compiles
// the IDL with unoidl-write and returns the .oxt (a zip). The same listing,
// options and unoidl-write give the same bytes.
func Build(ctx context.Context, l cell.Listing, o Options) ([]byte, error) {
	src, err := Sources(l, o)
	if err != nil {
		return nil, err
	}
	sdk := o.SDK
	if sdk == nil {
		s, err := FindSDK("")
		if err != nil {
			return nil, err
		}
		sdk = &s
	}
	rdb, err := sdk.compileIDL(ctx, src[pathIDL])
	if err != nil {
		return nil, err
	}
	files := map[string][]byte{pathRDB: rdb}
	for p, b := range src {
		if p != pathIDL {
			files[p] = b
		}
	}
	return zipFiles(files)
}

// zipFiles writes a zip with the manifest and description first, the rest
// in name order, all with one fixed time, so builds are reproducible.
func zipFiles(files map[string][]byte) ([]byte, error) {
	names := make([]string, 0, len(files))
	for n := range files {
		names = append(names, n)
	}
	rank := func(n string) int {
		switch n {
		case pathManifest:
			return 0
		case pathDesc:
			return 1
		}
		return 2
	}
	sort.Slice(names, func(i, j int) bool {
		if ri, rj := rank(names[i]), rank(names[j]); ri != rj {
			return ri < rj
		}
		return names[i] < names[j]
	})
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	stamp := time.Date(2020, 1, 1, 0, 0, 0, 0, time.UTC)
	for _, n := range names {
		w, err := zw.CreateHeader(&zip.FileHeader{Name: n, Method: zip.Deflate, Modified: stamp})
		if err != nil {
			return nil, err
		}
		if _, err := w.Write(files[n]); err != nil {
			return nil, err
		}
	}
	if err := zw.Close(); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}
