package report

import (
	"html"
	"strings"
	"testing"

	"veer/functions/serial"
)

// The report says whether serial correlation was found: detected in the
// demo's reference workers, and "no serial correlation detected" in words
// (method text and model table) for a model whose test found none.
func TestRenderSerialFinding(t *testing.T) {
	d := demoData(t)
	out := html.UnescapeString(render(t, d))
	if !strings.Contains(out, "Serial correlation was detected between a worker's exams") {
		t.Error("the demo report does not say that serial correlation was detected")
	}
	sec := d.Sections[0]
	m := *sec.Model
	tests := []struct {
		name  string
		p     serial.Params
		wants []string
	}{
		{"independent", serial.Params{Test: serial.CorrelationTest{Workers: 300, Pairs: 1500, MeanGap: 1.5, Corr: -0.004, T: -0.3, P: 0.62}},
			[]string{"No serial correlation was detected between a worker's exams", "p = 0.620", "charted as independent", "no serial correlation detected (consecutive exams correlate -0.004, p = 0.620)"}},
		{"weak, not detected", serial.Params{Phi: 0.003, C: 1, Test: serial.CorrelationTest{Workers: 300, Pairs: 1500, MeanGap: 1.5, Corr: 0.01, T: 0.9, P: 0.18}},
			[]string{"No serial correlation was detected between a worker's exams", "persistent share c = 1", "correlate 0"}},
	}
	for _, tc := range tests {
		m.Serial = tc.p
		sec.Model = &m
		out := html.UnescapeString(render(t, Data{Title: "t", Generated: "2026-12-01", Source: "s.csv", Sections: []Section{sec}}))
		for _, want := range tc.wants {
			if !strings.Contains(out, want) {
				t.Errorf("%s: the report lacks %q", tc.name, want)
			}
		}
	}
}
