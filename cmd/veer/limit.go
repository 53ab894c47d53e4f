package main

import (
	"flag"
	"fmt"
	"os"
	"strconv"
	"strings"

	"veer/functions/chart"
	"veer/functions/joint"
	"veer/functions/monitor"
	"veer/functions/screening"
	"veer/functions/serial"
)

// chartFlags are the chart options shared by limit, delay and screen.
type chartFlags struct {
	kind, side, serial, method string
	horizon                    string
	allowance, lambda, unit    float64
	headStart                  float64
	gap                        optionalFloat
	restart                    bool
	seed                       uint64
	paths                      int
	fs                         *flag.FlagSet
}

// given reports whether the flag was set on the command line.
func (c *chartFlags) given(name string) bool {
	set := false
	c.fs.Visit(func(f *flag.Flag) { set = set || f.Name == name })
	return set
}

func (c *chartFlags) register(fs *flag.FlagSet) {
	c.fs = fs
	d := chart.DefaultSpec()
	fs.StringVar(&c.kind, "chart", string(d.Kind), "chart: cusum or ewma; with several markers also mewma, mcusum or any (each marker's own CUSUM, one limit)")
	fs.StringVar(&c.side, "side", string(d.Side), "direction of drift to detect: up, down or both; with several markers one per marker, comma-separated in the order of --value, e.g. up,up,down")
	fs.Float64Var(&c.allowance, "allowance", d.Allowance, "CUSUM allowance k, in SDs (half the shift to detect fastest)")
	fs.Float64Var(&c.lambda, "lambda", d.Lambda, "EWMA smoothing weight per unit of time, in (0,1]")
	fs.Float64Var(&c.unit, "unit", d.UnitOrDefault(), "EWMA time unit in years (the weight of an exam after a gap d is 1-(1-lambda)^(d/unit))")
	fs.Float64Var(&c.headStart, "headstart", 0, "fast initial response: start the CUSUM at this fraction of the limit (0 to 1)")
	alias(fs, "head-start", "headstart")
	fs.BoolVar(&c.restart, "restart", false, "restart the chart after a signal")
	fs.StringVar(&c.serial, "serial", string(screening.SerialWhiten), "serial correlation: whiten (chart each reading against the worker's own predicted level, the Kalman innovation), direct (chart z; the limit carries the correlation) or off (ignore it)")
	fs.StringVar(&c.method, "method", string(monitor.Normal), "how the limit is computed: normal or bootstrap")
	fs.StringVar(&c.horizon, "horizon", string(monitor.HorizonFollowUp), "what the target counts: followup (worker-years of exams per false signal, workers followed as long as the reference workers; needs --model) or long (one worker with an unending exam history, the textbook average time to signal)")
	fs.Var(&c.gap, "gap", fmt.Sprintf("planned years between exams, from a day (%.4f) to %d years (default: the reference workers' own gaps; needed without --model)", monitor.MinGap, monitor.MaxGap))
	fs.Uint64Var(&c.seed, "seed", screening.DefaultSeed, "seed of the Monte Carlo methods (the same seed gives the same limit)")
	fs.IntVar(&c.paths, "reps", 0, "simulated or resampled sequences of the Monte Carlo and bootstrap methods (0: default, about 1.6% standard error)")
	alias(fs, "paths", "reps")
}

func (c *chartFlags) settings() (screening.Settings, error) {
	s := screening.Settings{
		Chart: chart.Spec{
			Kind: chart.Kind(c.kind), Side: chart.Side(c.side), Allowance: c.allowance, Lambda: c.lambda,
			Unit: c.unit, HeadStart: c.headStart, Restart: c.restart,
		},
		Serial: screening.Serial(c.serial),
	}
	if err := s.Chart.Validate(); err != nil {
		return s, usageError{err.Error()}
	}
	return s, c.settingsCommon()
}

// settingsCommon checks the flags shared by charts of one marker and of
// several.
func (c *chartFlags) settingsCommon() error {
	switch c.method {
	case string(monitor.Normal), string(monitor.Bootstrap):
	default:
		return usagef("--method must be normal or bootstrap, not %q", c.method)
	}
	switch monitor.Horizon(c.horizon) {
	case monitor.HorizonFollowUp, monitor.HorizonLong:
	default:
		return usagef("--horizon must be followup or long, not %q", c.horizon)
	}
	if c.gap.set && !(c.gap.v >= monitor.MinGap && c.gap.v <= monitor.MaxGap) {
		return usagef("--gap must be from a day (%.4f years) to %d years, not %s; leave it out to use the reference workers' own gaps", monitor.MinGap, monitor.MaxGap, c.gap.String())
	}
	return nil
}

// optionalFloat is a number flag that knows whether it was given.
type optionalFloat struct {
	v   float64
	set bool
}

func (f *optionalFloat) String() string {
	if f == nil || !f.set {
		return ""
	}
	return strconv.FormatFloat(f.v, 'g', -1, 64)
}

func (f *optionalFloat) Set(s string) error {
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil {
		return fmt.Errorf("%q is not a number", s)
	}
	f.v, f.set = v, true
	return nil
}

func (c *chartFlags) limitOptions(progress func(done, total int)) screening.LimitOptions {
	return screening.LimitOptions{
		Method: monitor.Method(c.method), Gap: c.gap.v, Seed: c.seed, Paths: c.paths, Progress: progress,
		Horizon: monitor.Horizon(c.horizon),
	}
}

// calibrationWithoutModel is used when no model is given: i.i.d. N(0,1)
// values at a fixed gap, method normal only, the textbook (long) horizon.
func (c *chartFlags) calibrationWithoutModel(s screening.Settings) (monitor.Calibration, error) {
	if !c.gap.set {
		return monitor.Calibration{}, usagef("without --model, give the planned years between exams with --gap")
	}
	if c.method != string(monitor.Normal) {
		return monitor.Calibration{}, usagef("--method bootstrap needs --model (it resamples the reference workers)")
	}
	// Without a model no serial correlation is known: whiten and direct
	// both chart independent N(0,1) scores.
	return monitor.Calibration{
		Settings: monitor.Settings{Chart: s.Chart, Mode: monitor.Direct, Serial: serial.Params{}},
		Method:   monitor.Normal, Gap: c.gap.v, Seed: c.seed, Paths: c.paths,
	}, nil
}

func mcProgress(e *env) (func(done, total int), func()) {
	p := newProgress(e)
	return func(done, total int) {
		if total > 0 {
			p.report("simulating", float64(done)/float64(total))
		}
	}, p.finish
}

func runLimit(e *env, args []string) error {
	fs := newFlags(e, "limit", "[--model M.json] --target YEARS [--chart cusum|ewma] [--allowance K] [--lambda L] [--side up|down|both] [--gap YEARS] [--method normal|bootstrap]")
	var cf chartFlags
	cf.register(fs)
	model := fs.String("model", "", "model file written by veer fit (optional with --gap and method normal)")
	target := fs.Float64("target", 0, "average years to a false signal for a healthy worker (required)")
	markers := fs.Int("markers", 0, "without --model: the number of markers charted together (independent N(0,1) readings of each)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if !(*target > 0) {
		return usagef("--target must be a positive number of years, e.g. 20")
	}
	if jc, err := jointModelOrMarkers(*model, *markers); err != nil || jc.several {
		if err != nil {
			return err
		}
		res, err := jointLimit(e, &cf, jc.model, *markers, *target)
		if err != nil {
			return err
		}
		describeLimit(e, res, *target, monitor.Method(cf.method))
		fmt.Fprintf(e.stdout, "%.4f\n", res.H)
		return nil
	}
	s, err := cf.settings()
	if err != nil {
		return err
	}
	prog, done := mcProgress(e)
	var res monitor.LimitResult
	if *model == "" {
		c, err := cf.calibrationWithoutModel(s)
		if err != nil {
			return err
		}
		c.Progress = prog
		res, err = monitor.Limit(c, *target)
		done()
		if err != nil {
			return err
		}
	} else {
		m, err := loadModel(*model)
		if err != nil {
			return err
		}
		res, err = m.Limit(s, cf.limitOptions(prog), *target)
		done()
		if err != nil {
			return err
		}
	}
	describeLimit(e, res, *target, monitor.Method(cf.method))
	fmt.Fprintf(e.stdout, "%.4f\n", res.H)
	return nil
}

// jointChoice says whether limit or delay work on several markers: a model
// of several markers, or --markers without a model.
type jointChoice struct {
	several bool
	model   *screening.Joint
}

func jointModelOrMarkers(model string, markers int) (jointChoice, error) {
	if markers < 0 || markers > joint.MaxMarkers {
		return jointChoice{}, usagef("--markers must be from 1 to %d", joint.MaxMarkers)
	}
	if model == "" {
		return jointChoice{several: markers > 0}, nil
	}
	if markers > 0 {
		return jointChoice{}, usagef("--markers goes without --model (a model knows its markers)")
	}
	b, err := os.ReadFile(model)
	if err != nil || !screening.IsJoint(b) {
		return jointChoice{}, nil // read below as a model of one marker
	}
	_, j, err := loadAnyModel(model)
	if err != nil {
		return jointChoice{}, err
	}
	return jointChoice{several: true, model: j}, nil
}

// describeLimit says on stderr how the limit was found: exactly, by Monte
// Carlo simulation of the fitted serial model, or by bootstrap of the
// reference workers' own sequences.
func describeLimit(e *env, r monitor.LimitResult, target float64, method monitor.Method) {
	how := "exact (i.i.d. normal values)"
	if !r.Exact {
		what := "Monte Carlo, %d simulated paths"
		if method == monitor.Bootstrap {
			what = "bootstrap, %d resampled histories of reference workers"
		}
		how = fmt.Sprintf(what+", standard error %.2f years (%.1f%% of target), limit ±%.3f", r.Paths, r.SE, 100*r.SE/target, r.SEH)
	}
	fmt.Fprintf(e.stderr, "limit %.4f: average time to a false signal %.2f years at a mean gap of %.2f years; %s\n", r.H, r.ATS, r.MeanGap, how)
}

func runDelay(e *env, args []string) error {
	fs := newFlags(e, "delay", "[--model M.json] (--limit H | --target YEARS) --shift SDS [--onset YEARS] [chart flags]")
	var cf chartFlags
	cf.register(fs)
	model := fs.String("model", "", "model file written by veer fit (optional with --gap)")
	limitH := fs.Float64("limit", 0, "control limit h (or give --target)")
	target := fs.Float64("target", 0, "average years to a false signal, to compute the limit")
	shifts := fs.String("shift", "1", "sustained shift of the readings, in reference SDs (negative for downward); with several markers one per marker, comma-separated, e.g. 0.5,0.5,0")
	onset := fs.Float64("onset", 0, "years after the first exam at which the shift starts")
	markers := fs.Int("markers", 0, "without --model: the number of markers charted together (independent N(0,1) readings of each)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if (*limitH > 0) == (*target > 0) {
		return usagef("give exactly one of --limit and --target")
	}
	if *onset < 0 {
		return usagef("--onset must not be negative")
	}
	if jc, err := jointModelOrMarkers(*model, *markers); err != nil || jc.several {
		if err != nil {
			return err
		}
		return jointDelay(e, &cf, jc.model, *markers, *limitH, *target, *shifts, *onset)
	}
	shiftList, err := parseList("shift", *shifts)
	if err != nil {
		return err
	}
	if len(shiftList) != 1 {
		return usagef("--shift takes one number for a model of one marker")
	}
	shift := &shiftList[0]
	s, err := cf.settings()
	if err != nil {
		return err
	}
	prog, done := mcProgress(e)
	defer done()
	var c monitor.Calibration
	if *model == "" {
		if c, err = cf.calibrationWithoutModel(s); err != nil {
			return err
		}
		c.Progress = prog
	} else {
		m, err := loadModel(*model)
		if err != nil {
			return err
		}
		if c, err = m.Calibration(s, cf.limitOptions(prog)); err != nil {
			return err
		}
	}
	h := *limitH
	if *target > 0 {
		r, err := monitor.Limit(c, *target)
		if err != nil {
			return err
		}
		describeLimit(e, r, *target, monitor.Method(cf.method))
		h = r.H
	}
	d, err := monitor.Delay(c, h, *shift, *onset)
	if err != nil {
		return err
	}
	fmt.Fprintf(e.stderr, "limit %.4f, shift %+g SD from %g years after the first exam: %d paths, standard error %.2f years\n", h, *shift, *onset, d.Paths, d.SE)
	fmt.Fprintf(e.stdout, "%.4f\n", d.Years)
	return nil
}
