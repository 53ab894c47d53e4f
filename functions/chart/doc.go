// Package chart computes control-chart statistics over one worker's
// time-ordered exams: CUSUM (Page 1954) upward, downward or both with
// allowance k, and EWMA (Roberts 1959) with a gap-aware weight
// 1-(1-lambda)^(gap/unit), optionally with a fast-initial-response head start
// (Lucas & Crosier 1982) and a restart after each signal.
//
// The charted values are standardised: Kalman innovations or z-scores, in
// SDs. Run returns, per exam, the upward and downward statistics, the
// statistic compared with the limit and whether it signals; Tracker gives
// the critical limit per exam, used by package limit to calibrate limits by
// simulation.
//
// A signal prompts review by a licensed clinician under local
// occupational-health rules; it is not a diagnosis.
//
// Tests compare Run with the recursions computed independently by numpy
// (testdata/make_fixtures.py).
package chart
