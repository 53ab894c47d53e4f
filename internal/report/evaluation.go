package report

import (
	"fmt"
	"html/template"
	"math"
	"sort"
	"strconv"
	"strings"

	"veer/functions/evaluation"
	"veer/functions/screening"
	"veer/internal/numeric"
	"veer/internal/symbols"
)

// Evaluation is a section's evaluation on a labelled history: how the
// chart at each target, the baseline and the rules would have done on
// workers later diagnosed and workers never diagnosed.
type Evaluation struct {
	// Source names the outcomes table, e.g. "outcomes.csv"; Condition what
	// was diagnosed, e.g. "hypertension" (may be empty).
	Source, Condition string
	// History is the evaluation (screening.Model.EvaluateHistory).
	History *screening.History
	// Target is the chart's target the plain-words summary speaks of.
	Target float64
}

// evaluationView is the evaluation part of a section.
type evaluationView struct {
	ID      string
	Intro   []string
	Figure  figure
	Rows    []evalRow
	Notes   []string
	Caution string
}

// evalRow is one method in the evaluation table.
type evalRow struct {
	Method, Target, Limit, Flagged, Interval, MedianLead, MedianFlagged, False, FalseInterval, Healthy string
	Chart                                                                                              bool
}

// methodLabel names a row for a reader: the chart at its target, the
// baseline, a rule.
func methodLabel(r evaluation.Row) string {
	switch r.Method {
	case evaluation.MethodChart:
		l := "chart (" + r.Name + ")"
		if strings.HasSuffix(r.Name, ")") {
			l = "chart (" + strings.Replace(r.Name, " (", ", at ", 1)
		}
		return l
	case evaluation.MethodBaseline:
		return "baseline: " + r.Name
	}
	return "rule " + r.Name
}

func buildEvaluation(s *Section, id string) (*evaluationView, error) {
	ev := s.Evaluation
	h := ev.History
	sum := h.Cohort
	v := &evaluationView{ID: id, Caution: screening.Caution}
	what := "the condition"
	if ev.Condition != "" {
		what = ev.Condition
	}
	src := ""
	if ev.Source != "" {
		src = " (" + ev.Source + ")"
	}
	v.Intro = append(v.Intro, fmt.Sprintf("Had these methods been used on the workers' past exams, whom would they have flagged, how long before %s was diagnosed, "+
		"and how many workers never diagnosed would they have bothered? The outcomes%s list %s workers diagnosed with %s who had an exam before the diagnosis "+
		"and %s never diagnosed.", what, src, thousands(sum.Diagnosed), what, thousands(sum.Healthy)))
	var left []string
	if sum.AfterDiagnosis > 0 {
		left = append(left, fmt.Sprintf("%s exams of %s workers at or after their diagnosis are left out: they follow a known condition and are not screening",
			thousands(sum.AfterDiagnosis), thousands(sum.WorkersAfterDiagnosis)))
	}
	if sum.AtFirstExam > 0 {
		left = append(left, fmt.Sprintf("%s workers diagnosed at their first exam are left out: no exam came before the diagnosis", thousands(sum.AtFirstExam)))
	}
	if sum.MissingAsHealthy > 0 {
		left = append(left, fmt.Sprintf("%s workers with no outcome row are counted as never diagnosed", thousands(sum.MissingAsHealthy)))
	}
	if len(left) > 0 {
		v.Intro = append(v.Intro, strings.Join(left, "; ")+".")
	}
	for _, r := range h.Rows {
		if r.Method == evaluation.MethodChart && r.Target == ev.Target {
			v.Intro = append(v.Intro, evaluation.Describe(r))
		}
	}
	base := h.Baseline()
	v.Intro = append(v.Intro, evaluation.Describe(base))
	if !math.IsNaN(h.Matched) {
		for _, r := range h.Rows {
			if r.Method == evaluation.MethodChart && r.Target == h.Matched {
				v.Intro = append(v.Intro, fmt.Sprintf("At the baseline's rate of false signals (%s per 100 worker-years), the chart's target would be about %s years; "+
					"there it flags %d of the %d diagnosed workers before the diagnosis, against %d for the baseline.",
					num(base.Result.FalsePer100.Estimate, 3), num(h.Matched, 3), r.Result.Flagged, r.Result.Diagnosed, base.Result.Flagged))
			}
		}
	} else {
		v.Notes = append(v.Notes, "No target of the sweep gives the baseline's rate of false signals; a wider sweep would find the target that does.")
	}
	for _, f := range h.Failed {
		v.Notes = append(v.Notes, f.Error())
	}
	v.Notes = append(v.Notes,
		"A worker's lead is the years from the first signal to the diagnosis; the median lead in the table counts every diagnosed worker, one never flagged as having no lead (Kaplan–Meier, censored at the diagnosis), and is blank when fewer than half were flagged. "+
			"False signals are first signals of workers never diagnosed, per 100 worker-years from their first exam to that signal or their last exam: a chart that keeps its promise gives about 100/target. "+
			"Intervals are 95%: Wilson for shares, exact Poisson for rates. Some workers never diagnosed may carry the condition undiagnosed, so false signals may be overstated.")

	for _, r := range h.Rows {
		x := r.Result
		row := evalRow{
			Method: methodLabel(r), Target: "—", Limit: "—", Chart: r.Method == evaluation.MethodChart,
			Flagged:       fmt.Sprintf("%d of %d (%s)", x.Flagged, x.Diagnosed, pct(x.FlaggedShare.Estimate)),
			Interval:      pct(x.FlaggedShare.Low) + "–" + pct(x.FlaggedShare.High),
			MedianLead:    leadText(x.Lead.Median),
			MedianFlagged: leadText(x.Lead.MedianFlagged),
			False:         num2(x.FalsePer100.Estimate),
			FalseInterval: num2(x.FalsePer100.Low) + "–" + num2(x.FalsePer100.High),
			Healthy:       fmt.Sprintf("%d of %d (%s)", x.HealthyFlagged, x.Healthy, pct(x.HealthyFlaggedShare.Estimate)),
		}
		if !math.IsNaN(r.Target) {
			row.Target = num(r.Target, 3)
			row.Limit = num(r.Limit, 4)
		}
		v.Rows = append(v.Rows, row)
	}
	fig, err := tradeOffFigure(s, id)
	if err != nil {
		return nil, err
	}
	v.Figure = fig
	return v, nil
}

func leadText(y float64) string {
	if math.IsNaN(y) {
		return "not reached"
	}
	return strconv.FormatFloat(y, 'f', 1, 64) + " y"
}

func num2(v float64) string {
	if math.IsNaN(v) {
		return "n/a"
	}
	return strconv.FormatFloat(v, 'f', 2, 64)
}

// Series styles of the trade-off figure, in the marks of package symbols:
// the chart a blue line with circles (the chart statistic's colour), each
// rule the key's open orange square, labelled by name, the baseline a
// black triangle, a shape the key gives no other meaning (the vermilion
// diamond means a chart signal everywhere).
var ruleColours = []string{symbols.Legend.Rule.Stroke}

// tradeOffFigure draws, for one section's evaluation, the share of
// diagnosed workers flagged before the diagnosis (left) and the median
// lead among them (right) against false signals per 100 worker-years: the
// chart's targets joined by a line and labelled, the baseline and each
// rule as a point.
func tradeOffFigure(s *Section, id string) (figure, error) {
	h := s.Evaluation.History
	var chartRows, others []evaluation.Row
	for _, r := range h.Rows {
		if r.Method == evaluation.MethodChart {
			chartRows = append(chartRows, r)
		} else {
			others = append(others, r)
		}
	}
	sort.SliceStable(chartRows, func(a, b int) bool {
		return chartRows[a].Result.FalsePer100.Estimate < chartRows[b].Result.FalsePer100.Estimate
	})
	xmax := 0.0
	ymaxLead := 0.0
	for _, r := range h.Rows {
		xmax = math.Max(xmax, finiteOr(r.Result.FalsePer100.Estimate, 0))
		ymaxLead = math.Max(ymaxLead, finiteOr(r.Result.Lead.MedianFlagged, 0))
	}
	if xmax == 0 {
		xmax = 1
	}
	if ymaxLead == 0 {
		ymaxLead = 1
	}
	name, _, _ := markerLabel(s)
	panel := func(pid, ylabel string, ylo, yhi float64, y func(evaluation.Row) float64) string {
		p := newPlot(plotSpec{
			ID: pid, Title: fmt.Sprintf("%s: %s against false signals per 100 worker-years", name, ylabel),
			Desc: fmt.Sprintf("One line for the chart across its targets, one point for the baseline and for each rule: %s against false signals per 100 worker-years among workers never diagnosed.", ylabel),
			W:    340, H: 300, Left: 50, Right: 14, Top: 14, Bottom: 40,
			XLo: 0, XHi: xmax * 1.12, YLo: ylo, YHi: yhi,
			XLabel: "false signals per 100 worker-years", YLabel: ylabel, XTicks: 5, YTicks: 6, Class: "chart tradeoff",
		})
		xs := make([]float64, len(chartRows))
		ys := make([]float64, len(chartRows))
		for i, r := range chartRows {
			xs[i], ys[i] = r.Result.FalsePer100.Estimate, y(r)
		}
		p.line(xs, ys, symbols.Legend.Statistic.Stroke, 2, "")
		for i := range chartRows {
			p.marker(xs[i], ys[i], shapeCircle, symbols.Legend.Statistic.Stroke, "#ffffff", 4)
		}
		// Target labels, the report's own target first, then the others
		// where they do not crowd a label already placed.
		order := make([]int, len(chartRows))
		for i := range order {
			order[i] = i
		}
		sort.SliceStable(order, func(a, b int) bool {
			return chartRows[order[a]].Target == s.Evaluation.Target && chartRows[order[b]].Target != s.Evaluation.Target
		})
		var placed [][2]float64
		nRule := 0
		for _, r := range others {
			x, yy := r.Result.FalsePer100.Estimate, y(r)
			shape, col, label := shapeSquare, ruleColours[nRule%len(ruleColours)], r.Name
			if r.Method == evaluation.MethodRule {
				nRule++
			}
			if r.Method == evaluation.MethodBaseline {
				shape, col, label = shapeTriangle, symbols.Black, "baseline"
			}
			fill := col
			if shape == shapeSquare || shape == shapeRing {
				fill = "none"
			}
			p.marker(x, yy, shape, fill, col, 5)
			if numeric.Finite(x) && numeric.Finite(yy) {
				lx, ly := p.x.at(x)+7, p.y.at(yy)+12
				placed = append(placed, [2]float64{lx, ly})
				p.text(lx, ly, label, col, "start", 9)
			}
		}
		for _, i := range order {
			if !numeric.Finite(xs[i]) || !numeric.Finite(ys[i]) {
				continue
			}
			lx, ly := p.x.at(xs[i])+5, p.y.at(ys[i])-6
			crowded := false
			for _, q := range placed {
				if math.Abs(q[0]-lx) < 40 && math.Abs(q[1]-ly) < 12 {
					crowded = true
				}
			}
			if crowded {
				continue
			}
			placed = append(placed, [2]float64{lx, ly})
			p.text(lx, ly, num(chartRows[i].Target, 3)+" y", symbols.Legend.Statistic.Stroke, "start", 9)
		}
		p.frame()
		return p.end()
	}
	left := panel(id+"-share", "% of diagnosed flagged before diagnosis", 0, 100,
		func(r evaluation.Row) float64 { return 100 * r.Result.FlaggedShare.Estimate })
	right := panel(id+"-lead", "median years flagged before diagnosis", 0, ymaxLead*1.1,
		func(r evaluation.Row) float64 { return r.Result.Lead.MedianFlagged })
	svg := `<div class="pair">` + left + right + `</div>`
	caption := "Trade-off on the labelled history. Blue line and circles: the chart at each target (labelled in years); " +
		"black triangle: the baseline (" + h.Baseline().Name + "); open squares: alert rules, labelled by name. " +
		"Left: share of the workers later diagnosed who were flagged before the diagnosis. Right: median years from the first signal to the diagnosis, among the flagged. " +
		"Further right means more false signals among workers never diagnosed; up and to the left is better."
	return figure{SVG: template.HTML(svg), Caption: caption}, nil
}

func finiteOr(v, def float64) float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return def
	}
	return v
}
