package workbooks

import (
	"archive/zip"
	"bytes"
	"encoding/binary"
	"encoding/xml"
	"flag"
	"io"
	"os"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"veer/functions/catalog"
	vcell "veer/functions/cell"

	"github.com/xuri/excelize/v2"

	"veer/examples"
	"veer/functions/rules"
	"veer/internal/table"
)

var update = flag.Bool("update", false, "rewrite screening.xlsx and screening.ods")

var (
	buildOnce      sync.Once
	builtX, builtO []byte
	buildErr       error
)

func built(t *testing.T) (xlsx, ods []byte) {
	t.Helper()
	buildOnce.Do(func() { builtX, builtO, buildErr = Build() })
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return builtX, builtO
}

// TestCommittedWorkbooksReproducible regenerates both workbooks in memory
// and compares them byte for byte with the committed (and embedded) files.
func TestCommittedWorkbooksReproducible(t *testing.T) {
	x, o := built(t)
	if *update {
		for name, b := range map[string][]byte{XLSXName: x, ODSName: o} {
			if err := os.WriteFile(name, b, 0o644); err != nil {
				t.Fatal(err)
			}
		}
		t.Log("rewrote the workbooks; rebuild to refresh the embedded copies")
		return
	}
	x2, o2, err := Build()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(x, x2) || !bytes.Equal(o, o2) {
		t.Fatal("two builds differ: the writers are not deterministic")
	}
	for _, c := range []struct {
		name       string
		built, emb []byte
	}{{XLSXName, x, XLSX()}, {ODSName, o, ODS()}} {
		disk, err := os.ReadFile(c.name)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(disk, c.built) {
			t.Errorf("%s differs from a fresh build (%d vs %d bytes); run go run ./examples/workbooks/gen", c.name, len(disk), len(c.built))
		}
		if !bytes.Equal(c.emb, disk) {
			t.Errorf("the embedded %s differs from the file", c.name)
		}
	}
}

// catalogue reports whether name is a cell function of veer's catalogue.
func catalogue(name string) bool {
	_, ok := catalog.New().Lookup(name)
	return ok
}

// catalogueOptions reports whether name is an option some cell function takes.
func catalogueOptions(name string) bool {
	_, ok := vcell.LookupOption(name)
	return ok
}

func demoTable(t *testing.T, b []byte) *table.Table {
	t.Helper()
	tab, err := table.Read(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	return tab
}

func openXLSX(t *testing.T, b []byte) *excelize.File {
	t.Helper()
	f, err := excelize.OpenReader(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { f.Close() })
	return f
}

// sameNumberOrText compares a cell's raw text with the CSV's text: numbers
// by value, text exactly.
func sameNumberOrText(cell, csv string) bool {
	a, errA := strconv.ParseFloat(cell, 64)
	b, errB := strconv.ParseFloat(csv, 64)
	if errA == nil && errB == nil {
		return a == b
	}
	return cell == csv
}

func TestXLSXDataSheets(t *testing.T) {
	x, _ := built(t)
	f := openXLSX(t, x)
	if got, want := f.GetSheetList(), []string{ExamsSheet, ReferenceSheet, SettingsSheet, ScreeningSheet}; !equal(got, want) {
		t.Fatalf("sheets %q, want %q", got, want)
	}
	for _, c := range []struct {
		sheet string
		csv   []byte
	}{{ExamsSheet, examples.WorkforceCSV()}, {ReferenceSheet, examples.ReferenceCSV()}} {
		want := demoTable(t, c.csv)
		rows, err := f.GetRows(c.sheet, excelize.Options{RawCellValue: true})
		if err != nil {
			t.Fatal(err)
		}
		if !equal(rows[0], want.Header) || len(rows) != len(want.Rows)+1 {
			t.Fatalf("%s: header %q and %d rows, want %q and %d", c.sheet, rows[0], len(rows)-1, want.Header, len(want.Rows))
		}
		for i, r := range want.Rows {
			for j, v := range r {
				if !sameNumberOrText(rows[i+1][j], v) {
					t.Fatalf("%s row %d column %s: %q, want %q", c.sheet, i+2, want.Header[j], rows[i+1][j], v)
				}
			}
		}
	}
}

var (
	veerCall        = regexp.MustCompile(`\b(VEER\.[A-Z]+)\(`)
	settingsRangeRE = regexp.MustCompile(`Settings!\$A\$(\d+):\$B\$(\d+)`)
	settingsCellRE  = regexp.MustCompile(`Settings!\$B\$(\d+)`)
)

// TestXLSXFormulas checks the Screening sheet's formulas against the
// catalogue: every function exists, every options range holds known option
// names, the model cells name the built-in models and the rule cells hold
// rules that compile.
func TestXLSXFormulas(t *testing.T) {
	x, _ := built(t)
	f := openXLSX(t, x)
	nExams := len(demoTable(t, examples.WorkforceCSV()).Rows)
	used := map[string]int{}
	arrays := 0
	rows, err := f.GetRows(ScreeningSheet)
	if err != nil {
		t.Fatal(err)
	}
	maxCol := 0
	for _, r := range rows {
		maxCol = max(maxCol, len(r))
	}
	settings := func(row int, col string) string {
		v, err := f.GetCellValue(SettingsSheet, col+strconv.Itoa(row))
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	for r := 1; r <= 40; r++ {
		for c := 1; c <= maxCol+4; c++ {
			ref := cellName(r-1, c-1)
			fo, err := f.GetCellFormula(ScreeningSheet, ref)
			if err != nil {
				t.Fatal(err)
			}
			if fo == "" {
				continue
			}
			for _, m := range veerCall.FindAllStringSubmatch(fo, -1) {
				if !catalogue(m[1]) {
					t.Errorf("%s: %s is not a catalogue function", ref, m[1])
				}
				used[m[1]]++
			}
			for _, m := range settingsRangeRE.FindAllStringSubmatch(fo, -1) {
				a, _ := strconv.Atoi(m[1])
				b, _ := strconv.Atoi(m[2])
				for row := a; row <= b; row++ {
					if name := settings(row, "A"); !catalogueOptions(name) {
						t.Errorf("%s: options range row %d holds %q, not an option name", ref, row, name)
					}
				}
			}
			for _, m := range settingsCellRE.FindAllStringSubmatch(fo, -1) {
				row, _ := strconv.Atoi(m[1])
				switch label, v := settings(row, "A"), settings(row, "B"); label {
				case "model":
					if v != "demo-sbp" && v != "demo-fev1" {
						t.Errorf("%s: model cell holds %q, want a built-in model", ref, v)
					}
				case "rule":
					if _, err := rules.Compile(v, rules.Bool); err != nil {
						t.Errorf("%s: the rule %q does not compile: %v", ref, v, err)
					}
				case "target":
				default:
					t.Errorf("%s: refers to Settings!B%d (%q), which is neither a model, a rule nor the target", ref, row, label)
				}
			}
			if strings.HasPrefix(fo, "VEER.") && strings.Contains(fo, "Exams!") && r == 2 {
				arrays++
			}
		}
	}
	for _, fn := range []string{"VEER.FIT", "VEER.CHART", "VEER.ZSCORE", "VEER.CENTILE", "VEER.LIMIT", "VEER.RULE", "VEER.INFO"} {
		if used[fn] == 0 {
			t.Errorf("the Screening sheet does not use %s", fn)
		}
	}
	// Spilled formulas cover every exam row: the array areas in the sheet XML.
	parts := zipParts(t, x)
	sheetXML := string(parts["xl/worksheets/sheet4.xml"])
	areas := regexp.MustCompile(`t="array" ref="([A-Z]+)2:([A-Z]+)(\d+)"`).FindAllStringSubmatch(sheetXML, -1)
	if len(areas) != arrays {
		t.Errorf("%d array formulas over the exams, %d VEER formulas on row 2", len(areas), arrays)
	}
	for _, a := range areas {
		if a[3] != strconv.Itoa(nExams+1) {
			t.Errorf("array %s2:%s%s does not end at the last exam row %d", a[1], a[2], a[3], nExams+1)
		}
	}
	if !regexp.MustCompile(`fullCalcOnLoad="(1|true)"`).Match(parts["xl/workbook.xml"]) {
		t.Error("the workbook does not ask for calculation on load")
	}
}

func zipParts(t *testing.T, b []byte) map[string][]byte {
	t.Helper()
	zr, err := zip.NewReader(bytes.NewReader(b), int64(len(b)))
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]byte{}
	for _, f := range zr.File {
		rc, err := f.Open()
		if err != nil {
			t.Fatal(err)
		}
		data, err := io.ReadAll(rc)
		rc.Close()
		if err != nil {
			t.Fatal(err)
		}
		out[f.Name] = data
	}
	return out
}

// TestODSPackage checks the package rules of OpenDocument: the mimetype part
// first, stored, without extra field, its text at byte 38; every part named
// in the manifest; well-formed XML.
func TestODSPackage(t *testing.T) {
	_, o := built(t)
	if string(o[30:38]) != "mimetype" || string(o[38:38+len(odsMime)]) != odsMime {
		t.Fatalf("the mimetype part is not first and stored at offset 38: %q", o[:80])
	}
	if method := binary.LittleEndian.Uint16(o[8:10]); method != 0 {
		t.Errorf("mimetype is compressed (method %d)", method)
	}
	if extra := binary.LittleEndian.Uint16(o[28:30]); extra != 0 {
		t.Errorf("mimetype has a %d-byte extra field", extra)
	}
	parts := zipParts(t, o)
	for _, p := range []string{"content.xml", "styles.xml", "meta.xml", "META-INF/manifest.xml"} {
		if err := wellFormed(parts[p]); err != nil {
			t.Errorf("%s: %v", p, err)
		}
		if p != "META-INF/manifest.xml" && !bytes.Contains(parts["META-INF/manifest.xml"], []byte(`full-path="`+p+`"`)) {
			t.Errorf("the manifest does not list %s", p)
		}
	}
}

func wellFormed(b []byte) error {
	if len(b) == 0 {
		return io.ErrUnexpectedEOF
	}
	d := xml.NewDecoder(bytes.NewReader(b))
	for {
		_, err := d.Token()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
	}
}

// odsCells decodes content.xml into sheet name -> "A1" -> formula or value.
func odsCells(t *testing.T, content []byte) (map[string]map[string]string, map[string]map[string][2]int) {
	t.Helper()
	type cellX struct {
		Formula string   `xml:"formula,attr"`
		Value   string   `xml:"value,attr"`
		Repeat  int      `xml:"number-columns-repeated,attr"`
		MCols   int      `xml:"number-matrix-columns-spanned,attr"`
		MRows   int      `xml:"number-matrix-rows-spanned,attr"`
		Text    []string `xml:"p"`
	}
	type rowX struct {
		Cells []cellX `xml:"table-cell"`
	}
	type tableX struct {
		Name string `xml:"name,attr"`
		Rows []rowX `xml:"table-row"`
	}
	var doc struct {
		Tables []tableX `xml:"body>spreadsheet>table"`
	}
	if err := xml.Unmarshal(content, &doc); err != nil {
		t.Fatal(err)
	}
	vals := map[string]map[string]string{}
	spans := map[string]map[string][2]int{}
	for _, tb := range doc.Tables {
		vals[tb.Name] = map[string]string{}
		spans[tb.Name] = map[string][2]int{}
		for r, row := range tb.Rows {
			c := 0
			for _, cx := range row.Cells {
				n := max(cx.Repeat, 1)
				at := cellName(r, c)
				switch {
				case cx.Formula != "":
					vals[tb.Name][at] = cx.Formula
					if cx.MRows > 0 {
						spans[tb.Name][at] = [2]int{cx.MRows, cx.MCols}
					}
				case len(cx.Text) > 0:
					vals[tb.Name][at] = strings.Join(cx.Text, "\n")
				}
				c += n
			}
		}
	}
	return vals, spans
}

// TestODSMatchesXLSX checks that the two files hold the same workbook:
// the same cells, formulas written in each syntax from the same expression.
func TestODSMatchesXLSX(t *testing.T) {
	x, o := built(t)
	f := openXLSX(t, x)
	vals, spans := odsCells(t, zipParts(t, o)["content.xml"])
	var names []string
	for n := range vals {
		names = append(names, n)
	}
	sort.Strings(names)
	if want := []string{ExamsSheet, ReferenceSheet, ScreeningSheet, SettingsSheet}; !equal(names, want) {
		t.Fatalf("ods sheets %q, want %q", names, want)
	}
	formulas := 0
	for _, s := range []string{SettingsSheet, ScreeningSheet} {
		for at, ov := range vals[s] {
			if strings.HasPrefix(ov, "of:=") {
				formulas++
				xf, err := f.GetCellFormula(s, at)
				if err != nil || xf == "" {
					t.Fatalf("%s!%s: formula %q in .ods, none in .xlsx", s, at, ov)
				}
				// Same functions and numbers in the same order.
				if got, want := funcNames(ov), funcNames(xf); !equal(got, want) {
					t.Errorf("%s!%s: functions %v in .ods, %v in .xlsx", s, at, got, want)
				}
				continue
			}
			xv, _ := f.GetCellValue(s, at, excelize.Options{RawCellValue: true})
			if !sameNumberOrText(xv, ov) {
				t.Errorf("%s!%s: %q in .xlsx, %q in .ods", s, at, xv, ov)
			}
		}
	}
	n := len(demoTable(t, examples.WorkforceCSV()).Rows)
	if formulas < n {
		t.Errorf("only %d formulas in the .ods", formulas)
	}
	chart := spans[ScreeningSheet]["H2"]
	if chart != [2]int{n, 6} {
		t.Errorf("VEER.CHART at H2 spans %v rows×columns, want %d×6", chart, n)
	}
	want := "of:=VEER.CHART([$Settings.$B$5];[$Exams.$A$2:.$A$" + strconv.Itoa(n+1) + "];"
	if got := vals[ScreeningSheet]["H2"]; !strings.HasPrefix(got, want) {
		t.Errorf("H2 holds %q, want it to start with %q", got, want)
	}
}

var funcRE = regexp.MustCompile(`[A-Z][A-Z.]*\(`)

// funcNames lists the functions called in a formula; OpenFormula's TRUE()
// is Excel's TRUE constant, so it is left out.
func funcNames(s string) []string {
	var out []string
	for _, f := range funcRE.FindAllString(s, -1) {
		if f != "TRUE(" && f != "FALSE(" {
			out = append(out, f)
		}
	}
	return out
}

func equal(a, b []string) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

func TestFormulaSyntax(t *testing.T) {
	cases := []struct {
		e         expr
		xlsx, ods string
	}{
		{ref{sheet: "Exams", c1: 1, r1: 2, c2: 1, r2: 5042, abs: true}, "Exams!$A$2:$A$5042", "[$Exams.$A$2:.$A$5042]"},
		{ref{c1: 28, r1: 3}, "AB3", "[.AB3]"},
		{ref{sheet: "My sheet's", c1: 2, r1: 1}, "'My sheet''s'!B1", "[$'My sheet''s'.B1]"},
		{call{"VEER.LIMIT", []expr{num(20), str(`say "hi"`), boolean(true)}}, `VEER.LIMIT(20,"say ""hi""",TRUE)`, `VEER.LIMIT(20;"say ""hi""";TRUE())`},
		{binop{">", ref{c1: 4, r1: 2}, ref{c1: 6, r1: 2}}, "D2>F2", "[.D2]>[.F2]"},
	}
	for _, c := range cases {
		if got := c.e.xlsx(); got != c.xlsx {
			t.Errorf("xlsx %q, want %q", got, c.xlsx)
		}
		if got := c.e.ods(); got != c.ods {
			t.Errorf("ods %q, want %q", got, c.ods)
		}
	}
	for c, want := range map[int]string{1: "A", 26: "Z", 27: "AA", 52: "AZ", 703: "AAA"} {
		if got := colLetters(c); got != want {
			t.Errorf("colLetters(%d) = %q, want %q", c, got, want)
		}
	}
}
