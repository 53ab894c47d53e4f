// Package numeric holds the one numeric check that several packages share and
// that neither the standard library nor gonum provides.
package numeric

import "math"

// Finite reports whether x is an ordinary number: neither NaN nor an
// infinity. Spreadsheet cells, model files and reports hold only such
// numbers.
func Finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }
