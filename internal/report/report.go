package report

import (
	"bytes"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"strconv"
	"strings"

	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/screening"
	"veer/functions/transform"
	"veer/internal/flagged"
)

// Caution is the screening-aid statement every report carries, at the top
// and at the end: screening.Caution and what a signal does and does not
// mean.
const Caution = "veer is a screening aid. " + screening.Caution + " A signal or a fired rule means only that a " +
	"worker's readings are moving away from what is usual for healthy workers of the same age and group. Do not " +
	"use this report to make decisions about a worker's fitness, employment or treatment without that review."

// DefaultMaxPanels is the number of flagged-worker panels shown per marker
// when Data.MaxPanels is 0.
const DefaultMaxPanels = 40

// Data is everything a report shows.
type Data struct {
	// Title heads the report, e.g. "Health surveillance screening — Morvandel Offshore Rotorworks".
	Title string
	// Generated is the date text shown under the title. The caller gives it
	// (rather than the report reading the clock) so the same inputs always
	// give the same file.
	Generated string
	// Version is the version of veer that made the report (shown beside
	// the date; the caller gives it, like Generated).
	Version string
	// Source optionally says where the exams came from, e.g. "workforce.csv".
	Source string
	// Sections holds one screened marker each.
	Sections []Section
	// MaxPanels caps the flagged-worker panels per section (0:
	// DefaultMaxPanels; negative: no panels). The summary table always
	// lists every flagged worker.
	MaxPanels int
	// Workers, when not empty, chooses the panels: these workers, in this
	// order, flagged or not (MaxPanels does not apply). Every id must be
	// among the exams of every section.
	Workers []string
	// ListAllWorkers makes the summary table list every worker, not only
	// the flagged ones.
	ListAllWorkers bool
}

// Section is one marker: its model, settings, limit and screening.
type Section struct {
	// Marker is the marker's name, e.g. "Systolic blood pressure"; Short an
	// abbreviation for axis labels, e.g. "SBP" (Marker when empty); Unit its
	// unit, e.g. "mmHg".
	Marker, Short, Unit string
	// Model is the fitted screening model; Settings the chart settings used.
	Model    *screening.Model
	Settings screening.Settings
	// Limit is the limit used; Target the target years it was computed for
	// (0 when the limit was given directly).
	Limit  monitor.LimitResult
	Target float64
	// Exams and Results are the screened exams and their results, in the
	// same order (as returned by Model.Screen).
	Exams   []screening.Exam
	Results []screening.Result
	// Rules are alert rules evaluated on the same rows.
	Rules []Rule
	// Evaluation, when not nil, adds how the methods would have done on a
	// history of later diagnoses.
	Evaluation *Evaluation
}

// Rule is one alert rule's outcome over the rows of a Section.
type Rule struct {
	// Name labels the rule; Expr is its text (shown in the report);
	// Severity its label, if any: a rule of severity high flags a worker as
	// a chart signal does (package flagged).
	Name, Expr, Severity string
	// Fired[i] is true when the rule flagged row i of Section.Exams.
	Fired []bool
}

// Render writes the report as one self-contained HTML document.
func Render(w io.Writer, d Data) error {
	if err := d.validate(); err != nil {
		return err
	}
	p, err := buildPage(d)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := pageTemplate.Execute(&buf, p); err != nil {
		return fmt.Errorf("report: %v", err)
	}
	_, err = w.Write(buf.Bytes())
	return err
}

func (d Data) validate() error {
	if len(d.Sections) == 0 {
		return errors.New("the report has no sections: give at least one screened marker")
	}
	for k, s := range d.Sections {
		name := s.Marker
		if name == "" {
			name = "section " + strconv.Itoa(k+1)
		}
		switch {
		case s.Model == nil || (s.Model.Curves == nil && s.Model.Published == nil):
			return fmt.Errorf("%s: the report needs the screening model (a fitted model or one on a published reference)", name)
		case len(s.Exams) != len(s.Results):
			return fmt.Errorf("%s: %d exams but %d results; give the results of screening these exams", name, len(s.Exams), len(s.Results))
		case !(s.Limit.H > 0) || math.IsInf(s.Limit.H, 0):
			return fmt.Errorf("%s: the control limit %g is not a positive number", name, s.Limit.H)
		}
		for _, r := range s.Rules {
			if len(r.Fired) != len(s.Exams) {
				return fmt.Errorf("%s: rule %q has %d results for %d exams", name, r.Name, len(r.Fired), len(s.Exams))
			}
		}
		if s.Evaluation != nil && (s.Evaluation.History == nil || len(s.Evaluation.History.Rows) == 0) {
			return fmt.Errorf("%s: the evaluation has no methods to show", name)
		}
		if len(d.Workers) > 0 {
			have := map[string]bool{}
			for _, e := range s.Exams {
				have[e.Worker] = true
			}
			var missing []string
			for _, id := range d.Workers {
				if !have[id] {
					missing = append(missing, strconv.Quote(id))
				}
			}
			if len(missing) > 0 {
				return &MissingWorkersError{Section: name, Workers: missing}
			}
		}
	}
	return nil
}

// MissingWorkersError says that workers chosen for panels have no exams in
// a section.
type MissingWorkersError struct {
	Section string
	Workers []string // quoted ids
}

func (e *MissingWorkersError) Error() string {
	what := "worker " + e.Workers[0] + " has"
	if len(e.Workers) > 1 {
		what = "workers " + strings.Join(e.Workers, ", ") + " have"
	}
	return fmt.Sprintf("%s: %s no exams among the exams screened; check the ids chosen for the panels", e.Section, what)
}

// kv is one labelled value in a table.
type kv struct{ Label, Value string }

// ruleRow is one alert rule in the rules table.
type ruleRow struct{ Name, Severity, Expr string }

type page struct {
	Title, Generated, Source, Version, Caution string
	Signal                                     string // screening.Caution, beside the flagged workers
	Sections                                   []*sectionView
}

type figure struct {
	SVG     template.HTML
	Caption string
}

type groupDiag struct {
	Group string
	Rows  []kv
}

type panelView struct {
	N          int
	Anchor     string
	Worker     string
	Caption    string
	Readings   template.HTML
	Statistic  template.HTML
	Signalled  bool
	RulesFired string
}

type summaryRow struct {
	Worker, Group, Exams, FirstExam, LastExam, FirstSignal, Rules, Ratio string
	Flagged                                                              bool
	Panel                                                                string
	Anchor                                                               string
}

type sectionView struct {
	ID, Heading   string
	Stats         []kv
	ChartText     string
	LimitText     []string
	LimitRows     []kv
	RuleRows      []ruleRow
	RefFigures    []figure
	Assumptions   []string
	Diag          []groupDiag
	ModelDiag     []kv
	Warnings      []string
	Legend        template.HTML
	Expected      bool // panels show the worker's own expected readings
	Panels        []panelView
	PanelNote     string
	Summary       []summaryRow
	SummaryNote   string
	FlaggedCount  int
	WorkerCount   int
	ExamCount     int
	GroupsPresent []string
	Evaluation    *evaluationView
}

// sectionRules are a section's rules for package flagged.
func sectionRules(s *Section) []flagged.Rule {
	rs := make([]flagged.Rule, len(s.Rules))
	for k, r := range s.Rules {
		rs[k] = flagged.Rule{Name: r.Name, Severity: r.Severity, Fired: r.Fired}
	}
	return rs
}

func buildPage(d Data) (*page, error) {
	p := &page{Title: d.Title, Generated: d.Generated, Source: d.Source, Version: d.Version, Caution: Caution, Signal: screening.Caution}
	if p.Title == "" {
		p.Title = "veer screening report"
	}
	maxPanels := d.MaxPanels
	if maxPanels == 0 {
		maxPanels = DefaultMaxPanels
	}
	for k := range d.Sections {
		sv, err := buildSection(&d.Sections[k], k, maxPanels, d.Workers, d.ListAllWorkers)
		if err != nil {
			return nil, err
		}
		p.Sections = append(p.Sections, sv)
	}
	return p, nil
}

func markerLabel(s *Section) (name, short, axis string) {
	name = s.Marker
	if name == "" {
		name = s.Model.Name
	}
	short = s.Short
	if short == "" {
		short = name
	}
	axis = short
	if s.Unit != "" {
		axis += " (" + s.Unit + ")"
	}
	return name, short, axis
}

func buildSection(s *Section, k, maxPanels int, chosen []string, all bool) (*sectionView, error) {
	name, _, _ := markerLabel(s)
	sv := &sectionView{ID: "m" + strconv.Itoa(k+1), Heading: name}
	if s.Unit != "" {
		sv.Heading += " (" + s.Unit + ")"
	}
	rules := sectionRules(s)
	ws := flagged.Workers(s.Exams, s.Results, rules, s.Limit.H)
	counts := flagged.Count(ws, rules)
	sv.WorkerCount, sv.ExamCount = len(ws), len(s.Exams)

	// Headline figures, each labelled with what it counts.
	outside := 0
	for _, r := range s.Results {
		if !r.InRange {
			outside++
		}
	}
	sv.FlaggedCount = counts.Flagged
	sv.Stats = []kv{
		{"Exams screened", thousands(len(s.Exams))},
		{"Workers screened", thousands(len(ws))},
		{"Workers flagged (" + flagged.Definition + ")", countShare(counts.Flagged, len(ws))},
		{"Workers with a chart signal", countShare(counts.Signalled, len(ws))},
	}
	for i, r := range s.Rules {
		label := "Workers for whom rule “" + r.Name + "” fired"
		if r.Severity != "" {
			label += " (severity " + r.Severity + ")"
		}
		sv.Stats = append(sv.Stats, kv{label, countShare(counts.Rules[i], len(ws))})
		sv.RuleRows = append(sv.RuleRows, ruleRow{r.Name, severityText(r.Severity), r.Expr})
	}
	if outside > 0 {
		sv.Stats = append(sv.Stats, kv{"Exams outside the reference age range", thousands(outside) +
			" (the curves are held at their end values there; read these with care)"})
	}

	sv.ChartText = describeChart(s.Settings, s.Model)
	sv.LimitText, sv.LimitRows = describeLimit(s)

	// Reference curves and diagnostics per group.
	groups := s.Model.Reference().Groups()
	for gi, g := range groups {
		fig, err := referenceFigure(s, g, sv.ID+"-ref"+strconv.Itoa(gi+1))
		if err != nil {
			return nil, err
		}
		sv.RefFigures = append(sv.RefFigures, fig)
	}
	if s.Model.Published != nil {
		sv.Diag, sv.ModelDiag, sv.Warnings = publishedDiagnostics(s.Model)
		sv.Assumptions = assumptions(s.Model)
	} else {
		sv.Diag, sv.ModelDiag, sv.Warnings = diagnostics(s.Model)
	}

	// Flagged workers in the order a reviewer needs them (flagged.ByUrgency:
	// the largest chart statistic relative to the limit at the latest exam
	// first); the panels show these, or the workers chosen.
	ordered := append([]*flagged.Worker(nil), ws...)
	flagged.ByUrgency(ordered)
	fl := ordered[:counts.Flagged]
	var panels []*flagged.Worker
	switch {
	case len(chosen) > 0:
		byID := map[string]*flagged.Worker{}
		for _, w := range ws {
			byID[w.ID] = w
		}
		for _, id := range chosen {
			panels = append(panels, byID[id])
		}
	case maxPanels >= 0:
		panels = fl[:min(len(fl), maxPanels)]
	}
	panelOf := map[string]int{}
	sv.Legend = template.HTML(legendSVG(sv.ID+"-legend", s))
	sv.Expected = showExpected(s)
	for i, w := range panels {
		pv, err := workerPanel(s, w, i+1, sv.ID)
		if err != nil {
			return nil, err
		}
		panelOf[w.ID] = i + 1
		sv.Panels = append(sv.Panels, pv)
	}
	const order = "the largest chart statistic relative to the limit at the worker's latest exam first, so workers still far over the limit come before those whose chart has come back down"
	switch {
	case len(chosen) > 0:
		sv.PanelNote = fmt.Sprintf("The %s chosen for this report, in the order given (%d of them flagged).",
			plural(len(panels), "worker"), countChosen(panels))
	case len(fl) == 0:
		sv.PanelNote = "No worker was flagged (" + flagged.Definition + ")."
	case len(panels) < len(fl):
		sv.PanelNote = fmt.Sprintf("Showing %d of %d flagged workers, %s; the summary table below lists all of them in the same order.",
			len(panels), len(fl), order)
	default:
		sv.PanelNote = fmt.Sprintf("All %d flagged workers, %s.", len(fl), order)
	}

	list := fl
	if all {
		list = ordered
	}
	for _, w := range list {
		row := summaryRow{
			Worker: w.ID, Group: groupName(w.Group) + covariateText(s, w.Rows), Exams: strconv.Itoa(len(w.Rows)),
			FirstExam: age(w.First), LastExam: age(w.Last), FirstSignal: "—", Rules: "—",
			Ratio: num(w.LastRatio, 3), Flagged: w.Flagged(), Panel: "—",
		}
		if w.Signalled() {
			row.FirstSignal = age(w.FirstSignal)
		}
		if len(w.RulesFired) > 0 {
			row.Rules = strings.Join(w.RulesFired, ", ")
		}
		if n, ok := panelOf[w.ID]; ok {
			row.Panel = strconv.Itoa(n)
			row.Anchor = panelAnchor(sv.ID, n)
		}
		sv.Summary = append(sv.Summary, row)
	}
	if !all && len(ws)-counts.Flagged > 0 {
		sv.SummaryNote = fmt.Sprintf("%s other workers were not flagged; they are not listed.", thousands(len(ws)-counts.Flagged))
	}
	if s.Evaluation != nil {
		ev, err := buildEvaluation(s, sv.ID+"-eval")
		if err != nil {
			return nil, err
		}
		sv.Evaluation = ev
	}
	return sv, nil
}

func countChosen(ws []*flagged.Worker) int {
	n := 0
	for _, w := range ws {
		if w.Flagged() {
			n++
		}
	}
	return n
}

func plural(n int, what string) string {
	if n == 1 {
		return "1 " + what
	}
	return strconv.Itoa(n) + " " + what + "s"
}

func severityText(s string) string {
	if s == "" {
		return "—"
	}
	return s
}

func panelAnchor(sectionID string, n int) string { return sectionID + "-w" + strconv.Itoa(n) }

func groupName(g string) string {
	if g == "" {
		return "all"
	}
	return g
}

// describeChart says in words what is charted.
func describeChart(set screening.Settings, m *screening.Model) string {
	c := set.Chart
	var dir string
	switch c.Side {
	case chart.Up:
		dir = "upward"
	case chart.Down:
		dir = "downward"
	default:
		dir = "two-sided"
	}
	var what string
	switch c.Kind {
	case chart.EWMA:
		unit := c.Unit
		if unit <= 0 {
			unit = 1
		}
		what = fmt.Sprintf("%s %s EWMA chart (Roberts 1959) with weight λ = %s for an exam %s after the previous one; "+
			"it keeps a running, time-weighted average of the standardised readings and signals when it passes the limit",
			article(dir), dir, num(c.Lambda, 3), years(unit))
	default:
		var sense string
		switch c.Side {
		case chart.Up:
			sense = "above"
		case chart.Down:
			sense = "below"
		default:
			sense = "above or below"
		}
		what = fmt.Sprintf("%s %s CUSUM chart (Page 1954) with allowance k = %s SD; it adds up, exam after exam, how far each "+
			"standardised reading lies %s the reference beyond k, and signals when the sum passes the limit",
			article(dir), dir, num(c.Allowance, 3), sense)
	}
	var serial string
	switch {
	case set.Serial == screening.SerialOff:
		serial = "Readings of a worker are treated as independent (serial correlation off)."
	case m.Serial.Independent():
		serial = serialFinding(m) + "; a worker's standardised readings are therefore charted as independent."
	case set.Serial == screening.SerialWhiten:
		serial = fmt.Sprintf("%s. Each worker's readings are first whitened with a Kalman filter of the fitted serial model "+
			"(%s), so the charted values of a healthy worker are independent.", serialFinding(m), serialModel(m))
	default:
		serial = fmt.Sprintf("%s. The standardised readings are charted directly; the limit allows for the correlation between "+
			"a worker's successive exams (%s).", serialFinding(m), serialModel(m))
	}
	if m.Published != nil {
		std := "Each reading is standardised against the published reference of the worker's group at the worker's age"
		if cv := m.Reference().Covariates(); len(cv) > 0 {
			std += " and " + strings.Join(cv, ", ")
		}
		std += " by the LMS method (Cole & Green 1992): z = ((reading / M)^L − 1) / (L·S), with L, M (the median) and S from the reference; " +
			"z is the reading's standard normal deviate, so the reading's centile is Φ(z)"
		return std + ". The chart is " + what + ". " + serial
	}
	return "Each reading is standardised against the reference of the worker's group at the worker's age: " +
		"z = (reading − reference mean) / reference SD" + transformNote(m) + ". The chart is " + what + ". " + serial
}

// serialFinding says whether serial correlation was found in the reference
// workers' exams, with the test behind it when the model has one.
func serialFinding(m *screening.Model) string {
	s := m.Serial
	var test string
	if t := s.Test; s.Tested() {
		test = fmt.Sprintf(" (consecutive exams of a reference worker correlate %s; one-sided test of no correlation p %s)", num(t.Corr, 2), pvalText(t.P))
	}
	if s.NoCorrelationDetected() {
		return "No serial correlation was detected between a worker's exams" + test
	}
	return "Serial correlation was detected between a worker's exams" + test
}

// serialModel describes the fitted serial model: phi, c and the
// correlation it gives two exams the reference workers' mean gap apart.
func serialModel(m *screening.Model) string {
	s := m.Serial
	return fmt.Sprintf("correlation φ = %s per year, persistent share c = %s; exams %s years apart correlate %s",
		num(s.Phi, 3), num(s.C, 3), num(m.MeanGap, 2), num(s.Corr(m.MeanGap), 2))
}

// pvalText is pval after "p": "= 0.420" or "< 0.001".
func pvalText(p float64) string {
	v := pval(p)
	if strings.HasPrefix(v, "<") {
		return v
	}
	return "= " + v
}

func article(word string) string {
	if strings.ContainsRune("aeiou", rune(word[0])) {
		return "an"
	}
	return "a"
}

func transformNote(m *screening.Model) string {
	switch m.Curves.Transform {
	case transform.Log:
		return ", on the log scale"
	case transform.BoxCox:
		return fmt.Sprintf(", on the Box-Cox scale (λ = %s)", num(m.Curves.Lambda, 3))
	}
	return ""
}

// gapWords says how often workers are examined, e.g. "about yearly".
func gapWords(g float64) string {
	switch {
	case !(g > 0):
		return "at the usual interval"
	case math.Abs(g-1) < 0.05:
		return "about yearly"
	case g < 1:
		return fmt.Sprintf("about every %s months", num(g*12, 2))
	default:
		return "about every " + num(g, 2) + " years"
	}
}

// describeLimit explains the limit in plain words.
func describeLimit(s *Section) ([]string, []kv) {
	l := s.Limit
	target := s.Target
	if !(target > 0) {
		target = l.ATS
	}
	var text []string
	if target > 0 {
		text = append(text, fmt.Sprintf("The chart signals when its statistic passes the limit h = %s. With this limit, "+
			"a healthy worker examined %s is flagged on average once in %s years.", num(l.H, 4), gapWords(l.MeanGap), num(target, 3)))
		t10 := 10.0
		text = append(text, fmt.Sprintf("This is an average: false flags happen. Roughly, treating them as random in time, "+
			"about %s%% of healthy workers followed for %s years would be flagged at least once (1 − e^(−%s/%s)). "+
			"A longer target gives fewer false flags but later signals for workers who really drift.",
			num(100*(1-math.Exp(-t10/target)), 2), num(t10, 2), num(t10, 2), num(target, 3)))
	} else {
		text = append(text, fmt.Sprintf("The chart signals when its statistic passes the limit h = %s.", num(l.H, 4)))
	}
	rows := []kv{{"Limit h", num(l.H, 4)}}
	if s.Target > 0 {
		rows = append(rows, kv{"Target average time to a false signal", num(s.Target, 3) + " years"})
	}
	if l.ATS > 0 {
		v := num(l.ATS, 4) + " years"
		if l.SE > 0 {
			v += " (Monte Carlo standard error " + num(l.SE, 2) + ")"
		}
		rows = append(rows, kv{"Average time to a false signal at h", v})
	}
	if l.MeanGap > 0 {
		rows = append(rows, kv{"Mean time between exams used", num(l.MeanGap, 3) + " years"})
	}
	if s.Model.Published != nil && l.Paths > 0 {
		rows = append(rows, kv{"Exam histories simulated from", "the screened workforce's own exam gaps and follow-up (there is no reference cohort)"})
	}
	switch {
	case l.Exact:
		rows = append(rows, kv{"How h was computed", "exactly: the chart's average run length for independent standard-normal scores, times the mean gap"})
	case l.Paths > 0:
		rows = append(rows, kv{"How h was computed", fmt.Sprintf("by simulating %s healthy workers with the reference's serial correlation and exam gaps (fixed seed, so the same inputs give the same limit)", thousands(l.Paths))})
	}
	if l.Censored > 0 {
		rows = append(rows, kv{"Simulated workers without a signal in the time simulated", thousands(l.Censored)})
	}
	return text, rows
}

// diagnostics builds the model diagnostics tables.
func diagnostics(m *screening.Model) ([]groupDiag, []kv, []string) {
	var gd []groupDiag
	var warn []string
	for _, c := range m.Curves.Curves {
		d := c.Diagnostics
		rows := []kv{
			{"Reference workers", thousands(d.Workers)},
			{"Reference exams", thousands(d.Exams)},
			{"Age range", age(d.TimeMin) + "–" + age(d.TimeMax) + " years"},
			{"Mean-curve bandwidth", num(d.MeanBandwidth, 3) + " years (" + d.MeanBandwidthSource + ")"},
			{"SD-curve bandwidth", num(d.SDBandwidth, 3) + " years (" + d.SDBandwidthSource + ")"},
			{"Share of reference exams inside the central 95% band", pct(d.Coverage95) + " (about 95% if the model fits)"},
		}
		if d.Normality != nil {
			rows = append(rows, kv{"Normality of standardised readings (D'Agostino–Pearson K²)",
				fmt.Sprintf("K² = %s, p = %s; skewness %s, excess kurtosis %s", num(d.Normality.Statistic, 3), pval(d.Normality.PValue),
					num(d.Normality.Skewness, 2), num(d.Normality.ExcessKurtosis, 2))})
		}
		if d.FlooredPoints > 0 {
			rows = append(rows, kv{"SD curve held at its floor", fmt.Sprintf("%d grid points", d.FlooredPoints)})
		}
		gd = append(gd, groupDiag{Group: groupName(c.Group), Rows: rows})
		for _, w := range d.Warnings {
			warn = append(warn, groupName(c.Group)+": "+w)
		}
	}
	tr := string(m.Curves.Transform)
	switch m.Curves.Transform {
	case "", transform.None:
		tr = "none"
	case transform.BoxCox:
		tr = "Box-Cox, λ = " + num(m.Curves.Lambda, 4)
	}
	sd := m.SerialDiagnostics
	model := []kv{
		{"Model", m.Name},
		{"Exams fitted", thousands(m.Curves.Rows)},
		{"Transform of the readings", tr},
		{"Serial correlation", serialCell(m)},
		{"Serial correlation φ (per year)", num(m.Serial.Phi, 3) + seNote(m.Serial.SEPhi)},
		{"Persistent share of variance c", num(m.Serial.C, 3) + seNote(m.Serial.SEC)},
		{"Mean time between reference exams", num(m.MeanGap, 3) + " years"},
		{"Innovations: mean and SD (expected 0 and 1)", num(sd.Mean, 3) + " and " + num(sd.SD, 3)},
		{"Innovations: lag-1 correlation within workers", num(sd.Lag1, 3) + ", p = " + pval(sd.Lag1P) + " (" + thousands(sd.Pairs) + " pairs)"},
		{"Innovations: normality (D'Agostino–Pearson K²)", num(sd.Normality, 3) + ", p = " + pval(sd.NormalityP)},
	}
	if len(m.Hash) >= 12 {
		model = append(model, kv{"Model fingerprint", m.Hash[:12]})
	}
	return gd, model, warn
}

// serialCell is the model table's serial-correlation finding.
func serialCell(m *screening.Model) string {
	s := m.Serial
	v := "detected"
	if s.NoCorrelationDetected() {
		v = "no serial correlation detected"
	}
	if t := s.Test; s.Tested() {
		v += fmt.Sprintf(" (consecutive exams correlate %s, p %s)", num(t.Corr, 2), pvalText(t.P))
	}
	return v
}

func seNote(se float64) string {
	if se > 0 {
		return " (standard error " + num(se, 2) + ")"
	}
	return ""
}

// num formats v with up to sig significant digits, no exponent for usual sizes.
func num(v float64, sig int) string {
	if math.IsNaN(v) {
		return "n/a"
	}
	if math.IsInf(v, 0) {
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
	if v == 0 {
		return "0"
	}
	mag := int(math.Floor(math.Log10(math.Abs(v))))
	dec := sig - 1 - mag
	if dec < 0 {
		dec = 0
	}
	if dec > 8 {
		return strconv.FormatFloat(v, 'g', sig, 64)
	}
	s := strconv.FormatFloat(v, 'f', dec, 64)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	return s
}

func age(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

func years(v float64) string {
	if v == 1 {
		return "1 year"
	}
	return num(v, 3) + " years"
}

func pct(v float64) string { return strconv.FormatFloat(100*v, 'f', 1, 64) + "%" }

func pval(p float64) string {
	switch {
	case math.IsNaN(p):
		return "n/a"
	case p < 0.001:
		return "< 0.001"
	}
	return strconv.FormatFloat(p, 'f', 3, 64)
}

func countShare(n, of int) string {
	if of == 0 {
		return thousands(n)
	}
	return fmt.Sprintf("%s (%s%%)", thousands(n), strconv.FormatFloat(100*float64(n)/float64(of), 'f', 1, 64))
}

// thousands formats n with thin separators, e.g. 12,345.
func thousands(n int) string {
	s := strconv.Itoa(n)
	neg := strings.HasPrefix(s, "-")
	if neg {
		s = s[1:]
	}
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}
