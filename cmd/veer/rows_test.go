package main

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"veer/functions/catalog"
	"veer/functions/screening"
	"veer/internal/table"
	"veer/internal/version"
)

// csvLines is a CSV file as lines (line k of the file is lines[k-1]).
type csvLines []string

func workLines(t *testing.T, n int) csvLines {
	f := fixture(t)
	return strings.Split(strings.TrimRight(string(csvOf(f.work[:n])), "\n"), "\n")
}

// set replaces cell col of file line line (1-based).
func (c csvLines) set(line, col int, v string) csvLines {
	out := slices.Clone(c)
	cells := strings.Split(out[line-1], ",")
	cells[col] = v
	out[line-1] = strings.Join(cells, ",")
	return out
}

func (c csvLines) write(t *testing.T, name string) string {
	return writeFile(t, filepath.Join(t.TempDir(), name), []byte(strings.Join(c, "\n")+"\n"))
}

// screenArgsFor are the flags of screen for the fixture model.
func screenArgsFor(t *testing.T, in, out string, extra ...string) []string {
	f := fixture(t)
	return append([]string{"screen", "--model", f.model, "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--limit", "4", "--out", out}, extra...)
}

// readOut reads a CSV the command wrote.
func readOut(t *testing.T, path string) (*table.Table, map[string]int) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	tab, err := table.Read(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for j, h := range tab.Header {
		col[h] = j
	}
	return tab, col
}

// A few bad rows never stop veer screen: it screens every row it can, gives
// the others a status saying why, counts them on stderr with their lines,
// writes the output and exits with exitSkipped. --strict keeps all or
// nothing. A blank reading is a missing exam, not a fault.
func TestScreenSetsAsideRows(t *testing.T) {
	f := fixture(t)
	clean := workLines(t, 60)
	_, hi, err := f.m.Curves.Range("tower")
	if err != nil {
		t.Fatal(err)
	}
	// Columns: worker, group, age, sbp. Find a tower row to push out of
	// range by a thousandth of a year.
	towerLine := 0
	for k := 2; k <= len(clean); k++ {
		if strings.Split(clean[k-1], ",")[1] == "tower" {
			towerLine = k
			break
		}
	}
	messy := clean.set(towerLine, 2, strconv.FormatFloat(hi+0.001, 'f', -1, 64)).
		set(9, 3, "").     // blank reading
		set(12, 1, "lab"). // unknown group
		set(15, 1, "").    // blank group
		set(20, 3, "high") // text reading
	want := map[int]string{towerLine: statusOutside, 9: statusNoReading, 12: statusUnknownGroup, 15: statusBlankGroup, 20: statusBadReading}
	in := messy.write(t, "messy.csv")
	out := filepath.Join(t.TempDir(), "out.csv")
	code, stdout, stderr := cli(screenArgsFor(t, in, out)...)
	if code != exitSkipped || stdout != "" {
		t.Fatalf("exit %d (want %d), stdout %q, stderr:\n%s", code, exitSkipped, stdout, stderr)
	}
	for _, part := range []string{
		"screened 55 exams of 60 rows", "1 row without a reading", "4 rows not screened",
		"1 outside_range", "1 unknown_group", "1 blank_group", "1 bad_reading",
		fmt.Sprintf(`line %d, column "age": age %s is 0.001 years above`, towerLine, fmtNum(hi+0.001)),
		`line 12, column "group": unknown group "lab"`,
		`line 15, column "group": the group is blank (worker`,
		`line 20, column "sbp": "high" is not a number`,
		screening.Caution,
	} {
		if !strings.Contains(stderr, part) {
			t.Errorf("stderr does not say %q:\n%s", part, stderr)
		}
	}
	tab, col := readOut(t, out)
	if len(tab.Rows) != len(messy)-1 {
		t.Fatalf("%d rows out for %d in", len(tab.Rows), len(messy)-1)
	}
	// The rows screened match the screening of the clean rows alone.
	var kept csvLines
	kept = append(kept, clean[0])
	for k := 2; k <= len(messy); k++ {
		if _, bad := want[k]; !bad {
			kept = append(kept, messy[k-1])
		}
	}
	refOut := filepath.Join(t.TempDir(), "ref.csv")
	if code, _, stderr := cli(screenArgsFor(t, kept.write(t, "kept.csv"), refOut)...); code != 0 {
		t.Fatalf("clean rows: exit %d: %s", code, stderr)
	}
	ref, _ := readOut(t, refOut)
	r := 0
	for i, row := range tab.Rows {
		line := i + 2
		if st, bad := want[line]; bad {
			if row[col["status"]] != st || row[col["status_note"]] == "" {
				t.Errorf("line %d: status %q, note %q; want %q", line, row[col["status"]], row[col["status_note"]], st)
			}
			for _, c := range []string{"z", "chart", "limit", "signal", "exam"} {
				if row[col[c]] != "" {
					t.Errorf("line %d was not screened but has %s = %q", line, c, row[col[c]])
				}
			}
			continue
		}
		if row[col["status"]] != statusScreened {
			t.Errorf("line %d: status %q", line, row[col["status"]])
		}
		for _, c := range []string{"z", "chart", "signal", "exam", "first_signal"} {
			if row[col[c]] != ref.Rows[r][col[c]] {
				t.Errorf("line %d: %s = %q; the clean rows alone give %q", line, c, row[col[c]], ref.Rows[r][col[c]])
			}
		}
		r++
	}

	// --strict: nothing written, every row named.
	os.Remove(out)
	code, _, stderr = cli(screenArgsFor(t, in, out, "--strict")...)
	if code != 1 || !strings.Contains(stderr, "nothing was written") || !strings.Contains(stderr, "line 12") || !strings.Contains(stderr, fmt.Sprintf("line %d", towerLine)) {
		t.Errorf("--strict: exit %d:\n%s", code, stderr)
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("--strict wrote the output")
	}

	// Only a blank reading: a missing exam, so exit 0, even with --strict.
	for _, strict := range []bool{false, true} {
		args := screenArgsFor(t, clean.set(9, 3, "").write(t, "missing.csv"), out)
		if strict {
			args = append(args, "--strict")
		}
		code, _, stderr = cli(args...)
		tab, col = readOut(t, out)
		if code != 0 || !strings.Contains(stderr, "1 row without a reading") || tab.Rows[7][col["status"]] != statusNoReading {
			t.Errorf("blank reading (strict %v): exit %d, status %q:\n%s", strict, code, tab.Rows[7][col["status"]], stderr)
		}
	}
}

// --extrapolate screens ages a stated distance outside the reference range
// against the curves' end values, marks each such row and counts them; ages
// farther out are set aside with a message naming --reach.
func TestScreenExtrapolateBounded(t *testing.T) {
	f := fixture(t)
	lo, hi, err := f.m.Curves.Range("tower")
	if err != nil {
		t.Fatal(err)
	}
	base := workLines(t, 30)
	extra := []struct {
		age           float64
		within5, in40 bool
	}{{hi + 1, true, true}, {lo - 2, true, true}, {hi + 20, false, true}, {lo - 30, false, true}, {hi + 60, false, false}}
	lines := slices.Clone(base)
	for k, x := range extra {
		lines = append(lines, fmt.Sprintf("X%d,tower,%s,130", k, fmtNum(x.age)))
	}
	in := lines.write(t, "ages.csv")
	out := filepath.Join(t.TempDir(), "out.csv")
	first := len(base) // data row of the first extra line

	for _, c := range []struct {
		name   string
		flags  []string
		reach  float64
		inside func(i int) bool
	}{
		{"no extrapolation", nil, 0, func(int) bool { return false }},
		{"default reach", []string{"--extrapolate"}, 5, func(i int) bool { return extra[i].within5 }},
		{"reach 40", []string{"--reach", "40"}, 40, func(i int) bool { return extra[i].in40 }},
		{"reach 40 and extrapolate", []string{"--extrapolate", "--reach=40"}, 40, func(i int) bool { return extra[i].in40 }},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, stderr := cli(screenArgsFor(t, in, out, c.flags...)...)
			tab, col := readOut(t, out)
			nIn := 0
			for i, x := range extra {
				row := tab.Rows[first-1+i]
				st, note := row[col["status"]], row[col["status_note"]]
				if c.inside(i) {
					nIn++
					mean, _, _ := f.m.Curves.At("tower", math.Max(lo, math.Min(hi, x.age)), false)
					if st != statusExtrapolated || !strings.Contains(note, "screened against the curves' end values") || row[col["mean"]] != strconv.FormatFloat(mean, 'f', 6, 64) {
						t.Errorf("age %g: status %q, note %q, mean %s (end value %.6f)", x.age, st, note, row[col["mean"]], mean)
					}
					continue
				}
				hint := "--extrapolate screens ages up to 5 years"
				if c.reach > 0 {
					hint = fmt.Sprintf("farther than --extrapolate reaches (%g years; --reach YEARS", c.reach)
				}
				if st != statusOutside || !strings.Contains(note, hint) {
					t.Errorf("age %g: status %q, note %q; want %s and %q", x.age, st, note, statusOutside, hint)
				}
			}
			wantCode := 0
			if nIn < len(extra) {
				wantCode = exitSkipped
			}
			if code != wantCode {
				t.Errorf("exit %d; want %d:\n%s", code, wantCode, stderr)
			}
			if nIn > 0 && !strings.Contains(stderr, fmt.Sprintf("%d exams extrapolated: at ages up to %g years", nIn, c.reach)) {
				t.Errorf("stderr does not count the %d extrapolated exams:\n%s", nIn, stderr)
			}
		})
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--extrapolate", "3"}, "--reach 3"},
		{[]string{"--extrapolate=false", "--reach", "3"}, "drop one of them"},
		{[]string{"--reach", "-1"}, "--reach must be"},
		{[]string{"--reach", "1000"}, "at most 100"},
	} {
		if code, _, stderr := cli(screenArgsFor(t, in, out, c.args...)...); code != 2 || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, %s", c.args, code, stderr)
		}
	}
	// veer curve takes the same bound.
	at := fmtNum(hi + 1)
	if code, stdout, stderr := cli("curve", "--model", f.model, "--group", "tower", "--at", at, "--extrapolate"); code != 0 || !strings.Contains(stdout, at+",tower,") {
		t.Errorf("curve at %s with --extrapolate: exit %d, %q, %s", at, code, stdout, stderr)
	}
	if code, _, stderr := cli("curve", "--model", f.model, "--group", "tower", "--at", fmtNum(hi+20), "--extrapolate"); code != 1 || !strings.Contains(stderr, "--reach") {
		t.Errorf("curve 20 years out with --extrapolate: exit %d, %s", code, stderr)
	}
}

// Fit and screen report every problem of a file at once (up to
// table.MaxListed, then a count), at the line a text editor shows (blank
// lines counted) or the sheet row and cell of a workbook.
func TestProblemsCollectedWithPlaces(t *testing.T) {
	f := fixture(t)
	lines := strings.Split(strings.TrimRight(string(csvOf(synthExams(1, 160, 0))), "\n"), "\n")
	// A blank line after line 10 shifts every later line by one.
	withBlank := append(slices.Clone(lines[:10]), append([]string{""}, lines[10:]...)...)
	var bad []int // file lines of the text cells
	for k := 0; k < 25; k++ {
		idx := 20 + 7*k // index in withBlank: file line idx+1
		cells := strings.Split(withBlank[idx], ",")
		cells[3] = "n/a"
		withBlank[idx] = strings.Join(cells, ",")
		bad = append(bad, idx+1)
	}
	in := writeFile(t, filepath.Join(t.TempDir(), "ref.csv"), []byte(strings.Join(withBlank, "\n")+"\n"))
	model := filepath.Join(t.TempDir(), "m.json")
	code, _, stderr := cli("fit", "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--name", "x", "--out", model)
	if code != 1 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	got := regexp.MustCompile(`line (\d+), column "sbp": "n/a" is not a number`).FindAllStringSubmatch(stderr, -1)
	if len(got) != table.MaxListed {
		t.Fatalf("%d problems listed; want %d:\n%s", len(got), table.MaxListed, stderr)
	}
	for k, m := range got {
		if m[1] != strconv.Itoa(bad[k]) {
			t.Errorf("problem %d at line %s; the text cell is on line %d", k+1, m[1], bad[k])
		}
	}
	if !strings.Contains(stderr, "25 problems") || !strings.Contains(stderr, "and 5 more") || !strings.Contains(stderr, "nothing was written") {
		t.Errorf("stderr does not count the rest:\n%s", stderr)
	}
	if _, err := os.Stat(model); err == nil {
		t.Error("a model was written")
	}

	// The same data in a workbook sheet whose header is on row 2: fit and
	// screen read it with --sheet and name cells as the sheet shows them.
	book := filepath.Join(t.TempDir(), "book.xlsx")
	writeBook(t, book, "Exams", 2, lines, map[int]string{7: "n/a"})
	code, _, stderr = cli("fit", "--in", book, "--sheet", "exams", "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--name", "x", "--out", model)
	if code != 1 || !strings.Contains(stderr, `cell D9 (column "sbp"): "n/a" is not a number`) {
		t.Errorf("fit of a workbook with a text cell: exit %d:\n%s", code, stderr)
	}
	writeBook(t, book, "Exams", 2, lines, nil)
	code, _, stderr = cli("fit", "--in", book, "--sheet", "Exams", "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--name", "sbp", "--out", model)
	if code != 0 {
		t.Fatalf("fit of a workbook: exit %d: %s", code, stderr)
	}
	fromBook, err := loadModel(model)
	if err != nil {
		t.Fatal(err)
	}
	if fromBook.Hash != f.m.Hash {
		t.Errorf("the model fitted from the workbook differs from the one fitted from the same rows as CSV")
	}
	// screen names the sheet row of an age outside the range.
	wl := strings.Split(strings.TrimRight(string(csvOf(f.work[:20])), "\n"), "\n")
	screenBook := filepath.Join(t.TempDir(), "screen.xlsx")
	writeBook(t, screenBook, "Exams", 2, wl, map[int]string{})
	fw, _ := excelize.OpenFile(screenBook)
	fw.SetCellValue("Exams", "C8", 99.5) // data row 5 is sheet row 8
	fw.Save()
	fw.Close()
	code, _, stderr = cli("screen", "--model", f.model, "--in", screenBook, "--sheet", "Exams", "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--limit", "4")
	if code != exitSkipped || !strings.Contains(stderr, `cell C8 (column "age"): age 99.5 is`) {
		t.Errorf("screen of a workbook with an age outside the range: exit %d:\n%s", code, stderr)
	}
	// --sheet goes with a workbook only.
	if code, _, stderr := cli("fit", "--in", in, "--sheet", "Exams", "--id", "worker", "--time", "age", "--value", "sbp", "--name", "x", "--out", model); code != 2 || !strings.Contains(stderr, "--sheet goes with an .xlsx workbook") {
		t.Errorf("--sheet with a CSV file: exit %d, %s", code, stderr)
	}
}

// writeBook writes CSV lines (header first) into sheet of a new workbook,
// the header on row headerRow; text maps a data row (1-based) to a text to
// put in its reading cell.
func writeBook(t *testing.T, path, sheet string, headerRow int, lines []string, text map[int]string) {
	t.Helper()
	f := excelize.NewFile()
	defer f.Close()
	if err := f.SetSheetName("Sheet1", sheet); err != nil {
		t.Fatal(err)
	}
	for k, l := range lines {
		row := headerRow + k
		for c, v := range strings.Split(l, ",") {
			ref, _ := excelize.CoordinatesToCellName(c+1, row)
			var val any = v
			if x, err := strconv.ParseFloat(v, 64); err == nil && k > 0 && c >= 2 {
				val = x
			}
			if s, ok := text[k]; ok && k > 0 && c == 3 {
				val = s
			}
			if err := f.SetCellValue(sheet, ref, val); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := f.SaveAs(path); err != nil {
		t.Fatal(err)
	}
}

// Messages say what to do: the flag that changes the outcome, the row,
// column and group of a blank group cell, one worker in the singular, no
// package names.
func TestMessagesSayWhatToDo(t *testing.T) {
	ref := strings.Split(strings.TrimRight(string(csvOf(synthExams(1, 160, 0))), "\n"), "\n")
	model := filepath.Join(t.TempDir(), "m.json")
	fit := func(lines []string, extra ...string) (int, string) {
		in := writeFile(t, filepath.Join(t.TempDir(), "ref.csv"), []byte(strings.Join(lines, "\n")+"\n"))
		code, _, stderr := cli(append([]string{"fit", "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--name", "x", "--out", model}, extra...)...)
		return code, stderr
	}
	// A blank group cell: its line, column and the worker's group.
	blank := csvLines(ref).set(6, 1, "")
	worker := strings.Split(blank[5], ",")[0]
	code, stderr := fit(blank)
	if code != 1 || !strings.Contains(stderr, fmt.Sprintf(`line 6, column "group": the group is blank (worker %q is in group "tower" on other rows)`, worker)) || strings.Contains(stderr, "workers;") {
		t.Errorf("blank group: exit %d:\n%s", code, stderr)
	}
	// One worker of a group of its own: singular, and the flag.
	lone := append(slices.Clone(ref), "Z1,lab,40,120", "Z1,lab,41,121")
	code, stderr = fit(lone)
	if code != 1 || !strings.Contains(stderr, `group "lab" has 1 worker; a reference curve needs at least 10`) || !strings.Contains(stderr, "--minworkers") {
		t.Errorf("a group of one worker: exit %d:\n%s", code, stderr)
	}
	if code, stderr = fit(lone, "--minworkers", "1"); code != 2 || !strings.Contains(stderr, "--minworkers must be at least 3") {
		t.Errorf("--minworkers 1: exit %d:\n%s", code, stderr)
	}
	// A model with groups screened without --group: said once, naming it.
	f := fixture(t)
	code, _, stderr = cli("screen", "--model", f.model, "--in", f.workCSV, "--id", "worker", "--time", "age", "--value", "sbp", "--limit", "4")
	if code != 2 || !strings.Contains(stderr, `the model has groups "tower", "workshop": name the column holding each exam's group with --group`) {
		t.Errorf("no --group: exit %d:\n%s", code, stderr)
	}
	// No Go package names in messages; "1 year", not "1 years".
	code, _, stderr = cli("limit", "--target", "0.5", "--gap", "1")
	if code != 1 || regexp.MustCompile(`\b(monitor|limit|chart|screening|refcurve): `).MatchString(strings.TrimPrefix(stderr, "veer limit: ")) || strings.Contains(stderr, "1 years") {
		t.Errorf("limit below the gap: exit %d: %s", code, stderr)
	}
}

// One name per idea: the command line spells options as the cells do
// (headstart, minworkers, reps); earlier spellings still work but --help
// does not list them.
func TestFlagNamesMatchCellOptions(t *testing.T) {
	for _, c := range []struct {
		cmd        []string
		shown, old string
	}{
		{[]string{"limit"}, "--headstart", "head-start"},
		{[]string{"limit"}, "--reps", "paths"},
		{[]string{"fit"}, "--minworkers", "min-workers"},
	} {
		_, _, help := cli(append(c.cmd, "--help")...)
		if !strings.Contains(help, "  -"+strings.TrimPrefix(c.shown, "--")) || strings.Contains(help, "-"+c.old+" ") || strings.Contains(help, "-"+c.old+"\n") {
			t.Errorf("veer %s --help: want %s listed and --%s not:\n%s", c.cmd[0], c.shown, c.old, help)
		}
	}
	a := []string{"limit", "--target", "20", "--gap", "1", "--method", "normal"}
	_, newOut, _ := cli(append(a, "--headstart", "0.5")...)
	_, oldOut, _ := cli(append(a, "--head-start", "0.5")...)
	_, noneOut, _ := cli(a...)
	if newOut == "" || newOut != oldOut || newOut == noneOut {
		t.Errorf("--headstart gives %q, --head-start %q, neither %q", newOut, oldOut, noneOut)
	}
}

// Progress on a terminal rewrites one line; to a file or a pipe it writes
// whole lines, at most one every progressLineEvery.
func TestProgressLines(t *testing.T) {
	for _, term := range []bool{true, false} {
		var b bytes.Buffer
		p := newProgress(&env{stderr: &b, stderrTerminal: term})
		p.start = time.Now().Add(-time.Minute)
		p.report("simulating", 0.25)
		p.report("simulating", 0.5) // too soon after the first
		p.finish()
		got := b.String()
		if term {
			if got != "\r"+fmt.Sprintf("%-40s %3.0f%%", "simulating", 25.0)+"\n" {
				t.Errorf("terminal: %q", got)
			}
			continue
		}
		if got != "simulating: 25%\n" {
			t.Errorf("not a terminal: %q", got)
		}
	}
}

// veer version, the function listing (GET /v1/functions) and the report
// say which veer this is.
func TestVersion(t *testing.T) {
	code, stdout, _ := cli("version")
	if code != 0 || stdout != "veer "+version.String()+"\n" {
		t.Errorf("veer version: exit %d, %q", code, stdout)
	}
	if v := catalog.New().Listing().Version; v != version.String() {
		t.Errorf("the function listing says version %q; want %q", v, version.String())
	}
	f := fixture(t)
	rep := filepath.Join(t.TempDir(), "r.html")
	if code, _, stderr := cli("report", "--model", f.model, "--in", f.workCSV, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--limit", "4", "--out", rep); code != 0 {
		t.Fatalf("report: exit %d: %s", code, stderr)
	}
	b, _ := os.ReadFile(rep)
	if !strings.Contains(string(b), "made with veer "+version.String()) {
		t.Error("the report does not say which veer made it")
	}
	_, _, help := cli("--help")
	// Every summary starts in the same column.
	col := -1
	for _, l := range strings.Split(help, "\n") {
		if !strings.HasPrefix(l, "  ") {
			continue
		}
		name := strings.Fields(l)[0]
		at := strings.Index(l[2+len(name):], strings.Fields(l[2+len(name):])[0]) + 2 + len(name)
		if col >= 0 && at != col {
			t.Errorf("the summary of %s starts at column %d, the others at %d:\n%s", name, at, col, help)
		}
		col = at
	}
}

// CSV in, CSV out: screen writes in the input's delimiter, decimal mark,
// byte-order mark and line ends unless told otherwise; a screened file
// screened again has its result columns replaced, not doubled; a clash
// with a column screen writes is refused with a message.
func TestScreenCSVFormat(t *testing.T) {
	f := fixture(t)
	comma := workLines(t, 40)
	// The same exams as a spreadsheet in a decimal-comma locale saves them.
	var euro []string
	for _, l := range comma {
		cells := strings.Split(l, ",")
		for k := range cells {
			cells[k] = strings.Replace(cells[k], ".", ",", 1)
		}
		euro = append(euro, strings.Join(cells, ";"))
	}
	euroIn := writeFile(t, filepath.Join(t.TempDir(), "euro.csv"), []byte("\xEF\xBB\xBF"+strings.Join(euro, "\r\n")+"\r\n"))
	commaIn := csvLines(comma).write(t, "comma.csv")
	outEuro := filepath.Join(t.TempDir(), "euro.out.csv")
	outComma := filepath.Join(t.TempDir(), "comma.out.csv")
	for _, c := range [][]string{screenArgsFor(t, euroIn, outEuro, "--rule", "r=chart > 1.0"), screenArgsFor(t, commaIn, outComma, "--rule", "r=chart > 1.0")} {
		if code, _, stderr := cli(c...); code != 0 {
			t.Fatalf("exit %d: %s", code, stderr)
		}
	}
	raw, _ := os.ReadFile(outEuro)
	if !bytes.HasPrefix(raw, []byte("\xEF\xBB\xBFworker;group;age;sbp;mean;")) || !bytes.Contains(raw, []byte("\r\n")) || bytes.Contains(bytes.ReplaceAll(raw, []byte("\r\n"), nil), []byte("\n")) {
		t.Fatalf("not written as read (BOM, ';', CR LF): %q", raw[:min(200, len(raw))])
	}
	eu, col := readOut(t, outEuro)
	co, _ := readOut(t, outComma)
	if eu.Format() != (table.Format{Comma: ';', DecimalComma: true, BOM: true, CRLF: true}) {
		t.Errorf("output format %+v", eu.Format())
	}
	for i := range eu.Rows {
		for _, c := range []string{"mean", "z", "chart", "limit", "first_signal"} {
			want := strings.Replace(co.Rows[i][col[c]], ".", ",", 1)
			if eu.Rows[i][col[c]] != want {
				t.Fatalf("row %d %s = %q; the comma file gives %q", i+1, c, eu.Rows[i][col[c]], co.Rows[i][col[c]])
			}
		}
	}
	// Told otherwise: comma and point.
	out := filepath.Join(t.TempDir(), "o.csv")
	if code, _, stderr := cli(screenArgsFor(t, euroIn, out, "--separator", "comma", "--decimal", "point")...); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if o, _ := readOut(t, out); o.Comma != ',' || o.DecimalComma {
		t.Errorf("--separator comma --decimal point wrote %q", o.Comma)
	}
	if code, _, stderr := cli(screenArgsFor(t, euroIn, out, "--separator", "comma", "--decimal", "comma")...); code != 2 || !strings.Contains(stderr, "--decimal comma needs") {
		t.Errorf("a decimal comma with a comma delimiter: exit %d, %s", code, stderr)
	}

	// Screening the screened file again: the same columns, once each, the
	// same results.
	again := filepath.Join(t.TempDir(), "again.csv")
	if code, _, stderr := cli(screenArgsFor(t, outComma, again, "--rule", "r=chart > 1.0")...); code != 0 {
		t.Fatalf("re-screen: exit %d: %s", code, stderr)
	}
	ag, _ := readOut(t, again)
	if strings.Join(ag.Header, ",") != strings.Join(co.Header, ",") {
		t.Errorf("re-screened header\n %s\nwant\n %s", strings.Join(ag.Header, ","), strings.Join(co.Header, ","))
	}
	for i := range ag.Rows {
		if strings.Join(ag.Rows[i], ",") != strings.Join(co.Rows[i], ",") {
			t.Fatalf("row %d re-screened %v; first screening %v", i+1, ag.Rows[i], co.Rows[i])
		}
	}
	// A column of the input named like one screen writes, or like a rule.
	clash := csvLines(comma)
	clash[0] = strings.Replace(clash[0], "group", "z", 1)
	clash[0] = strings.Replace(clash[0], "worker", "group", 1)
	args := []string{"screen", "--model", f.model, "--in", clash.write(t, "clash.csv"), "--id", "group", "--time", "age", "--value", "sbp", "--group", "z", "--limit", "4", "--out", out}
	if code, _, stderr := cli(args...); code != 1 || !strings.Contains(stderr, `the input has a column "z"`) {
		t.Errorf("input column z: exit %d, %s", code, stderr)
	}
	if code, _, stderr := cli(screenArgsFor(t, commaIn, out, "--rule", "group=chart > 1.0")...); code != 1 || !strings.Contains(stderr, `column "group", the name of a rule`) {
		t.Errorf("a rule named like an input column: exit %d, %s", code, stderr)
	}
	if code, _, stderr := cli(screenArgsFor(t, commaIn, out, "--rule", "limit=chart > 1.0")...); code != 2 || !strings.Contains(stderr, `"limit"`) {
		t.Errorf("a rule named like a result column: exit %d, %s", code, stderr)
	}
}
