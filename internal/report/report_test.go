package report

import (
	"bytes"
	"encoding/xml"
	"errors"
	"html"
	"io"
	"math"
	"regexp"
	"sort"
	"strings"
	"testing"

	"veer/functions/monitor"
	"veer/functions/screening"
	"veer/internal/symbols"
)

var svgRE = regexp.MustCompile(`(?s)<svg\b.*?</svg>`)

// checkXML decodes s strictly as XML and reports the first error.
func checkXML(s string) error {
	dec := xml.NewDecoder(strings.NewReader(s))
	dec.Strict = true
	for {
		_, err := dec.Token()
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
	}
}

func render(t *testing.T, d Data) string {
	t.Helper()
	var b bytes.Buffer
	if err := Render(&b, d); err != nil {
		t.Fatal(err)
	}
	return b.String()
}

// flaggedInOrder recomputes, independently of the report code, the workers a
// section flags (a chart signal, or a rule of severity high), ordered for a
// reviewer: the chart statistic relative to the limit at the worker's
// latest exam, largest first; then the largest over the worker's exams;
// then the earliest flag; then the order of first appearance.
func flaggedInOrder(s Section) []string {
	type w struct {
		id                  string
		pos                 int
		lastAge, last, most float64
		flagged             bool
		firstFlag           float64
	}
	ws := map[string]*w{}
	var ids []string
	for i, e := range s.Exams {
		x, ok := ws[e.Worker]
		if !ok {
			x = &w{id: e.Worker, pos: i, lastAge: math.Inf(-1), most: math.Inf(-1), firstFlag: math.Inf(1)}
			ws[e.Worker] = x
			ids = append(ids, e.Worker)
		}
		r := s.Results[i].Stat / s.Limit.H
		x.most = math.Max(x.most, r)
		if e.Time > x.lastAge {
			x.lastAge, x.last = e.Time, r
		}
		hit := s.Results[i].Signal
		for _, rl := range s.Rules {
			hit = hit || (strings.EqualFold(rl.Severity, "high") && rl.Fired[i])
		}
		if hit {
			x.flagged = true
			x.firstFlag = math.Min(x.firstFlag, e.Time)
		}
	}
	var out []string
	for _, id := range ids {
		if ws[id].flagged {
			out = append(out, id)
		}
	}
	sort.SliceStable(out, func(a, b int) bool {
		x, y := ws[out[a]], ws[out[b]]
		switch {
		case x.last != y.last:
			return x.last > y.last
		case x.most != y.most:
			return x.most > y.most
		case x.firstFlag != y.firstFlag:
			return x.firstFlag < y.firstFlag
		}
		return x.pos < y.pos
	})
	return out
}

func TestRenderDemoStructure(t *testing.T) {
	d := demoData(t)
	out := render(t, d)

	if n := strings.Count(out, html.EscapeString(Caution)); n != 2 {
		t.Errorf("caution appears %d times, want 2 (top and end)", n)
	}
	// screening.Caution word for word: in the caution at the top and the
	// end, and beside the flagged workers of each section.
	if n := strings.Count(out, html.EscapeString(screening.Caution)); n != 2+len(d.Sections) {
		t.Errorf("screening.Caution appears %d times, want %d", n, 2+len(d.Sections))
	}
	for _, bad := range []string{"<script", "<link", "<img", "src=", `href="http`, "url(http", "@import"} {
		if strings.Contains(strings.ToLower(out), bad) {
			t.Errorf("report is not self-contained: contains %q", bad)
		}
	}
	for _, want := range []string{"@page", "size: A4", "page-break-inside: avoid", "once in 20 years"} {
		if !strings.Contains(out, want) {
			t.Errorf("report lacks %q", want)
		}
	}

	svgs := svgRE.FindAllString(out, -1)
	wantSVG := 0
	for _, s := range d.Sections {
		fl := flaggedInOrder(s)
		panels := min(len(fl), DefaultMaxPanels)
		wantSVG += len(s.Model.Curves.Groups()) + 2*panels
		if panels > 0 {
			wantSVG++ // legend
		}
	}
	if len(svgs) != wantSVG {
		t.Errorf("%d SVG charts, want %d", len(svgs), wantSVG)
	}
	for i, s := range svgs {
		if err := checkXML(s); err != nil {
			t.Fatalf("SVG %d is not well-formed XML: %v\n%.300s", i+1, err, s)
		}
	}

	for k, s := range d.Sections {
		id := "m" + string(rune('1'+k))
		fl := flaggedInOrder(s)
		if len(fl) == 0 {
			t.Fatalf("%s: the demo should flag workers", s.Marker)
		}
		// Panels: capped, the most urgent first.
		re := regexp.MustCompile(`<div class="panel" id="` + id + `-w(\d+)">\s*<h4>\d+\. Worker ([^<]+)</h4>`)
		got := re.FindAllStringSubmatch(out, -1)
		if len(got) != min(len(fl), DefaultMaxPanels) {
			t.Fatalf("%s: %d panels, want %d", s.Marker, len(got), min(len(fl), DefaultMaxPanels))
		}
		for j, g := range got {
			if g[2] != fl[j] {
				t.Fatalf("%s: panel %d shows worker %s, want %s (largest chart ÷ limit at the latest exam first)", s.Marker, j+1, g[2], fl[j])
			}
		}
		if len(fl) > DefaultMaxPanels && !strings.Contains(out, "Showing 40 of ") {
			t.Errorf("%s: the cap on panels is not stated", s.Marker)
		}
		// Summary: one row per flagged worker.
		sec := out[strings.Index(out, `<section class="marker" id="`+id+`"`):]
		sec = sec[:strings.Index(sec, "</section>")]
		rows := strings.Count(sec, `<tr class="flagged">`)
		if rows != len(fl) {
			t.Errorf("%s: summary lists %d flagged workers, want %d", s.Marker, rows, len(fl))
		}
	}
}

func TestRenderPanelCap(t *testing.T) {
	base := demoData(t)
	s := base.Sections[0]
	nfl := len(flaggedInOrder(s))
	cases := []struct {
		name      string
		maxPanels int
		want      int
	}{
		{"default", 0, min(nfl, DefaultMaxPanels)},
		{"five", 5, 5},
		{"none", -1, 0},
		{"all", 100000, nfl},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := Data{Title: "cap", Generated: "today", Sections: []Section{s}, MaxPanels: c.maxPanels}
			out := render(t, d)
			if got := strings.Count(out, `<div class="panel"`); got != c.want {
				t.Errorf("%d panels, want %d", got, c.want)
			}
		})
	}
}

func TestRenderAllWorkers(t *testing.T) {
	s := demoData(t).Sections[1]
	workers := map[string]bool{}
	for _, e := range s.Exams {
		workers[e.Worker] = true
	}
	out := render(t, Data{Sections: []Section{s}, ListAllWorkers: true, MaxPanels: -1})
	body := out[strings.Index(out, `<table class="summary">`):]
	body = body[:strings.Index(body, "</table>")]
	if got := strings.Count(body, "<tr") - 1; got != len(workers) {
		t.Errorf("summary has %d rows, want one per worker (%d)", got, len(workers))
	}
}

func TestRenderDeterministic(t *testing.T) {
	d := demoData(t)
	if a, b := render(t, d), render(t, d); a != b {
		t.Error("two renders of the same data differ")
	}
}

// TestRenderEscapes puts markup into every caller-given text and checks it
// comes out as text, in the HTML and inside the SVG.
func TestRenderEscapes(t *testing.T) {
	base := demoData(t).Sections[0]
	const evil = `<script>alert("x")</script>&'`
	s := base
	s.Marker, s.Short, s.Unit = evil, evil, evil
	s.Exams = append([]screening.Exam(nil), base.Exams...)
	// Rename the first flagged worker.
	fl := flaggedInOrder(base)
	for i := range s.Exams {
		if s.Exams[i].Worker == fl[0] {
			s.Exams[i].Worker = evil
		}
	}
	s.Rules = []Rule{{Name: evil, Expr: evil, Fired: base.Rules[0].Fired}}
	out := render(t, Data{Title: evil, Generated: evil, Source: evil, Sections: []Section{s}, MaxPanels: 3})
	if strings.Contains(out, "<script") {
		t.Fatal("markup in caller text was not escaped")
	}
	for i, svg := range svgRE.FindAllString(out, -1) {
		if err := checkXML(svg); err != nil {
			t.Fatalf("SVG %d is not well-formed XML after escaping: %v", i+1, err)
		}
	}
}

func TestRenderErrors(t *testing.T) {
	good := demoData(t).Sections[0]
	short := good
	short.Results = good.Results[:10]
	noModel := good
	noModel.Model = nil
	badLimit := good
	badLimit.Limit = monitor.LimitResult{H: math.NaN()}
	badRule := good
	badRule.Rules = []Rule{{Name: "r", Fired: []bool{true}}}
	cases := []struct {
		name string
		d    Data
		want string
	}{
		{"no sections", Data{}, "no sections"},
		{"no model", Data{Sections: []Section{noModel}}, "fitted model"},
		{"results mismatch", Data{Sections: []Section{short}}, "results"},
		{"bad limit", Data{Sections: []Section{badLimit}}, "control limit"},
		{"rule length", Data{Sections: []Section{badRule}}, `rule "r"`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			err := Render(io.Discard, c.d)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want one mentioning %q", err, c.want)
			}
		})
	}
}

type failWriter struct{}

func (failWriter) Write([]byte) (int, error) { return 0, errors.New("disk full") }

func TestRenderWriteError(t *testing.T) {
	d := demoData(t)
	d.Sections = d.Sections[:1]
	if err := Render(failWriter{}, d); err == nil || !strings.Contains(err.Error(), "disk full") {
		t.Fatalf("error %v, want the writer's error", err)
	}
}

func TestNiceTicks(t *testing.T) {
	// Expected values worked by hand from Heckbert's (1990) loose labelling.
	cases := []struct {
		lo, hi float64
		n      int
		want   []float64
	}{
		{0, 100, 6, []float64{0, 20, 40, 60, 80, 100}},
		{20.04, 64.97, 10, []float64{20, 25, 30, 35, 40, 45, 50, 55, 60, 65}},
		{96.3, 171.8, 6, []float64{80, 100, 120, 140, 160, 180}},
		{2.31, 4.92, 5, []float64{2, 3, 4, 5}}, // range 2.61 → nice 5, step nice(1.25) = 1
		{0, 1.36, 5, []float64{0, 0.5, 1, 1.5}},
		{5, 5, 3, []float64{4, 5, 6}},
	}
	for _, c := range cases {
		got := niceTicks(c.lo, c.hi, c.n)
		if len(got) != len(c.want) {
			t.Errorf("niceTicks(%g, %g, %d) = %v, want %v", c.lo, c.hi, c.n, got, c.want)
			continue
		}
		for i := range got {
			if math.Abs(got[i]-c.want[i]) > 1e-12 {
				t.Errorf("niceTicks(%g, %g, %d) = %v, want %v", c.lo, c.hi, c.n, got, c.want)
				break
			}
		}
	}
}

func TestWords(t *testing.T) {
	cases := []struct{ got, want string }{
		{gapWords(1.02), "about yearly"},
		{gapWords(1.262), "about every 1.3 years"},
		{gapWords(0.5), "about every 6 months"},
		{num(19.987605, 3), "20"},
		{num(1.2573159, 4), "1.257"},
		{num(0.000123, 2), "0.00012"},
		{thousands(1234567), "1,234,567"},
		{thousands(999), "999"},
		{pval(0.0004), "< 0.001"},
		{tickLabel(0.30000000000000004, []float64{0.2, 0.3}), "0.3"},
	}
	for i, c := range cases {
		if c.got != c.want {
			t.Errorf("case %d: %q, want %q", i, c.got, c.want)
		}
	}
}

func TestSpreadLabels(t *testing.T) {
	got := spreadLabels([]float64{100, 101, 50, 102}, 10, 0, 200)
	sorted := append([]float64(nil), got...)
	sort.Float64s(sorted)
	for i := 1; i < len(sorted); i++ {
		if sorted[i]-sorted[i-1] < 10-1e-9 {
			t.Fatalf("labels %v closer than 10", got)
		}
	}
	if got[2] != 50 {
		t.Errorf("a label with room moved: %v", got)
	}
}

// TestRenderChosenWorkers chooses the panels by worker id: in the order
// given, flagged or not; an id without exams is refused by name.
func TestRenderChosenWorkers(t *testing.T) {
	s := demoData(t).Sections[0]
	fl := flaggedInOrder(s)
	isFlagged := map[string]bool{}
	for _, id := range fl {
		isFlagged[id] = true
	}
	var quiet string
	for _, e := range s.Exams {
		if !isFlagged[e.Worker] {
			quiet = e.Worker
			break
		}
	}
	want := []string{fl[3], quiet, fl[0]}
	out := render(t, Data{Sections: []Section{s}, Workers: want})
	re := regexp.MustCompile(`<div class="panel" id="m1-w(\d+)">\s*<h4>\d+\. Worker ([^<]+)</h4>`)
	got := re.FindAllStringSubmatch(out, -1)
	if len(got) != len(want) {
		t.Fatalf("%d panels, want %d", len(got), len(want))
	}
	for j, g := range got {
		if g[2] != want[j] {
			t.Errorf("panel %d shows %s, want %s", j+1, g[2], want[j])
		}
	}
	if !strings.Contains(out, "The 3 workers chosen for this report, in the order given (2 of them flagged).") {
		t.Error("the panel note does not say the workers were chosen")
	}
	var b bytes.Buffer
	err := Render(&b, Data{Sections: []Section{s}, Workers: []string{fl[0], "nobody", "W-none"}})
	var me *MissingWorkersError
	if !errors.As(err, &me) || !strings.Contains(err.Error(), `workers "nobody", "W-none" have no exams`) {
		t.Fatalf("unknown ids: %v, want a *MissingWorkersError naming both", err)
	}
}

// TestPanelShowsWhy checks that each panel shows why its worker was
// flagged: one expected-reading bar per exam (the serial model's one-step
// prediction, drawn in the key's colour), a ring around every reading
// outside the central 95% (|z| > 1.96), a diamond at every signalling exam
// in both charts, the limit line, and a caption that compares the reading at
// the first signal with the worker's own expected reading.
func TestPanelShowsWhy(t *testing.T) {
	s := demoData(t).Sections[0]
	if s.Model.Serial.Independent() {
		t.Fatal("the demo model should carry serial correlation")
	}
	out := render(t, Data{Sections: []Section{s}, MaxPanels: 6})
	fl := flaggedInOrder(s)
	panels := regexp.MustCompile(`(?s)<div class="panel" id="m1-w\d+">.*?<p>.*?</p>`).FindAllString(out, -1)
	if len(panels) != 6 {
		t.Fatalf("%d panels, want 6", len(panels))
	}
	key := symbols.Legend
	for j, p := range panels {
		id := fl[j]
		var exams, outside, signals int
		for i, e := range s.Exams {
			if e.Worker != id {
				continue
			}
			exams++
			if math.Abs(s.Results[i].Z) > 1.959963984540054 {
				outside++
			}
			if s.Results[i].Signal {
				signals++
			}
		}
		svgs := svgRE.FindAllString(p, -1)
		if len(svgs) != 2 {
			t.Fatalf("worker %s: %d charts in the panel, want 2", id, len(svgs))
		}
		readings, stat := svgs[0], svgs[1]
		ticks := strings.Count(readings, `stroke="`+key.Expected.Stroke+`" stroke-width="2"/>`)
		if ticks != exams {
			t.Errorf("worker %s: %d expected-reading ticks, want one per exam (%d)", id, ticks, exams)
		}
		rings := strings.Count(readings, `fill="none" stroke="`+key.Outside.Stroke+`"`)
		if rings != outside {
			t.Errorf("worker %s: %d rings, want %d readings outside the central 95%%", id, rings, outside)
		}
		diamond := `fill="` + key.Signal.Fill + `" stroke="` + key.Signal.Stroke + `"`
		if a, b := strings.Count(readings, diamond), strings.Count(stat, diamond); a != signals || b != signals {
			t.Errorf("worker %s: %d and %d signal diamonds, want %d in each chart", id, a, b, signals)
		}
		if !strings.Contains(stat, `stroke-dasharray="`+key.Limit.Dash+`"`) {
			t.Errorf("worker %s: no limit line", id)
		}
		if signals > 0 && !strings.Contains(p, "this worker&#39;s earlier exams led the model to expect") {
			t.Errorf("worker %s: the caption does not compare the reading with the expected one", id)
		}
	}
	// Without serial whitening there is no expectation to show.
	off := s
	off.Settings.Serial = screening.SerialDirect
	out = render(t, Data{Sections: []Section{off}, MaxPanels: 2})
	if strings.Contains(out, `stroke="`+key.Expected.Stroke+`" stroke-width="2"/>`) {
		t.Error("serial direct: panels should not show expected readings")
	}
}
