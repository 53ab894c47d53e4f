// Package report writes veer's screening report: one self-contained HTML
// file (inline CSS and inline SVG, no scripts, no external assets) that an
// occupational-health officer can open in any browser, hand to a reviewer or
// print on A4.
//
// For each screened marker the report shows the reference curves and bands
// of every group (median and the 2.5–97.5 and 10–90 centile bands over the
// reference age range), the model diagnostics, the control limit and what it
// means in plain words, one panel per flagged worker (readings against the
// group's band, chart statistic against the limit, signals marked; capped,
// in order of first signal) and a summary table of workers.
//
// The charts are hand-written SVG (see svg.go): no Go plotting library in the
// module's dependencies emits inline SVG that fits this layout, and adding
// one for a few line-and-band charts would cost more than it saves.
//
// Colours come from the colour-blind-safe palette of Okabe, M. and Ito, K.
// (2008), "Color Universal Design (CUD): how to make figures and
// presentations that are friendly to colorblind people"; every series is
// also told apart by dash pattern or marker shape and by a text label.
//
// Screening is an aid: every report says that a signal prompts review by a
// licensed clinician under local occupational-health rules and is not a
// diagnosis.
package report
