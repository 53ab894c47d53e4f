// Package symbols is veer's one key of chart marks: each mark has one
// shape, one colour and one meaning wherever veer draws it — the HTML
// report, the web add-in's task pane (which reads this key from the
// generated catalog.js) and the highlighting of the sheets veer writes into
// a workbook. A shape or colour is never reused for another meaning.
//
// Colours come from the colour-blind-safe palette of Okabe, M. and Ito, K.
// (2008), "Color Universal Design (CUD): how to make figures and
// presentations that are friendly to colorblind people"; every mark is also
// told apart by its shape or dash pattern.
package symbols

// Okabe–Ito colours.
const (
	Black     = "#000000"
	Orange    = "#E69F00"
	Sky       = "#56B4E9"
	Green     = "#009E73"
	Blue      = "#0072B2"
	Vermilion = "#D55E00"
	Purple    = "#CC79A7"
)

// Mark is one entry of the key.
type Mark struct {
	// Shape is "circle", "ring" (an open circle around a reading),
	// "diamond", "square" (open), "bar" (a tick with a vertical interval),
	// "line" or "band".
	Shape string `json:"shape"`
	// Fill and Stroke are colours ("none" for no fill); Dash an SVG dash
	// pattern ("" for solid).
	Fill   string `json:"fill"`
	Stroke string `json:"stroke"`
	Dash   string `json:"dash,omitempty"`
	// Meaning is the key's text.
	Meaning string `json:"meaning"`
}

// Key holds every mark veer draws.
type Key struct {
	Reading   Mark `json:"reading"`
	Outside   Mark `json:"outside"`
	Signal    Mark `json:"signal"`
	Rule      Mark `json:"rule"`
	Expected  Mark `json:"expected"`
	Statistic Mark `json:"statistic"`
	Limit     Mark `json:"limit"`
	Median    Mark `json:"median"`
	Band      Mark `json:"band"`
	// Flagged is the highlight of flagged rows in the sheets veer writes
	// into a workbook: Fill is the cell fill, Stroke the font colour.
	Flagged Mark `json:"flagged"`
}

// Legend is the key: the one meaning of every mark.
var Legend = Key{
	Reading:   Mark{Shape: "circle", Fill: Black, Stroke: Black, Meaning: "the worker's reading"},
	Outside:   Mark{Shape: "ring", Fill: "none", Stroke: Purple, Meaning: "a reading outside the central 95% of healthy workers of the same age"},
	Signal:    Mark{Shape: "diamond", Fill: Vermilion, Stroke: Black, Meaning: "an exam where the chart signals (its statistic is over the limit)"},
	Rule:      Mark{Shape: "square", Fill: "none", Stroke: Orange, Meaning: "an exam where an alert rule fired"},
	Expected:  Mark{Shape: "bar", Fill: Green, Stroke: Green, Meaning: "the worker's own expected reading from the earlier exams (serial model), with its 95% interval"},
	Statistic: Mark{Shape: "line", Fill: Blue, Stroke: Blue, Meaning: "the chart statistic"},
	Limit:     Mark{Shape: "line", Fill: "none", Stroke: Vermilion, Dash: "9 3 2 3", Meaning: "the control limit h"},
	Median:    Mark{Shape: "line", Fill: "none", Stroke: Blue, Meaning: "the reference median of healthy workers"},
	Band:      Mark{Shape: "band", Fill: Sky, Stroke: "none", Meaning: "the central 80% (darker) and 95% (lighter) of healthy workers"},
	Flagged:   Mark{Shape: "band", Fill: "#FBE3D6", Stroke: "#9C2A00", Meaning: "a flagged worker, or an exam that flags"},
}
