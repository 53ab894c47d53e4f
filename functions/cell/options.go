package cell

import (
	"slices"
	"sort"
	"strconv"
	"strings"

	"veer/internal/numeric"
)

// Names of the options shared by several functions. They are declared once
// here so every function spells them the same way; a Func lists the ones it
// accepts in Func.Options.
const (
	OptionAllowance   = "allowance"
	OptionSide        = "side"
	OptionChart       = "chart"
	OptionLambda      = "lambda"
	OptionSerial      = "serial"
	OptionTarget      = "target"
	OptionMethod      = "method"
	OptionLimit       = "limit"
	OptionGap         = "gap"
	OptionHeadstart   = "headstart"
	OptionShift       = "shift"
	OptionSeed        = "seed"
	OptionReps        = "reps"
	OptionTransform   = "transform"
	OptionGroup       = "group"
	OptionUnit        = "unit"
	OptionRestart     = "restart"
	OptionExtrapolate = "extrapolate"
	OptionReach       = "reach"
	OptionBandwidth   = "bandwidth"
	OptionMinWorkers  = "minworkers"
	OptionOnset       = "onset"
	OptionHorizon     = "horizon"
	OptionMarkers     = "markers"
	OptionTargets     = "targets"
	OptionCentile     = "centile"
	OptionMissing     = "missing"
)

// Option declares one named option: its value type, allowed choices and help.
type Option struct {
	Name    string
	Type    Type // TypeNumber, TypeText, TypeBool or TypeChoice
	Choices []string
	// List, for TypeChoice: the value may also be a comma-separated list
	// of choices (one per marker of several), e.g. "up,up,down".
	List bool
	Help string
}

// OptionInfo is the JSON form of an Option in the function listing.
type OptionInfo struct {
	Name    string   `json:"name"`
	Type    Type     `json:"type"`
	Choices []string `json:"choices,omitempty"`
	List    bool     `json:"list,omitempty"`
	Help    string   `json:"help"`
}

func (o Option) info() OptionInfo {
	return OptionInfo{Name: o.Name, Type: o.Type, Choices: append([]string(nil), o.Choices...), List: o.List, Help: o.Help}
}

// sharedOptions is the one table of option spellings. It is never modified.
var sharedOptions = []Option{
	{Name: OptionAllowance, Type: TypeNumber, Help: "CUSUM allowance (reference value) k, in standard deviations; common practice is half the shift to be detected"},
	{Name: OptionSide, Type: TypeChoice, Choices: []string{"up", "down", "both"}, List: true, Help: "which drift to watch: up, down or both; with several markers one per marker, in the order of the value columns, e.g. up,up,down"},
	{Name: OptionChart, Type: TypeChoice, Choices: []string{"cusum", "ewma", "mewma", "mcusum", "any"}, Help: "chart statistic: cusum or ewma; with several markers also mewma or mcusum (every direction) or any (each marker's own CUSUM, one common limit)"},
	{Name: OptionLambda, Type: TypeNumber, Help: "EWMA weight per unit of time, in (0, 1]"},
	{Name: OptionSerial, Type: TypeChoice, Choices: []string{"whiten", "direct", "off", "on"}, Help: "how the correlation of a worker's readings is handled: whiten (the default: chart each reading against the worker's own predicted level, the Kalman-filter innovation; on means whiten), direct (chart z, the limit carries the correlation) or off (ignore it)"},
	{Name: OptionTarget, Type: TypeNumber, Help: "target average time to a false signal for a healthy worker, in years"},
	{Name: OptionMethod, Type: TypeChoice, Choices: []string{"normal", "bootstrap"}, Help: "how limits are calibrated: normal (exact for independent N(0,1) scores) or bootstrap (resampled reference workers)"},
	{Name: OptionLimit, Type: TypeNumber, Help: "control limit h; a chart statistic beyond it signals"},
	{Name: OptionGap, Type: TypeNumber, Help: "mean time between exams, in years"},
	{Name: OptionHeadstart, Type: TypeNumber, Help: "fast initial response head start, as a fraction of the limit, in [0, 1)"},
	{Name: OptionShift, Type: TypeNumber, Help: "size of a sustained shift, in standard deviations of the readings"},
	{Name: OptionSeed, Type: TypeNumber, Help: "random seed (a whole number); the same seed gives the same result"},
	{Name: OptionReps, Type: TypeNumber, Help: "number of simulated or resampled sequences"},
	{Name: OptionTransform, Type: TypeChoice, Choices: []string{"none", "log", "boxcox"}, List: true, Help: "transform of the readings before fitting: none, log or boxcox; with several markers one for all or one per marker, e.g. none,log,none"},
	{Name: OptionGroup, Type: TypeText, Help: "group (for example sex or job group) whose reference curve is used"},
	{Name: OptionUnit, Type: TypeNumber, Help: "time unit, in years, of the gap-aware EWMA weight 1-(1-lambda)^(gap/unit)"},
	{Name: OptionRestart, Type: TypeBool, Help: "on: the chart statistic starts again after a signal; off: it carries on"},
	{Name: OptionExtrapolate, Type: TypeBool, Help: "on: answer ages up to a few years (5, or reach) outside the reference age range from the nearest end of the curves; off: " + string(OutsideReference.Code()) + " there"},
	{Name: OptionReach, Type: TypeNumber, Help: "how many years beyond the reference ages extrapolate reaches (default 5; giving it turns extrapolate on); ages farther out are " + string(OutsideReference.Code())},
	{Name: OptionBandwidth, Type: TypeNumber, Help: "smoothing bandwidth of the reference curves, in years; 0 or absent: chosen by cross-validation"},
	{Name: OptionMinWorkers, Type: TypeNumber, Help: "fewest reference workers a group needs to get its own curves"},
	{Name: OptionOnset, Type: TypeNumber, Help: "years after the first exam at which a sustained shift starts"},
	{Name: OptionMarkers, Type: TypeText, Help: "the markers of a values range of several columns, by name in column order (e.g. sbp,chol,fev1); without a model, how many markers are charted together (e.g. 3)"},
	{Name: OptionTargets, Type: TypeText, Help: "more targets in years to evaluate the chart at: a list 5,10,20,50,100 or a range 5-100 (10 targets evenly spaced on a log scale; 5-100/N for N)"},
	{Name: OptionCentile, Type: TypeNumber, Help: "the baseline rule flags a reading beyond this reference centile in the chart's direction (97.5 and 2.5 both mean the outer 2.5%)"},
	{Name: OptionMissing, Type: TypeChoice, Choices: []string{"error", "healthy"}, Help: "a worker of the exams with no outcome row: error (name a few and stop) or healthy (take them as never diagnosed)"},
	{Name: OptionHorizon, Type: TypeChoice, Choices: []string{"followup", "long"}, Help: "what the target counts: followup (the default with a model: worker-years of exams per false signal, workers followed as long as the reference workers) or long (one worker with an unending exam history)"},
}

// LookupOption returns the shared declaration of an option name
// (case-insensitive).
func LookupOption(name string) (Option, bool) {
	name = strings.ToLower(strings.TrimSpace(name))
	for _, o := range sharedOptions {
		if o.Name == name {
			o.Choices = append([]string(nil), o.Choices...)
			return o, true
		}
	}
	return Option{}, false
}

// SharedOptions returns all declared options in declaration order.
func SharedOptions() []Option {
	out := make([]Option, len(sharedOptions))
	for i, o := range sharedOptions {
		o.Choices = append([]string(nil), o.Choices...)
		out[i] = o
	}
	return out
}

// Options holds parsed options of one call. Values are already checked
// against their declared type, so the getters cannot fail. Asking for an
// option the function did not declare panics (a programmer error).
type Options struct {
	fn      string
	allowed []string
	vals    map[string]Cell
}

func (o Options) check(name string) {
	for _, a := range o.allowed {
		if a == name {
			return
		}
	}
	panic("cell: " + o.fn + " reads option " + strconv.Quote(name) + " that it does not list in Func.Options")
}

// Has reports whether the option was given.
func (o Options) Has(name string) bool {
	o.check(name)
	_, ok := o.vals[name]
	return ok
}

// Number returns a number option, or def when it was not given.
func (o Options) Number(name string, def float64) float64 {
	o.check(name)
	if c, ok := o.vals[name]; ok {
		return c.Num
	}
	return def
}

// Text returns a text or choice option (choices in lower case), or def.
func (o Options) Text(name string, def string) string {
	o.check(name)
	if c, ok := o.vals[name]; ok {
		return c.Str
	}
	return def
}

// Bool returns an on/off option, or def.
func (o Options) Bool(name string, def bool) bool {
	o.check(name)
	if c, ok := o.vals[name]; ok {
		return c.B
	}
	return def
}

// Names returns the names of the options given, sorted.
func (o Options) Names() []string {
	out := make([]string, 0, len(o.vals))
	for k := range o.vals {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

// ParseOptions parses an options argument for the function fn that accepts
// the options named in allowed. The argument may be:
//
//   - absent or blank: no options;
//   - text "name=value; name=value" (pieces separated by ';' or new lines,
//     names case-insensitive, spaces around names and values ignored);
//   - a range of two columns, option names in the first and values in the
//     second (fully blank rows are skipped);
//   - a one-column or one-row range of "name=value" texts.
//
// An unknown option is an error listing the known ones; so is an option given
// twice or a value of the wrong type. argName names the argument in messages.
func ParseOptions(fn string, allowed []string, v Value, argName string) (Options, error) {
	p := optParser{allowed: allowed, arg: argName, o: Options{fn: fn, allowed: allowed, vals: map[string]Cell{}}}
	if v.IsMissing() {
		return p.o, nil
	}
	if c, ok := v.Cell(); ok && v.IsScalar() {
		switch c.Kind {
		case KindText:
			return p.o, p.text(c.Str, "")
		case KindError:
			return p.o, Errorf(Code(c.Str), "argument %s is the error %s", argName, c.Str)
		}
		return p.o, p.shapeError()
	}
	rows, cols := v.Dims()
	switch {
	case rows == 0:
		return p.o, nil
	case cols == 2:
		for r, row := range v.Rows() {
			name, val := row[0], row[1]
			if name.Kind == KindBlank && val.Kind == KindBlank {
				continue
			}
			where := "row " + strconv.Itoa(r+1)
			if name.Kind != KindText || strings.TrimSpace(name.Str) == "" {
				return p.o, WrongArgument.Errorf("argument %s, %s: the first column must hold an option name; got %s", argName, where, name)
			}
			if err := p.set(name.Str, val, where); err != nil {
				return p.o, err
			}
		}
		return p.o, nil
	case cols == 1 || rows == 1:
		for r, row := range v.Rows() {
			for c, cl := range row {
				where := position(rows, cols, r, c)
				switch cl.Kind {
				case KindBlank:
					continue
				case KindText:
					if err := p.text(cl.Str, where); err != nil {
						return p.o, err
					}
				case KindError:
					return p.o, Errorf(Code(cl.Str), "argument %s, %s: the error %s", argName, where, cl.Str)
				default:
					return p.o, WrongArgument.Errorf("argument %s, %s: expected text like \"side=up\"; got %s", argName, where, cl)
				}
			}
		}
		return p.o, nil
	}
	return p.o, p.shapeError()
}

type optParser struct {
	arg     string
	allowed []string
	o       Options
}

func (p *optParser) shapeError() *Error {
	return WrongArgument.Errorf("argument %s: options must be text like \"side=up; allowance=0.5\" or a two-column range of names and values", p.arg)
}

func (p *optParser) prefix(where string) string {
	s := "argument " + p.arg
	if where != "" {
		s += ", " + where
	}
	return s
}

// text parses "name=value; name=value".
func (p *optParser) text(s, where string) error {
	for _, piece := range strings.FieldsFunc(s, func(r rune) bool { return r == ';' || r == '\n' || r == '\r' }) {
		piece = strings.TrimSpace(piece)
		if piece == "" {
			continue
		}
		name, val, ok := strings.Cut(piece, "=")
		if !ok {
			return WrongArgument.Errorf("%s: %s has no value; write name=value, e.g. \"side=up\"", p.prefix(where), quoteShort(piece))
		}
		if err := p.set(name, TextCell(strings.TrimSpace(val)), where); err != nil {
			return err
		}
	}
	return nil
}

// set checks and stores one option.
func (p *optParser) set(rawName string, val Cell, where string) error {
	name := strings.ToLower(strings.TrimSpace(rawName))
	known := false
	for _, a := range p.allowed {
		if a == name {
			known = true
			break
		}
	}
	if !known {
		if len(p.allowed) == 0 {
			return WrongArgument.Errorf("%s: unknown option %s; the function takes no options", p.prefix(where), quoteShort(name))
		}
		return WrongArgument.Errorf("%s: unknown option %s; known options: %s", p.prefix(where), quoteShort(name), strings.Join(p.allowed, ", "))
	}
	if _, dup := p.o.vals[name]; dup {
		return WrongArgument.Errorf("%s: option %q is given twice", p.prefix(where), name)
	}
	decl, _ := LookupOption(name)
	if val.Kind == KindError {
		return Errorf(Code(val.Str), "%s: option %q is the error %s", p.prefix(where), name, val.Str)
	}
	if val.Kind == KindBlank || (val.Kind == KindText && strings.TrimSpace(val.Str) == "") {
		return WrongArgument.Errorf("%s: option %q has no value", p.prefix(where), name)
	}
	c, err := coerceOption(decl, val)
	if err != nil {
		return WrongArgument.Errorf("%s: %s", p.prefix(where), err.Message)
	}
	p.o.vals[name] = c
	return nil
}

// coerceOption converts a value to the option's declared type.
func coerceOption(decl Option, v Cell) (Cell, *Error) {
	switch decl.Type {
	case TypeNumber:
		switch v.Kind {
		case KindNumber:
			if numeric.Finite(v.Num) {
				return v, nil
			}
		case KindText:
			f, err := strconv.ParseFloat(strings.TrimSpace(v.Str), 64)
			if err == nil && numeric.Finite(f) {
				return NumberCell(f), nil
			}
		}
		return Cell{}, WrongArgument.Errorf("option %q must be a number; got %s", decl.Name, v)
	case TypeBool:
		if b, ok := boolOf(v); ok {
			return BoolCell(b), nil
		}
		return Cell{}, WrongArgument.Errorf("option %q must be on or off; got %s", decl.Name, v)
	case TypeChoice:
		if v.Kind == KindText {
			parts := []string{v.Str}
			if decl.List {
				parts = strings.Split(v.Str, ",")
			}
			ok := true
			for i, p := range parts {
				parts[i] = strings.ToLower(strings.TrimSpace(p))
				ok = ok && slices.Contains(decl.Choices, parts[i])
			}
			if ok {
				return TextCell(strings.Join(parts, ",")), nil
			}
		}
		if decl.List {
			return Cell{}, WrongArgument.Errorf("option %q must be one of %s, or a comma-separated list of them (one per marker); got %s", decl.Name, strings.Join(decl.Choices, ", "), v)
		}
		return Cell{}, WrongArgument.Errorf("option %q must be one of %s; got %s", decl.Name, strings.Join(decl.Choices, ", "), v)
	case TypeText:
		switch v.Kind {
		case KindText:
			return TextCell(strings.TrimSpace(v.Str)), nil
		case KindNumber:
			return TextCell(FormatNumber(v.Num)), nil
		}
		return Cell{}, WrongArgument.Errorf("option %q must be text; got %s", decl.Name, v)
	}
	panic("cell: option " + decl.Name + " has unknown type " + string(decl.Type))
}

// boolOf reads a boolean from TRUE/FALSE, 1/0 or on/off, yes/no, true/false.
func boolOf(v Cell) (bool, bool) {
	switch v.Kind {
	case KindBool:
		return v.B, true
	case KindNumber:
		switch v.Num {
		case 1:
			return true, true
		case 0:
			return false, true
		}
	case KindText:
		switch strings.ToLower(strings.TrimSpace(v.Str)) {
		case "on", "yes", "true", "1":
			return true, true
		case "off", "no", "false", "0":
			return false, true
		}
	}
	return false, false
}
