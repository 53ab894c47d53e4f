package catalog

import (
	"context"
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
)

const caution = " A signal is a prompt for review by a licensed clinician under local occupational-health rules, not a diagnosis."

// Option names used by this catalogue beyond cell's shared ones.
var chartOptions = []string{
	cell.OptionTarget, cell.OptionLimit, cell.OptionChart, cell.OptionSide, cell.OptionAllowance,
	cell.OptionLambda, cell.OptionUnit, cell.OptionHeadstart, cell.OptionRestart, cell.OptionSerial,
	cell.OptionMethod, cell.OptionGap, cell.OptionSeed, cell.OptionReps, cell.OptionExtrapolate, cell.OptionHorizon,
}

var lookupOptions = []string{cell.OptionExtrapolate}

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
			Help:    "The mean curve of healthy workers of the group at each age. For a model fitted with a log or Box-Cox transform the mean is on the transformed scale; use VEER.CENTILE with 50 for the median in the reading's own unit.",
			Params: []cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group or groups (needed when the model has several)"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: "extrapolate=true to allow ages outside the reference range"}},
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: lookup("mean"),
		},
		{
			Name:    "VEER.REFSD",
			Summary: "Reference standard deviation at an age (on the model's scale).",
			Help:    "The SD curve of healthy workers of the group at each age.",
			Params: []cell.Param{modelParam(),
				{Name: "ages", Type: cell.TypeRange, Help: "age or ages in years"},
				{Name: "groups", Type: cell.TypeRange, Optional: true, Help: "group or groups"},
				{Name: "options", Type: cell.TypeAny, Optional: true, Help: "extrapolate=true to allow ages outside the reference range"}},
			Options: lookupOptions, Result: cell.ShapeColumn, Streaming: true,
			Call: lookup("sd"),
		},
		{
			Name:    "VEER.CENTILE",
			Summary: "Reference centile at an age, in the reading's own unit.",
			Help:    "The reading below which p percent of healthy workers of the group fall at that age.",
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
			Help:    "z = (reading − reference mean) / reference SD at the worker's age, on the model's scale. Blank cells give #N/A in their row, an age outside the reference range #NUM! in its row (unless extrapolate=true); text in a numeric range is #VALUE! naming the cell.",
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
			Help:    "Give every exam row (any order); each worker's exams are ordered by age inside. Spills one row per input row with columns z, innovation, chart, limit, signal, first_signal. Options must give target (years to a false signal) or limit. A row with a blank id, age, reading or group is #N/A and a row outside the reference age range #NUM! (unless extrapolate=true); the worker's other exams are charted without it. Text in a numeric range, or two exams of a worker at the same age, fail the call with a message naming the rows." + caution,
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
		return nil, ref, cell.RefError("%s is a rule set saved with VEER.SAVERULES, not a model; give a model fitted with VEER.FIT", ref.Handle)
	}
	v, err := env.Once("veer.model:"+ref.Handle+":"+ref.SHA256, func() (any, error) {
		m, err := screening.Decode(ref.Doc)
		if err != nil {
			return nil, cell.Errorf(cell.CodeRef, "model %s cannot be read: %v", ref.Handle, err)
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
		return nil, cell.ModelRef{}, cell.ValueError("%s: the model name (argument %s) is empty", a.Func().Name, a.Func().ArgName(i))
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
	return nil, cell.ValueError("%s: %s has %d cells but there are %d rows; give one group per row or a single group", a.Func().Name, a.Func().ArgName(i), len(g), n)
}

// rowCheck reports why the reading y (NaN: no reading) of group at age t
// cannot be scored against m, or nil: an age outside the group's reference
// range without extrapolation is #NUM!, a group the model does not know
// #N/A, a reading the model's transform cannot take (log of a non-positive
// number) #NUM!; a blank group cell (groupGiven: the groups argument was
// given) of a model with groups is #N/A like any blank input. row is the
// 1-based row for the message (0: none).
func rowCheck(fn string, m *screening.Model, group string, groupGiven bool, t, y float64, ext bool, row int) *cell.Error {
	where := fn + ": "
	if row > 0 {
		where = fmt.Sprintf("%s: row %d: ", fn, row)
	}
	lo, hi, err := m.Curves.Range(group)
	if err != nil {
		if group == "" && groupGiven {
			return cell.NAError("%sthe group is blank; %v", where, err)
		}
		return cell.AsError(cellError(strings.TrimSuffix(where, ": "), err))
	}
	if !ext && (t < lo || t > hi) {
		g := "the reference data"
		if group != "" {
			g = "group " + strconv.Quote(group)
		}
		return cell.NumError(`%sage %s is outside the reference range %s to %s of %s; add "extrapolate=true" to the options to hold the curves at their ends`,
			where, cell.FormatNumber(t), cell.FormatNumber(round2(lo)), cell.FormatNumber(round2(hi)), g)
	}
	if !math.IsNaN(y) {
		if _, err := m.Curves.Z(group, t, y, ext); err != nil {
			return cell.NumError("%s%v", where, err)
		}
	}
	return nil
}

func round2(x float64) float64 { return math.Round(x*100) / 100 }

// cellError turns an engine error into a spreadsheet error: a value outside
// what the model covers is #NUM!, anything else #VALUE!.
func cellError(fn string, err error) error {
	if _, ok := err.(*cell.Error); ok {
		return err
	}
	msg := err.Error()
	code := cell.CodeValue
	if strings.Contains(msg, "outside the reference range") || strings.Contains(msg, "cannot reach") {
		code = cell.CodeNum
	}
	if strings.Contains(msg, "unknown group") || strings.Contains(msg, "no group") {
		code = cell.CodeNA
	}
	return cell.Errorf(code, "%s: %s", fn, msg)
}

func lookup(what string) func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	return func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
		m, _, err := modelArg(ctx, env, a, 0)
		if err != nil {
			return nil, err
		}
		ages, err := a.Numbers(1, cell.PolicyMissing)
		if err != nil {
			return nil, err
		}
		groups, err := groupsArg(a, 2, len(ages))
		if err != nil {
			return nil, err
		}
		opts, err := a.Options(3)
		if err != nil {
			return nil, err
		}
		ext := opts.Bool(cell.OptionExtrapolate, false)
		out := make([]any, len(ages))
		for i, t := range ages {
			if math.IsNaN(t) {
				out[i] = cell.NAError("row %d: the age is blank", i+1)
				continue
			}
			if e := rowCheck(a.Func().Name, m, groups[i], !a.Missing(2), t, math.NaN(), ext, rowLabel(len(ages), i)); e != nil {
				out[i] = e
				continue
			}
			mean, sd, err := m.Curves.At(groups[i], t, ext)
			if err != nil {
				out[i] = cellError(a.Func().Name, err)
				continue
			}
			if what == "mean" {
				out[i] = mean
			} else {
				out[i] = sd
			}
		}
		return single(out, isScalarArgs(a, 1, 2))
	}
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
	m, _, err := modelArg(ctx, env, a, 0)
	if err != nil {
		return nil, err
	}
	ages, err := a.Numbers(1, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	p, err := a.Number(2)
	if err != nil {
		return nil, err
	}
	if !(p > 0 && p < 100) {
		return nil, cell.NumError("VEER.CENTILE: the centile p must be between 0 and 100 (percent), not %s", cell.FormatNumber(p))
	}
	groups, err := groupsArg(a, 3, len(ages))
	if err != nil {
		return nil, err
	}
	opts, err := a.Options(4)
	if err != nil {
		return nil, err
	}
	ext := opts.Bool(cell.OptionExtrapolate, false)
	out := make([]any, len(ages))
	for i, t := range ages {
		if math.IsNaN(t) {
			out[i] = cell.NAError("row %d: the age is blank", i+1)
			continue
		}
		if e := rowCheck("VEER.CENTILE", m, groups[i], !a.Missing(3), t, math.NaN(), ext, rowLabel(len(ages), i)); e != nil {
			out[i] = e
			continue
		}
		v, err := m.Curves.Centile(groups[i], t, p, ext)
		if err != nil {
			out[i] = cellError(a.Func().Name, err)
			continue
		}
		out[i] = v
	}
	return single(out, isScalarArgs(a, 1, 3))
}

func callZ(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	m, _, err := modelArg(ctx, env, a, 0)
	if err != nil {
		return nil, err
	}
	ages, err := a.Numbers(1, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	vals, err := a.Numbers(2, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	if len(vals) != len(ages) {
		return nil, cell.ValueError("VEER.ZSCORE: ages has %d cells but values has %d; give one age per reading", len(ages), len(vals))
	}
	groups, err := groupsArg(a, 3, len(ages))
	if err != nil {
		return nil, err
	}
	opts, err := a.Options(4)
	if err != nil {
		return nil, err
	}
	ext := opts.Bool(cell.OptionExtrapolate, false)
	out := make([]any, len(ages))
	for i := range ages {
		if math.IsNaN(ages[i]) || math.IsNaN(vals[i]) {
			out[i] = cell.NAError("row %d: the age or the reading is blank", i+1)
			continue
		}
		if e := rowCheck("VEER.ZSCORE", m, groups[i], !a.Missing(3), ages[i], vals[i], ext, rowLabel(len(ages), i)); e != nil {
			out[i] = e
			continue
		}
		z, err := m.Curves.Z(groups[i], ages[i], vals[i], ext)
		if err != nil {
			out[i] = cellError(a.Func().Name, err)
			continue
		}
		out[i] = z
	}
	return single(out, isScalarArgs(a, 1, 2, 3))
}

// chartSettings reads the chart options shared by CHART, LIMIT and DELAY.
func chartSettings(fn string, o cell.Options) (screening.Settings, screening.LimitOptions, error) {
	d := chart.DefaultSpec()
	s := screening.Settings{
		Chart: chart.Spec{
			Kind:      o.Text(cell.OptionChart, d.Kind),
			Side:      o.Text(cell.OptionSide, d.Side),
			Allowance: o.Number(cell.OptionAllowance, d.Allowance),
			Lambda:    o.Number(cell.OptionLambda, d.Lambda),
			Unit:      o.Number(cell.OptionUnit, d.UnitOrDefault()),
			HeadStart: o.Number(cell.OptionHeadstart, 0),
			Restart:   o.Bool(cell.OptionRestart, false),
		},
		// Not given: "" (the engine's default, whiten, with a model; no
		// serial correlation without one).
		Serial: o.Text(cell.OptionSerial, ""),

		Extrapolate: o.Bool(cell.OptionExtrapolate, false),
	}
	if err := s.Chart.Validate(); err != nil {
		return s, screening.LimitOptions{}, cell.NumError("%s: %v", fn, err)
	}
	seed := o.Number(cell.OptionSeed, screening.DefaultSeed)
	if seed != math.Trunc(seed) || seed < 0 || seed > 1<<53 {
		return s, screening.LimitOptions{}, cell.NumError("%s: the seed option must be a whole number from 0 to 9007199254740992, not %s", fn, cell.FormatNumber(seed))
	}
	reps := o.Number(cell.OptionReps, 0)
	if reps != math.Trunc(reps) || reps < 0 || reps > 1_000_000 {
		return s, screening.LimitOptions{}, cell.NumError("%s: reps must be a whole number from 1 to 1,000,000 (0 or absent: the default), not %s", fn, cell.FormatNumber(reps))
	}
	lo := screening.LimitOptions{
		Method:  monitor.Method(o.Text(cell.OptionMethod, string(monitor.Normal))),
		Gap:     o.Number(cell.OptionGap, 0),
		Horizon: monitor.Horizon(o.Text(cell.OptionHorizon, string(monitor.HorizonFollowUp))),
		Seed:    uint64(seed),
		Paths:   int(reps),
	}
	if lo.Gap < 0 {
		return s, lo, cell.NumError("%s: the gap option must be a positive number of years", fn)
	}
	return s, lo, nil
}

// settingsKey is a canonical text of the options, for cache keys.
func settingsKey(s screening.Settings, lo screening.LimitOptions) string {
	return fmt.Sprintf("%+v|%+v|%s|%g|%d|%d|%s", s.Chart, s.Serial, lo.Method, lo.Gap, lo.Seed, lo.Paths, lo.Horizon)
}

// resolveLimit returns the limit from the options: given directly, or
// computed for the target (once per distinct input).
func resolveLimit(env cell.Env, fn string, m *screening.Model, ref cell.ModelRef, o cell.Options, s screening.Settings, lo screening.LimitOptions) (float64, error) {
	hasT, hasL := o.Has(cell.OptionTarget), o.Has(cell.OptionLimit)
	switch {
	case hasT && hasL:
		return 0, cell.ValueError("%s: give either target or limit in the options, not both", fn)
	case hasL:
		h := o.Number(cell.OptionLimit, 0)
		if err := chart.ValidateLimit(h); err != nil {
			return 0, cell.NumError("%s: %v", fn, err)
		}
		return h, nil
	case hasT:
		r, err := computeLimit(env, fn, m, ref, s, lo, o.Number(cell.OptionTarget, 0))
		if err != nil {
			return 0, err
		}
		return r.H, nil
	}
	return 0, cell.ValueError(`%s: the options must give target (average years to a false signal, e.g. "target=20") or limit`, fn)
}

func computeLimit(env cell.Env, fn string, m *screening.Model, ref cell.ModelRef, s screening.Settings, lo screening.LimitOptions, target float64) (monitor.LimitResult, error) {
	key := "veer.limit:" + ref.Handle + ":" + ref.SHA256 + ":" + settingsKey(s, lo) + ":" + strconv.FormatFloat(target, 'g', -1, 64)
	lo.Progress = func(done, total int) {
		if total > 0 {
			env.Progress(float64(done) / float64(total))
		}
	}
	v, err := env.Once(key, func() (any, error) {
		var r monitor.LimitResult
		var err error
		if m == nil {
			c, cerr := calibrationWithoutModel(fn, s, lo)
			if cerr != nil {
				return nil, cerr
			}
			r, err = monitor.Limit(c, target)
		} else {
			r, err = m.Limit(s, lo, target)
		}
		if err != nil {
			return nil, cell.NumError("%s: %v", fn, err)
		}
		return r, nil
	})
	if err != nil {
		return monitor.LimitResult{}, err
	}
	return v.(monitor.LimitResult), nil
}

func calibrationWithoutModel(fn string, s screening.Settings, lo screening.LimitOptions) (monitor.Calibration, error) {
	if lo.Gap <= 0 {
		return monitor.Calibration{}, cell.ValueError(`%s: without a model, give the years between exams as an option, e.g. "gap=1"`, fn)
	}
	if lo.Method == monitor.Bootstrap {
		return monitor.Calibration{}, cell.ValueError("%s: method bootstrap needs a model (it resamples the reference workers)", fn)
	}
	// Without a model no serial correlation is known: every serial mode
	// charts independent N(0,1) scores (the textbook horizon).
	c := monitor.Calibration{Method: monitor.Normal, Gap: lo.Gap, Seed: lo.Seed, Paths: lo.Paths, Progress: lo.Progress}
	c.Settings.Chart, c.Settings.Mode = s.Chart, monitor.Direct
	return c, nil
}

// optionalModel reads an optional model argument.
func optionalModel(ctx context.Context, env cell.Env, a cell.Args, i int) (*screening.Model, cell.ModelRef, error) {
	if a.Missing(i) {
		return nil, cell.ModelRef{Handle: "-"}, nil
	}
	return modelArg(ctx, env, a, i)
}

// modelAndChart reads the optional model (argument 1) and the chart options
// (argument 2) of VEER.LIMIT and VEER.DELAY; the Monte Carlo work stops when
// the call is cancelled.
func modelAndChart(ctx context.Context, env cell.Env, a cell.Args) (*screening.Model, cell.ModelRef, cell.Options, screening.Settings, screening.LimitOptions, error) {
	fn := a.Func().Name
	m, ref, err := optionalModel(ctx, env, a, 1)
	if err != nil {
		return nil, ref, cell.Options{}, screening.Settings{}, screening.LimitOptions{}, err
	}
	o, err := a.Options(2)
	if err != nil {
		return nil, ref, o, screening.Settings{}, screening.LimitOptions{}, err
	}
	s, lo, err := chartSettings(fn, o)
	if err != nil {
		return nil, ref, o, s, lo, err
	}
	lo.Stop = func() bool { return ctx.Err() != nil }
	return m, ref, o, s, lo, nil
}

func callLimit(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	target, err := a.Number(0)
	if err != nil {
		return nil, err
	}
	m, ref, o, s, lo, err := modelAndChart(ctx, env, a)
	if err != nil {
		return nil, err
	}
	if o.Has(cell.OptionTarget) || o.Has(cell.OptionLimit) {
		return nil, cell.ValueError("VEER.LIMIT: the target is the first argument; do not give target or limit as options")
	}
	r, err := computeLimit(env, "VEER.LIMIT", m, ref, s, lo, target)
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
	m, ref, o, s, lo, err := modelAndChart(ctx, env, a)
	if err != nil {
		return nil, err
	}
	h, err := resolveLimit(env, "VEER.DELAY", m, ref, o, s, lo)
	if err != nil {
		return nil, err
	}
	onset := o.Number(cell.OptionOnset, 0)
	if onset < 0 {
		return nil, cell.NumError("VEER.DELAY: onset must not be negative")
	}
	key := "veer.delay:" + ref.Handle + ":" + ref.SHA256 + ":" + settingsKey(s, lo) + fmt.Sprintf(":%g:%g:%g", h, shift, onset)
	v, err := env.Once(key, func() (any, error) {
		var c monitor.Calibration
		var err error
		if m == nil {
			c, err = calibrationWithoutModel("VEER.DELAY", s, lo)
		} else {
			c, err = m.Calibration(s, lo)
		}
		if err != nil {
			return nil, err
		}
		c.Stop = lo.Stop
		c.Progress = func(done, total int) {
			if total > 0 {
				env.Progress(float64(done) / float64(total))
			}
		}
		d, err := monitor.Delay(c, h, shift, onset)
		if err != nil {
			return nil, cell.NumError("VEER.DELAY: %v", err)
		}
		return d.Years, nil
	})
	if err != nil {
		return nil, err
	}
	return v, nil
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
	fn := a.Func().Name
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
		return nil, cell.ValueError("%s: ids, ages and values must have the same number of rows (they have %d, %d and %d)", fn, n, len(ages), len(vals))
	}
	if n == 0 {
		return nil, cell.ValueError("%s: there are no exam rows", fn)
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
			sh.failed[r] = cell.NAError("row %d: the worker id is blank", r+1)
		case math.IsNaN(ages[r]):
			sh.failed[r] = cell.NAError("row %d: the age is blank", r+1)
		case math.IsNaN(vals[r]):
			sh.failed[r] = cell.NAError("row %d: the reading is blank", r+1)
		default:
			sh.exams = append(sh.exams, screening.Exam{Worker: id, Group: groups[r], Time: ages[r], Value: vals[r]})
			sh.rowOf = append(sh.rowOf, r)
		}
	}
	if len(sh.exams) == 0 {
		return nil, cell.ValueError("%s: every exam row has a blank id, age or reading", fn)
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
func (sh *sheet) screenable(fn string, m *screening.Model, ext bool) error {
	// The usual row passes with a range check against its group's span,
	// looked up once per group (rowCheck words the failures).
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
			if ce := rowCheck(fn, m, e.Group, sh.groupGiven, e.Time, e.Value, ext, r+1); ce != nil {
				sh.failed[r] = ce
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

// screen runs the engine over the screenable rows. An engine error about
// two exams of one worker at the same age is reworded with the sheet's
// row numbers (the engine counts the screenable rows only).
func (sh *sheet) screen(fn string, m *screening.Model, s screening.Settings, h float64) ([]screening.Result, error) {
	res, err := m.Screen(sh.exams, s, h)
	if err == nil {
		return res, nil
	}
	type key struct {
		worker string
		age    float64
	}
	seen := make(map[key]int, len(sh.exams))
	for k, e := range sh.exams {
		kk := key{e.Worker, e.Time}
		if j, dup := seen[kk]; dup {
			return nil, cell.ValueError("%s: worker %q has two exams at the same age %s (rows %d and %d); remove or merge one",
				fn, e.Worker, cell.FormatNumber(e.Time), sh.rowOf[j]+1, sh.rowOf[k]+1)
		}
		seen[kk] = k
	}
	return nil, cellError(fn, err)
}

func callChart(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	m, ref, err := modelArg(ctx, env, a, 0)
	if err != nil {
		return nil, err
	}
	sh, err := examsArgs(a, 1)
	if err != nil {
		return nil, err
	}
	o, err := a.Options(5)
	if err != nil {
		return nil, err
	}
	s, lo, err := chartSettings("VEER.CHART", o)
	if err != nil {
		return nil, err
	}
	lo.Stop = func() bool { return ctx.Err() != nil }
	h, err := resolveLimit(env, "VEER.CHART", m, ref, o, s, lo)
	if err != nil {
		return nil, err
	}
	if err := sh.screenable("VEER.CHART", m, s.Extrapolate); err != nil {
		return nil, err
	}
	res, err := sh.screen("VEER.CHART", m, s, h)
	if err != nil {
		return nil, err
	}
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
func checkKind(env cell.Env, fn, name string, ruleSet bool) error {
	ref, err := env.Model(name + "@v1")
	if err != nil || isRuleSet(ref.Doc) == ruleSet {
		return nil
	}
	if ruleSet {
		return cell.ValueError("%s: %s is the name of a model fitted with VEER.FIT; give the rule set another name", fn, ref.Name)
	}
	return cell.ValueError("%s: %s is the name of a rule set saved with VEER.SAVERULES; give the model another name", fn, ref.Name)
}

// checkName checks the name of a model or rule set to save.
func checkName(fn, what, name string) (string, error) {
	name = strings.TrimSpace(name)
	if name == "" || strings.ContainsAny(name, "@/\\") {
		return "", cell.ValueError("%s: the %s name must be non-empty text without @, / or \\", fn, what)
	}
	return name, nil
}

func callFit(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	name, err := a.Text(0)
	if err != nil {
		return nil, err
	}
	if name, err = checkName("VEER.FIT", "model", name); err != nil {
		return nil, err
	}
	sh, err := examsArgs(a, 1)
	if err != nil {
		return nil, err
	}
	if e := sh.firstFailed(); e != nil {
		return nil, cell.ValueError("VEER.FIT: %s; every reference row needs an id, an age and a reading", e.Message)
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
		Transform:  o.Text(cell.OptionTransform, "none"),
		Bandwidth:  o.Number(cell.OptionBandwidth, 0),
		MinWorkers: int(o.Number(cell.OptionMinWorkers, 0)),
		Progress:   func(stage string, done float64) { env.Progress(done) },
	}}
	if opt.Curves.Bandwidth < 0 {
		return nil, cell.NumError("VEER.FIT: bandwidth must be positive (or 0 to choose it)")
	}
	m, err := screening.Fit(ctx, rows, opt)
	if err != nil {
		if cerr := ctx.Err(); cerr != nil {
			return nil, cerr
		}
		return nil, cellError("VEER.FIT", err)
	}
	doc, err := m.Encode()
	if err != nil {
		return nil, err
	}
	if err := checkKind(env, "VEER.FIT", name, false); err != nil {
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
		return nil, cell.ValueError("VEER.MODELS: this server cannot list its models; GET /v1/models lists them")
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
