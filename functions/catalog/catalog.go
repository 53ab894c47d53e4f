package catalog

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"veer/functions/cell"
	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/rules"
	"veer/functions/screening"
	"veer/functions/transform"
)

const caution = " " + screening.Caution

// Option names used by this catalogue beyond cell's shared ones.
var chartOptions = []string{
	cell.OptionTarget, cell.OptionLimit, cell.OptionChart, cell.OptionSide, cell.OptionAllowance,
	cell.OptionLambda, cell.OptionUnit, cell.OptionHeadstart, cell.OptionRestart, cell.OptionSerial,
	cell.OptionMethod, cell.OptionGap, cell.OptionSeed, cell.OptionReps, cell.OptionExtrapolate, cell.OptionHorizon,
}

var lookupOptions = []string{cell.OptionExtrapolate}

// lookupFailures are the failures a lookup answers in the row they concern.
var lookupFailures = []cell.Failure{cell.BlankInput, cell.UnknownGroup, cell.OutsideReference}

// sheetHelp says what VEER.CHART and VEER.RULE answer for rows that cannot
// be charted and which failures stop the call, from the error contract.
var sheetHelp = cell.RowHelp(cell.BlankInput, cell.UnknownGroup, cell.OutsideReference, cell.OutOfDomain) +
	" The worker's other exams are charted without that row. " + cell.CallHelp(cell.WrongArgument, cell.BadData) +
	" Messages name the rows."

// New returns the catalogue of veer's cell functions.
func New() *cell.Catalogue {
	c := cell.NewCatalogue()
	for _, f := range funcs() {
		c.Register(f)
	}
	for _, f := range ruleFuncs(rules.NewCache(rules.DefaultCacheSize, rules.DefaultLimits())) {
		c.Register(f)
	}
	return c
}

func modelParam() cell.Param {
	return cell.Param{Name: "model", Type: cell.TypeText, Help: `model name ("sbp": its latest version, updated when refitted) or handle ("sbp@v2": that exact version)`}
}

func funcs() []cell.Func {
	return []cell.Func{
		{
			Name:    "VEER.FIT",
			Summary: "Fits a reference model from healthy workers' exams and returns its handle.",
			Help:    "Fits mean and SD curves over age per group, and the serial correlation of each worker's readings, from rows of workers known to be healthy. The handle (name@vN) changes when the data change and stays the same when they do not. Every row needs an id, an age and a reading: a blank one is an error naming the row. A name is either a model or a rule set (VEER.SAVERULES), never both.",
			Params: []cell.Param{
				{Name: "name", Type: cell.TypeText, Help: "name of the model, e.g. sbp"},
				{Name: "ids", Type: cell.TypeRange, Help: "worker ids, one per exam"},
				{Name: "ages", Type: cell.TypeRange, Help: "age at each exam, in years"},
				{Name: "values", Type: cell.TypeRange, Help: "the marker's reading at each exam"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "reference group per exam (e.g. sex or job group)"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `options as "name=value; ..." text or a two-column range`},
			},
			Options: []string{cell.OptionTransform, cell.OptionBandwidth, cell.OptionMinWorkers},
			Result:  cell.ShapeValue, Writes: true, Slow: true,
			Call: callFit,
		},
		{
			Name:    "VEER.MODELS",
			Summary: "Lists the stored models and rule sets.",
			Help:    "A header row, then one row per name: name, latest handle, number of versions, groups (\"rule set\" for a rule set saved with VEER.SAVERULES) and exams fitted.",
			Result:  cell.ShapeTable, Streaming: true,
			Call: callModels,
		},
		{
			Name:    "VEER.INFO",
			Summary: "Diagnostics of a reference model as item and value rows.",
			Help:    "Workers and exams per group, age range, bandwidths, band coverage, normality check, serial correlation and its checks, mean gap between exams.",
			Params:  []cell.Param{modelParam()},
			Result:  cell.ShapeTable, Streaming: true,
			Call: callInfo,
		},
		{
			Name:    "VEER.REFMEAN",
			Summary: "Reference mean at an age (on the model's scale).",
			Help: "The mean curve of healthy workers of the group at each age. For a model fitted with a log or Box-Cox transform the mean is on the transformed scale; use VEER.CENTILE with 50 for the median in the reading's own unit. " +
				cell.RowHelp(lookupFailures...),
			Params: []cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group or groups (needed when the model has several)"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: "extrapolate=true to allow ages outside the reference range"}},
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callMean,
		},
		{
			Name:    "VEER.REFSD",
			Summary: "Reference standard deviation at an age (on the model's scale).",
			Help:    "The SD curve of healthy workers of the group at each age. " + cell.RowHelp(lookupFailures...),
			Params: []cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group or groups"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: "extrapolate=true to allow ages outside the reference range"}},
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callSD,
		},
		{
			Name:    "VEER.CENTILE",
			Summary: "Reference centile at an age, in the reading's own unit.",
			Help:    "The reading below which p percent of healthy workers of the group fall at that age. " + cell.RowHelp(append(lookupFailures, cell.OutOfDomain)...),
			Params: []cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "p", Type: cell.TypeNumber, Help: "centile in percent, between 0 and 100, e.g. 97.5"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group or groups"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: "extrapolate=true to allow ages outside the reference range"}},
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callCentile,
		},
		{
			Name:    "VEER.ZSCORE",
			Summary: "Standardised score of a reading against healthy workers of the same age.",
			Help: "z = (reading − reference mean) / reference SD at the worker's age, on the model's scale. " +
				cell.RowHelp(append(lookupFailures, cell.OutOfDomain)...) + " " + cell.CallHelp(cell.WrongArgument),
			Params: []cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "values", Type: cell.TypeRange, Help: "reading or readings"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group or groups"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: "extrapolate=true to allow ages outside the reference range"}},
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: callZ,
		},
		{
			Name:    "VEER.CHART",
			Summary: "Chart statistic over a whole sheet of exams: z, innovation, chart, limit, signal, first signal.",
			Help: "Give every exam row (any order); each worker's exams are ordered by age inside. Spills one row per input row with columns z, innovation, chart, limit, signal, first_signal. Options must give target (years to a false signal) or limit. " +
				sheetHelp + caution,
			Params: []cell.Param{modelParam(),
				{Name: "ids", Type: cell.TypeRange, Help: "worker ids, one per exam"},
				{Name: "ages", Type: cell.TypeRange, Help: "age at each exam, in years"},
				{Name: "values", Type: cell.TypeRange, Help: "the reading at each exam"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group per exam"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "target=20; side=up; allowance=0.5"`}},
			Options: chartOptions, Result: cell.ShapeTable, Streaming: true, Slow: true,
			Call: callChart,
		},
		{
			Name:    "VEER.LIMIT",
			Summary: "Control limit for a target average time to a false signal.",
			Help:    "The limit h such that a healthy worker is flagged on average once in target years. Without a model, independent N(0,1) scores at the gap given by the gap option are assumed.",
			Params: []cell.Param{
				{Name: "target", Type: cell.TypeNumber, Help: "average years to a false signal for a healthy worker, e.g. 20"},
				{Name: "model", Type: cell.TypeText, Optional: true, Help: "model name or handle (for its serial correlation and exam gaps)"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "chart=cusum; allowance=0.5; side=up; method=normal"`}},
			Options: chartOptions, Result: cell.ShapeValue, Streaming: true, Slow: true,
			Call: callLimit,
		},
		{
			Name:    "VEER.DELAY",
			Summary: "Expected years from the start of a sustained shift to a signal.",
			Help:    "A shift of the readings by the given number of reference SDs (negative for downward) starts at the first exam (or onset years later); the answer is the expected years until the chart signals. Options give target or limit.",
			Params: []cell.Param{
				{Name: "shift", Type: cell.TypeNumber, Help: "shift in reference SDs, e.g. 1"},
				{Name: "model", Type: cell.TypeText, Optional: true, Help: "model name or handle"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: `e.g. "target=20; onset=5"`}},
			Options: append(append([]string{}, chartOptions...), cell.OptionOnset), Result: cell.ShapeValue, Streaming: true, Slow: true,
			Call: callDelay,
		},
	}
}

// loadModel returns the decoded model a cell names, decoding each stored
// version once.
func loadModel(env cell.Env, name string) (*screening.Model, cell.ModelRef, error) {
	ref, err := env.Model(name)
	if err != nil {
		return nil, ref, err
	}
	if isRuleSet(ref.Doc) {
		return nil, ref, cell.UnknownModel.Errorf("%s is a rule set saved with VEER.SAVERULES, not a model; give a model fitted with VEER.FIT", ref.Handle)
	}
	v, err := env.Once("veer.model:"+ref.Handle+":"+ref.SHA256, func() (any, error) {
		m, err := screening.Decode(ref.Doc)
		if err != nil {
			return nil, cell.UnknownModel.Errorf("model %s cannot be read: %v", ref.Handle, err)
		}
		return m, nil
	})
	if err != nil {
		return nil, ref, err
	}
	return v.(*screening.Model), ref, nil
}

func modelArg(ctx context.Context, env cell.Env, a cell.Args, i int) (*screening.Model, cell.ModelRef, error) {
	name, err := a.Text(i)
	if err != nil {
		return nil, cell.ModelRef{}, err
	}
	if strings.TrimSpace(name) == "" {
		return nil, cell.ModelRef{}, cell.WrongArgument.Errorf("the model name (argument %s) is empty", a.Func().ArgName(i))
	}
	return loadModel(env, strings.TrimSpace(name))
}

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

func round2(x float64) float64 { return math.Round(x*100) / 100 }

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
	groupGiven bool
	scalar     bool
}

func (l lookupRows) answer(at func(group string, age, value float64) (float64, error)) (any, error) {
	out := make([]any, len(l.ages))
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
		v, err := at(l.groups[i], t, y)
		if err != nil {
			out[i] = rowError(err, rowLabel(len(l.ages), i), l.groupGiven)
			continue
		}
		out[i] = v
	}
	return single(out, l.scalar)
}

// lookupArgs reads the model (argument 0), the ages (1), the readings
// (values >= 0: that argument), the groups and the options of a lookup.
func lookupArgs(ctx context.Context, env cell.Env, a cell.Args, values, groups, options int) (lookupRows, cell.Options, error) {
	var l lookupRows
	m, _, err := modelArg(ctx, env, a, 0)
	if err != nil {
		return l, cell.Options{}, err
	}
	l.m = m
	if l.ages, err = a.Numbers(1, cell.PolicyMissing); err != nil {
		return l, cell.Options{}, err
	}
	scalarArgs := []int{1, groups}
	if values >= 0 {
		if l.values, err = a.Numbers(values, cell.PolicyMissing); err != nil {
			return l, cell.Options{}, err
		}
		if len(l.values) != len(l.ages) {
			return l, cell.Options{}, cell.WrongArgument.Errorf("ages has %d cells but values has %d; give one age per reading", len(l.ages), len(l.values))
		}
		scalarArgs = append(scalarArgs, values)
	}
	if l.groups, err = groupsArg(a, groups, len(l.ages)); err != nil {
		return l, cell.Options{}, err
	}
	l.groupGiven = !a.Missing(groups)
	l.scalar = isScalarArgs(a, scalarArgs...)
	o, err := a.Options(options)
	return l, o, err
}

func callMean(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, o, err := lookupArgs(ctx, env, a, -1, 2, 3)
	if err != nil {
		return nil, err
	}
	ext := o.Bool(cell.OptionExtrapolate, false)
	return l.answer(func(g string, t, _ float64) (float64, error) {
		mean, _, err := l.m.Curves.At(g, t, ext)
		return mean, err
	})
}

func callSD(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, o, err := lookupArgs(ctx, env, a, -1, 2, 3)
	if err != nil {
		return nil, err
	}
	ext := o.Bool(cell.OptionExtrapolate, false)
	return l.answer(func(g string, t, _ float64) (float64, error) {
		_, sd, err := l.m.Curves.At(g, t, ext)
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
	l, o, err := lookupArgs(ctx, env, a, -1, 3, 4)
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
	ext := o.Bool(cell.OptionExtrapolate, false)
	return l.answer(func(g string, t, _ float64) (float64, error) { return l.m.Curves.Centile(g, t, p, ext) })
}

func callZ(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, o, err := lookupArgs(ctx, env, a, 2, 3, 4)
	if err != nil {
		return nil, err
	}
	ext := o.Bool(cell.OptionExtrapolate, false)
	return l.answer(func(g string, t, y float64) (float64, error) { return l.m.Curves.Z(g, t, y, ext) })
}

// chartSettings reads the chart options shared by CHART, RULE, LIMIT and
// DELAY.
func chartSettings(o cell.Options) (screening.Settings, screening.LimitOptions, error) {
	d := chart.DefaultSpec()
	s := screening.Settings{
		Chart: chart.Spec{
			Kind:      chart.Kind(o.Text(cell.OptionChart, string(d.Kind))),
			Side:      chart.Side(o.Text(cell.OptionSide, string(d.Side))),
			Allowance: o.Number(cell.OptionAllowance, d.Allowance),
			Lambda:    o.Number(cell.OptionLambda, d.Lambda),
			Unit:      o.Number(cell.OptionUnit, d.UnitOrDefault()),
			HeadStart: o.Number(cell.OptionHeadstart, 0),
			Restart:   o.Bool(cell.OptionRestart, false),
		},
		// Not given: "" (the engine's default, whiten, with a model; no
		// serial correlation without one).
		Serial: screening.Serial(o.Text(cell.OptionSerial, "")),

		Extrapolate: o.Bool(cell.OptionExtrapolate, false),
	}
	if err := s.Chart.Validate(); err != nil {
		return s, screening.LimitOptions{}, cellError(err, cell.OutOfRange)
	}
	seed := o.Number(cell.OptionSeed, screening.DefaultSeed)
	if seed != math.Trunc(seed) || seed < 0 || seed > 1<<53 {
		return s, screening.LimitOptions{}, cell.OutOfRange.Errorf("the seed option must be a whole number from 0 to 9007199254740992, not %s", cell.FormatNumber(seed))
	}
	reps := o.Number(cell.OptionReps, 0)
	if reps != math.Trunc(reps) || reps < 0 || reps > 1_000_000 {
		return s, screening.LimitOptions{}, cell.OutOfRange.Errorf("reps must be a whole number from 1 to 1,000,000 (0 or absent: the default), not %s", cell.FormatNumber(reps))
	}
	lo := screening.LimitOptions{
		Method:  monitor.Method(o.Text(cell.OptionMethod, string(monitor.Normal))),
		Gap:     o.Number(cell.OptionGap, 0),
		Horizon: monitor.Horizon(o.Text(cell.OptionHorizon, string(monitor.HorizonFollowUp))),
		Seed:    uint64(seed),
		Paths:   int(reps),
	}
	if lo.Gap < 0 {
		return s, lo, cell.OutOfRange.Errorf("the gap option must be a positive number of years")
	}
	return s, lo, nil
}

// chartCall is what VEER.CHART, VEER.RULE, VEER.LIMIT and VEER.DELAY
// share: the model (nil when none was given) and its stored version, the
// options, and the chart and limit settings read from them. Its Monte Carlo
// work reports progress to env and stops when the call's context ends.
type chartCall struct {
	env  cell.Env
	m    *screening.Model
	ref  cell.ModelRef
	opts cell.Options
	set  screening.Settings
	lim  screening.LimitOptions
}

// newChartCall reads the optional model (argument model) and the options
// (argument options) of VEER.LIMIT or VEER.DELAY.
func newChartCall(ctx context.Context, env cell.Env, a cell.Args, model, options int) (*chartCall, error) {
	c := &chartCall{env: env, ref: cell.ModelRef{Handle: "-"}}
	if !a.Missing(model) {
		if err := c.readModel(ctx, a, model); err != nil {
			return nil, err
		}
	}
	if err := c.readOptions(ctx, a, options); err != nil {
		return nil, err
	}
	return c, nil
}

// readModel reads the model argument i.
func (c *chartCall) readModel(ctx context.Context, a cell.Args, i int) error {
	var err error
	c.m, c.ref, err = modelArg(ctx, c.env, a, i)
	return err
}

// readOptions reads the options argument i and the settings they give.
func (c *chartCall) readOptions(ctx context.Context, a cell.Args, i int) error {
	var err error
	if c.opts, err = a.Options(i); err != nil {
		return err
	}
	if c.set, c.lim, err = chartSettings(c.opts); err != nil {
		return err
	}
	c.lim.Stop = func() bool { return ctx.Err() != nil }
	c.lim.Progress = func(done, total int) {
		if total > 0 {
			c.env.Progress(float64(done) / float64(total))
		}
	}
	return nil
}

// key is a cache key of the model version and every setting, after prefix.
func (c *chartCall) key(prefix string) string {
	return fmt.Sprintf("%s:%s:%s:%+v|%+v|%s|%g|%d|%d|%s", prefix, c.ref.Handle, c.ref.SHA256,
		c.set.Chart, c.set.Serial, c.lim.Method, c.lim.Gap, c.lim.Seed, c.lim.Paths, c.lim.Horizon)
}

// resolveLimit returns the limit from the options: given directly, or
// computed for the target (once per distinct input).
func (c *chartCall) resolveLimit() (float64, error) {
	hasT, hasL := c.opts.Has(cell.OptionTarget), c.opts.Has(cell.OptionLimit)
	switch {
	case hasT && hasL:
		return 0, cell.WrongArgument.Errorf("give either target or limit in the options, not both")
	case hasL:
		h := c.opts.Number(cell.OptionLimit, 0)
		if err := chart.ValidateLimit(h); err != nil {
			return 0, cellError(err, cell.OutOfRange)
		}
		return h, nil
	case hasT:
		r, err := c.limit(c.opts.Number(cell.OptionTarget, 0))
		if err != nil {
			return 0, err
		}
		return r.H, nil
	}
	return 0, cell.WrongArgument.Errorf(`the options must give target (average years to a false signal, e.g. "target=20") or limit`)
}

// limit computes the limit for target years, once per distinct input.
func (c *chartCall) limit(target float64) (monitor.LimitResult, error) {
	v, err := c.env.Once(c.key("veer.limit")+":"+strconv.FormatFloat(target, 'g', -1, 64), func() (any, error) {
		cal, err := c.calibration()
		if err != nil {
			return nil, err
		}
		r, err := monitor.Limit(cal, target)
		if err != nil {
			return nil, cellError(err, cell.OutOfRange)
		}
		return r, nil
	})
	if err != nil {
		return monitor.LimitResult{}, err
	}
	return v.(monitor.LimitResult), nil
}

// delay computes the expected years to a signal after a shift, once per
// distinct input.
func (c *chartCall) delay(h, shift, onset float64) (float64, error) {
	return onceFloat(c.env, c.key("veer.delay")+fmt.Sprintf(":%g:%g:%g", h, shift, onset), func() (float64, error) {
		cal, err := c.calibration()
		if err != nil {
			return 0, err
		}
		d, err := monitor.Delay(cal, h, shift, onset)
		if err != nil {
			return 0, cellError(err, cell.OutOfRange)
		}
		return d.Years, nil
	})
}

func onceFloat(env cell.Env, key string, f func() (float64, error)) (float64, error) {
	v, err := env.Once(key, func() (any, error) { return f() })
	if err != nil {
		return 0, err
	}
	return v.(float64), nil
}

// calibration is the model's calibration for the settings or, without a
// model, independent N(0,1) scores at the gap the options give.
func (c *chartCall) calibration() (monitor.Calibration, error) {
	if c.m != nil {
		cal, err := c.m.Calibration(c.set, c.lim)
		return cal, cellError(err, cell.OutOfRange)
	}
	if c.lim.Gap <= 0 {
		return monitor.Calibration{}, cell.WrongArgument.Errorf(`without a model, give the years between exams as an option, e.g. "gap=1"`)
	}
	if c.lim.Method == monitor.Bootstrap {
		return monitor.Calibration{}, cell.WrongArgument.Errorf("method bootstrap needs a model (it resamples the reference workers)")
	}
	// Without a model no serial correlation is known: every serial mode
	// charts independent N(0,1) scores (the textbook horizon).
	cal := monitor.Calibration{Method: monitor.Normal, Gap: c.lim.Gap, Seed: c.lim.Seed, Paths: c.lim.Paths,
		Progress: c.lim.Progress, Stop: c.lim.Stop}
	cal.Settings.Chart, cal.Settings.Mode = c.set.Chart, monitor.Direct
	return cal, nil
}

func callLimit(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	target, err := a.Number(0)
	if err != nil {
		return nil, err
	}
	c, err := newChartCall(ctx, env, a, 1, 2)
	if err != nil {
		return nil, err
	}
	if c.opts.Has(cell.OptionTarget) || c.opts.Has(cell.OptionLimit) {
		return nil, cell.WrongArgument.Errorf("the target is the first argument; do not give target or limit as options")
	}
	r, err := c.limit(target)
	if err != nil {
		return nil, err
	}
	return r.H, nil
}

func callDelay(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	shift, err := a.Number(0)
	if err != nil {
		return nil, err
	}
	c, err := newChartCall(ctx, env, a, 1, 2)
	if err != nil {
		return nil, err
	}
	h, err := c.resolveLimit()
	if err != nil {
		return nil, err
	}
	onset := c.opts.Number(cell.OptionOnset, 0)
	if onset < 0 {
		return nil, cell.OutOfRange.Errorf("onset must not be negative")
	}
	return c.delay(h, shift, onset)
}

// sheet is a table of exam rows read from ids, ages, values and groups
// columns: the rows that can be screened, and an error for each of the
// others, in sheet order.
type sheet struct {
	n int // rows in the sheet
	// groupGiven: the groups argument was given (a "" group is a blank cell)
	groupGiven bool
	exams      []screening.Exam    // rows that can be screened, in sheet order
	rowOf      []int               // 0-based sheet row of each exam
	failed     map[int]*cell.Error // sheet rows answered with an error instead
}

// examsArgs reads ids, ages, values and groups columns starting at argument
// i. Cells follow cell.PolicyMissing: a blank (or error) id, age or reading
// makes its row #N/A, text or TRUE/FALSE in a numeric column fails the call
// naming the cell.
func examsArgs(a cell.Args, i int) (*sheet, error) {
	ids, err := a.Texts(i, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	ages, err := a.Numbers(i+1, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	vals, err := a.Numbers(i+2, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	n := len(ids)
	if len(ages) != n || len(vals) != n {
		return nil, cell.WrongArgument.Errorf("ids, ages and values must have the same number of rows (they have %d, %d and %d)", n, len(ages), len(vals))
	}
	if n == 0 {
		return nil, cell.WrongArgument.Errorf("there are no exam rows")
	}
	groups, err := groupsArg(a, i+3, n)
	if err != nil {
		return nil, err
	}
	sh := &sheet{n: n, groupGiven: !a.Missing(i + 3), failed: map[int]*cell.Error{}, exams: make([]screening.Exam, 0, n), rowOf: make([]int, 0, n)}
	for r := 0; r < n; r++ {
		id := strings.TrimSpace(ids[r])
		switch {
		case id == "":
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the worker id is blank", r+1)
		case math.IsNaN(ages[r]):
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the age is blank", r+1)
		case math.IsNaN(vals[r]):
			sh.failed[r] = cell.BlankInput.Errorf("row %d: the reading is blank", r+1)
		default:
			sh.exams = append(sh.exams, screening.Exam{Worker: id, Group: groups[r], Time: ages[r], Value: vals[r]})
			sh.rowOf = append(sh.rowOf, r)
		}
	}
	if len(sh.exams) == 0 {
		return nil, cell.WrongArgument.Errorf("every exam row has a blank id, age or reading")
	}
	return sh, nil
}

// firstFailed returns the error of the first failed row, or nil.
func (sh *sheet) firstFailed() *cell.Error {
	first := -1
	for r := range sh.failed {
		if first < 0 || r < first {
			first = r
		}
	}
	if first < 0 {
		return nil
	}
	return sh.failed[first]
}

// screenable moves the rows m cannot score (age outside the reference
// range without extrapolation, unknown group, a reading the transform
// cannot take) to the failed rows, each with its own error, so the rest of
// the sheet is still charted; the other exams of such a worker are charted
// without that row.
func (sh *sheet) screenable(m *screening.Model, ext bool) error {
	// The usual row passes with a range check against its group's span,
	// looked up once per group; a row that fails it is scored alone to
	// find why (rowError words it).
	type span struct {
		lo, hi float64
		ok     bool
	}
	spans := map[string]span{}
	var last span
	lastGroup, haveLast := "", false
	positive := m.Curves.Transform != "" && m.Curves.Transform != "none"
	kept := sh.exams[:0]
	rowOf := sh.rowOf[:0]
	for k, e := range sh.exams {
		r := sh.rowOf[k]
		if !haveLast || e.Group != lastGroup {
			sp, found := spans[e.Group]
			if !found {
				lo, hi, err := m.Curves.Range(e.Group)
				sp = span{lo, hi, err == nil}
				spans[e.Group] = sp
			}
			last, lastGroup, haveLast = sp, e.Group, true
		}
		if !last.ok || (!ext && (e.Time < last.lo || e.Time > last.hi)) || (positive && !(e.Value > 0)) {
			if _, err := m.Curves.Z(e.Group, e.Time, e.Value, ext); err != nil {
				sh.failed[r] = rowError(err, r+1, sh.groupGiven)
				continue
			}
		}
		kept = append(kept, e)
		rowOf = append(rowOf, r)
	}
	sh.exams, sh.rowOf = kept, rowOf
	if len(sh.exams) == 0 {
		return sh.firstFailed()
	}
	return nil
}

// screen runs the engine over the screenable rows. Two exams of one worker
// at the same age fail the call; the engine's error names them by their
// place among the screenable rows, which are mapped back to sheet rows.
func (sh *sheet) screen(m *screening.Model, s screening.Settings, h float64) ([]screening.Result, error) {
	res, err := m.Screen(sh.exams, s, h)
	var dup *refcurve.DuplicateError
	switch {
	case err == nil:
		return res, nil
	case errors.As(err, &dup):
		return nil, cell.BadData.Errorf("worker %q has two exams at the same age %s (rows %d and %d); remove or merge one",
			dup.Worker, cell.FormatNumber(dup.Time), sh.rowOf[dup.Rows[0]-1]+1, sh.rowOf[dup.Rows[1]-1]+1)
	}
	return nil, cellError(err, cell.BadData)
}

// screened is a sheet charted by VEER.CHART or VEER.RULE: its rows, the
// call's settings, the limit and the results of the screenable rows.
type screened struct {
	*sheet
	call *chartCall
	h    float64
	res  []screening.Result
}

// screenSheet reads the model (argument model), the exams (arguments exams
// on) and the options (argument options) of VEER.CHART or VEER.RULE, and
// screens the sheet.
func screenSheet(ctx context.Context, env cell.Env, a cell.Args, model, exams, options int) (*screened, error) {
	c := &chartCall{env: env}
	if err := c.readModel(ctx, a, model); err != nil {
		return nil, err
	}
	sh, err := examsArgs(a, exams)
	if err != nil {
		return nil, err
	}
	if err := c.readOptions(ctx, a, options); err != nil {
		return nil, err
	}
	h, err := c.resolveLimit()
	if err != nil {
		return nil, err
	}
	if err := sh.screenable(c.m, c.set.Extrapolate); err != nil {
		return nil, err
	}
	res, err := sh.screen(c.m, c.set, h)
	if err != nil {
		return nil, err
	}
	return &screened{sheet: sh, call: c, h: h, res: res}, nil
}

func callChart(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	sc, err := screenSheet(ctx, env, a, 0, 1, 5)
	if err != nil {
		return nil, err
	}
	sh, h, res := sc.sheet, sc.h, sc.res
	out := make([][]any, sh.n)
	for r, e := range sh.failed {
		out[r] = []any{e, e, e, e, e, e}
	}
	for k, r := range res {
		var fs any
		if !math.IsNaN(r.FirstSignal) {
			fs = r.FirstSignal
		}
		out[sh.rowOf[k]] = []any{r.Z, r.Innovation, r.Stat, h, r.Signal, fs}
	}
	return out, nil
}

// checkKind refuses to save a model under the name of a rule set or a rule
// set under the name of a model. A name keeps the kind of its first
// version; reading that exact version (not the bare name) keeps the call's
// result valid in the server's cache after the save.
func checkKind(env cell.Env, name string, ruleSet bool) error {
	ref, err := env.Model(name + "@v1")
	if err != nil || isRuleSet(ref.Doc) == ruleSet {
		return nil
	}
	if ruleSet {
		return cell.WrongArgument.Errorf("%s is the name of a model fitted with VEER.FIT; give the rule set another name", ref.Name)
	}
	return cell.WrongArgument.Errorf("%s is the name of a rule set saved with VEER.SAVERULES; give the model another name", ref.Name)
}

// checkName checks the name of a model or rule set to save.
func checkName(what, name string) (string, error) {
	name = strings.TrimSpace(name)
	if name == "" || strings.ContainsAny(name, "@/\\") {
		return "", cell.WrongArgument.Errorf("the %s name must be non-empty text without @, / or \\", what)
	}
	return name, nil
}

func callFit(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	name, err := a.Text(0)
	if err != nil {
		return nil, err
	}
	if name, err = checkName("model", name); err != nil {
		return nil, err
	}
	sh, err := examsArgs(a, 1)
	if err != nil {
		return nil, err
	}
	if e := sh.firstFailed(); e != nil {
		return nil, cell.BadData.Errorf("%s; every reference row needs an id, an age and a reading", e.Message)
	}
	o, err := a.Options(5)
	if err != nil {
		return nil, err
	}
	rows := make([]refcurve.Row, len(sh.exams))
	for i, e := range sh.exams {
		rows[i] = refcurve.Row{Worker: e.Worker, Group: e.Group, Time: e.Time, Value: e.Value}
	}
	opt := screening.FitOptions{Name: name, Curves: refcurve.Options{
		Transform:  transform.Name(o.Text(cell.OptionTransform, string(transform.None))),
		Bandwidth:  o.Number(cell.OptionBandwidth, 0),
		MinWorkers: int(o.Number(cell.OptionMinWorkers, 0)),
		Progress:   func(stage string, done float64) { env.Progress(done) },
	}}
	if opt.Curves.Bandwidth < 0 {
		return nil, cell.OutOfRange.Errorf("bandwidth must be positive (or 0 to choose it)")
	}
	m, err := screening.Fit(ctx, rows, opt)
	if err != nil {
		if cerr := ctx.Err(); cerr != nil {
			return nil, cerr
		}
		return nil, cellError(err, cell.BadData)
	}
	doc, err := m.Encode()
	if err != nil {
		return nil, err
	}
	if err := checkKind(env, name, false); err != nil {
		return nil, err
	}
	return env.SaveModel(name, doc)
}

func callInfo(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	m, ref, err := modelArg(ctx, env, a, 0)
	if err != nil {
		return nil, err
	}
	items := m.Items()
	out := make([][]any, 0, len(items)+1)
	out = append(out, []any{"handle", ref.Handle})
	for _, it := range items {
		out = append(out, []any{it.Name, it.Value})
	}
	return out, nil
}

// ModelLister is implemented by a cell.Env that can list the names of the
// models it holds (cell.MemoryEnv does). VEER.MODELS needs it.
type ModelLister interface {
	// Names returns the names of the models held, sorted.
	Names() []string
}

func callModels(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	l, ok := env.(ModelLister)
	if !ok {
		return nil, cell.WrongArgument.Errorf("this server cannot list its models; GET /v1/models lists them")
	}
	out := [][]any{{"name", "handle", "versions", "groups", "exams"}}
	for _, name := range l.Names() {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		ref, err := env.Model(name)
		if err != nil {
			continue // deleted meanwhile
		}
		if isRuleSet(ref.Doc) {
			out = append(out, []any{ref.Name, ref.Handle, ref.Version, "rule set", nil})
			continue
		}
		m, _, err := loadModel(env, ref.Handle)
		if err != nil {
			out = append(out, []any{ref.Name, ref.Handle, ref.Version, cell.AsError(err), nil})
			continue
		}
		out = append(out, []any{ref.Name, ref.Handle, ref.Version, strings.Join(m.Curves.Groups(), ", "), m.Curves.Rows})
	}
	return out, nil
}
