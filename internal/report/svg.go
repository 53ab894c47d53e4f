package report

import (
	"html"
	"math"
	"strconv"
	"strings"

	"veer/internal/numeric"
)

// Colours of the frame; the marks' colours are those of symbols.Legend.
const (
	colGrid = "#d9d9d9"
	colAxis = "#444444"
)

// Dash patterns of the reference centiles, so series differ without colour.
const (
	dashOuter = "7 4" // 2.5th and 97.5th centiles
	dashInner = "2 3" // 10th and 90th centiles
)

// linScale maps a data interval onto a pixel interval.
type linScale struct{ d0, d1, r0, r1 float64 }

func (s linScale) at(v float64) float64 {
	if s.d1 == s.d0 {
		return (s.r0 + s.r1) / 2
	}
	return s.r0 + (v-s.d0)/(s.d1-s.d0)*(s.r1-s.r0)
}

// niceNum returns a "nice" number (1, 2 or 5 times a power of ten) close to
// x, rounding when round is true and taking the ceiling otherwise. This is
// the loose-labelling method of Heckbert, P. S. (1990), "Nice numbers for
// graph labels", Graphics Gems, 61–63.
func niceNum(x float64, round bool) float64 {
	if !(x > 0) {
		return 1
	}
	e := math.Floor(math.Log10(x))
	f := x / math.Pow(10, e)
	var nf float64
	if round {
		switch {
		case f < 1.5:
			nf = 1
		case f < 3:
			nf = 2
		case f < 7:
			nf = 5
		default:
			nf = 10
		}
	} else {
		switch {
		case f <= 1:
			nf = 1
		case f <= 2:
			nf = 2
		case f <= 5:
			nf = 5
		default:
			nf = 10
		}
	}
	return nf * math.Pow(10, e)
}

// niceTicks returns about n tick values covering [lo, hi] by Heckbert's
// loose labelling: step d = nice(nice(hi−lo)/(n−1)), first tick
// floor(lo/d)·d, last ceil(hi/d)·d. The returned ticks extend the interval
// to whole steps.
func niceTicks(lo, hi float64, n int) []float64 {
	if n < 2 {
		n = 2
	}
	if !(hi > lo) {
		d := math.Max(math.Abs(lo)*0.1, 1)
		lo, hi = lo-d, hi+d
	}
	r := niceNum(hi-lo, false)
	d := niceNum(r/float64(n-1), true)
	start := math.Floor(lo/d) * d
	end := math.Ceil(hi/d) * d
	var out []float64
	for k := 0; ; k++ {
		v := start + float64(k)*d
		if v > end+d/2 || k > 100 {
			break
		}
		// Snap to the step's precision so labels read 0.3, not 0.30000000000000004.
		out = append(out, math.Round(v/d)*d)
	}
	return out
}

// tickLabel formats a tick with as many decimals as the step needs.
func tickLabel(v float64, ticks []float64) string {
	dec := 0
	if len(ticks) > 1 {
		step := math.Abs(ticks[1] - ticks[0])
		if step > 0 && step < 1 {
			dec = int(math.Ceil(-math.Log10(step) - 1e-9))
		}
	}
	if v == 0 {
		v = 0 // no "-0"
	}
	return strconv.FormatFloat(v, 'f', dec, 64)
}

// px formats a pixel coordinate.
func px(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

// esc escapes text for SVG (XML) and HTML alike.
func esc(s string) string { return html.EscapeString(s) }

// plot is one SVG chart under construction: a plotting area with axes,
// grid, ticks and labels, onto which series are drawn.
type plot struct {
	b          strings.Builder
	w, h       float64
	x, y       linScale
	xTicks     []float64
	yTicks     []float64
	clipID     string
	plotLeft   float64
	plotRight  float64
	plotTop    float64
	plotBottom float64
}

// plotSpec describes the frame of a chart.
type plotSpec struct {
	ID                       string // unique within the page; used for the clip path and title
	Title                    string // accessible title (also shown as a tooltip)
	Desc                     string // accessible description
	W, H                     float64
	Left, Right, Top, Bottom float64 // margins
	XLo, XHi, YLo, YHi       float64
	XLabel, YLabel           string
	XTicks, YTicks           int // wanted tick counts
	Class                    string
}

func newPlot(s plotSpec) *plot {
	p := &plot{w: s.W, h: s.H, clipID: s.ID + "-clip"}
	p.xTicks = niceTicks(s.XLo, s.XHi, s.XTicks)
	p.yTicks = niceTicks(s.YLo, s.YHi, s.YTicks)
	// The x axis keeps the data range (ages are read against it); only
	// ticks inside it are drawn. The y axis extends to whole ticks.
	xlo, xhi := s.XLo, s.XHi
	if !(xhi > xlo) {
		xlo, xhi = p.xTicks[0], p.xTicks[len(p.xTicks)-1]
	}
	ylo, yhi := p.yTicks[0], p.yTicks[len(p.yTicks)-1]
	p.plotLeft, p.plotRight = s.Left, s.W-s.Right
	p.plotTop, p.plotBottom = s.Top, s.H-s.Bottom
	p.x = linScale{xlo, xhi, p.plotLeft, p.plotRight}
	p.y = linScale{ylo, yhi, p.plotBottom, p.plotTop}

	b := &p.b
	b.WriteString(`<svg xmlns="http://www.w3.org/2000/svg" role="img" viewBox="0 0 `)
	b.WriteString(px(s.W) + " " + px(s.H) + `"`)
	if s.Class != "" {
		b.WriteString(` class="` + esc(s.Class) + `"`)
	}
	b.WriteString(` aria-labelledby="` + esc(s.ID) + `-t ` + esc(s.ID) + `-d" font-family="DejaVu Sans, Helvetica, Arial, sans-serif" font-size="11">`)
	b.WriteString(`<title id="` + esc(s.ID) + `-t">` + esc(s.Title) + `</title>`)
	b.WriteString(`<desc id="` + esc(s.ID) + `-d">` + esc(s.Desc) + `</desc>`)
	b.WriteString(`<defs><clipPath id="` + esc(p.clipID) + `"><rect x="` + px(p.plotLeft) + `" y="` + px(p.plotTop) +
		`" width="` + px(p.plotRight-p.plotLeft) + `" height="` + px(p.plotBottom-p.plotTop) + `"/></clipPath></defs>`)
	b.WriteString(`<rect x="0" y="0" width="` + px(s.W) + `" height="` + px(s.H) + `" fill="#ffffff"/>`)
	// Grid and ticks.
	b.WriteString(`<g stroke="` + colGrid + `" stroke-width="0.7">`)
	for _, t := range p.yTicks {
		y := p.y.at(t)
		b.WriteString(`<line x1="` + px(p.plotLeft) + `" x2="` + px(p.plotRight) + `" y1="` + px(y) + `" y2="` + px(y) + `"/>`)
	}
	for _, t := range p.xTicks {
		if t < xlo-1e-9 || t > xhi+1e-9 {
			continue
		}
		x := p.x.at(t)
		b.WriteString(`<line x1="` + px(x) + `" x2="` + px(x) + `" y1="` + px(p.plotTop) + `" y2="` + px(p.plotBottom) + `"/>`)
	}
	b.WriteString(`</g>`)
	b.WriteString(`<g fill="` + colAxis + `">`)
	for _, t := range p.yTicks {
		b.WriteString(`<text x="` + px(p.plotLeft-5) + `" y="` + px(p.y.at(t)+3.5) + `" text-anchor="end">` + esc(tickLabel(t, p.yTicks)) + `</text>`)
	}
	for _, t := range p.xTicks {
		if t < xlo-1e-9 || t > xhi+1e-9 {
			continue
		}
		b.WriteString(`<text x="` + px(p.x.at(t)) + `" y="` + px(p.plotBottom+14) + `" text-anchor="middle">` + esc(tickLabel(t, p.xTicks)) + `</text>`)
	}
	b.WriteString(`<text x="` + px((p.plotLeft+p.plotRight)/2) + `" y="` + px(s.H-5) + `" text-anchor="middle" font-size="12">` + esc(s.XLabel) + `</text>`)
	cy := (p.plotTop + p.plotBottom) / 2
	b.WriteString(`<text x="12" y="` + px(cy) + `" text-anchor="middle" font-size="12" transform="rotate(-90 12 ` + px(cy) + `)">` + esc(s.YLabel) + `</text>`)
	b.WriteString(`</g>`)
	return p
}

// path returns an SVG path through the finite points (xs[i], ys[i]); a
// non-finite value breaks the line.
func (p *plot) path(xs, ys []float64) string {
	var b strings.Builder
	pen := false
	for i := range xs {
		if !numeric.Finite(xs[i]) || !numeric.Finite(ys[i]) {
			pen = false
			continue
		}
		if pen {
			b.WriteString("L")
		} else {
			b.WriteString("M")
			pen = true
		}
		b.WriteString(px(p.x.at(xs[i])) + " " + px(p.y.at(ys[i])))
	}
	return b.String()
}

// band fills the area between lo and hi over xs.
func (p *plot) band(xs, lo, hi []float64, fill string, opacity float64) {
	var b strings.Builder
	for i := range xs {
		if i == 0 {
			b.WriteString("M")
		} else {
			b.WriteString("L")
		}
		b.WriteString(px(p.x.at(xs[i])) + " " + px(p.y.at(hi[i])))
	}
	for i := len(xs) - 1; i >= 0; i-- {
		b.WriteString("L" + px(p.x.at(xs[i])) + " " + px(p.y.at(lo[i])))
	}
	b.WriteString("Z")
	p.b.WriteString(`<path clip-path="url(#` + esc(p.clipID) + `)" d="` + b.String() + `" fill="` + fill +
		`" fill-opacity="` + strconv.FormatFloat(opacity, 'f', 2, 64) + `" stroke="none"/>`)
}

// line draws a polyline with an optional dash pattern.
func (p *plot) line(xs, ys []float64, stroke string, width float64, dash string) {
	d := p.path(xs, ys)
	if d == "" {
		return
	}
	p.b.WriteString(`<path clip-path="url(#` + esc(p.clipID) + `)" d="` + d + `" fill="none" stroke="` + stroke +
		`" stroke-width="` + strconv.FormatFloat(width, 'f', 1, 64) + `" stroke-linejoin="round"`)
	if dash != "" {
		p.b.WriteString(` stroke-dasharray="` + dash + `"`)
	}
	p.b.WriteString(`/>`)
}

// Marker shapes.
const (
	shapeCircle  = "circle"
	shapeDiamond = "diamond"
	shapeSquare  = "square" // open square, drawn around a point
	shapeRing    = "ring"   // open circle, drawn around a point
	// shapeTriangle is a filled triangle pointing up: the evaluation's
	// baseline, outside the key of symbols.
	shapeTriangle = "triangle"
)

// marker draws one marker at data point (x, y).
func (p *plot) marker(x, y float64, shape, fill, stroke string, r float64) {
	if !numeric.Finite(x) || !numeric.Finite(y) {
		return
	}
	cx, cy := p.x.at(x), p.y.at(y)
	switch shape {
	case shapeDiamond:
		p.b.WriteString(`<path d="M` + px(cx) + " " + px(cy-r) + "L" + px(cx+r) + " " + px(cy) + "L" + px(cx) + " " + px(cy+r) +
			"L" + px(cx-r) + " " + px(cy) + `Z" fill="` + fill + `" stroke="` + stroke + `" stroke-width="1"/>`)
	case shapeTriangle:
		p.b.WriteString(`<path d="M` + px(cx) + " " + px(cy-r) + "L" + px(cx+r) + " " + px(cy+0.8*r) + "L" + px(cx-r) + " " + px(cy+0.8*r) +
			`Z" fill="` + fill + `" stroke="` + stroke + `" stroke-width="1"/>`)
	case shapeRing:
		p.b.WriteString(`<circle cx="` + px(cx) + `" cy="` + px(cy) + `" r="` + px(r) + `" fill="none" stroke="` + stroke + `" stroke-width="1.6"/>`)
	case shapeSquare:
		p.b.WriteString(`<rect x="` + px(cx-r) + `" y="` + px(cy-r) + `" width="` + px(2*r) + `" height="` + px(2*r) +
			`" fill="none" stroke="` + stroke + `" stroke-width="1.6"/>`)
	default:
		p.b.WriteString(`<circle cx="` + px(cx) + `" cy="` + px(cy) + `" r="` + px(r) + `" fill="` + fill + `" stroke="` + stroke + `" stroke-width="1"/>`)
	}
}

// interval draws a vertical bar from lo to hi at x with a tick at mid
// (a value and its interval); non-finite ends are left out.
func (p *plot) interval(x, lo, mid, hi float64, stroke string) {
	if !numeric.Finite(x) {
		return
	}
	cx := p.x.at(x)
	if numeric.Finite(lo) && numeric.Finite(hi) {
		p.b.WriteString(`<line clip-path="url(#` + esc(p.clipID) + `)" x1="` + px(cx) + `" x2="` + px(cx) + `" y1="` + px(p.y.at(lo)) + `" y2="` + px(p.y.at(hi)) +
			`" stroke="` + stroke + `" stroke-width="1.2" stroke-opacity="0.8"/>`)
	}
	if numeric.Finite(mid) {
		y := p.y.at(mid)
		p.b.WriteString(`<line clip-path="url(#` + esc(p.clipID) + `)" x1="` + px(cx-4) + `" x2="` + px(cx+4) + `" y1="` + px(y) + `" y2="` + px(y) +
			`" stroke="` + stroke + `" stroke-width="2"/>`)
	}
}

// hline draws a horizontal line at data value y across the plot.
func (p *plot) hline(y float64, stroke string, width float64, dash string) {
	yy := p.y.at(y)
	p.b.WriteString(`<line x1="` + px(p.plotLeft) + `" x2="` + px(p.plotRight) + `" y1="` + px(yy) + `" y2="` + px(yy) +
		`" stroke="` + stroke + `" stroke-width="` + strconv.FormatFloat(width, 'f', 1, 64) + `"`)
	if dash != "" {
		p.b.WriteString(` stroke-dasharray="` + dash + `"`)
	}
	p.b.WriteString(`/>`)
}

// text writes a label at pixel position (x, y).
func (p *plot) text(x, y float64, s, fill, anchor string, size float64) {
	p.b.WriteString(`<text x="` + px(x) + `" y="` + px(y) + `" fill="` + fill + `" text-anchor="` + anchor + `"`)
	if size > 0 {
		p.b.WriteString(` font-size="` + strconv.FormatFloat(size, 'f', 1, 64) + `"`)
	}
	// A white halo keeps the label readable over lines and bands.
	p.b.WriteString(` stroke="#ffffff" stroke-width="3" stroke-linejoin="round" paint-order="stroke">` + esc(s) + `</text>`)
}

// frame draws the plot border; call after the series so it stays on top.
func (p *plot) frame() {
	p.b.WriteString(`<rect x="` + px(p.plotLeft) + `" y="` + px(p.plotTop) + `" width="` + px(p.plotRight-p.plotLeft) +
		`" height="` + px(p.plotBottom-p.plotTop) + `" fill="none" stroke="` + colAxis + `" stroke-width="1"/>`)
}

// end closes the SVG and returns it.
func (p *plot) end() string {
	p.b.WriteString(`</svg>`)
	return p.b.String()
}

// spreadLabels moves label positions (pixel y, any order) apart so that
// neighbours are at least gap pixels apart, keeping them inside [lo, hi].
// It returns the new positions in the input order.
func spreadLabels(ys []float64, gap, lo, hi float64) []float64 {
	n := len(ys)
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	// insertion sort by y (n is tiny)
	for i := 1; i < n; i++ {
		for j := i; j > 0 && ys[idx[j]] < ys[idx[j-1]]; j-- {
			idx[j], idx[j-1] = idx[j-1], idx[j]
		}
	}
	out := append([]float64(nil), ys...)
	for k := 1; k < n; k++ {
		if out[idx[k]] < out[idx[k-1]]+gap {
			out[idx[k]] = out[idx[k-1]] + gap
		}
	}
	if n > 0 && out[idx[n-1]] > hi {
		out[idx[n-1]] = hi
		for k := n - 2; k >= 0; k-- {
			if out[idx[k]] > out[idx[k+1]]-gap {
				out[idx[k]] = out[idx[k+1]] - gap
			}
		}
	}
	if n > 0 && out[idx[0]] < lo {
		out[idx[0]] = lo
	}
	return out
}
