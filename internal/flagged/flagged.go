// Package flagged holds veer's one definition of a flagged worker, used by
// every count and list of flagged workers veer shows: the terminal summary
// of veer screen and veer report, the summary sheet written into a
// workbook, the HTML report and the demo.
//
// A worker is flagged when the chart signalled at any of the worker's exams,
// or when an alert rule of severity "high" (rule files: "name [high] =
// ..."; case does not matter) fired at any of them. Rules of any other
// severity, or none, are shown as fired but do not flag: the chart's
// limit is set for an agreed false-alarm rate, and an officer marks a rule
// high to say that it weighs as much. A flag, like a signal, is a prompt
// for review by a licensed clinician under local occupational-health rules,
// not a diagnosis.
package flagged

import (
	"math"
	"sort"
	"strings"

	"veer/functions/screening"
)

// Severity is the rule severity that flags a worker.
const Severity = "high"

// Definition says in words what "flagged" counts; every count of flagged
// workers is shown with it.
const Definition = "a chart signal, or an alert rule of severity " + Severity

// Rule is one alert rule's outcome per exam row.
type Rule struct {
	Name, Severity string
	// Fired[i] is true when the rule fired at exam row i.
	Fired []bool
}

// Flags reports whether a rule of this severity flags a worker.
func Flags(severity string) bool {
	return strings.EqualFold(strings.TrimSpace(severity), Severity)
}

// Worker is one worker's screening, summarised.
type Worker struct {
	ID, Group string
	// Rows are the worker's exam rows, ordered by age.
	Rows []int
	// First and Last are the ages at the first and last exam.
	First, Last float64
	// FirstSignal is the age of the first chart signal and FirstFlag of the
	// first exam that flags (a chart signal or a rule of severity high);
	// NaN when there is none. FirstRule is the age at which any rule first
	// fired (NaN if none).
	FirstSignal, FirstFlag, FirstRule float64
	// Signals counts the exams where the chart signals.
	Signals int
	// RulesFired names the rules that fired at any of the worker's exams,
	// in the rules' order.
	RulesFired []string
	// LastRatio is the chart statistic at the worker's latest exam divided
	// by the limit (above 1: over the limit now); MaxRatio the largest over
	// the worker's exams.
	LastRatio, MaxRatio float64
}

// Flagged reports whether the worker is flagged (see the package comment).
func (w *Worker) Flagged() bool { return !math.IsNaN(w.FirstFlag) }

// Signalled reports whether the chart signalled at any of the worker's exams.
func (w *Worker) Signalled() bool { return !math.IsNaN(w.FirstSignal) }

// Workers summarises each worker of a screened sheet, in order of first
// appearance: exams and results are one per row (as Model.Screen returns
// them, or Model.ScreenEach: rows set aside, whose Result is Skipped, are
// left out), rules one column each over the same rows, h the control limit.
// It panics if the lengths differ (a programmer error).
func Workers(exams []screening.Exam, res []screening.Result, rules []Rule, h float64) []*Worker {
	if len(res) != len(exams) {
		panic("flagged: one result per exam is needed")
	}
	for _, r := range rules {
		if len(r.Fired) != len(exams) {
			panic("flagged: rule " + r.Name + " needs one outcome per exam")
		}
	}
	pos := map[string]int{}
	var ws []*Worker
	for i, e := range exams {
		if res[i].Skipped != nil {
			continue
		}
		k, ok := pos[e.Worker]
		if !ok {
			k = len(ws)
			pos[e.Worker] = k
			ws = append(ws, &Worker{ID: e.Worker, Group: e.Group})
		}
		ws[k].Rows = append(ws[k].Rows, i)
	}
	for _, w := range ws {
		sort.SliceStable(w.Rows, func(a, b int) bool { return exams[w.Rows[a]].Time < exams[w.Rows[b]].Time })
		w.First, w.Last = exams[w.Rows[0]].Time, exams[w.Rows[len(w.Rows)-1]].Time
		w.FirstSignal, w.FirstFlag, w.FirstRule = math.NaN(), math.NaN(), math.NaN()
		w.MaxRatio = math.Inf(-1)
		for _, i := range w.Rows {
			t := exams[i].Time
			ratio := res[i].Stat / h
			if !math.IsNaN(ratio) {
				w.MaxRatio = math.Max(w.MaxRatio, ratio)
			}
			w.LastRatio = ratio
			if res[i].Signal {
				w.Signals++
				if math.IsNaN(w.FirstSignal) {
					w.FirstSignal = t
				}
				if math.IsNaN(w.FirstFlag) {
					w.FirstFlag = t
				}
			}
		}
		if math.IsInf(w.MaxRatio, -1) {
			w.MaxRatio = math.NaN()
		}
		for _, r := range rules {
			first := math.NaN()
			for _, i := range w.Rows {
				if r.Fired[i] {
					first = exams[i].Time
					break
				}
			}
			if math.IsNaN(first) {
				continue
			}
			w.RulesFired = append(w.RulesFired, r.Name)
			if math.IsNaN(w.FirstRule) || first < w.FirstRule {
				w.FirstRule = first
			}
			if Flags(r.Severity) && (math.IsNaN(w.FirstFlag) || first < w.FirstFlag) {
				w.FirstFlag = first
			}
		}
	}
	return ws
}

// Counts are the headline counts of a screened sheet.
type Counts struct {
	// Workers screened; Flagged (see Definition); Signalled: workers with a
	// chart signal.
	Workers, Flagged, Signalled int
	// Rules[k] counts the workers for whom rule k fired.
	Rules []int
}

// Count counts the workers, the flagged ones, those with a chart signal
// and, per rule, those for whom it fired.
func Count(ws []*Worker, rules []Rule) Counts {
	c := Counts{Workers: len(ws), Rules: make([]int, len(rules))}
	for _, w := range ws {
		if w.Flagged() {
			c.Flagged++
		}
		if w.Signalled() {
			c.Signalled++
		}
		for k, r := range rules {
			for _, n := range w.RulesFired {
				if n == r.Name {
					c.Rules[k]++
					break
				}
			}
		}
	}
	return c
}

// Exams returns, per exam row, whether the exam flags: the chart signals
// there or a rule of severity high fires there.
func Exams(res []screening.Result, rules []Rule) []bool {
	out := make([]bool, len(res))
	for i, r := range res {
		out[i] = r.Signal
	}
	for _, r := range rules {
		if !Flags(r.Severity) {
			continue
		}
		for i, f := range r.Fired {
			out[i] = out[i] || f
		}
	}
	return out
}

// ByUrgency orders flagged workers for a reviewer: the largest chart
// statistic relative to the limit at the worker's latest exam first (a
// worker still far over the limit now comes before one whose chart has
// come back down), then by the largest ratio over the worker's exams, then
// by the earliest flag; ties keep the given order. Unflagged workers go
// last, in the given order.
func ByUrgency(ws []*Worker) {
	key := func(v float64) float64 {
		if math.IsNaN(v) {
			return math.Inf(-1)
		}
		return v
	}
	sort.SliceStable(ws, func(a, b int) bool {
		wa, wb := ws[a], ws[b]
		if wa.Flagged() != wb.Flagged() {
			return wa.Flagged()
		}
		if !wa.Flagged() {
			return false
		}
		if la, lb := key(wa.LastRatio), key(wb.LastRatio); la != lb {
			return la > lb
		}
		if ma, mb := key(wa.MaxRatio), key(wb.MaxRatio); ma != mb {
			return ma > mb
		}
		return wa.FirstFlag < wb.FirstFlag
	})
}
