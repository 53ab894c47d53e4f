// Package refcurve fits and serves reference curves: how a medical marker
// (blood pressure, FEV1, cholesterol, ...) behaves with age in workers who
// stayed healthy, per group (sex, job group), and how far a new exam lies
// from that reference as a standardised score z = (y - mean)/sd.
//
// # Model
//
// Values are first mapped to a working scale by package transform (none,
// log, or Box-Cox with lambda by maximum likelihood, one lambda for all
// groups). On that scale, for each group g:
//
//   - the mean curve μ_g(t) is the local linear kernel regression of the
//     values on time (Fan & Gijbels 1996), with the bandwidth chosen by
//     leave-one-worker-out cross-validation (Rice & Silverman 1991) unless
//     fixed by the caller; see package smooth;
//   - the variance curve σ_g²(t) is the local linear regression of the
//     squared residuals r_i² = (y_i - μ̂_g(t_i))² on time (Fan & Yao 1998,
//     "Efficient estimation of conditional variance functions in
//     stochastic regression", Biometrika 85:645-660), floored at
//     SDFloorShare of the group's mean squared residual so it stays
//     positive (local linear smooths can dip below 0 near the ends). Its
//     bandwidth is also chosen by leave-one-worker-out cross-validation,
//     scored by the Gaussian deviance log v + r²/v rather than squared
//     error (squared residuals are heavy-tailed), and with the
//     one-standard-error rule: the largest bandwidth whose score is within
//     one paired standard error of the best. The deviance is flat over a
//     wide range of bandwidths, and its raw minimum often sits on noise,
//     which shows as a wobbly sd at the ends of the age range;
//   - both curves are stored on an equally spaced grid of GridPoints times
//     from the group's youngest to its oldest exam; lookups between grid
//     points interpolate linearly (the grid step is range/400 by default,
//     ~0.1 year for a working life, far below the bandwidths, so the
//     interpolation error is negligible beside the estimation error).
//
// The valid time range of a group is [first exam, last exam]. Lookups
// outside it are errors unless the caller asks to extrapolate; the curves
// are then held at their end values (constant extrapolation: a local
// linear slope at the very edge is the least reliable part of the fit and
// extending it would invent a trend).
//
// Centiles are answered on the user's scale by mapping μ + Φ⁻¹(p/100)·σ
// back through the transform. Standardised scores z = (T(y) - μ)/σ use the
// transformed value T(y).
//
// # Data policy
//
// Each (worker, time) pair may occur once: a repeated exam at the same
// time is an error naming both rows, since averaging or dropping silently
// would change the reference without the user knowing. A worker may
// appear in several groups (a job change); leave-one-worker-out
// cross-validation is done within each group.
//
// A fitted Model is serialised by Encode to versioned JSON with a content
// hash; Decode verifies format, version and hash. Same data (in any row
// order) and settings give the same model and hash.
//
// Bibliographic details of the cited papers (journal, volume, pages) are
// recalled from memory; the formulas are checked against the outside
// fixtures in the tests.
package refcurve
