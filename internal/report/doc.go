// Package report writes veer's screening report: one self-contained HTML
// file (inline CSS and inline SVG, no scripts, no external assets) that an
// occupational-health officer can open in any browser, hand to a reviewer or
// print on A4.
//
// For each screened marker the report shows the reference curves and bands
// of every group (median and the 2.5–97.5 and 10–90 centile bands over the
// reference age range), the model diagnostics, the control limit and what it
// means in plain words, one panel per flagged worker and a summary table of
// workers. "Flagged" is package flagged's one definition (a chart signal, or
// a rule of severity high). Panels and table come in flagged.ByUrgency
// order (the largest chart statistic relative to the limit at the latest
// exam first), capped at MaxPanels, or are the workers Data.Workers
// chooses. A panel shows why its worker was flagged: the readings against
// the group's band, readings outside the central 95% ringed, the reading
// the serial model expected from the worker's earlier exams
// (screening.Model.ExpectedLevels) and the chart statistic against the
// limit, with the marks of symbols.Legend.
//
// The charts are hand-written SVG (see svg.go): no Go plotting library in the
// module's dependencies emits inline SVG that fits this layout, and adding
// one for a few line-and-band charts would cost more than it saves.
//
// Colours and shapes are those of package symbols (one meaning per mark,
// shared with the task pane and the workbooks), from the colour-blind-safe
// palette of Okabe & Ito (2008); every series is also told apart by dash
// pattern or marker shape and by a text label.
//
// Screening is an aid: every report says that a signal prompts review by a
// licensed clinician under local occupational-health rules and is not a
// diagnosis.
package report
