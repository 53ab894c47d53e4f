package screening

import (
	"fmt"
	"math"

	"veer/functions/rules"
)

// RuleExams returns the variables alert rules see for each screened exam,
// in the input order: the reading and its reference values, the chart
// statistic against limit h, and the worker's history (see rules.Exam).
// chart is the statistic compared with the limit and chart_low the
// downward statistic of a two-sided chart (NaN for a one-sided chart).
func RuleExams(exams []Exam, res []Result, set Settings, h float64) ([]rules.Exam, error) {
	if len(exams) != len(res) {
		return nil, fmt.Errorf("internal: %d exams but %d results", len(exams), len(res))
	}
	twoSided := set.Chart.Side == "both"
	out := make([]rules.Exam, len(exams))
	for i, e := range exams {
		r := res[i]
		out[i] = rules.Exam{
			Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value,
			Mean: r.Mean, SD: r.SD, Z: r.Z, Centile: r.Centile, Innovation: r.Innovation,
			Chart: r.Stat, ChartLow: math.NaN(), Limit: h, Signal: r.Signal, InRange: r.InRange,
		}
		if twoSided {
			out[i].ChartLow = r.Down
		}
	}
	if err := rules.Link(out); err != nil {
		return nil, err
	}
	return out, nil
}
