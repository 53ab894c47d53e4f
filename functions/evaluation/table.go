package evaluation

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Methods, the values of the table's method column.
const (
	// MethodChart is the chart (CUSUM or EWMA) at a target.
	MethodChart = "chart"
	// MethodBaseline is the cross-sectional rule "a reading beyond the
	// reference centile p".
	MethodBaseline = "baseline"
	// MethodRule is an alert rule written in CEL.
	MethodRule = "rule"
)

// WithinYears is the follow-up over which the table's
// healthy_flagged_within_10_years column and Describe count healthy
// workers flagged at least once.
const WithinYears = 10

// Row is one line of an evaluation table: one method, at one target for a
// chart (and for a rule, which sees the chart at that target).
type Row struct {
	// Method is MethodChart, MethodBaseline or MethodRule.
	Method string
	// Name tells methods of a kind apart: the chart's settings, the
	// baseline's centile, the rule's name.
	Name string
	// Target is the chart's target in years and Limit its control limit
	// (NaN for the baseline).
	Target, Limit float64
	// Result holds the figures.
	Result Result
}

// TableColumn documents one column of the evaluation table. Digits is
// the number of decimals a text rendering (CSV, a report) gives its
// numbers; cells carry full precision.
type TableColumn struct {
	Name, Meaning string
	Digits        int
}

// TableColumns are the evaluation table's columns, in order: the one
// definition used by the command line's CSV, the cell function's header
// row and the documentation. Figures that are not available (a quartile
// not reached, an interval of no workers, a follow-up too short) are blank.
var TableColumns = []TableColumn{
	{"method", "chart, baseline (a reading beyond the reference centile) or rule", 0},
	{"name", "which chart, baseline or rule", 0},
	{"target", "the chart's target in years: a healthy worker flagged on average once in this many years of exams (for a rule, the target of the chart it sees)", -1},
	{"limit", "the chart's control limit at that target", 4},
	{"diagnosed", "workers later diagnosed who had an exam before the diagnosis", 0},
	{"flagged_before_diagnosis", "of them, workers flagged at an exam before the diagnosis", 0},
	{"flagged_before_diagnosis_share", "their share of the diagnosed (0 to 1)", 4},
	{"flagged_before_diagnosis_share_low", "lower end of its 95% interval (Wilson)", 4},
	{"flagged_before_diagnosis_share_high", "upper end of its 95% interval (Wilson)", 4},
	{"median_lead_years", "median years from the first signal to the diagnosis over all diagnosed workers, a worker never flagged counting as no lead (Kaplan–Meier, censored at the diagnosis); blank when fewer than half were flagged", 2},
	{"lead_q25_years", "lower quartile of the lead: three in four diagnosed workers were flagged about this long or longer before the diagnosis; blank when fewer than three in four were flagged", 2},
	{"lead_q75_years", "upper quartile of the lead: one in four diagnosed workers was flagged about this long or longer before the diagnosis", 2},
	{"median_lead_flagged_years", "median years from the first signal to the diagnosis among the flagged workers only", 2},
	{"healthy", "workers never diagnosed", 0},
	{"healthy_flagged", "of them, workers flagged at least once (each a false signal)", 0},
	{"healthy_flagged_share", "their share of the never diagnosed (0 to 1), over their whole follow-up", 4},
	{"healthy_flagged_share_low", "lower end of its 95% interval (Wilson)", 4},
	{"healthy_flagged_share_high", "upper end of its 95% interval (Wilson)", 4},
	{"healthy_flagged_within_10_years", "share of never-diagnosed workers flagged within 10 years of their first exam (Kaplan–Meier); blank when no one was followed that long", 4},
	{"worker_years_at_risk", "years from the first exam to the first signal, or to the last exam, summed over the never diagnosed", 1},
	{"false_signals_per_100_worker_years", "false signals per 100 of those worker-years: 100/target for a chart that keeps its promise", 3},
	{"false_signals_per_100_worker_years_low", "lower end of its 95% interval (exact Poisson, Garwood)", 3},
	{"false_signals_per_100_worker_years_high", "upper end of its 95% interval (exact Poisson, Garwood)", 3},
	{"exams_after_diagnosis", "exams at or after a diagnosis, left out of every figure (they are not screening)", 0},
}

// Header returns the column names.
func Header() []string {
	out := make([]string, len(TableColumns))
	for i, c := range TableColumns {
		out[i] = c.Name
	}
	return out
}

// Cell is one value of the table: text, or a number (NaN for a blank).
type Cell struct {
	Text   string
	Number float64
	IsText bool
}

func text(s string) Cell    { return Cell{Text: s, IsText: true} }
func number(v float64) Cell { return Cell{Number: v} }
func count(n int) Cell      { return Cell{Number: float64(n)} }
func interval(i Interval) []Cell {
	return []Cell{number(i.Estimate), number(i.Low), number(i.High)}
}

// Cells returns the row's values in the order of TableColumns; s is the
// cohort's summary.
func (r Row) Cells(s Summary) []Cell {
	x := r.Result
	out := []Cell{text(r.Method), text(r.Name), number(r.Target), number(r.Limit), count(x.Diagnosed), count(x.Flagged)}
	out = append(out, interval(x.FlaggedShare)...)
	out = append(out, number(x.Lead.Median), number(x.Lead.Q25), number(x.Lead.Q75), number(x.Lead.MedianFlagged),
		count(x.Healthy), count(x.HealthyFlagged))
	out = append(out, interval(x.HealthyFlaggedShare)...)
	out = append(out, number(x.FlaggedWithin(WithinYears)), number(x.YearsAtRisk))
	out = append(out, interval(x.FalsePer100)...)
	out = append(out, count(s.AfterDiagnosis))
	if len(out) != len(TableColumns) {
		panic("evaluation: a row's cells do not match the columns")
	}
	return out
}

// Describe says in plain words what a row's figures mean, for a report or
// a terminal: how many of the workers later diagnosed were flagged before
// the diagnosis and how long before, and how many healthy workers were
// flagged. It does not add the screening-aid caution; callers do.
func Describe(r Row) string {
	x := r.Result
	var b strings.Builder
	switch {
	case r.Method == MethodChart && !math.IsNaN(r.Target):
		fmt.Fprintf(&b, "At a %s-year target, of ", targetWords(r.Target))
	case r.Method == MethodRule:
		fmt.Fprintf(&b, "With the rule %s, of ", r.Name)
	case r.Method == MethodBaseline:
		fmt.Fprintf(&b, "With the baseline rule (%s), of ", r.Name)
	default:
		fmt.Fprintf(&b, "With %s, of ", r.Name)
	}
	fmt.Fprintf(&b, "%s later diagnosed, %d (%s) %s flagged before the diagnosis",
		workers(x.Diagnosed), x.Flagged, percent(x.FlaggedShare.Estimate), were(x.Flagged))
	if x.Flagged > 0 {
		fmt.Fprintf(&b, ", a median of %s years before it", plain1(x.Lead.MedianFlagged))
	}
	b.WriteString("; ")
	within := x.FlaggedWithin(WithinYears)
	switch {
	case x.HealthyFlagged == 0:
		fmt.Fprintf(&b, "none of the %s never diagnosed was flagged", workers(x.Healthy))
	case !math.IsNaN(within) && math.Round(100*within) < 1:
		fmt.Fprintf(&b, "fewer than 1 in 100 healthy workers followed for %d years were flagged at least once", WithinYears)
	case !math.IsNaN(within):
		fmt.Fprintf(&b, "about %s in 100 healthy workers followed for %d years were flagged at least once",
			plain(math.Round(100*within)), WithinYears)
	default:
		fmt.Fprintf(&b, "%d of %s never diagnosed (%s) were flagged at least once over their follow-up",
			x.HealthyFlagged, workers(x.Healthy), percent(x.HealthyFlaggedShare.Estimate))
	}
	if !math.IsNaN(x.FalsePer100.Estimate) {
		fmt.Fprintf(&b, " (%s false signals per 100 worker-years)", plain2(x.FalsePer100.Estimate))
	}
	b.WriteString(".")
	return b.String()
}

func workers(n int) string {
	if n == 1 {
		return "1 worker"
	}
	return strconv.Itoa(n) + " workers"
}

func were(n int) string {
	if n == 1 {
		return "was"
	}
	return "were"
}

func percent(v float64) string {
	if math.IsNaN(v) {
		return "no share"
	}
	return strconv.FormatFloat(math.Round(100*v), 'f', 0, 64) + "%"
}

func plain(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

// targetWords formats a target: whole years as such, others to a tenth.
func targetWords(t float64) string {
	if t == math.Round(t) {
		return strconv.FormatFloat(t, 'f', 0, 64)
	}
	return plain1(t)
}
func plain1(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }
func plain2(v float64) string { return strconv.FormatFloat(v, 'f', 2, 64) }
