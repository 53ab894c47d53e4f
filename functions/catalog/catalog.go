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
	cell.OptionMethod, cell.OptionGap, cell.OptionSeed, cell.OptionReps, cell.OptionExtrapolate,
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
			Help:    "Fits mean and SD curves over age per group, and the serial correlation of each worker's readings, from rows of workers known to be healthy. The handle (name@vN) changes when the data change and stays the same when they do not.",
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
			Help:    "z = (reading − reference mean) / reference SD at the worker's age, on the model's scale. Blank cells give #N/A in their row.",
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
			Help:    "Give every exam row (any order); each worker's exams are ordered by age inside. Spills one row per input row with columns z, innovation, chart, limit, signal, first_signal. Options must give target (years to a false signal) or limit." + caution,
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
		Serial: o.Text(cell.OptionSerial, screening.SerialDirect),

		Extrapolate: o.Bool(cell.OptionExtrapolate, false),
	}
	if err := s.Chart.Validate(); err != nil {
		return s, screening.LimitOptions{}, cell.NumError("%s: %v", fn, err)
	}
	lo := screening.LimitOptions{
		Method: monitor.Method(o.Text(cell.OptionMethod, string(monitor.Normal))),
		Gap:    o.Number(cell.OptionGap, 0),
		Seed:   uint64(o.Number(cell.OptionSeed, screening.DefaultSeed)),
		Paths:  int(o.Number(cell.OptionReps, 0)),
	}
	if lo.Gap < 0 {
		return s, lo, cell.NumError("%s: the gap option must be a positive number of years", fn)
	}
	if lo.Paths < 0 || lo.Paths > 1_000_000 {
		return s, lo, cell.NumError("%s: reps must be between 1 and 1,000,000", fn)
	}
	return s, lo, nil
}

// settingsKey is a canonical text of the options, for cache keys.
func settingsKey(s screening.Settings, lo screening.LimitOptions) string {
	return fmt.Sprintf("%+v|%+v|%s|%g|%d|%d", s.Chart, s.Serial, lo.Method, lo.Gap, lo.Seed, lo.Paths)
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
	if s.Serial == screening.SerialWhiten {
		return monitor.Calibration{}, cell.ValueError("%s: serial=whiten needs a model (it uses the fitted serial correlation)", fn)
	}
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

func callLimit(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	target, err := a.Number(0)
	if err != nil {
		return nil, err
	}
	m, ref, err := optionalModel(ctx, env, a, 1)
	if err != nil {
		return nil, err
	}
	o, err := a.Options(2)
	if err != nil {
		return nil, err
	}
	s, lo, err := chartSettings("VEER.LIMIT", o)
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
	m, ref, err := optionalModel(ctx, env, a, 1)
	if err != nil {
		return nil, err
	}
	o, err := a.Options(2)
	if err != nil {
		return nil, err
	}
	s, lo, err := chartSettings("VEER.DELAY", o)
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

// examsArgs reads ids, ages, values and groups columns starting at argument
// i; rows with a blank id, age or value are reported in missing.
func examsArgs(a cell.Args, i int) (exams []screening.Exam, rowOf []int, missing map[int]string, n int, err error) {
	fn := a.Func().Name
	ids, err := a.Texts(i, cell.PolicyMissing)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	ages, err := a.Numbers(i+1, cell.PolicyMissing)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	vals, err := a.Numbers(i+2, cell.PolicyMissing)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	n = len(ids)
	if len(ages) != n || len(vals) != n {
		return nil, nil, nil, 0, cell.ValueError("%s: ids, ages and values must have the same number of rows (they have %d, %d and %d)", fn, n, len(ages), len(vals))
	}
	if n == 0 {
		return nil, nil, nil, 0, cell.ValueError("%s: there are no exam rows", fn)
	}
	groups, err := groupsArg(a, i+3, n)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	missing = map[int]string{}
	for r := 0; r < n; r++ {
		switch {
		case strings.TrimSpace(ids[r]) == "":
			missing[r] = "the worker id is blank"
		case math.IsNaN(ages[r]):
			missing[r] = "the age is blank"
		case math.IsNaN(vals[r]):
			missing[r] = "the reading is blank"
		default:
			exams = append(exams, screening.Exam{Worker: strings.TrimSpace(ids[r]), Group: groups[r], Time: ages[r], Value: vals[r]})
			rowOf = append(rowOf, r)
		}
	}
	if len(exams) == 0 {
		return nil, nil, nil, 0, cell.ValueError("%s: every exam row has a blank id, age or reading", fn)
	}
	return exams, rowOf, missing, n, nil
}

func callChart(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	m, ref, err := modelArg(ctx, env, a, 0)
	if err != nil {
		return nil, err
	}
	exams, rowOf, missing, n, err := examsArgs(a, 1)
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
	h, err := resolveLimit(env, "VEER.CHART", m, ref, o, s, lo)
	if err != nil {
		return nil, err
	}
	res, err := m.Screen(exams, s, h)
	if err != nil {
		return nil, cellError("VEER.CHART", err)
	}
	out := make([][]any, n)
	for r, msg := range missing {
		e := cell.NAError("row %d: %s", r+1, msg)
		out[r] = []any{e, e, e, e, e, e}
	}
	for k, r := range res {
		var fs any
		if !math.IsNaN(r.FirstSignal) {
			fs = r.FirstSignal
		}
		out[rowOf[k]] = []any{r.Z, r.Innovation, r.Stat, h, r.Signal, fs}
	}
	return out, nil
}

func callFit(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	name, err := a.Text(0)
	if err != nil {
		return nil, err
	}
	name = strings.TrimSpace(name)
	if name == "" || strings.ContainsAny(name, "@/\\") {
		return nil, cell.ValueError("VEER.FIT: the model name must be non-empty text without @, / or \\")
	}
	exams, _, missing, _, err := examsArgs(a, 1)
	if err != nil {
		return nil, err
	}
	if len(missing) > 0 {
		for r, msg := range missing {
			return nil, cell.ValueError("VEER.FIT: row %d: %s; every reference row needs an id, an age and a reading", r+1, msg)
		}
	}
	o, err := a.Options(5)
	if err != nil {
		return nil, err
	}
	rows := make([]refcurve.Row, len(exams))
	for i, e := range exams {
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
	m, err := screening.Fit(rows, opt)
	if err != nil {
		return nil, cellError("VEER.FIT", err)
	}
	doc, err := m.Encode()
	if err != nil {
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
