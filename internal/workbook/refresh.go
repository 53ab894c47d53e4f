package workbook

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/xuri/excelize/v2"

	"veer/functions/screening"
	"veer/internal/flagged"
	"veer/internal/numeric"
	"veer/internal/symbols"
	"veer/internal/table"
)

// Default names of the sheets Refresh writes.
const (
	DefaultResultsSheet = "veer results"
	DefaultSummarySheet = "veer summary"
	// DefaultChartWorkers is how many flagged workers the summary chart shows.
	DefaultChartWorkers = 40
)

// Caution is written on the summary sheet (and in the example workbooks):
// screening.Caution, and the same for alert rules.
const Caution = "Screening aid. " + screening.Caution + " The same holds for an alert rule that fires."

// RefreshOptions control Refresh.
type RefreshOptions struct {
	// ResultsSheet and SummarySheet name the sheets written (empty:
	// DefaultResultsSheet, DefaultSummarySheet). Sheets of these names are
	// replaced; no other sheet is touched.
	ResultsSheet, SummarySheet string
	// ChartWorkers caps the flagged workers in the summary chart (0:
	// DefaultChartWorkers; negative: no chart).
	ChartWorkers int
}

// ResultsData is what Refresh writes.
type ResultsData struct {
	// Input is the exams sheet as read (ReadSheet): its columns are copied
	// to the results sheet, row for row.
	Input *table.Table
	// Markers holds one screened marker each, over the rows of Input.
	Markers []MarkerResults
}

// MarkerResults is the screening of one marker over the rows of the input.
type MarkerResults struct {
	// Name prefixes the marker's columns, e.g. "sbp" gives "sbp z",
	// "sbp chart", ...; it may be empty when there is one marker.
	Name string
	// Exams and Results are one per input row, in the input order (as
	// Model.Screen returns them); Exams give the worker, group and age.
	Exams   []screening.Exam
	Results []screening.Result
	// Limit is the control limit used.
	Limit float64
	// Rules are alert rules evaluated on the same rows; each gets a
	// TRUE/FALSE column.
	Rules []RuleColumn
	// Status and Notes, when given (one per input row), say what happened
	// to each row (screened, extrapolated, or why it was not screened) in
	// two columns. A row whose Result is Skipped shows no numbers.
	Status, Notes []string
}

// RuleColumn is one alert rule's outcome per input row; a rule of
// severity "high" flags a worker as a chart signal does (package flagged).
type RuleColumn = flagged.Rule

func (o RefreshOptions) withDefaults() RefreshOptions {
	if o.ResultsSheet == "" {
		o.ResultsSheet = DefaultResultsSheet
	}
	if o.SummarySheet == "" {
		o.SummarySheet = DefaultSummarySheet
	}
	if o.ChartWorkers == 0 {
		o.ChartWorkers = DefaultChartWorkers
	}
	return o
}

func (d ResultsData) validate() error {
	if d.Input == nil || len(d.Input.Header) == 0 {
		return errors.New("there is no input sheet to copy into the results")
	}
	if len(d.Markers) == 0 {
		return errors.New("there are no screening results to write")
	}
	n := len(d.Input.Rows)
	if n == 0 {
		return errors.New("the input sheet has no exam rows")
	}
	seen := map[string]bool{}
	for k, m := range d.Markers {
		label := m.Name
		if label == "" {
			label = "marker " + strconv.Itoa(k+1)
		}
		if seen[m.Name] {
			return fmt.Errorf("two markers are both called %q; give each a different name", m.Name)
		}
		seen[m.Name] = true
		if len(m.Exams) != n || len(m.Results) != n {
			return fmt.Errorf("%s: %d exams and %d results for %d input rows; screen every input row", label, len(m.Exams), len(m.Results), n)
		}
		if !(m.Limit > 0) || math.IsInf(m.Limit, 0) {
			return fmt.Errorf("%s: the control limit %g is not a positive number", label, m.Limit)
		}
		for _, r := range m.Rules {
			if len(r.Fired) != n {
				return fmt.Errorf("%s: rule %q has %d results for %d input rows", label, r.Name, len(r.Fired), n)
			}
		}
		if (m.Status != nil && len(m.Status) != n) || (m.Notes != nil && len(m.Notes) != n) {
			return fmt.Errorf("%s: %d statuses and %d notes for %d input rows", label, len(m.Status), len(m.Notes), n)
		}
	}
	return nil
}

// Refresh writes the results and summary sheets into the workbook at path
// and replaces the file atomically, keeping the previous version at
// BackupPath(path). See the package comment for what is written and the
// guarantees.
func Refresh(path string, opt RefreshOptions, out ResultsData) (err error) {
	opt = opt.withDefaults()
	if err := out.validate(); err != nil {
		return err
	}
	if strings.EqualFold(opt.ResultsSheet, opt.SummarySheet) {
		return fmt.Errorf("the results and summary sheets need different names, not both %q", opt.ResultsSheet)
	}
	mode, err := checkWritable(path)
	if err != nil {
		return err
	}
	f, err := open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("the workbook %s could not be updated (it may be damaged: %v); nothing was written", path, r)
		}
	}()
	for _, s := range []string{opt.ResultsSheet, opt.SummarySheet} {
		if len([]rune(s)) > 31 || strings.ContainsAny(s, `:\/?*[]`) {
			return fmt.Errorf("%q cannot be a sheet name: at most 31 characters and none of : \\ / ? * [ ]", s)
		}
	}
	wr := &writer{f: f, d: out, opt: opt}
	if err := wr.build(); err != nil {
		return fmt.Errorf("%s: %v; nothing was written", path, err)
	}
	return replaceAtomic(path, mode, func(w io.Writer) error {
		var buf bytes.Buffer
		if err := f.Write(&buf); err != nil {
			return err
		}
		b, err := prunePackage(buf.Bytes())
		if err != nil {
			return err
		}
		_, err = w.Write(b)
		return err
	})
}

// writer builds the two sheets in an open workbook.
type writer struct {
	f   *excelize.File
	d   ResultsData
	opt RefreshOptions

	header, num2, num1, num3, caution, title int
}

func (w *writer) build() error {
	if err := w.styles(); err != nil {
		return err
	}
	if err := w.resetSheet(w.opt.ResultsSheet); err != nil {
		return err
	}
	if err := w.results(); err != nil {
		return err
	}
	if err := w.resetSheet(w.opt.SummarySheet); err != nil {
		return err
	}
	return w.summary()
}

func (w *writer) styles() error {
	var err error
	mk := func(s *excelize.Style) int {
		if err != nil {
			return 0
		}
		var id int
		id, err = w.f.NewStyle(s)
		return id
	}
	fmtStyle := func(code string) *excelize.Style { return &excelize.Style{CustomNumFmt: &code} }
	w.header = mk(&excelize.Style{Font: &excelize.Font{Bold: true}, Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"DCE6F1"}},
		Alignment: &excelize.Alignment{WrapText: true, Vertical: "top"}})
	w.num1 = mk(fmtStyle("0.0"))
	w.num2 = mk(fmtStyle("0.00"))
	w.num3 = mk(fmtStyle("0.000"))
	w.caution = mk(&excelize.Style{Font: &excelize.Font{Bold: true, Color: "9C2A00"}, Alignment: &excelize.Alignment{WrapText: true, Vertical: "top"},
		Border: []excelize.Border{{Type: "left", Color: "D55E00", Style: 2}, {Type: "right", Color: "D55E00", Style: 2},
			{Type: "top", Color: "D55E00", Style: 2}, {Type: "bottom", Color: "D55E00", Style: 2}}})
	w.title = mk(&excelize.Style{Font: &excelize.Font{Bold: true, Size: 13}})
	return err
}

// resetSheet removes a sheet of that name (and so its old contents) and
// creates it afresh at the same position, or at the end.
func (w *writer) resetSheet(name string) error {
	list := w.f.GetSheetList()
	next := ""
	for i, s := range list {
		if strings.EqualFold(s, name) {
			if len(list) == 1 {
				return fmt.Errorf("the workbook has only the sheet %q, which veer would replace; keep the exams on another sheet", s)
			}
			if i+1 < len(list) {
				next = list[i+1]
			}
			if err := w.f.DeleteSheet(s); err != nil {
				return err
			}
			break
		}
	}
	if _, err := w.f.NewSheet(name); err != nil {
		return err
	}
	if next != "" {
		return w.f.MoveSheet(name, next)
	}
	return nil
}

func (w *writer) prefix(m MarkerResults, col string) string {
	if m.Name == "" {
		return col
	}
	return m.Name + " " + col
}

// inputValue returns an input cell as a number when it is one in the
// canonical form ReadSheet gives numbers, else as text (so ids like "007"
// stay text).
func inputValue(s string) any {
	if s == "" {
		return nil
	}
	if x, err := strconv.ParseFloat(s, 64); err == nil && numeric.Finite(x) && strconv.FormatFloat(x, 'g', -1, 64) == s {
		return x
	}
	return s
}

func nilIfEmpty(s string) any {
	if s == "" {
		return nil
	}
	return s
}

func numCell(v float64, style int) any {
	if !numeric.Finite(v) {
		return nil
	}
	return excelize.Cell{StyleID: style, Value: v}
}

func colName(c int) string {
	s, _ := excelize.ColumnNumberToName(c)
	return s
}

// results writes the results sheet with the stream writer (fast for large
// sheets). Conditional formats and panes are set before streaming, as the
// stream writer carries the sheet's settings over.
func (w *writer) results() error {
	name := w.opt.ResultsSheet
	in := w.d.Input
	header := make([]any, 0, len(in.Header)+8*len(w.d.Markers))
	for _, h := range in.Header {
		header = append(header, excelize.Cell{StyleID: w.header, Value: h})
	}
	var signalCols []int
	for _, m := range w.d.Markers {
		for _, c := range []string{"z", "centile", "chart", "limit", "signal", "first signal"} {
			if c == "signal" {
				signalCols = append(signalCols, len(header)+1)
			}
			header = append(header, excelize.Cell{StyleID: w.header, Value: w.prefix(m, c)})
		}
		if m.Status != nil {
			header = append(header, excelize.Cell{StyleID: w.header, Value: w.prefix(m, "status")})
		}
		if m.Notes != nil {
			header = append(header, excelize.Cell{StyleID: w.header, Value: w.prefix(m, "status note")})
		}
		for _, r := range m.Rules {
			if flagged.Flags(r.Severity) {
				// A rule of severity high flags the exam as a signal does.
				signalCols = append(signalCols, len(header)+1)
			}
			header = append(header, excelize.Cell{StyleID: w.header, Value: w.prefix(m, r.Name)})
		}
	}
	ncol := len(header)
	n := len(in.Rows)
	last := colName(ncol) + strconv.Itoa(n+1)
	// Highlight exam rows that flag: any marker's chart signals, or a rule
	// of severity high fires (package flagged).
	conds := make([]string, len(signalCols))
	for i, c := range signalCols {
		conds[i] = "$" + colName(c) + "2=TRUE"
	}
	crit := conds[0]
	if len(conds) > 1 {
		crit = "OR(" + strings.Join(conds, ",") + ")"
	}
	hl, err := w.f.NewConditionalStyle(flaggedStyle())
	if err != nil {
		return err
	}
	if err := w.f.SetConditionalFormat(name, "A2:"+last, []excelize.ConditionalFormatOptions{{Type: "formula", Criteria: crit, Format: &hl}}); err != nil {
		return err
	}
	if err := w.f.AutoFilter(name, "A1:"+last, nil); err != nil {
		return err
	}
	sw, err := w.f.NewStreamWriter(name)
	if err != nil {
		return err
	}
	if err := sw.SetPanes(&excelize.Panes{Freeze: true, YSplit: 1, TopLeftCell: "A2", ActivePane: "bottomLeft"}); err != nil {
		return err
	}
	if err := sw.SetColWidth(1, ncol, 12); err != nil {
		return err
	}
	if err := sw.SetRow("A1", header, excelize.RowOpts{Height: 30}); err != nil {
		return err
	}
	row := make([]any, ncol)
	for i := 0; i < n; i++ {
		k := 0
		for c := range in.Header {
			var s string
			if c < len(in.Rows[i]) {
				s = in.Rows[i][c]
			}
			row[k] = inputValue(s)
			k++
		}
		for _, m := range w.d.Markers {
			r := m.Results[i]
			row[k] = numCell(r.Z, w.num2)
			row[k+1] = numCell(r.Centile, w.num1)
			row[k+2] = numCell(r.Stat, w.num3)
			row[k+3] = numCell(m.Limit, w.num3)
			row[k+4] = r.Signal
			row[k+5] = numCell(r.FirstSignal, w.num2)
			if r.Skipped != nil {
				row[k+3], row[k+4] = nil, nil
			}
			k += 6
			if m.Status != nil {
				row[k] = m.Status[i]
				k++
			}
			if m.Notes != nil {
				row[k] = nilIfEmpty(m.Notes[i])
				k++
			}
			for _, rc := range m.Rules {
				row[k] = rc.Fired[i]
				if r.Skipped != nil {
					row[k] = nil
				}
				k++
			}
		}
		cell, _ := excelize.CoordinatesToCellName(1, i+2)
		if err := sw.SetRow(cell, row); err != nil {
			return err
		}
	}
	return sw.Flush()
}

// flaggedStyle is the highlight of flagged workers and of the exams that
// flag: the Flagged mark of symbols.Legend, as in the report and the task
// pane.
func flaggedStyle() *excelize.Style {
	m := symbols.Legend.Flagged
	return &excelize.Style{Font: &excelize.Font{Color: strings.TrimPrefix(m.Stroke, "#"), Bold: true},
		Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{strings.TrimPrefix(m.Fill, "#")}}}
}

// workerRow is one worker of the summary, over every marker.
type workerRow struct {
	id, group   string
	exams       int
	first, last float64
	signal      []float64 // per marker: age of first signal, NaN if none
	rules       [][]string
	flagged     bool
	urgency     []*flagged.Worker // per marker, for the order
	order       int
}

// markerRules turns a marker's rule columns into the rules of package
// flagged.
func markerRules(m MarkerResults) []flagged.Rule {
	rs := make([]flagged.Rule, len(m.Rules))
	for k, r := range m.Rules {
		rs[k] = flagged.Rule(r)
	}
	return rs
}

// workers summarises each worker over the markers; flagged workers come
// first, in flagged.ByUrgency order of their most urgent marker, then the
// rest in sheet order.
func (w *writer) workers() ([]*workerRow, []flagged.Counts) {
	pos := map[string]int{}
	var ws []*workerRow
	counts := make([]flagged.Counts, len(w.d.Markers))
	for j, m := range w.d.Markers {
		rs := markerRules(m)
		fw := flagged.Workers(m.Exams, m.Results, rs, m.Limit)
		counts[j] = flagged.Count(fw, rs)
		for _, x := range fw {
			k, ok := pos[x.ID]
			if !ok {
				k = len(ws)
				pos[x.ID] = k
				wr := &workerRow{id: x.ID, group: x.Group, first: x.First, last: x.Last, order: k, exams: len(x.Rows),
					signal: make([]float64, len(w.d.Markers)), rules: make([][]string, len(w.d.Markers)),
					urgency: make([]*flagged.Worker, len(w.d.Markers))}
				for i := range wr.signal {
					wr.signal[i] = math.NaN()
				}
				ws = append(ws, wr)
			}
			wr := ws[k]
			wr.first, wr.last = math.Min(wr.first, x.First), math.Max(wr.last, x.Last)
			wr.signal[j] = x.FirstSignal
			wr.rules[j] = x.RulesFired
			wr.flagged = wr.flagged || x.Flagged()
			wr.urgency[j] = x
		}
	}
	// The most urgent marker of each worker stands for the worker.
	most := make([]*flagged.Worker, len(ws))
	idx := map[*flagged.Worker]*workerRow{}
	for i, wr := range ws {
		var pick []*flagged.Worker
		for _, x := range wr.urgency {
			if x != nil {
				pick = append(pick, x)
			}
		}
		flagged.ByUrgency(pick)
		most[i] = pick[0]
		idx[pick[0]] = wr
	}
	flagged.ByUrgency(most)
	out := make([]*workerRow, len(ws))
	for i, x := range most {
		out[i] = idx[x]
	}
	return out, counts
}

// summary writes the summary sheet: one row per worker, a caution, the
// limits, and a bar chart of years from first exam to first signal.
func (w *writer) summary() error {
	name := w.opt.SummarySheet
	f := w.f
	ws, counts := w.workers()
	header := []any{"worker", "group", "exams", "first exam (age)", "last exam (age)"}
	// Columns holding ages or years, written as numbers with two decimals.
	numCols := []int{4, 5}
	var yearsCols []int
	for _, m := range w.d.Markers {
		header = append(header, w.prefix(m, "first signal (age)"))
		numCols = append(numCols, len(header))
		header = append(header, w.prefix(m, "years to signal"))
		numCols = append(numCols, len(header))
		yearsCols = append(yearsCols, len(header))
		header = append(header, w.prefix(m, "rules fired"))
	}
	header = append(header, "flagged")
	ncol := len(header)
	flagCol := colName(ncol)
	if err := f.SetSheetRow(name, "A1", &header); err != nil {
		return err
	}
	if err := f.SetCellStyle(name, "A1", colName(ncol)+"1", w.header); err != nil {
		return err
	}
	nFlagged := 0
	for i, wr := range ws {
		// Plain Go values: SetSheetRow writes float64 as a number cell (an
		// excelize.Cell would be written as its printed form, as text).
		row := []any{inputValue(wr.id), wr.group, wr.exams, wr.first, wr.last}
		for j := range w.d.Markers {
			if math.IsNaN(wr.signal[j]) {
				row = append(row, nil, nil)
			} else {
				row = append(row, wr.signal[j], wr.signal[j]-wr.first)
			}
			row = append(row, strings.Join(wr.rules[j], ", "))
		}
		if wr.flagged {
			nFlagged++
		}
		row = append(row, wr.flagged)
		cell, _ := excelize.CoordinatesToCellName(1, i+2)
		if err := f.SetSheetRow(name, cell, &row); err != nil {
			return err
		}
	}
	for _, c := range numCols {
		if err := f.SetCellStyle(name, colName(c)+"2", colName(c)+strconv.Itoa(len(ws)+1), w.num2); err != nil {
			return err
		}
	}
	last := colName(ncol) + strconv.Itoa(len(ws)+1)
	hl, err := f.NewConditionalStyle(flaggedStyle())
	if err != nil {
		return err
	}
	if err := f.SetConditionalFormat(name, "A2:"+last, []excelize.ConditionalFormatOptions{{Type: "formula", Criteria: "$" + flagCol + "2=TRUE", Format: &hl}}); err != nil {
		return err
	}
	if err := f.SetColWidth(name, "A", colName(ncol), 14); err != nil {
		return err
	}
	if err := f.SetPanes(name, &excelize.Panes{Freeze: true, YSplit: 1, TopLeftCell: "A2", ActivePane: "bottomLeft"}); err != nil {
		return err
	}
	if err := f.AutoFilter(name, "A1:"+last, nil); err != nil {
		return err
	}

	// Notes beside the table.
	nc := colName(ncol + 2)
	notes := [][2]any{
		{"veer screening summary", w.title},
		{Caution, w.caution},
		{fmt.Sprintf("%d of %d workers flagged (flagged: %s, for any marker). Flagged workers are listed first and highlighted, "+
			"the largest chart statistic relative to its limit at the latest exam first; on the results sheet the exams that flag are highlighted.",
			nFlagged, len(ws), flagged.Definition), 0},
	}
	for j, m := range w.d.Markers {
		label := m.Name
		if label == "" {
			label = "chart"
		}
		c := counts[j]
		note := fmt.Sprintf("%s: control limit h = %s; %d of %d workers flagged, %d with a chart signal",
			label, strconv.FormatFloat(m.Limit, 'g', 6, 64), c.Flagged, c.Workers, c.Signalled)
		for k, r := range m.Rules {
			sev := ""
			if r.Severity != "" {
				sev = " [" + r.Severity + "]"
			}
			note += fmt.Sprintf("; rule %s%s fired for %d", r.Name, sev, c.Rules[k])
		}
		notes = append(notes, [2]any{note + ".", 0})
	}
	for i, nt := range notes {
		cell := nc + strconv.Itoa(i+1)
		if err := f.SetCellValue(name, cell, nt[0]); err != nil {
			return err
		}
		if st := nt[1].(int); st != 0 {
			if err := f.SetCellStyle(name, cell, cell, st); err != nil {
				return err
			}
		}
	}
	if err := f.SetColWidth(name, nc, nc, 70); err != nil {
		return err
	}
	if err := f.SetRowHeight(name, 2, 48); err != nil {
		return err
	}

	// Chart of the first flagged workers.
	nChart := nFlagged
	if nChart > w.opt.ChartWorkers {
		nChart = w.opt.ChartWorkers
	}
	if w.opt.ChartWorkers < 0 || nChart == 0 {
		return nil
	}
	sheetRef := "'" + strings.ReplaceAll(name, "'", "''") + "'!"
	var series []excelize.ChartSeries
	// One colour per marker; vermillion and orange are kept for signals
	// and rules (see the report's and the task pane's keys).
	colours := []string{"0072B2", "CC79A7", "009E73", "56B4E9", "F0E442", "000000"}
	for j, m := range w.d.Markers {
		yc := colName(yearsCols[j])
		label := m.Name
		if label == "" {
			label = "years to signal"
		}
		series = append(series, excelize.ChartSeries{
			Name:       label,
			Categories: sheetRef + "$A$2:$A$" + strconv.Itoa(nChart+1),
			Values:     sheetRef + "$" + yc + "$2:$" + yc + "$" + strconv.Itoa(nChart+1),
			Fill:       excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{colours[j%len(colours)]}},
		})
	}
	height := uint(120 + 16*nChart*len(w.d.Markers))
	title := fmt.Sprintf("Years from first exam to first chart signal (first %d flagged workers; blank: flagged by a rule or another marker only)", nChart)
	return f.AddChart(name, nc+strconv.Itoa(len(notes)+2), &excelize.Chart{
		Type:      excelize.Bar,
		Series:    series,
		Title:     excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: title}}},
		Dimension: excelize.ChartDimension{Width: 640, Height: height},
		Legend:    excelize.ChartLegend{Position: "bottom"},
		XAxis:     excelize.ChartAxis{ReverseOrder: true},
		YAxis:     excelize.ChartAxis{MajorGridLines: true, Title: excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: "years"}}}},
		Format:    excelize.GraphicOptions{AltText: title},
	})
}
