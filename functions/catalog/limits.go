// Limits and delays: the chart options shared by VEER.CHART, VEER.RULE,
// VEER.LIMIT and VEER.DELAY (chartCall), and the two limit functions.

package catalog

import (
	"context"
	"fmt"
	"math"
	"strconv"

	"veer/functions/cell"
	"veer/functions/chart"
	"veer/functions/joint"
	"veer/functions/monitor"
	"veer/functions/screening"
)

// chartSettings reads the chart options shared by CHART, RULE, LIMIT and
// DELAY.
//
// With joint, the chart itself is not checked (the chart of several
// markers is read by jointSettings).
func chartSettings(o cell.Options, joint bool) (screening.Settings, screening.LimitOptions, error) {
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
	}
	var err error
	if s.Extrapolate, err = reachOption(o); err != nil {
		return s, screening.LimitOptions{}, err
	}
	if err := s.Chart.Validate(); err != nil && !joint {
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
	if o.Has(cell.OptionGap) && !(lo.Gap >= monitor.MinGap && lo.Gap <= monitor.MaxGap) {
		return s, lo, cell.OutOfRange.Errorf("the gap option must be from a day (%.4f years) to %d years, not %s; leave it out to use the reference workers' own gaps", monitor.MinGap, monitor.MaxGap, cell.FormatNumber(lo.Gap))
	}
	return s, lo, nil
}

// reachOption reads extrapolate and reach: how many years beyond the
// reference ages an age is answered from the curves' nearest end (0: none).
// extrapolate=on reaches screening.DefaultExtrapolation years; reach=N
// reaches N years and turns extrapolation on.
func reachOption(o cell.Options) (float64, error) {
	on := o.Bool(cell.OptionExtrapolate, false)
	if !o.Has(cell.OptionReach) {
		if on {
			return screening.DefaultExtrapolation, nil
		}
		return 0, nil
	}
	if o.Has(cell.OptionExtrapolate) && !on {
		return 0, cell.WrongArgument.Errorf("reach says how far extrapolate reaches, but extrapolate is off; drop one of them")
	}
	r := o.Number(cell.OptionReach, 0)
	if !(r > 0 && r <= screening.MaxExtrapolation) {
		return 0, cell.OutOfRange.Errorf("reach must be a number of years above 0 and at most %g, not %s", screening.MaxExtrapolation, cell.FormatNumber(r))
	}
	return r, nil
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
	// Several markers: the model (nil without one), how many markers, and
	// the joint chart settings.
	j       *screening.Joint
	markers int
	jset    screening.JointSettings
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

// readModel reads the model argument i (of one marker or several).
func (c *chartCall) readModel(ctx context.Context, a cell.Args, i int) error {
	var err error
	c.m, c.j, c.ref, err = anyModelArg(c.env, a, i)
	if c.j != nil {
		c.markers = len(c.j.Markers)
	}
	return err
}

// readOptions reads the options argument i and the settings they give.
func (c *chartCall) readOptions(ctx context.Context, a cell.Args, i int) error {
	var err error
	if c.opts, err = a.Options(i); err != nil {
		return err
	}
	if c.j == nil && c.m == nil && c.opts.Has(cell.OptionMarkers) {
		names := splitOption(c.opts.Text(cell.OptionMarkers, ""))
		c.markers = len(names)
		if len(names) == 1 {
			n, err := strconv.Atoi(names[0])
			if err != nil || n < 1 || n > joint.MaxMarkers {
				return cell.OutOfRange.Errorf("markers must be a number of markers from 1 to %d, or their names", joint.MaxMarkers)
			}
			c.markers = n
		}
	} else if c.opts.Has(cell.OptionMarkers) {
		return cell.WrongArgument.Errorf("the markers option goes without a model (a model knows its markers)")
	}
	if c.markers > 0 {
		// Settings shared with one marker (method, gap, seed, ...) are read
		// as for one marker, with a chart of one marker standing in.
		o := c.opts
		if c.jset, err = jointSettings(o, c.markers); err != nil {
			return err
		}
		if _, c.lim, err = chartSettings(o, true); err != nil {
			return err
		}
	} else if c.set, c.lim, err = chartSettings(c.opts, false); err != nil {
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
		limit := c.limit
		if c.markers > 0 {
			limit = c.jointLimit
		}
		r, err := limit(c.opts.Number(cell.OptionTarget, 0))
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
	limit := c.limit
	if c.markers > 0 {
		limit = c.jointLimit
	}
	r, err := limit(target)
	if err != nil {
		return nil, err
	}
	return r.H, nil
}

func callDelay(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	shifts, err := a.Numbers(0, cell.PolicyError)
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
	if c.markers > 0 {
		if len(shifts) != c.markers {
			return nil, cell.WrongArgument.Errorf("%d markers need %d shifts, one per marker in order, got %d", c.markers, c.markers, len(shifts))
		}
		return c.jointDelay(h, shifts, onset)
	}
	if len(shifts) != 1 {
		return nil, cell.WrongArgument.Errorf("shift is one number for a model of one marker, got %d", len(shifts))
	}
	return c.delay(h, shifts[0], onset)
}
