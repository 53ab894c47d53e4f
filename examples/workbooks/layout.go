package workbooks

import (
	"bytes"
	"fmt"
	"strconv"
	"strings"

	"veer/examples"
	"veer/internal/table"
	refresh "veer/internal/workbook" // the caution matches the sheets veer screen writes
)

// expr is a formula expression that can be written in both spreadsheet
// syntaxes: Excel's A1 syntax (in .xlsx) and OpenFormula (in .ods).
type expr interface {
	xlsx() string
	ods() string
}

// ref is a cell or range reference: columns and rows are 1-based; r2 == 0
// means a single cell. An empty sheet refers to the formula's own sheet.
type ref struct {
	sheet          string
	c1, r1, c2, r2 int
	abs            bool
}

func colLetters(c int) string {
	s := ""
	for c > 0 {
		c--
		s = string(rune('A'+c%26)) + s
		c /= 26
	}
	return s
}

func (r ref) a1(c, row int) string {
	if r.abs {
		return "$" + colLetters(c) + "$" + strconv.Itoa(row)
	}
	return colLetters(c) + strconv.Itoa(row)
}

func (r ref) xlsx() string {
	s := ""
	if r.sheet != "" {
		s = quoteSheetXLSX(r.sheet) + "!"
	}
	s += r.a1(r.c1, r.r1)
	if r.r2 > 0 {
		s += ":" + r.a1(r.c2, r.r2)
	}
	return s
}

func (r ref) ods() string {
	s := "["
	if r.sheet != "" {
		s += "$" + quoteSheetODS(r.sheet)
	}
	s += "." + r.a1(r.c1, r.r1)
	if r.r2 > 0 {
		s += ":." + r.a1(r.c2, r.r2)
	}
	return s + "]"
}

func needsQuote(name string) bool {
	for _, c := range name {
		if !(c == '_' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9') {
			return true
		}
	}
	return false
}

func quoteSheetXLSX(name string) string {
	if needsQuote(name) {
		return "'" + strings.ReplaceAll(name, "'", "''") + "'"
	}
	return name
}

func quoteSheetODS(name string) string {
	if needsQuote(name) {
		return "'" + strings.ReplaceAll(name, "'", "''") + "'"
	}
	return name
}

// call is a function call.
type call struct {
	name string
	args []expr
}

func (c call) join(sep string, f func(expr) string) string {
	parts := make([]string, len(c.args))
	for i, a := range c.args {
		parts[i] = f(a)
	}
	return c.name + "(" + strings.Join(parts, sep) + ")"
}

func (c call) xlsx() string { return c.join(",", expr.xlsx) }
func (c call) ods() string  { return c.join(";", expr.ods) }

// str is a text literal; num a number literal; boolean a TRUE/FALSE literal.
type str string
type num float64
type boolean bool

func (s str) xlsx() string     { return `"` + strings.ReplaceAll(string(s), `"`, `""`) + `"` }
func (s str) ods() string      { return s.xlsx() }
func (n num) xlsx() string     { return strconv.FormatFloat(float64(n), 'g', -1, 64) }
func (n num) ods() string      { return n.xlsx() }
func (b boolean) xlsx() string { return strings.ToUpper(strconv.FormatBool(bool(b))) }
func (b boolean) ods() string  { return b.xlsx() + "()" }

// binop is a binary operator such as > or *.
type binop struct {
	op   string
	a, b expr
}

func (o binop) xlsx() string { return o.a.xlsx() + o.op + o.b.xlsx() }
func (o binop) ods() string  { return o.a.ods() + o.op + o.b.ods() }

// paren wraps an expression in brackets.
type paren struct{ e expr }

func (p paren) xlsx() string { return "(" + p.e.xlsx() + ")" }
func (p paren) ods() string  { return "(" + p.e.ods() + ")" }

// kind of a cell.
type kind uint8

const (
	kText kind = iota + 1
	kNumber
	kFormula
)

// cell is one written cell. A formula cell with rows/cols > 1 is an array
// formula whose results fill that many rows and columns.
type cell struct {
	kind       kind
	text       string
	num        float64
	formula    expr
	rows, cols int
	bold       bool
	wrap       bool
}

// sheet is one sheet: cells by row and column (0-based), column widths in
// characters.
type sheet struct {
	name   string
	cells  map[[2]int]cell
	nrows  int
	ncols  int
	widths map[int]float64
}

func newSheet(name string) *sheet {
	return &sheet{name: name, cells: map[[2]int]cell{}, widths: map[int]float64{}}
}

func (s *sheet) set(row, col int, c cell) {
	s.cells[[2]int{row, col}] = c
	if row+1 > s.nrows {
		s.nrows = row + 1
	}
	if col+1 > s.ncols {
		s.ncols = col + 1
	}
}

func (s *sheet) text(row, col int, t string)    { s.set(row, col, cell{kind: kText, text: t}) }
func (s *sheet) bold(row, col int, t string)    { s.set(row, col, cell{kind: kText, text: t, bold: true}) }
func (s *sheet) number(row, col int, v float64) { s.set(row, col, cell{kind: kNumber, num: v}) }
func (s *sheet) formula(row, col int, e expr) {
	s.set(row, col, cell{kind: kFormula, formula: e, rows: 1, cols: 1})
}
func (s *sheet) array(row, col, nr, nc int, e expr) {
	s.set(row, col, cell{kind: kFormula, formula: e, rows: nr, cols: nc})
	if row+nr > s.nrows {
		s.nrows = row + nr
	}
	if col+nc > s.ncols {
		s.ncols = col + nc
	}
}

// workbook is the whole layout, sheets in order.
type workbook struct{ sheets []*sheet }

// Sheet names.
const (
	ExamsSheet     = "Exams"
	ReferenceSheet = "Reference"
	SettingsSheet  = "Settings"
	ScreeningSheet = "Screening"
)

// dataSheet copies a CSV table; numeric cells become numbers.
func dataSheet(name string, t *table.Table) *sheet {
	s := newSheet(name)
	for c, h := range t.Header {
		s.bold(0, c, h)
		s.widths[c] = 11
	}
	for i, row := range t.Rows {
		for c, v := range row {
			if x, err := strconv.ParseFloat(v, 64); err == nil {
				s.number(i+1, c, x)
			} else {
				s.text(i+1, c, v)
			}
		}
	}
	return s
}

// Settings layout (1-based rows of the Settings sheet).
const (
	setSBPModel   = 5
	setSBPRule    = 6
	setSBPOptions = 8 // target, chart, side, allowance, extrapolate: rows 8–12
	setFEVModel   = 15
	setFEVRule    = 16
	setFEVOptions = 18 // rows 18–22
)

func settingsSheet() *sheet {
	s := newSheet(SettingsSheet)
	s.widths[0], s.widths[1], s.widths[2] = 16, 32, 70
	s.bold(0, 0, "veer settings: the cells the Screening sheet's formulas read")
	s.set(1, 0, cell{kind: kText, text: refresh.Caution, bold: true})
	block := func(title string, modelRow int, model, rule, side string) {
		r := modelRow - 2 // 0-based title row
		s.bold(r, 0, title)
		s.text(r+1, 0, "model")
		s.text(r+1, 1, model)
		s.text(r+1, 2, "built-in demo model (needs no token); after VEER.FIT on the Screening sheet, put your own model's name here")
		s.text(r+2, 0, "rule")
		s.text(r+2, 1, rule)
		s.text(r+2, 2, "alert rule in CEL, evaluated per exam by VEER.RULE")
		s.bold(r+3, 0, "chart options")
		s.text(r+3, 2, "name | value pairs; formulas pass these rows as their options range")
		opts := []struct {
			name  string
			value any
			help  string
		}{
			{"target", 20.0, "years: a healthy worker is flagged on average once in this many years"},
			{"chart", "cusum", "chart statistic: cusum or ewma"},
			{"side", side, "which drift to watch: up, down or both"},
			{"allowance", 0.5, "CUSUM allowance k in SD (common practice: half the shift to detect)"},
			{"extrapolate", "true", "allow ages outside the reference range (curves held at their ends)"},
		}
		for i, o := range opts {
			s.text(r+4+i, 0, o.name)
			switch v := o.value.(type) {
			case float64:
				s.number(r+4+i, 1, v)
			case string:
				s.text(r+4+i, 1, v)
			}
			s.text(r+4+i, 2, o.help)
		}
	}
	block("Systolic blood pressure (SBP, mmHg)", setSBPModel, "demo-sbp", "chart > limit || centile > 99", "up")
	block("FEV1 (litres)", setFEVModel, "demo-fev1", "chart > limit || centile < 1", "down")
	return s
}

// settingsRef refers to Settings cells (1-based rows, 0-based column a=0).
func settingsRef(row, col int) ref {
	return ref{sheet: SettingsSheet, c1: col + 1, r1: row, abs: true}
}

func settingsRange(r1, r2 int) ref {
	return ref{sheet: SettingsSheet, c1: 1, r1: r1, c2: 2, r2: r2, abs: true}
}

// markerPlan describes the formulas of one marker on the Screening sheet.
type markerPlan struct {
	label      string // column prefix
	valueCol   int    // 1-based column of the marker on Exams/Reference
	modelRow   int
	ruleRow    int
	optRow     int // first options row (target)
	centile    float64
	centileTxt string
	cutWord    string // "above" or "below"
	cutOp      string
}

func (p markerPlan) model() ref      { return settingsRef(p.modelRow, 1) }
func (p markerPlan) rule() ref       { return settingsRef(p.ruleRow, 1) }
func (p markerPlan) allOptions() ref { return settingsRange(p.optRow, p.optRow+4) }
func (p markerPlan) chartOnly() ref  { return settingsRange(p.optRow+1, p.optRow+3) }
func (p markerPlan) delayOpts() ref  { return settingsRange(p.optRow, p.optRow+3) }
func (p markerPlan) extrapOnly() ref { return settingsRange(p.optRow+4, p.optRow+4) }

func screeningSheet(nExams, nRef int) *sheet {
	s := newSheet(ScreeningSheet)
	last := nExams + 1 // last data row on Exams
	col := func(c int) ref { return ref{sheet: ExamsSheet, c1: c, r1: 2, c2: c, r2: last, abs: true} }
	ids, groups, ages := col(1), col(2), col(3)

	// Per-row copies of the exam columns.
	heads := []string{"worker", "group", "age"}
	for c, h := range heads {
		s.bold(0, c, h)
		for i := 0; i < nExams; i++ {
			s.formula(i+1, c, ref{sheet: ExamsSheet, c1: c + 1, r1: i + 2})
		}
	}
	plans := []markerPlan{
		{"sbp", 4, setSBPModel, setSBPRule, setSBPOptions, 97.5, "97.5th", "above", ">"},
		{"fev1", 5, setFEVModel, setFEVRule, setFEVOptions, 2.5, "2.5th", "below", "<"},
	}
	c := len(heads)
	for _, p := range plans {
		values := col(p.valueCol)
		vcol, centCol := c, c+2
		s.bold(0, vcol, p.label)
		for i := 0; i < nExams; i++ {
			s.formula(i+1, vcol, ref{sheet: ExamsSheet, c1: p.valueCol, r1: i + 2})
		}
		s.bold(0, c+1, p.label+" reference mean")
		s.array(1, c+1, nExams, 1, call{"VEER.REFMEAN", []expr{p.model(), ages, groups, p.extrapOnly()}})
		s.bold(0, centCol, p.label+" "+p.centileTxt+" centile")
		s.array(1, centCol, nExams, 1, call{"VEER.CENTILE", []expr{p.model(), ages, num(p.centile), groups, p.extrapOnly()}})
		s.bold(0, c+3, p.label+" z")
		s.array(1, c+3, nExams, 1, call{"VEER.ZSCORE", []expr{p.model(), ages, values, groups, p.extrapOnly()}})
		for k, h := range []string{"z", "innovation", "chart", "limit", "signal", "first signal"} {
			s.bold(0, c+4+k, p.label+" "+h)
		}
		s.array(1, c+4, nExams, 6, call{"VEER.CHART", []expr{p.model(), ids, ages, values, groups, p.allOptions()}})
		s.bold(0, c+10, p.label+" rule")
		s.array(1, c+10, nExams, 1, call{"VEER.RULE", []expr{p.rule(), p.model(), ids, ages, values, groups, p.allOptions()}})
		s.bold(0, c+11, p.label+" "+p.cutWord+" "+p.centileTxt)
		for i := 0; i < nExams; i++ {
			s.formula(i+1, c+11, binop{p.cutOp, ref{c1: vcol + 1, r1: i + 2}, ref{c1: centCol + 1, r1: i + 2}})
		}
		c += 12
	}
	for k := 0; k < c; k++ {
		s.widths[k] = 12
	}

	// Summary block to the right.
	kc := c + 1 // label column (0-based); values in kc+1
	s.widths[kc], s.widths[kc+1] = 44, 22
	s.bold(0, kc, "veer screening of the Exams sheet")
	s.set(1, kc, cell{kind: kText, text: refresh.Caution, bold: true, wrap: true})
	row := 3
	item := func(label string, e expr) {
		s.text(row, kc, label)
		s.formula(row, kc+1, e)
		row++
	}
	item("exams on the Exams sheet", call{"COUNTA", []expr{ids}})
	for pi, p := range plans {
		base := 3 + 12*pi // 0-based first column of the marker block
		firstSig := ref{c1: base + 4 + 5 + 1, r1: 2, c2: base + 4 + 5 + 1, r2: last, abs: true}
		ageCol := ref{c1: 3, r1: 2, c2: 3, r2: last, abs: true}
		cut := ref{c1: base + 11 + 1, r1: 2, c2: base + 11 + 1, r2: last, abs: true}
		item(p.label+" model", p.model())
		item(p.label+" limit for the target years", call{"VEER.LIMIT", []expr{settingsRef(p.optRow, 1), p.model(), p.chartOnly()}})
		item(p.label+" years to signal after a sustained 1 SD shift", call{"VEER.DELAY", []expr{num(1), p.model(), p.delayOpts()}})
		item(p.label+" workers flagged by the chart", call{"SUMPRODUCT", []expr{binop{"*", paren{binop{"=", firstSig, ageCol}}, num(1)}}})
		item(p.label+" exams "+p.cutWord+" the "+p.centileTxt+" centile", call{"COUNTIF", []expr{cut, boolean(true)}})
	}
	row++
	s.bold(row, kc, "your own model (needs the write token)")
	row++
	refCol := func(c int) ref { return ref{sheet: ReferenceSheet, c1: c, r1: 2, c2: c, r2: nRef + 1, abs: true} }
	item("VEER.FIT of my-sbp on the Reference sheet", call{"VEER.FIT", []expr{str("my-sbp"), refCol(1), refCol(3), refCol(4), refCol(2)}})
	row++
	for pi, p := range plans {
		cc := kc + 3*pi
		if pi > 0 {
			s.widths[cc], s.widths[cc+1] = 30, 22
		}
		s.bold(row, cc, p.label+" model diagnostics (VEER.INFO)")
		s.array(row+1, cc, infoRows, 2, call{"VEER.INFO", []expr{p.model()}})
	}
	return s
}

// infoRows is the room left for the VEER.INFO tables.
const infoRows = 30

func readTable(b []byte) (*table.Table, error) {
	t, err := table.Read(bytes.NewReader(b))
	if err != nil {
		return nil, fmt.Errorf("demo data: %v", err)
	}
	return t, nil
}

// layout builds the workbook from the demo data.
func layout() (*workbook, error) {
	wf, err := readTable(examples.WorkforceCSV())
	if err != nil {
		return nil, err
	}
	ref, err := readTable(examples.ReferenceCSV())
	if err != nil {
		return nil, err
	}
	return &workbook{sheets: []*sheet{
		dataSheet(ExamsSheet, wf),
		dataSheet(ReferenceSheet, ref),
		settingsSheet(),
		screeningSheet(len(wf.Rows), len(ref.Rows)),
	}}, nil
}
