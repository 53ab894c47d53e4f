// Package smooth fits smooth curves through scattered (time, value) points:
// local linear kernel regression with a Gaussian kernel, evaluated on an
// equally spaced grid after linear binning, and the choice of its bandwidth
// by leave-one-subject-out cross-validation.
//
// It is the numerical engine under the reference curves of veer (package
// refcurve): the mean of a marker at each age, and the variance around it,
// are both local linear smooths.
//
// # Methods
//
// Local linear regression (Fan & Gijbels 1996, "Local Polynomial Modelling
// and Its Applications", Chapman & Hall, ch. 3) estimates the curve at x as
// the intercept of a weighted least-squares line through the points, with
// weights K((x_i - x)/h) w_i. With the kernel sums
//
//	S_r(x) = Σ_i w_i K((x_i - x)/h) (x_i - x)^r,   r = 0, 1, 2
//	T_r(x) = Σ_i w_i K((x_i - x)/h) (x_i - x)^r y_i, r = 0, 1
//
// the estimate is
//
//	m̂(x) = (S_2 T_0 - S_1 T_1) / (S_0 S_2 - S_1²).
//
// K is the Gaussian kernel K(u) = exp(-u²/2) truncated at |u| = 4 (its
// normalising constant cancels). For speed the data are first linearly
// binned onto the grid (Fan & Marron 1994, "Fast implementations of
// nonparametric curve estimators", J. Comput. Graph. Statist. 3:35-56): a
// point between grid nodes g_k and g_k+1 gives weight (1-r) w to g_k and
// r w to g_k+1, r = (x - g_k)/δ. The kernel sums then become discrete
// convolutions of the binned weights with the kernel tabulated at multiples
// of the grid step δ. This is the same estimator as R KernSmooth's locpoly
// (degree 1, Gaussian kernel, truncation at 4 bandwidths), which the tests
// check grid point by grid point.
//
// The bandwidth is chosen by leave-one-subject-out cross-validation (Rice &
// Silverman 1991, "Estimating the mean and covariance structure
// nonparametrically when the data are curves", J. R. Statist. Soc. B
// 53:233-243): every exam of a subject is predicted from all other
// subjects, so the correlation between a subject's own exams does not pull
// the bandwidth down. See CrossValidate for the fast binned algorithm and
// ChooseBandwidth for the search over bandwidths.
//
// Bibliographic details of the cited papers (journal, volume, pages) are
// recalled from memory; the formulas are checked against the outside
// fixtures in the tests.
package smooth
