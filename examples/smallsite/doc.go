// Package smallsite is the small-site demo scenario: a site of 60 workers
// with no healthy reference cohort of its own, screened against published
// references instead. Everything is synthetic — the site, its workers,
// their readings, and both references, which are invented for the demo and
// must not be used for people.
//
// The site, "Quarrenby Tileworks", an invented maker of ceramic tiles,
// screens its workers' systolic blood pressure (kiln shifts) and lung
// function (glaze and clay dust):
//
//   - SBP against a synthetic LMS table by sex and age (data/sbp-lms.csv,
//     columns group, age, L, M, S; formulas in sbpLMS);
//   - FEV1 against synthetic reference equations in age and height
//     (data/fev1-equations.json, a veer equations document; formulas in
//     FEV1EquationsJSON), in the form of current lung-function equations.
//
// data/exams.csv has one row per exam: worker, sex, age (years, 2
// decimals), height (cm), sbp (mmHg), fev1 (litres, 2 decimals).
// data/truth.csv says which workers drift in which marker and from when.
//
// Generating model. Per worker (own PCG stream from the seed and its
// number): sex female with probability 0.4; height N(164, 6.5²) cm for
// women and N(177, 7²) for men, whole cm, kept within 145–200; first exam
// at an age uniform on 20–55, follow-up uniform on 4–12 years (ending by
// 65), gaps 80% uniform 0.8–1.4 years, 12% missed visits 2–3 years, 8%
// ad-hoc 0.1–0.4 years, at least 3 exams. Each marker's standardised
// residual follows the serial model of package serial (SerialSBP,
// SerialFEV1). With probability 0.15 per marker a worker drifts: from an
// onset 20–50% into the follow-up the residual shifts by a growing amount
// (up for SBP, down for FEV1) that reaches a plateau of 1.0–1.5 SD after
// 2–4 years. A reading is the reference centile at the shifted residual
// (the table's or the equations' L, M, S at the worker's age, and height
// for FEV1), SBP rounded to 1 mmHg and FEV1 to 0.01 L. The site is thus
// exactly described by the published references, as a site whose
// population they fit.
//
// go run ./examples/smallsite/gen rewrites data/ from DefaultSeed byte for
// byte; a test checks that the committed files are what it writes.
package smallsite
