package flagged

import (
	"fmt"
	"math"
	"testing"

	"veer/functions/screening"
)

// sheet is a small screened sheet: three workers, rows out of age order.
func sheet() ([]screening.Exam, []screening.Result) {
	ex := []screening.Exam{
		{Worker: "a", Time: 31}, {Worker: "b", Time: 40}, {Worker: "a", Time: 30},
		{Worker: "c", Time: 50}, {Worker: "b", Time: 41}, {Worker: "c", Time: 52},
	}
	res := []screening.Result{
		{Stat: 3, Signal: true}, {Stat: 0.5}, {Stat: 1},
		{Stat: 2.5, Signal: true}, {Stat: 1.8}, {Stat: 1},
	}
	return ex, res
}

func TestWorkers(t *testing.T) {
	ex, res := sheet()
	rules := []Rule{
		{Name: "quiet", Severity: "medium", Fired: []bool{false, true, false, false, false, false}},
		{Name: "loud", Severity: " High ", Fired: []bool{false, false, false, false, true, false}},
	}
	ws := Workers(ex, res, rules, 2)
	type want struct {
		id                  string
		rows                []int
		first, signal, flag float64
		signals             int
		fired               []string
		last, most          float64
		flagged, signalled  bool
	}
	nan := math.NaN()
	wants := []want{
		{"a", []int{2, 0}, 30, 31, 31, 1, nil, 1.5, 1.5, true, true},
		{"b", []int{1, 4}, 40, nan, 41, 0, []string{"quiet", "loud"}, 0.9, 0.9, true, false},
		{"c", []int{3, 5}, 50, 50, 50, 1, nil, 0.5, 1.25, true, true},
	}
	same := func(a, b float64) bool { return a == b || math.IsNaN(a) && math.IsNaN(b) }
	if len(ws) != len(wants) {
		t.Fatalf("%d workers, want %d", len(ws), len(wants))
	}
	for i, w := range wants {
		g := ws[i]
		if g.ID != w.id || fmt.Sprint(g.Rows) != fmt.Sprint(w.rows) || g.First != w.first || !same(g.FirstSignal, w.signal) ||
			!same(g.FirstFlag, w.flag) || g.Signals != w.signals || fmt.Sprint(g.RulesFired) != fmt.Sprint(w.fired) ||
			!same(g.LastRatio, w.last) || !same(g.MaxRatio, w.most) || g.Flagged() != w.flagged || g.Signalled() != w.signalled {
			t.Errorf("worker %s: %+v, want %+v", w.id, *g, w)
		}
	}
	c := Count(ws, rules)
	if c.Workers != 3 || c.Flagged != 3 || c.Signalled != 2 || fmt.Sprint(c.Rules) != "[1 1]" {
		t.Errorf("counts %+v", c)
	}
	// Without the high rule, b is not flagged: a rule of severity medium
	// fires but does not flag.
	c = Count(Workers(ex, res, rules[:1], 2), rules[:1])
	if c.Flagged != 2 || c.Rules[0] != 1 {
		t.Errorf("without the high rule: %+v", c)
	}
	if got := fmt.Sprint(Exams(res, rules)); got != "[true false false true true false]" {
		t.Errorf("exams that flag: %s", got)
	}
}

func TestFlags(t *testing.T) {
	for sev, want := range map[string]bool{"high": true, "HIGH": true, " High ": true, "": false, "medium": false, "highest": false, "low": false} {
		if Flags(sev) != want {
			t.Errorf("Flags(%q) = %v, want %v", sev, !want, want)
		}
	}
}

func TestByUrgency(t *testing.T) {
	nan := math.NaN()
	mk := func(id string, flag, last, most float64) *Worker {
		return &Worker{ID: id, FirstFlag: flag, LastRatio: last, MaxRatio: most}
	}
	ws := []*Worker{
		mk("quiet1", nan, 0.9, 0.9),
		mk("old", 20, 0.4, 3),
		mk("now", 50, 2.5, 2.5),
		mk("quiet2", nan, 0.1, 0.2),
		mk("tieA", 41, 1.2, 1.5),
		mk("tieB", 40, 1.2, 1.5),
		mk("tieC", 30, 1.2, 2.0),
		mk("nostat", 35, nan, nan),
	}
	ByUrgency(ws)
	var got []string
	for _, w := range ws {
		got = append(got, w.ID)
	}
	if want := "[now tieC tieB tieA old nostat quiet1 quiet2]"; fmt.Sprint(got) != want {
		t.Errorf("order %v, want %s", got, want)
	}
}

func ExampleWorkers() {
	exams := []screening.Exam{{Worker: "W1", Time: 40}, {Worker: "W1", Time: 41}, {Worker: "W2", Time: 50}}
	results := []screening.Result{{Stat: 0.4}, {Stat: 1.6, Signal: true}, {Stat: 0.2}}
	rules := []Rule{{Name: "high_z", Severity: "medium", Fired: []bool{false, true, true}}}
	ws := Workers(exams, results, rules, 1.3)
	c := Count(ws, rules)
	fmt.Printf("%d of %d workers flagged (%s); %d with a chart signal; rule high_z fired for %d\n",
		c.Flagged, c.Workers, Definition, c.Signalled, c.Rules[0])
	// Output: 1 of 2 workers flagged (a chart signal, or an alert rule of severity high); 1 with a chart signal; rule high_z fired for 2
}
