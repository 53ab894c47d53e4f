// Package transform maps marker values to the scale on which veer fits
// its reference curves, and back: none (identity), log, or the Box-Cox
// power transform with its lambda estimated by maximum likelihood.
//
// Skewed markers (triglycerides, blood lead, liver enzymes) are closer to
// normal after a log or power transform; the reference mean and standard
// deviation curves then live on the transformed scale, and centiles are
// mapped back to the user's scale.
//
// Box-Cox (Box & Cox 1964, "An analysis of transformations", J. R. Statist.
// Soc. B 26:211-252):
//
//	z = (y^λ - 1)/λ  (λ ≠ 0),   z = log y  (λ = 0),   y > 0,
//	y = (1 + λz)^(1/λ)  (λ ≠ 0, needs 1 + λz > 0),  y = exp z  (λ = 0).
//
// Bibliographic details of the cited papers (journal, volume, pages) are
// recalled from memory; the formulas are checked against the outside
// fixtures in the tests.
package transform
