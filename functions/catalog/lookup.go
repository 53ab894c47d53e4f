// Lookups: VEER.REFMEAN, VEER.REFSD, VEER.CENTILE and VEER.ZSCORE answer
// row by row through one loop (lookupRows).

package catalog

import (
	"context"
	"math"

	"veer/functions/cell"
	"veer/functions/refcurve"
	"veer/functions/screening"
)

var lookupOptions = []string{cell.OptionExtrapolate, cell.OptionReach}

// lookupFailures are the failures a lookup answers in the row they concern.
var lookupFailures = []cell.Failure{cell.BlankInput, cell.UnknownGroup, cell.OutsideReference}

// isScalarArgs reports whether every given argument is a single cell, so the
// answer is one value rather than a column.
func isScalarArgs(a cell.Args, idx ...int) bool {
	for _, i := range idx {
		if a.Missing(i) {
			continue
		}
		if r, c := a.Value(i).Dims(); r*c != 1 {
			return false
		}
	}
	return true
}

// groupsArg returns the groups per row: a column of n, a single group for
// all rows, or "" when the argument is missing.
func groupsArg(a cell.Args, i, n int) ([]string, error) {
	out := make([]string, n)
	if a.Missing(i) {
		return out, nil
	}
	g, err := a.Texts(i, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	switch len(g) {
	case n:
		return g, nil
	case 1:
		for k := range out {
			out[k] = g[0]
		}
		return out, nil
	}
	return nil, cell.WrongArgument.Errorf("%s has %d cells but there are %d rows; give one group per row or a single group", a.Func().ArgName(i), len(g), n)
}

// lookupRows is the one per-row loop of VEER.REFMEAN, VEER.REFSD,
// VEER.CENTILE and VEER.ZSCORE: for every row of ages (and values, when
// given) it answers at(group, age, value), or the row's error. A blank age
// or reading is #N/A in its row; other failures get the code of their kind
// (rowError). scalar: every argument was a single cell, so the answer is
// one value and its error fails the cell.
type lookupRows struct {
	m          *screening.Model
	ages       []float64
	values     []float64 // nil: no readings
	groups     []string
	cov        [][]float64 // covariates per column, nil without
	groupGiven bool
	scalar     bool
}

// within checks that age t of group g lies inside the reference range or
// within reach years of it (a *refcurve.RangeError carrying the reach
// otherwise; an unknown group is left to the lookup to report).
func (l lookupRows) within(g string, t, reach float64) error {
	lo, hi, err := l.m.Reference().Range(g)
	if err != nil {
		return nil
	}
	return refcurve.Outside(g, t, lo, hi, reach)
}

// answer answers at(group, age, value, covariates) for every row, ages up
// to reach years outside the reference range included.
func (l lookupRows) answer(reach float64, at func(group string, age, value float64, cov []float64) (float64, error)) (any, error) {
	out := make([]any, len(l.ages))
	var buf []float64
	for i, t := range l.ages {
		y := math.NaN()
		if l.values != nil {
			y = l.values[i]
		}
		switch {
		case l.values != nil && (math.IsNaN(t) || math.IsNaN(y)):
			out[i] = cell.BlankInput.Errorf("row %d: the age or the reading is blank", i+1)
			continue
		case math.IsNaN(t):
			out[i] = cell.BlankInput.Errorf("row %d: the age is blank", i+1)
			continue
		}
		buf = covRow(l.cov, i, buf)
		var v float64
		err := l.within(l.groups[i], t, reach)
		if err == nil {
			v, err = at(l.groups[i], t, y, buf)
		}
		if err != nil {
			out[i] = rowError(err, rowLabel(len(l.ages), i), l.groupGiven)
			continue
		}
		out[i] = v
	}
	return single(out, l.scalar)
}

// lookupLayout says where a lookup's arguments are: the model is argument
// 0 and the ages argument 1 in every lookup; values is -1 when the lookup
// takes no readings. The covariates follow the options.
type lookupLayout struct {
	values, groups, options int
}

// Layouts of the lookups.
var (
	meanLayout    = lookupLayout{values: -1, groups: 2, options: 3} // VEER.REFMEAN, VEER.REFSD
	centileLayout = lookupLayout{values: -1, groups: 3, options: 4} // VEER.CENTILE (p is argument 2)
	zLayout       = lookupLayout{values: 2, groups: 3, options: 4}  // VEER.ZSCORE
)

// lookupParams are the parameters every lookup ends with: groups, options
// and covariates.
func lookupParams(groupHelp string) []cell.Param {
	return []cell.Param{
		{Name: "groups", Type: cell.TypeRange, Optional: true, Help: groupHelp},
		{Name: "options", Type: cell.TypeAny, Optional: true, Help: "extrapolate=true to answer ages up to 5 years (reach=YEARS: that many) and covariates outside the reference range from its nearest end"},
		covariatesParam(),
	}
}

// lookupArgs reads the model, ages, readings, groups and options of a
// lookup laid out as at.
func lookupArgs(ctx context.Context, env cell.Env, a cell.Args, at lookupLayout) (lookupRows, cell.Options, error) {
	var l lookupRows
	m, _, err := modelArg(ctx, env, a, 0)
	if err != nil {
		return l, cell.Options{}, err
	}
	l.m = m
	if l.ages, err = a.Numbers(1, cell.PolicyMissing); err != nil {
		return l, cell.Options{}, err
	}
	scalarArgs := []int{1, at.groups}
	if at.values >= 0 {
		if l.values, err = a.Numbers(at.values, cell.PolicyMissing); err != nil {
			return l, cell.Options{}, err
		}
		if len(l.values) != len(l.ages) {
			return l, cell.Options{}, cell.WrongArgument.Errorf("ages has %d cells but values has %d; give one age per reading", len(l.ages), len(l.values))
		}
		scalarArgs = append(scalarArgs, at.values)
	}
	if l.groups, err = groupsArg(a, at.groups, len(l.ages)); err != nil {
		return l, cell.Options{}, err
	}
	l.groupGiven = !a.Missing(at.groups)
	l.scalar = isScalarArgs(a, scalarArgs...)
	if l.cov, err = covariatesArg(a, at.options+1, m, len(l.ages)); err != nil {
		return l, cell.Options{}, err
	}
	o, err := a.Options(at.options)
	return l, o, err
}

func callMean(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, o, err := lookupArgs(ctx, env, a, meanLayout)
	if err != nil {
		return nil, err
	}
	reach, err := reachOption(o)
	if err != nil {
		return nil, err
	}
	ext := reach > 0
	ref := l.m.Reference()
	return l.answer(reach, func(g string, t, _ float64, cov []float64) (float64, error) {
		mean, _, err := ref.MeanSD(g, t, cov, ext)
		return mean, err
	})
}

func callSD(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, o, err := lookupArgs(ctx, env, a, meanLayout)
	if err != nil {
		return nil, err
	}
	reach, err := reachOption(o)
	if err != nil {
		return nil, err
	}
	ext := reach > 0
	ref := l.m.Reference()
	return l.answer(reach, func(g string, t, _ float64, cov []float64) (float64, error) {
		_, sd, err := ref.MeanSD(g, t, cov, ext)
		return sd, err
	})
}

// rowLabel is the 1-based row for messages about row i of n, or 0 for a
// single cell.
func rowLabel(n, i int) int {
	if n == 1 {
		return 0
	}
	return i + 1
}

// single answers one value for single-cell inputs (an error in it fails
// the cell) and a column otherwise.
func single(out []any, scalar bool) (any, error) {
	if scalar && len(out) == 1 {
		if e, ok := out[0].(error); ok {
			return nil, e
		}
		return out[0], nil
	}
	return out, nil
}

func callCentile(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, o, err := lookupArgs(ctx, env, a, centileLayout)
	if err != nil {
		return nil, err
	}
	p, err := a.Number(2)
	if err != nil {
		return nil, err
	}
	if !(p > 0 && p < 100) {
		return nil, cell.OutOfRange.Errorf("the centile p must be between 0 and 100 (percent), not %s", cell.FormatNumber(p))
	}
	reach, err := reachOption(o)
	if err != nil {
		return nil, err
	}
	ext := reach > 0
	ref := l.m.Reference()
	return l.answer(reach, func(g string, t, _ float64, cov []float64) (float64, error) { return ref.Centile(g, t, cov, p, ext) })
}

func callZ(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, o, err := lookupArgs(ctx, env, a, zLayout)
	if err != nil {
		return nil, err
	}
	reach, err := reachOption(o)
	if err != nil {
		return nil, err
	}
	ext := reach > 0
	ref := l.m.Reference()
	return l.answer(reach, func(g string, t, y float64, cov []float64) (float64, error) { return ref.Z(g, t, cov, y, ext) })
}
