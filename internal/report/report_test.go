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
// section flags (chart signal or any rule), ordered by the age of the first
// flag.
func flaggedInOrder(s Section) []string {
	first := map[string]float64{}
	for i, e := range s.Exams {
		hit := s.Results[i].Signal
		for _, r := range s.Rules {
			hit = hit || r.Fired[i]
		}
		if !hit {
			continue
		}
		if a, ok := first[e.Worker]; !ok || e.Time < a {
			first[e.Worker] = e.Time
		}
	}
	ids := make([]string, 0, len(first))
	for id := range first {
		ids = append(ids, id)
	}
	// Ties keep the order of first appearance in the sheet.
	pos := map[string]int{}
	for i, e := range s.Exams {
		if _, ok := pos[e.Worker]; !ok {
			pos[e.Worker] = i
		}
	}
	sort.Slice(ids, func(a, b int) bool {
		if first[ids[a]] != first[ids[b]] {
			return first[ids[a]] < first[ids[b]]
		}
		return pos[ids[a]] < pos[ids[b]]
	})
	return ids
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
		// Panels: capped, in order of first flag.
		re := regexp.MustCompile(`<div class="panel" id="` + id + `-w(\d+)">\s*<h4>\d+\. Worker ([^<]+)</h4>`)
		got := re.FindAllStringSubmatch(out, -1)
		if len(got) != min(len(fl), DefaultMaxPanels) {
			t.Fatalf("%s: %d panels, want %d", s.Marker, len(got), min(len(fl), DefaultMaxPanels))
		}
		for j, g := range got {
			if g[2] != fl[j] {
				t.Fatalf("%s: panel %d shows worker %s, want %s (order of first signal)", s.Marker, j+1, g[2], fl[j])
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
