// Package published serves published references — centile tables in the
// LMS form and reference equations with covariates such as height — for
// sites that have no healthy reference cohort of their own to fit curves
// from, and estimates the serial model of package serial from the
// workforce's own repeated exams instead.
//
// # The LMS distribution
//
// A reference gives, at each age (and covariates), the three parameters
// of the LMS method of Cole, T. J. and Green, P. J. (1992), "Smoothing
// reference centile curves: the LMS method and penalized likelihood",
// Statistics in Medicine 11, 1305–1319: L the Box-Cox power, M the median
// and S the coefficient of variation. A reading y has the standard normal
// deviate
//
//	z = ((y/M)^L − 1) / (L·S)   (L ≠ 0),      z = ln(y/M) / S   (L = 0),
//
// and the centile with deviate z (the c-th centile has z = Φ⁻¹(c/100)) is
//
//	M·(1 + L·S·z)^(1/L)   (L ≠ 0),      M·exp(S·z)   (L = 0).
//
// With L ≠ 1 readings must be positive; where 1 + L·S·z ≤ 0 the centile
// does not exist (the Box-Cox normal distribution is truncated there).
// The formulas are checked against R's VGAM (qlms.bcn, and plnorm for
// L = 0) in testdata/make_fixtures.R.
//
// # LMS tables
//
// NewTable takes rows of group, age, L, M and S, one per group and age,
// at any spacing. Between ages L, M and S are interpolated linearly in
// age (the default; see Linear for why) or by a monotone cubic (Cubic).
// The valid ages of a group are its first to last row. Outside them a
// lookup is an error unless extrapolation is asked for; then L, M and S
// are held at the nearest end, the rule package refcurve applies to fitted
// curves.
//
// # Reference equations
//
// Current lung-function equations give each parameter as a sum of
// coefficient × term in age and height, plus a spline in age read from a
// lookup table, on a log scale for M and S. An equations document (JSON,
// decoded by DecodeEquations, written by Reference.Encode) says exactly
// that, per group:
//
//	{
//	  "format": "veer.equations", "version": 1,
//	  "name": "...", "source": "...", "marker": "fev1", "unit": "L",
//	  "form": "lms",                       // or "mean-sd"
//	  "interpolation": "linear",           // or "cubic"; for lookups
//	  "covariates": [{"name": "height", "unit": "cm", "min": 130, "max": 210}],
//	  "groups": [
//	    {"group": "female", "age_min": 18, "age_max": 80,
//	     "L": {"terms": [{"term": "1", "coef": 1.1}]},
//	     "M": {"link": "log", "terms": [
//	            {"term": "1", "coef": -10.2}, {"term": "ln(height)", "coef": 2.1},
//	            {"term": "ln(age)", "coef": -0.05}]},
//	     "S": {"link": "log", "terms": [{"term": "1", "coef": -2.1}]},
//	     "lookup": {"columns": ["age", "M", "S"],
//	                "rows": [[18, 0.01, 0.02], [19, 0.012, 0.019], ...]}}
//	  ]
//	}
//
// Each parameter p of the form (L, M, S for "lms"; mean, sd for "mean-sd")
// is
//
//	p = link⁻¹( Σ coef·term(age, covariates) + lookup_p(age) )
//
// with link "identity" (the default) or "log" (p = exp(...)). A term is
// "1", a variable (age or a declared covariate), ln(variable), a whole
// power of either from −4 to 4 (age^2, ln(age)^2, height^-1), or a
// product of up to four such factors (age*height). lookup_p is the
// interpolated value of the lookup's column p (0 when the lookup has no
// such column); a parameter needs terms, a lookup column or both. The
// valid ages are age_min to age_max, which default to the lookup's first
// and last age and must lie within them. A covariate's min and max, when
// given, bound where the equations are valid: outside them, as outside the
// ages, a lookup is an error unless extrapolation is asked for, and then
// the value is held at the nearest end of its range. A covariate a
// group's terms use must be given for every exam. With form "mean-sd",
// the reading is normal with that mean and SD (L = 1, M = mean, S =
// SD/mean).
//
// When the file is read, each group is evaluated over its ages (and the
// ends and middle of declared covariate ranges), so coefficients that make
// M or S non-positive somewhere are refused then, not mid-screening.
//
// # The serial model without a reference cohort
//
// EstimateSerial estimates phi and c of package serial from the
// workforce's own z against the published reference, optionally leaving
// out the workers a first screening pass flags; SetSerial takes them from
// the user. Either way the model is an assumption a reviewer should know
// about: estimated from the people being screened, or set by hand.
//
// # Errors
//
// Problems with the user's table or document are *InputError values
// (several in *InputErrors) naming the row and column (or group, parameter
// and lookup row, or the line and column of a syntax error); lookups fail
// with refcurve's *RangeError (an age) and *GroupError, *RangeError (a
// covariate), *CovariateError, *ParamsError and
// *ReadingError. All wrap the sentinels of errors.go, for errors.Is.
//
// The package is pure: it reads no files and keeps no globals.
// Bibliographic details of the cited papers are recalled from memory; the
// formulas are checked against outside fixtures in the tests. References
// loaded from publications should be checked against a few values printed
// in the publication before use. A signal from screening against any
// reference is a prompt for review by a licensed clinician under local
// occupational-health rules, not a diagnosis.
package published
