package screening

import (
	"fmt"

	"veer/functions/rules"
)

// RuleExams returns the variables alert rules see for each screened exam,
// in the input order: the reading and its reference values, the chart
// statistic against limit h, and the worker's history (see rules.Exam).
// chart_up, chart_down and chart are the output columns of the same names:
// the upward and downward statistics (0 for a side the chart does not
// watch) and the one compared with the limit.
func RuleExams(exams []Exam, res []Result, h float64) ([]rules.Exam, error) {
	if len(exams) != len(res) {
		return nil, fmt.Errorf("internal: %d exams but %d results", len(exams), len(res))
	}
	out := make([]rules.Exam, len(exams))
	for i, e := range exams {
		r := res[i]
		out[i] = rules.Exam{
			Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value,
			Mean: r.Mean, SD: r.SD, Z: r.Z, Centile: r.Centile, Innovation: r.Innovation,
			ChartUp: r.Up, ChartDown: r.Down, Chart: r.Stat, Limit: h, Signal: r.Signal, InRange: r.InRange,
		}
	}
	if err := rules.Link(out); err != nil {
		return nil, err
	}
	return out, nil
}
