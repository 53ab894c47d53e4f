// Covariates: a model on reference equations needs, besides age, values
// such as height. Lookups and sheet functions take them as one extra
// range, their last argument: one column per covariate, in the model's
// order, one row per exam (or a single row for every exam).

package catalog

import (
	"math"
	"strings"

	"veer/functions/cell"
	"veer/functions/screening"
)

// covariatesParam is the optional last parameter of the lookups and sheet
// functions.
func covariatesParam() cell.Param {
	return cell.Param{Name: "covariates", Type: cell.TypeRange, Optional: true,
		Help: "for a model on reference equations: its covariates besides age (e.g. height), one column each in the order VEER.INFO lists them, one row per exam or a single row for all"}
}

// covariatesArg reads argument i as the covariates of n rows for model m:
// cov[k][r] is covariate k of row r, NaN for a blank or error cell (the row
// then answers #N/A when the reference needs it). nil when the model uses
// no covariates. A model without covariates given some, the wrong number of
// columns or rows, or text in a cell fail the call.
func covariatesArg(a cell.Args, i int, m *screening.Model, n int) ([][]float64, error) {
	names := m.Reference().Covariates()
	if a.Missing(i) {
		if len(names) == 0 {
			return nil, nil
		}
		cov := make([][]float64, len(names))
		for k := range cov {
			cov[k] = nanColumn(n)
		}
		return cov, nil
	}
	if len(names) == 0 {
		return nil, cell.WrongArgument.Errorf("%s: this model's reference uses no covariates besides age; leave the argument out", a.Func().ArgName(i))
	}
	rows, cols := a.Value(i).Dims()
	if cols != len(names) {
		return nil, cell.WrongArgument.Errorf("%s has %d columns; give one column per covariate of the model (%s)", a.Func().ArgName(i), cols, strings.Join(names, ", "))
	}
	if rows != n && rows != 1 {
		return nil, cell.WrongArgument.Errorf("%s has %d rows but there are %d rows of exams; give one row per exam or a single row for all", a.Func().ArgName(i), rows, n)
	}
	cells := a.Range(i)
	cov := make([][]float64, len(names))
	for k := range cov {
		cov[k] = make([]float64, n)
		for r := range n {
			c := cells[0][k]
			if rows == n {
				c = cells[r][k]
			}
			switch c.Kind {
			case cell.KindNumber:
				cov[k][r] = c.Num
			case cell.KindBlank, cell.KindError:
				cov[k][r] = math.NaN()
			default:
				return nil, cell.WrongArgument.Errorf("%s, row %d, column %d (%s): expected a number; got %s", a.Func().ArgName(i), r+1, k+1, names[k], c)
			}
		}
	}
	return cov, nil
}

func nanColumn(n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = math.NaN()
	}
	return out
}

// covRow returns row r of cov into buf (nil when there are no covariates).
func covRow(cov [][]float64, r int, buf []float64) []float64 {
	if cov == nil {
		return nil
	}
	buf = buf[:0]
	for _, c := range cov {
		buf = append(buf, c[r])
	}
	return buf
}
