// Package screening joins the pieces of veer into the model a user fits and
// the screening a user runs.
//
// A screening model is a reference model (mean and standard-deviation curves
// over age, per group, from package refcurve) together with the serial
// correlation of healthy workers' standardised residuals (package serial), a
// sample of the reference workers' residual sequences with their exam gaps
// (used by bootstrap limits and as the realistic gap distribution) and the
// mean gap between exams. It is fitted once from rows of workers known to be
// healthy and stored as one versioned, checksummed JSON document.
//
// Screening a sheet of exams follows the dynamic-screening scheme of
// Qiu, P. and Xiang, D. (2014), "Univariate dynamic screening system: an
// approach for identifying individuals with irregular longitudinal behavior",
// Technometrics 56(2), 248–260:
//
//  1. each exam is standardised against the reference at the worker's age,
//     z = (y − μ_g(t)) / σ_g(t) on the model's transformed scale;
//  2. the worker's z sequence, ordered by age, is either whitened by a Kalman
//     filter of the serial model or charted directly (package monitor);
//  3. a CUSUM or EWMA chart runs over it and signals when it crosses the
//     limit h, chosen for a target average time to a false signal.
//
// The package is pure: it reads no files and keeps no globals. Results are in
// the caller's row order. A signal is a prompt for review by a licensed
// clinician under local occupational-health rules, not a diagnosis.
package screening
