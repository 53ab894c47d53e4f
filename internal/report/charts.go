package report

import (
	"fmt"
	"html/template"
	"math"
	"strings"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/screening"
	"veer/internal/flagged"
	"veer/internal/numeric"
	"veer/internal/symbols"
)

// centileLevels are the centiles drawn, lowest first.
var centileLevels = [5]float64{2.5, 10, 50, 90, 97.5}

// centilesOver returns the centile curves of group g at times ts, with
// covariates cov (nil for a reference without covariates); a centile that
// cannot be computed (far Box-Cox tails) is NaN.
func centilesOver(s *Section, g string, ts, cov []float64) [5][]float64 {
	var out [5][]float64
	ref := s.Model.Reference()
	for k, p := range centileLevels {
		out[k] = make([]float64, len(ts))
		for i, t := range ts {
			v, err := ref.Centile(g, t, cov, p, true)
			if err != nil {
				v = math.NaN()
			}
			out[k][i] = v
		}
	}
	return out
}

func minMaxFinite(vs ...[]float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, v := range vs {
		for _, x := range v {
			if numeric.Finite(x) {
				lo = math.Min(lo, x)
				hi = math.Max(hi, x)
			}
		}
	}
	return lo, hi
}

// drawBands draws the two centile bands and the median of c over xs,
// skipping points where a band edge is missing.
func drawBands(p *plot, xs []float64, c [5][]float64, lines bool) {
	band := func(lo, hi []float64, op float64) {
		var x, l, h []float64
		flush := func() {
			if len(x) > 1 {
				p.band(x, l, h, symbols.Legend.Band.Fill, op)
			}
			x, l, h = x[:0], l[:0], h[:0]
		}
		for i := range xs {
			if numeric.Finite(lo[i]) && numeric.Finite(hi[i]) {
				x, l, h = append(x, xs[i]), append(l, lo[i]), append(h, hi[i])
			} else {
				flush()
			}
		}
		flush()
	}
	band(c[0], c[4], 0.28)
	band(c[1], c[3], 0.45)
	if lines {
		p.line(xs, c[0], symbols.Legend.Median.Stroke, 1, dashOuter)
		p.line(xs, c[4], symbols.Legend.Median.Stroke, 1, dashOuter)
		p.line(xs, c[1], symbols.Legend.Median.Stroke, 1, dashInner)
		p.line(xs, c[3], symbols.Legend.Median.Stroke, 1, dashInner)
	}
	p.line(xs, c[2], symbols.Legend.Median.Stroke, 2, "")
}

// referenceFigure draws the reference centiles of one group over its age range.
func referenceFigure(s *Section, g, id string) (figure, error) {
	lo, hi, err := s.Model.Reference().Range(g)
	if err != nil {
		return figure{}, err
	}
	name, _, axis := markerLabel(s)
	xs := floats.Span(make([]float64, 121), lo, hi)
	cov := covariatesOf(s, groupRows(s, g))
	c := centilesOver(s, g, xs, cov)
	ylo, yhi := minMaxFinite(c[:]...)
	if !numeric.Finite(ylo) {
		return figure{}, fmt.Errorf("%s, group %q: the reference centiles cannot be computed", name, g)
	}
	pad := 0.04 * (yhi - ylo)
	p := newPlot(plotSpec{
		ID:    id,
		Title: fmt.Sprintf("Reference centiles of %s by age, group %s", name, groupName(g)),
		Desc: fmt.Sprintf("Median and the 10th–90th and 2.5th–97.5th centile bands of %s for healthy workers of group %s, ages %s to %s years.",
			axis, groupName(g), age(lo), age(hi)),
		W: 680, H: 300, Left: 58, Right: 96, Top: 12, Bottom: 40,
		XLo: lo, XHi: hi, YLo: ylo - pad, YHi: yhi + pad,
		XLabel: "age (years)", YLabel: axis, XTicks: 10, YTicks: 8, Class: "chart ref",
	})
	drawBands(p, xs, c, true)
	p.frame()
	// End labels, pushed apart so they do not overlap.
	labels := []string{"2.5th centile", "10th centile", "median", "90th centile", "97.5th centile"}
	ys := make([]float64, 5)
	last := len(xs) - 1
	for k := range ys {
		v := c[k][last]
		if !numeric.Finite(v) {
			v = c[2][last]
		}
		ys[k] = p.y.at(v) + 4
	}
	ys = spreadLabels(ys, 12, p.plotTop+8, p.plotBottom)
	for k, l := range labels {
		p.text(p.plotRight+6, ys[k], l, symbols.Legend.Median.Stroke, "start", 10.5)
	}
	svg := p.end()
	const key = "Solid line: median (50th centile); darker band and dotted lines: 10th–90th centile; lighter band and dashed lines: 2.5th–97.5th centile."
	if s.Model.Published != nil {
		at := ""
		if cov != nil {
			at = ", drawn at the group's median" + strings.TrimPrefix(covariateText(s, groupRows(s, g)), ",")
		}
		caption := fmt.Sprintf("Group %s: reference centiles of %s by age from %s, ages %s–%s%s. %s",
			groupName(g), axis, referenceName(s.Model), age(lo), age(hi), at, key)
		return figure{SVG: template.HTML(svg), Caption: caption}, nil
	}
	d := s.Model.Curves.Curves
	var workers, exams int
	for _, cv := range d {
		if cv.Group == g {
			workers, exams = cv.Diagnostics.Workers, cv.Diagnostics.Exams
		}
	}
	caption := fmt.Sprintf("Group %s: reference centiles of %s by age, from %s healthy workers (%s exams), ages %s–%s. %s",
		groupName(g), axis, thousands(workers), thousands(exams), age(lo), age(hi), key)
	return figure{SVG: template.HTML(svg), Caption: caption}, nil
}

// showExpected reports whether the panels draw the worker's own expected
// readings: when the chart charts innovations against them (serial whiten
// with a model that found correlation).
func showExpected(s *Section) bool {
	switch s.Settings.Serial {
	case "", "on", screening.SerialWhiten:
		return !s.Model.Serial.Independent()
	}
	return false
}

// drawMark draws one mark of the key at data point (x, y), r its size.
func drawMark(p *plot, x, y float64, m symbols.Mark, r float64) {
	switch m.Shape {
	case "diamond":
		p.marker(x, y, shapeDiamond, m.Fill, m.Stroke, r)
	case "square":
		p.marker(x, y, shapeSquare, m.Fill, m.Stroke, r)
	case "ring":
		p.marker(x, y, shapeRing, m.Fill, m.Stroke, r)
	default:
		p.marker(x, y, shapeCircle, m.Fill, m.Stroke, r)
	}
}

// workerPanel draws one worker: readings against the group's band with the
// worker's own expected readings, and the chart statistic against the
// limit, so that the reason for a flag can be seen.
func workerPanel(s *Section, w *flagged.Worker, n int, sectionID string) (panelView, error) {
	_, _, axis := markerLabel(s)
	key := symbols.Legend
	t0, t1 := w.First, w.Last
	pad := math.Max(0.5, 0.05*(t1-t0))
	xlo, xhi := t0-pad, t1+pad

	k := len(w.Rows)
	ts, vs, zs, st := make([]float64, k), make([]float64, k), make([]float64, k), make([]float64, k)
	sig, rule, out := make([]bool, k), make([]bool, k), make([]bool, k)
	for j, i := range w.Rows {
		ts[j], vs[j] = s.Exams[i].Time, s.Exams[i].Value
		zs[j], st[j], sig[j] = s.Results[i].Z, s.Results[i].Stat, s.Results[i].Signal
		out[j] = math.Abs(s.Results[i].Z) > z975
		for _, r := range s.Rules {
			if r.Fired[i] {
				rule[j] = true
			}
		}
	}
	var exp []screening.Expected
	if showExpected(s) {
		var err error
		mine := make([]screening.Exam, len(w.Rows))
		for j, i := range w.Rows {
			mine[j] = s.Exams[i]
		}
		if exp, err = s.Model.ExpectedLevels(s.Settings, mine, zs); err != nil {
			return panelView{}, fmt.Errorf("worker %q: %v", w.ID, err)
		}
	}
	anchor := panelAnchor(sectionID, n)

	// Left: readings against the band, inside the reference range only.
	rlo, rhi, err := s.Model.Reference().Range(w.Group)
	if err != nil {
		return panelView{}, fmt.Errorf("worker %q: %v", w.ID, err)
	}
	blo, bhi := math.Max(xlo, rlo), math.Min(xhi, rhi)
	var bx []float64
	var bc [5][]float64
	if bhi > blo {
		bx = floats.Span(make([]float64, 41), blo, bhi)
		bc = centilesOver(s, w.Group, bx, covariatesOf(s, w.Rows))
	}
	var elo, ehi []float64
	for _, e := range exp {
		elo, ehi = append(elo, e.Low), append(ehi, e.High)
	}
	ylo, yhi := minMaxFinite(vs, bc[0], bc[4], elo, ehi)
	ypad := 0.06 * (yhi - ylo)
	if !(ypad > 0) {
		ypad = 1
	}
	desc := fmt.Sprintf("%d readings of %s from age %s to %s; %s marked with diamonds; readings outside the central 95%% ringed.",
		len(ts), axis, age(t0), age(t1), "exams where the chart signals are")
	if exp != nil {
		desc += " Green bars: the reading the serial model expected from the worker's earlier exams, with its 95% interval."
	}
	left := newPlot(plotSpec{
		ID:    anchor + "-r",
		Title: fmt.Sprintf("Readings of worker %s against the reference band of group %s", w.ID, groupName(w.Group)),
		Desc:  desc,
		W:     340, H: 210, Left: 50, Right: 8, Top: 10, Bottom: 36,
		XLo: xlo, XHi: xhi, YLo: ylo - ypad, YHi: yhi + ypad,
		XLabel: "age (years)", YLabel: axis, XTicks: 6, YTicks: 5, Class: "chart panel-readings",
	})
	if len(bx) > 1 {
		drawBands(left, bx, bc, false)
	}
	for j, e := range exp {
		left.interval(ts[j], e.Low, e.Value, e.High, key.Expected.Stroke)
	}
	left.line(ts, vs, key.Reading.Stroke, 1.2, "")
	for j := range ts {
		drawMark(left, ts[j], vs[j], key.Reading, 2.6)
	}
	for j := range ts {
		if rule[j] {
			drawMark(left, ts[j], vs[j], key.Rule, 6.5)
		}
		if sig[j] {
			drawMark(left, ts[j], vs[j], key.Signal, 5)
		}
		if out[j] {
			// Around the other marks, so it shows beside a signal too.
			drawMark(left, ts[j], vs[j], key.Outside, 9)
		}
	}
	left.frame()

	// Right: chart statistic against the limit.
	h := s.Limit.H
	slo, shi := minMaxFinite(st)
	slo = math.Min(slo, 0)
	shi = math.Max(shi, h) * 1.08
	right := newPlot(plotSpec{
		ID:    anchor + "-c",
		Title: fmt.Sprintf("Chart statistic of worker %s against the limit", w.ID),
		Desc:  fmt.Sprintf("Chart statistic at each of %d exams; dash-dotted line: the limit h = %s; diamonds: signals.", len(ts), num(h, 4)),
		W:     340, H: 210, Left: 50, Right: 8, Top: 10, Bottom: 36,
		XLo: xlo, XHi: xhi, YLo: slo, YHi: shi,
		XLabel: "age (years)", YLabel: "chart statistic (SD)", XTicks: 6, YTicks: 5, Class: "chart panel-stat",
	})
	right.hline(h, key.Limit.Stroke, 1.6, key.Limit.Dash)
	// The label sits at the right end, where a rising statistic has
	// usually left the limit behind, and flips below the line near the top.
	ly := right.y.at(h) - 4
	if ly < right.plotTop+12 {
		ly = right.y.at(h) + 12
	}
	right.text(right.plotRight-4, ly, "limit h = "+num(h, 3), key.Limit.Stroke, "end", 10)
	right.line(ts, st, key.Statistic.Stroke, 1.6, "")
	for j := range ts {
		if sig[j] {
			drawMark(right, ts[j], st[j], key.Signal, 5)
		} else {
			right.marker(ts[j], st[j], shapeCircle, key.Statistic.Fill, key.Statistic.Stroke, 2.4)
		}
	}
	right.frame()

	return panelView{
		N: n, Anchor: anchor, Worker: w.ID, Caption: panelCaption(s, w, ts, vs, zs, exp),
		Readings: template.HTML(left.end()), Statistic: template.HTML(right.end()),
		Signalled: w.Signalled(), RulesFired: strings.Join(w.RulesFired, ", "),
	}, nil
}

// z975 is Φ⁻¹(0.975): a reading with |z| above it lies outside the
// central 95% of healthy workers of the same age.
var z975 = distuv.UnitNormal.Quantile(0.975)

// panelCaption says why the worker is in the report: ages, the first
// signal, the rules, and at the exam of the first signal how the reading
// compared with the worker's own expected reading.
func panelCaption(s *Section, w *flagged.Worker, ts, vs, zs []float64, exp []screening.Expected) string {
	var cap strings.Builder
	fmt.Fprintf(&cap, "group %s%s · %d exams, ages %s–%s", groupName(w.Group), covariateText(s, w.Rows), len(ts), age(w.First), age(w.Last))
	if w.Signalled() {
		if w.FirstSignal == w.First {
			fmt.Fprintf(&cap, " · first chart signal at age %s, at the first exam", age(w.FirstSignal))
		} else {
			fmt.Fprintf(&cap, " · first chart signal at age %s (%s years after the first exam)", age(w.FirstSignal), num(w.FirstSignal-w.First, 2))
		}
		for j, t := range ts {
			if t != w.FirstSignal || exp == nil {
				continue
			}
			e := exp[j]
			fmt.Fprintf(&cap, "; there the reading %s%s (reference centile %s) was %s SD %s the %s%s this worker's earlier exams led the model to expect",
				num(vs[j], 4), unitSuffix(s), num(100*distuv.UnitNormal.CDF(zs[j]), 3),
				num(math.Abs(zs[j]-e.Z)/e.SD, 2), aboveBelow(zs[j]-e.Z), num(e.Value, 4), unitSuffix(s))
		}
	} else {
		cap.WriteString(" · no chart signal")
	}
	fmt.Fprintf(&cap, " · chart at the latest exam: %s × the limit", num(w.LastRatio, 3))
	if len(w.RulesFired) > 0 {
		fmt.Fprintf(&cap, " · rules fired: %s (first at age %s)", strings.Join(w.RulesFired, ", "), age(w.FirstRule))
	}
	return cap.String()
}

func unitSuffix(s *Section) string {
	if s.Unit == "" {
		return ""
	}
	return " " + s.Unit
}

func aboveBelow(d float64) string {
	if d < 0 {
		return "below"
	}
	return "above"
}

// legendSVG is the key shared by all worker panels of a section; every
// entry is a mark of symbols.Legend.
func legendSVG(id string, s *Section) string {
	key := symbols.Legend
	var b strings.Builder
	b.WriteString(`<svg xmlns="http://www.w3.org/2000/svg" role="img" viewBox="0 0 680 64" class="legend" aria-labelledby="` + esc(id) + `-t" font-family="DejaVu Sans, Helvetica, Arial, sans-serif" font-size="11">`)
	b.WriteString(`<title id="` + esc(id) + `-t">Key to the worker panels</title>`)
	b.WriteString(`<rect x="0" y="0" width="680" height="64" fill="#ffffff"/>`)
	item := func(x, y float64, sym, label string) {
		b.WriteString(`<g transform="translate(` + px(x) + " " + px(y) + `)">` + sym +
			`<text x="24" y="4" fill="#111111">` + esc(label) + `</text></g>`)
	}
	item(6, 12, `<rect x="0" y="-6" width="18" height="12" fill="`+key.Band.Fill+`" fill-opacity="0.45"/><line x1="0" x2="18" y1="0" y2="0" stroke="`+key.Median.Stroke+`" stroke-width="2"/>`,
		"reference median, 10th–90th (dark) and 2.5th–97.5th (light) centile bands")
	item(500, 12, `<line x1="0" x2="18" y1="0" y2="0" stroke="`+key.Reading.Stroke+`" stroke-width="1.2"/><circle cx="9" cy="0" r="2.6" fill="`+key.Reading.Fill+`"/>`, "the worker's readings")
	item(6, 32, `<path d="M9 -5L14 0L9 5L4 0Z" fill="`+key.Signal.Fill+`" stroke="`+key.Signal.Stroke+`" stroke-width="1"/>`, "exam where the chart signals")
	item(220, 32, `<rect x="2.5" y="-6.5" width="13" height="13" fill="none" stroke="`+key.Rule.Stroke+`" stroke-width="1.6"/>`, "exam where a rule fired")
	item(400, 32, `<line x1="0" x2="18" y1="0" y2="0" stroke="`+key.Limit.Stroke+`" stroke-width="1.6" stroke-dasharray="`+key.Limit.Dash+`"/>`, "control limit h")
	item(530, 32, `<line x1="0" x2="18" y1="0" y2="0" stroke="`+key.Statistic.Stroke+`" stroke-width="1.6"/>`, "chart statistic")
	item(6, 52, `<circle cx="9" cy="0" r="4.6" fill="none" stroke="`+key.Outside.Stroke+`" stroke-width="1.6"/><circle cx="9" cy="0" r="2.6" fill="`+key.Reading.Fill+`"/>`,
		"reading outside the central 95%")
	if showExpected(s) {
		item(220, 52, `<line x1="9" x2="9" y1="-6" y2="6" stroke="`+key.Expected.Stroke+`" stroke-width="1.2"/><line x1="5" x2="13" y1="0" y2="0" stroke="`+key.Expected.Stroke+`" stroke-width="2"/>`,
			"the worker's own expected reading from earlier exams, with its 95% interval")
	}
	b.WriteString(`</svg>`)
	return b.String()
}
