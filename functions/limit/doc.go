// Package limit turns a target average time to a false signal into a
// control limit, and computes run lengths and delays.
//
// Exact methods (i.i.d. N(mu,1) charted values at equal gaps): ARL solves the
// run-length integral equation by the Nyström method with Gauss-Legendre
// nodes, with the atom at 0 of reflected charts as an extra unknown (Brook &
// Evans 1972; Crowder 1987), for one-sided CUSUM, one-sided reflected EWMA
// and two-sided EWMA; the two-sided CUSUM is combined from the one-sided
// ARLs (Lucas & Crosier 1982). Solve finds the limit for a target in-control
// ARL by Brent's method. The average time to signal is ATS = ARL x mean gap
// when gaps do not depend on the values.
//
// Several markers: MEWMAARL and SolveMEWMA give the average run length and
// the limit of the multivariate EWMA of Lowry et al. (1992) for i.i.d.
// p-variate normal vectors, in control by Rigdon's (1995a) integral
// equation and out of control by his (1995b) double integral equation
// (solved by GMRES), matching R spc's mewma.arl and mewma.crit to 2e-9
// relative on a 138-row grid (testdata/make_mewma.R; spc's delta is the
// squared Mahalanobis distance, ours the distance itself).
//
// Monte Carlo methods (any stream of exams, e.g. correlated or resampled):
// MonteCarlo.Calibrate simulates paths with common random numbers and a
// fixed seed per path, records each path's running maxima of the chart's
// critical limit, and so knows the first-passage time T(h) for every h at
// once; ATS(h) = mean T(h) is monotone in h and is searched exactly.
// MonteCarlo.Delay simulates the time from a change to the signal.
// CalibrateStat and DelayStat do the same for streams that compute their
// own chart statistic (charts over several markers).
//
// Accuracy and speed (testdata/make_fixtures.R, testdata/time_crit.R, R spc
// 0.6.7 from Debian): the 676-row ARL grid of R spc is matched to within
// 1.3e-5 relative (task bound 0.5%), and the limits of spc's xcusum.crit and
// xewma.crit to 0.5%. Timed back to back on the shared 2-core machine
// (load about 6): Solve takes 0.12-0.13 ms for a one-sided CUSUM limit
// against 0.21-0.34 ms for spc's xcusum.crit (ratio about 0.4-0.6),
// 0.11-0.16 ms two-sided against 0.64-0.97 ms (about 0.2), and 0.53-0.72 ms
// for a two-sided EWMA with lambda 0.1 against 1.7-1.8 ms for xewma.crit
// (about 0.35). Calibrate with the default 4000 paths reaches a Monte Carlo
// SE of about 1.5% of the target; a 1000-year target at 0.5-3-year gaps
// takes 0.2-0.9 s depending on load (package monitor's benchmarks).
package limit
