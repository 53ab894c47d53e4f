// Package serial models the serial correlation of a worker's standardised
// residuals at irregular exam times and whitens them.
//
// Model (the "persistent part plus measurement noise" decomposition of
// longitudinal data; continuous-time AR(1) at unequal spacing as in Jones &
// Boadi-Boateng 1991, Biometrics 47):
//
//	e(t) = s(t) + w(t),  corr(s(t), s(t+d)) = phi^d,  var s = c,  var w = 1 - c,
//
// so two exams d years apart correlate c*phi^d and e is N(0,1) marginally.
//
// Estimate fits phi and c to reference workers by maximum pairwise
// likelihood with worker-level sandwich standard errors, and tests for no
// correlation between consecutive exams. It reads the pairs of exams a few
// times (to check and test, to bin them by gap, and for one or two exact
// Newton steps); the search itself runs on the binned sums, whose size does
// not grow with the number of pairs. Filter and Innovations give the Kalman
// innovations, i.i.d. N(0,1) for a healthy worker at any gaps; Simulate
// draws healthy workers; Diagnose checks the reference innovations (mean,
// SD, lag-1 correlation and D'Agostino-Pearson normality, with p-values).
//
// Tests check the innovations against Cholesky whitening, the estimate
// against scipy.optimize (inside the parameter space and at its edge), the
// sandwich standard errors against numpy central differences, and the
// p-values against scipy.stats (testdata/make_fixtures.py); they recover
// phi and c from simulated workers with known truth (no correlation, phi
// near 0 and near 1, no noise, few pairs), and check the derivatives, the
// binning error, row-order independence and cancellation.
package serial
