package rules

import (
	"bufio"
	"context"
	"encoding/csv"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// sameFloat treats two NaNs as equal and allows rounding in the last bits.
func sameFloat(a, b float64) bool {
	if math.IsNaN(a) || math.IsNaN(b) {
		return math.IsNaN(a) && math.IsNaN(b)
	}
	return math.Abs(a-b) <= 1e-12*math.Max(1, math.Abs(b))
}

func sameFloats(a, b []float64) bool {
	return slices.EqualFunc(a, b, sameFloat)
}

// handSheet is two workers, rows out of time order and interleaved. The
// expectations in TestLinkHandChecked are worked out by hand below.
func handSheet() []Exam {
	return []Exam{
		{Worker: "W1", Time: 42.0, Z: 0.5, Value: 130},                 // row 1
		{Worker: "W2", Time: 30.0, Z: -1.0, Value: 100},                // row 2
		{Worker: "W1", Time: 40.0, Z: 1.0, Value: 125},                 // row 3
		{Worker: "W1", Time: 45.5, Z: 2.5, Value: 150, Signal: true},   // row 4
		{Worker: "W2", Time: 31.0, Z: 0.0, Value: 110, Signal: true},   // row 5
		{Worker: "W1", Time: 47.0, Z: 3.0, Value: 160, Signal: true},   // row 6
		{Worker: "W2", Time: 31.0, Z: 0.25, Value: 112, Signal: false}, // row 7: same time as row 5
	}
}

func TestLinkHandChecked(t *testing.T) {
	nan := math.NaN()
	exams := handSheet()
	if err := Link(exams); err != nil {
		t.Fatal(err)
	}
	// W1 in time order: rows 3 (40), 1 (42), 4 (45.5), 6 (47); first signal at 45.5.
	// W2: rows 2 (30), 5 (31), 7 (31, tie keeps input order); first signal at 31.
	tests := []struct {
		row                         int
		exam, exams                 int
		gap, prevZ, prevValue, ysfs float64
		zs, times                   []float64
		signals                     []bool
	}{
		{3, 1, 4, 0, nan, nan, nan, []float64{1.0}, []float64{40}, []bool{false}},
		{1, 2, 4, 2.0, 1.0, 125, nan, []float64{1.0, 0.5}, []float64{40, 42}, []bool{false, false}},
		{4, 3, 4, 3.5, 0.5, 130, 0, []float64{1.0, 0.5, 2.5}, []float64{40, 42, 45.5}, []bool{false, false, true}},
		{6, 4, 4, 1.5, 2.5, 150, 1.5, []float64{1.0, 0.5, 2.5, 3.0}, []float64{40, 42, 45.5, 47}, []bool{false, false, true, true}},
		{2, 1, 3, 0, nan, nan, nan, []float64{-1.0}, []float64{30}, []bool{false}},
		{5, 2, 3, 1.0, -1.0, 100, 0, []float64{-1.0, 0.0}, []float64{30, 31}, []bool{false, true}},
		{7, 3, 3, 0.0, 0.0, 110, 0, []float64{-1.0, 0.0, 0.25}, []float64{30, 31, 31}, []bool{false, true, false}},
	}
	for _, tc := range tests {
		e := exams[tc.row-1]
		if e.Exam != tc.exam || e.Exams != tc.exams {
			t.Errorf("row %d: exam %d of %d, want %d of %d", tc.row, e.Exam, e.Exams, tc.exam, tc.exams)
		}
		for _, c := range []struct {
			name      string
			got, want float64
		}{{"gap", e.Gap, tc.gap}, {"prev_z", e.PrevZ, tc.prevZ}, {"prev_value", e.PrevValue, tc.prevValue},
			{"years_since_first_signal", e.YearsSinceFirstSignal, tc.ysfs}} {
			if !sameFloat(c.got, c.want) {
				t.Errorf("row %d: %s = %v, want %v", tc.row, c.name, c.got, c.want)
			}
		}
		if !sameFloats(e.Zs, tc.zs) || !sameFloats(e.Times, tc.times) || !slices.Equal(e.Signals, tc.signals) {
			t.Errorf("row %d: history zs=%v times=%v signals=%v, want %v %v %v", tc.row, e.Zs, e.Times, e.Signals, tc.zs, tc.times, tc.signals)
		}
		if len(e.Values) != len(tc.zs) {
			t.Errorf("row %d: %d values, want %d", tc.row, len(e.Values), len(tc.zs))
		}
	}
	// A history cannot grow into the next exam's history.
	first := exams[2] // W1's first exam
	_ = append(first.Zs, 99)
	if exams[0].Zs[1] != 0.5 {
		t.Errorf("appending to one history changed another: %v", exams[0].Zs)
	}
}

func TestLinkErrors(t *testing.T) {
	tests := []struct {
		name  string
		exams []Exam
		want  string
	}{
		{"empty worker", []Exam{{Worker: "A", Time: 1}, {Worker: "", Time: 2}}, "row 2: the worker id is empty"},
		{"missing age", []Exam{{Worker: "A", Time: math.NaN()}}, `row 1: the age (time) of worker "A" is missing`},
		{"infinite age", []Exam{{Worker: "A", Time: 1}, {Worker: "B", Time: math.Inf(1)}}, `row 2: the age (time) of worker "B"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			err := Link(tc.exams)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("got %v, want an error containing %q", err, tc.want)
			}
		})
	}
	if err := Link(nil); err != nil {
		t.Errorf("empty sheet: %v", err)
	}
}

// fixtureRow is one row of testdata/linked_fixture.csv.
type fixtureRow struct {
	exam     Exam
	expected map[string]string
}

// readFixture reads testdata/linked_fixture.csv, written by
// testdata/make_fixtures.py: an independent Python implementation of the
// per-worker variables and of some history rules.
func readFixture(t *testing.T) []fixtureRow {
	t.Helper()
	f, err := os.Open("testdata/linked_fixture.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	br := bufio.NewReader(f)
	if line, _ := br.ReadString('\n'); !strings.HasPrefix(line, "#") {
		t.Fatal("fixture should start with its provenance comment")
	}
	recs, err := csv.NewReader(br).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	head := recs[0]
	var rows []fixtureRow
	for _, rec := range recs[1:] {
		m := make(map[string]string, len(head))
		for i, h := range head {
			m[h] = rec[i]
		}
		num := func(k string) float64 {
			v, err := strconv.ParseFloat(m[k], 64)
			if err != nil {
				t.Fatalf("fixture %s=%q: %v", k, m[k], err)
			}
			return v
		}
		rows = append(rows, fixtureRow{
			exam: Exam{Worker: m["worker"], Time: num("time"), Z: num("z"), Value: num("value"),
				Signal: m["signal"] == "true"},
			expected: m,
		})
	}
	if len(rows) < 100 {
		t.Fatalf("fixture has only %d rows", len(rows))
	}
	return rows
}

// TestLinkAgainstPython checks Link and the history rules against
// testdata/linked_fixture.csv (source: testdata/make_fixtures.py, numpy).
func TestLinkAgainstPython(t *testing.T) {
	rows := readFixture(t)
	exams := make([]Exam, len(rows))
	for i := range rows {
		exams[i] = rows[i].exam
	}
	if err := Link(exams); err != nil {
		t.Fatal(err)
	}
	// Each check is a rule evaluated over the whole sheet, compared with
	// the fixture column computed in Python.
	checks := []struct{ column, rule string }{
		{"exam", "exam"},
		{"exams", "exams"},
		{"gap", "gap"},
		{"prev_z", "prev_z"},
		{"prev_value", "prev_value"},
		{"ysfs", "years_since_first_signal"},
		{"n_last5", "times.count(t, t >= time - 5.0)"},
		{"n_last5", "times.filter(t, t >= time - 5.0).size()"},
		{"three_of_4", "last(zs, 4).count(v, v > 2.0) >= 3"},
		{"three_of_4", "last(zs, 4).filter(v, v > 2.0).size() >= 3"},
		{"mean_last3", "mean(last(zs, 3))"},
		{"max_values", "max(values)"},
		{"rise_rate", "has_previous && gap > 0.0 ? (z - prev_z) / gap : -1000.0"},
		{"n_signals", "signals.count(s, s)"},
	}
	cache := NewCache(0, Limits{})
	out := make([]Value, len(exams))
	for _, c := range checks {
		r, err := cache.Compile(c.rule, Any)
		if err != nil {
			t.Fatalf("%s: %v", c.rule, err)
		}
		if err := EvalAll(context.Background(), r, exams, out); err != nil {
			t.Fatalf("%s: %v", c.rule, err)
		}
		for i, v := range out {
			want := rows[i].expected[c.column]
			switch want {
			case "true", "false":
				if b, ok := v.Bool(); !ok || b != (want == "true") {
					t.Errorf("row %d %s: got %v, want %s", i+1, c.rule, v, want)
				}
			default:
				w, _ := strconv.ParseFloat(want, 64)
				if n, ok := v.Number(); !ok || !sameFloat(n, w) {
					t.Errorf("row %d %s: got %v, want %s", i+1, c.rule, v, want)
				}
			}
		}
	}
}
