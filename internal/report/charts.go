package report

import (
	"fmt"
	"html/template"
	"math"
	"strings"

	"gonum.org/v1/gonum/floats"

	"veer/internal/numeric"
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
				p.band(x, l, h, colSky, op)
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
		p.line(xs, c[0], colBlue, 1, dashOuter)
		p.line(xs, c[4], colBlue, 1, dashOuter)
		p.line(xs, c[1], colBlue, 1, dashInner)
		p.line(xs, c[3], colBlue, 1, dashInner)
	}
	p.line(xs, c[2], colBlue, 2, "")
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
		p.text(p.plotRight+6, ys[k], l, colBlue, "start", 10.5)
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

// workerPanel draws one flagged worker: readings against the group's band,
// and the chart statistic against the limit.
func workerPanel(s *Section, w *workerView, n int, sectionID string) (panelView, error) {
	_, _, axis := markerLabel(s)
	t0 := s.Exams[w.idx[0]].Time
	t1 := s.Exams[w.idx[len(w.idx)-1]].Time
	pad := math.Max(0.5, 0.05*(t1-t0))
	xlo, xhi := t0-pad, t1+pad

	ts := make([]float64, len(w.idx))
	vs := make([]float64, len(w.idx))
	st := make([]float64, len(w.idx))
	sig := make([]bool, len(w.idx))
	rule := make([]bool, len(w.idx))
	for j, i := range w.idx {
		ts[j], vs[j] = s.Exams[i].Time, s.Exams[i].Value
		st[j], sig[j] = s.Results[i].Stat, s.Results[i].Signal
		for _, r := range s.Rules {
			if r.Fired[i] {
				rule[j] = true
			}
		}
	}
	anchor := panelAnchor(sectionID, n)

	// Left: readings against the band, inside the reference range only.
	rlo, rhi, err := s.Model.Reference().Range(w.group)
	if err != nil {
		return panelView{}, fmt.Errorf("worker %q: %v", w.id, err)
	}
	blo, bhi := math.Max(xlo, rlo), math.Min(xhi, rhi)
	var bx []float64
	var bc [5][]float64
	if bhi > blo {
		bx = floats.Span(make([]float64, 41), blo, bhi)
		bc = centilesOver(s, w.group, bx, covariatesOf(s, w.idx))
	}
	ylo, yhi := minMaxFinite(vs, bc[0], bc[4])
	ypad := 0.06 * (yhi - ylo)
	if !(ypad > 0) {
		ypad = 1
	}
	left := newPlot(plotSpec{
		ID:    anchor + "-r",
		Title: fmt.Sprintf("Readings of worker %s against the reference band of group %s", w.id, groupName(w.group)),
		Desc: fmt.Sprintf("%d readings of %s from age %s to %s; exams where the chart signals are marked with diamonds.",
			len(ts), axis, age(t0), age(t1)),
		W: 340, H: 210, Left: 50, Right: 8, Top: 10, Bottom: 36,
		XLo: xlo, XHi: xhi, YLo: ylo - ypad, YHi: yhi + ypad,
		XLabel: "age (years)", YLabel: axis, XTicks: 6, YTicks: 5, Class: "chart panel-readings",
	})
	if len(bx) > 1 {
		drawBands(left, bx, bc, false)
	}
	left.line(ts, vs, colBlack, 1.2, "")
	for j := range ts {
		left.marker(ts[j], vs[j], shapeCircle, colBlack, colBlack, 2.6)
	}
	for j := range ts {
		if rule[j] {
			left.marker(ts[j], vs[j], shapeSquare, "none", colOrange, 5.5)
		}
		if sig[j] {
			left.marker(ts[j], vs[j], shapeDiamond, colVermilion, colBlack, 5)
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
		Title: fmt.Sprintf("Chart statistic of worker %s against the limit", w.id),
		Desc:  fmt.Sprintf("Chart statistic at each of %d exams; dashed line: the limit h = %s; diamonds: signals.", len(ts), num(h, 4)),
		W:     340, H: 210, Left: 50, Right: 8, Top: 10, Bottom: 36,
		XLo: xlo, XHi: xhi, YLo: slo, YHi: shi,
		XLabel: "age (years)", YLabel: "chart statistic (SD)", XTicks: 6, YTicks: 5, Class: "chart panel-stat",
	})
	right.hline(h, colVermilion, 1.6, dashLimit)
	// The label sits at the right end, where a rising statistic has
	// usually left the limit behind, and flips below the line near the top.
	ly := right.y.at(h) - 4
	if ly < right.plotTop+12 {
		ly = right.y.at(h) + 12
	}
	right.text(right.plotRight-4, ly, "limit h = "+num(h, 3), colVermilion, "end", 10)
	right.line(ts, st, colBlue, 1.6, "")
	for j := range ts {
		if sig[j] {
			right.marker(ts[j], st[j], shapeDiamond, colVermilion, colBlack, 5)
		} else {
			right.marker(ts[j], st[j], shapeCircle, colBlue, colBlue, 2.4)
		}
	}
	right.frame()

	var cap strings.Builder
	fmt.Fprintf(&cap, "group %s%s · %d exams, ages %s–%s", groupName(w.group), covariateText(s, w.idx), len(ts), age(t0), age(t1))
	if !math.IsNaN(w.firstSignal) {
		if w.firstSignal == t0 {
			fmt.Fprintf(&cap, " · first chart signal at age %s, at the first exam", age(w.firstSignal))
		} else {
			fmt.Fprintf(&cap, " · first chart signal at age %s (%s years after the first exam)", age(w.firstSignal), num(w.firstSignal-t0, 2))
		}
	} else {
		cap.WriteString(" · no chart signal")
	}
	if len(w.rules) > 0 {
		fmt.Fprintf(&cap, " · rules fired: %s (first at age %s)", strings.Join(w.rules, ", "), age(w.firstRule))
	}
	return panelView{
		N: n, Anchor: anchor, Worker: w.id, Caption: cap.String(),
		Readings: template.HTML(left.end()), Statistic: template.HTML(right.end()),
		Signalled: !math.IsNaN(w.firstSignal), RulesFired: strings.Join(w.rules, ", "),
	}, nil
}

// legendSVG is the key shared by all worker panels of a section.
func legendSVG(id string) string {
	var b strings.Builder
	b.WriteString(`<svg xmlns="http://www.w3.org/2000/svg" role="img" viewBox="0 0 680 44" class="legend" aria-labelledby="` + esc(id) + `-t" font-family="DejaVu Sans, Helvetica, Arial, sans-serif" font-size="11">`)
	b.WriteString(`<title id="` + esc(id) + `-t">Key to the worker panels</title>`)
	b.WriteString(`<rect x="0" y="0" width="680" height="44" fill="#ffffff"/>`)
	item := func(x, y float64, sym, label string) {
		b.WriteString(`<g transform="translate(` + px(x) + " " + px(y) + `)">` + sym +
			`<text x="24" y="4" fill="#111111">` + esc(label) + `</text></g>`)
	}
	item(6, 12, `<rect x="0" y="-6" width="18" height="12" fill="`+colSky+`" fill-opacity="0.45"/><line x1="0" x2="18" y1="0" y2="0" stroke="`+colBlue+`" stroke-width="2"/>`,
		"reference median, 10th–90th (dark) and 2.5th–97.5th (light) centile bands")
	item(500, 12, `<line x1="0" x2="18" y1="0" y2="0" stroke="`+colBlack+`" stroke-width="1.2"/><circle cx="9" cy="0" r="2.6" fill="`+colBlack+`"/>`, "the worker's readings")
	item(6, 32, `<path d="M9 -5L14 0L9 5L4 0Z" fill="`+colVermilion+`" stroke="`+colBlack+`" stroke-width="1"/>`, "exam where the chart signals")
	item(220, 32, `<rect x="3.5" y="-5.5" width="11" height="11" fill="none" stroke="`+colOrange+`" stroke-width="1.6"/>`, "exam where a rule fired")
	item(400, 32, `<line x1="0" x2="18" y1="0" y2="0" stroke="`+colVermilion+`" stroke-width="1.6" stroke-dasharray="`+dashLimit+`"/>`, "control limit h")
	item(530, 32, `<line x1="0" x2="18" y1="0" y2="0" stroke="`+colBlue+`" stroke-width="1.6"/>`, "chart statistic")
	b.WriteString(`</svg>`)
	return b.String()
}
