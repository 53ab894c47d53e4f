package rules

import (
	"cmp"
	"context"
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common/types"
	"github.com/google/cel-go/interpreter"
)

// JointExam holds what a rule may look at for one exam of a worker screened
// on several markers together: the joint chart and, per marker, what an
// Exam holds for one marker. Rules name a marker's values with the marker's
// name as a suffix (z_sbp, centile_chol, zs_fev1; marker names are made
// into CEL names by SanitizeNames).
//
// Fields from Exam on depend on the worker's other exams; LinkJoint fills
// them. A marker not measured at an exam has NaN readings there (and
// measured_<m> false); its history lists hold only the exams where it was
// measured.
type JointExam struct {
	Worker  string  // [worker]
	Group   string  // [group]
	Time    float64 // [time]
	Chart   float64 // [chart] the joint chart statistic
	Limit   float64 // [limit] its control limit
	Signal  bool    // [signal] the joint chart signals at this exam
	Leading string  // [leading_marker] at a signal, the marker contributing most; "" otherwise
	InRange bool    // [in_range] the age lies inside every measured marker's reference range

	Markers []MarkerExam

	Exam                  int     // [exam]
	Exams                 int     // [exams]
	Gap                   float64 // [gap]
	YearsSinceFirstSignal float64 // [years_since_first_signal]
	Times                 []float64
	Signals               []bool
}

// MarkerExam is one marker at one exam of a JointExam.
type MarkerExam struct {
	Value, Mean, SD, Z, Centile, Innovation float64 // [value_m] [mean_m] [sd_m] [z_m] [centile_m] [innovation_m]; NaN when not measured

	PrevZ, PrevValue float64   // [prev_z_m] [prev_value_m] at the marker's previous reading; NaN if none
	Zs, Values       []float64 // [zs_m] [values_m] the marker's readings up to this exam, oldest first
}

// jointVar is a name of a joint rule: a joint variable (marker < 0) or a
// marker's (field one of the per-marker fields).
type jointVar struct {
	marker int
	field  string
}

// jointMarkerVars are the per-marker variables, each suffixed _<marker>.
func jointMarkerVars() []examVar {
	num, flag := cel.DoubleType, cel.BoolType
	nums := cel.ListType(cel.DoubleType)
	v := func(name string, t *cel.Type, doc string) examVar {
		return examVar{Variable{name, typeWords(t), doc}, t}
	}
	return []examVar{
		v("value", num, "the marker's reading, in its own units; NaN when not measured at this exam"),
		v("z", num, "the marker's standardised reading"),
		v("mean", num, "the marker's reference mean at this age and group"),
		v("sd", num, "the marker's reference standard deviation at this age and group"),
		v("centile", num, "the reading's centile in the marker's reference, 0 to 100"),
		v("innovation", num, "the marker's Kalman innovation"),
		v("measured", flag, "true when the marker was measured at this exam"),
		v("prev_z", num, "z of the marker's previous reading; NaN if none"),
		v("prev_value", num, "the marker's previous reading; NaN if none"),
		v("zs", nums, "the marker's z values up to this exam, oldest first"),
		v("values", nums, "the marker's readings up to this exam, oldest first"),
	}
}

// jointVars are the joint variables.
func jointVars() []examVar {
	num, whole, flag, text := cel.DoubleType, cel.IntType, cel.BoolType, cel.StringType
	nums, flags := cel.ListType(cel.DoubleType), cel.ListType(cel.BoolType)
	v := func(name string, t *cel.Type, doc string) examVar {
		return examVar{Variable{name, typeWords(t), doc}, t}
	}
	return []examVar{
		v("time", num, "age at the exam, in years"),
		v("group", text, `reference group of the worker; "" if none`),
		v("worker", text, "worker identifier"),
		v("chart", num, "the joint chart statistic over every marker"),
		v("limit", num, "the joint chart's control limit"),
		v("signal", flag, "true when the joint chart signals at this exam"),
		v("leading_marker", text, `at a signal, the marker contributing most to the chart; "" otherwise`),
		v("in_range", flag, "true when the age lies inside every measured marker's reference range"),
		v("exam", whole, "number of this exam for the worker: 1 for the first, in time order"),
		v("exams", whole, "number of exams of this worker in the data"),
		v("has_previous", flag, "true from the worker's second exam on"),
		v("gap", num, "years since the worker's previous exam; 0 on the first exam"),
		v("has_signalled", flag, "true if the joint chart has signalled at this exam or an earlier one"),
		v("years_since_first_signal", num, "years since the worker's first signal; NaN if none yet"),
		v("times", nums, "the worker's ages at each exam up to this one, oldest first"),
		v("signals", flags, "the joint chart's signal at each exam up to this one, oldest first"),
	}
}

// JointVariables lists the names a rule over several markers can use: the
// joint ones, then each marker's (suffixed _<marker>, marker names made
// into CEL names).
func JointVariables(markers []string) []Variable {
	var out []Variable
	for _, v := range jointVars() {
		out = append(out, v.Variable)
	}
	for _, m := range SanitizeNames(markers) {
		for _, v := range jointMarkerVars() {
			w := v.Variable
			w.Name += "_" + m
			out = append(out, w)
		}
	}
	return out
}

// JointRule is a compiled rule over exams of several markers.
type JointRule struct {
	p       program
	markers []string
	vars    map[string]jointVar
}

// Expr returns the rule's text.
func (r *JointRule) Expr() string { return r.p.expr }

// CompileJoint compiles a rule over exams of the given markers (in the
// order of JointExam.Markers) that must give a result of kind want, with
// the default limits. A mistake in the text gives a *CompileError.
func CompileJoint(expr string, markers []string, want ResultKind) (*JointRule, error) {
	return compileJoint(expr, markers, want, DefaultLimits())
}

// CompileJoint is the cached form of the package function CompileJoint.
func (c *Cache) CompileJoint(expr string, markers []string, want ResultKind) (*JointRule, error) {
	e := c.lookup(cacheKey{expr: expr, want: want, cols: "joint\x00" + strings.Join(markers, "\x00")}, func(e *cacheEntry) {
		e.jrule, e.err = compileJoint(expr, markers, want, c.lim)
	})
	return e.jrule, e.err
}

func compileJoint(expr string, markers []string, want ResultKind, lim Limits) (*JointRule, error) {
	lim = lim.withDefaults()
	r := &JointRule{markers: markers, vars: map[string]jointVar{}}
	opts := baseEnvOptions(lim)
	sized := map[string]bool{"times": true, "signals": true, "group": true, "worker": true, "leading_marker": true}
	var known []string
	for _, v := range jointVars() {
		opts = append(opts, cel.Variable(v.Name, v.typ))
		r.vars[v.Name] = jointVar{marker: -1, field: v.Name}
		known = append(known, v.Name)
	}
	for k, m := range SanitizeNames(markers) {
		for _, v := range jointMarkerVars() {
			name := v.Name + "_" + m
			if _, clash := r.vars[name]; clash {
				return nil, fmt.Errorf("the marker %q gives the rule name %q twice; rename the marker", markers[k], name)
			}
			opts = append(opts, cel.Variable(name, v.typ))
			r.vars[name] = jointVar{marker: k, field: v.Name}
			known = append(known, name)
			if v.Name == "zs" || v.Name == "values" {
				sized[name] = true
			}
		}
	}
	env, err := cel.NewEnv(opts...)
	if err != nil {
		return nil, fmt.Errorf("cannot declare the markers: %w", err)
	}
	p, err := compileProgram(env, expr, want, lim, known, nil, sized)
	if err != nil {
		return nil, err
	}
	r.p = *p
	return r, nil
}

// jointActivation binds a JointRule's names to one JointExam.
type jointActivation struct {
	r          *JointRule
	e          *JointExam
	times      floatList
	signals    boolList
	zs, values []floatList // per marker
}

func (a *jointActivation) Parent() interpreter.Activation { return nil }

func (a *jointActivation) ResolveName(name string) (any, bool) {
	v, ok := a.r.vars[name]
	if !ok {
		return nil, false
	}
	e := a.e
	if v.marker >= 0 {
		m := &e.Markers[v.marker]
		switch v.field {
		case "value":
			return types.Double(m.Value), true
		case "z":
			return types.Double(m.Z), true
		case "mean":
			return types.Double(m.Mean), true
		case "sd":
			return types.Double(m.SD), true
		case "centile":
			return types.Double(m.Centile), true
		case "innovation":
			return types.Double(m.Innovation), true
		case "measured":
			return types.Bool(!math.IsNaN(m.Value)), true
		case "prev_z":
			return types.Double(m.PrevZ), true
		case "prev_value":
			return types.Double(m.PrevValue), true
		case "zs":
			a.zs[v.marker].v = m.Zs
			return &a.zs[v.marker], true
		case "values":
			a.values[v.marker].v = m.Values
			return &a.values[v.marker], true
		}
		return nil, false
	}
	switch v.field {
	case "time":
		return types.Double(e.Time), true
	case "group":
		return types.String(e.Group), true
	case "worker":
		return types.String(e.Worker), true
	case "chart":
		return types.Double(e.Chart), true
	case "limit":
		return types.Double(e.Limit), true
	case "signal":
		return types.Bool(e.Signal), true
	case "leading_marker":
		return types.String(e.Leading), true
	case "in_range":
		return types.Bool(e.InRange), true
	case "exam":
		return types.Int(e.Exam), true
	case "exams":
		return types.Int(e.Exams), true
	case "has_previous":
		return types.Bool(e.Exam > 1), true
	case "gap":
		return types.Double(e.Gap), true
	case "has_signalled":
		return types.Bool(!math.IsNaN(e.YearsSinceFirstSignal)), true
	case "years_since_first_signal":
		return types.Double(e.YearsSinceFirstSignal), true
	case "times":
		a.times.v = e.Times
		return &a.times, true
	case "signals":
		a.signals.v = e.Signals
		return &a.signals, true
	}
	return nil, false
}

func (a *jointActivation) fits(maxList int) bool {
	e := a.e
	if len(e.Times) > maxList || len(e.Signals) > maxList || len(e.Group) > maxStrFast || len(e.Worker) > maxStrFast || len(e.Leading) > maxStrFast {
		return false
	}
	for _, m := range e.Markers {
		if len(m.Zs) > maxList || len(m.Values) > maxList {
			return false
		}
	}
	return true
}

// EvalJoint evaluates r on every exam under ctx and writes out[i] for
// exams[i], with EvalAll's error behaviour. Use LinkJoint first. Each
// exam must hold as many markers as r was compiled for.
func EvalJoint(ctx context.Context, r *JointRule, exams []JointExam, out []Value) error {
	if len(out) < len(exams) {
		return fmt.Errorf("room for %d results but %d exams", len(out), len(exams))
	}
	for i := range exams {
		if len(exams[i].Markers) != len(r.markers) {
			return fmt.Errorf("row %d holds %d markers; the rule was compiled for %d", i+1, len(exams[i].Markers), len(r.markers))
		}
	}
	p := len(r.markers)
	act := &jointActivation{r: r, zs: make([]floatList, p), values: make([]floatList, p)}
	return r.p.batch(ctx, len(exams), act, func(i int) { act.e = &exams[i] },
		func(i int) string { return exams[i].Worker }, out)
}

// LinkJoint fills the fields of exams that depend on the same worker's
// other exams (Exam, Exams, Gap, YearsSinceFirstSignal, Times, Signals and
// each marker's PrevZ, PrevValue, Zs and Values), as Link does for one
// marker. Rows of a worker are put in time order without moving them.
func LinkJoint(exams []JointExam) error {
	for i := range exams {
		if exams[i].Worker == "" {
			return fmt.Errorf("row %d: the worker id is empty; every exam needs the id of its worker", i+1)
		}
		if t := exams[i].Time; math.IsNaN(t) || math.IsInf(t, 0) {
			return fmt.Errorf("row %d: the age (time) of worker %q is missing or not a number", i+1, exams[i].Worker)
		}
	}
	first := make(map[string]int, 64)
	for i := range exams {
		if _, ok := first[exams[i].Worker]; !ok {
			first[exams[i].Worker] = i
		}
	}
	order := make([]int, len(exams))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		if c := cmp.Compare(first[exams[a].Worker], first[exams[b].Worker]); c != 0 {
			return c
		}
		return cmp.Compare(exams[a].Time, exams[b].Time)
	})
	for s := 0; s < len(order); {
		e := s
		for e < len(order) && exams[order[e]].Worker == exams[order[s]].Worker {
			e++
		}
		idx := order[s:e]
		n := len(idx)
		times := make([]float64, n)
		signals := make([]bool, n)
		p := len(exams[idx[0]].Markers)
		zs := make([][]float64, p)
		vals := make([][]float64, p)
		firstSignal := math.NaN()
		for j, i := range idx {
			x := &exams[i]
			if len(x.Markers) != p {
				return fmt.Errorf("row %d holds %d markers, other rows of worker %q %d", i+1, len(x.Markers), x.Worker, p)
			}
			times[j], signals[j] = x.Time, x.Signal
			if x.Signal && math.IsNaN(firstSignal) {
				firstSignal = x.Time
			}
			x.Exam, x.Exams = j+1, n
			x.Gap = 0
			if j > 0 {
				x.Gap = x.Time - times[j-1]
			}
			x.YearsSinceFirstSignal = x.Time - firstSignal
			x.Times, x.Signals = times[:j+1:j+1], signals[:j+1:j+1]
			for k := range x.Markers {
				m := &x.Markers[k]
				m.PrevZ, m.PrevValue = math.NaN(), math.NaN()
				if c := len(zs[k]); c > 0 {
					m.PrevZ, m.PrevValue = zs[k][c-1], vals[k][c-1]
				}
				if !math.IsNaN(m.Value) {
					zs[k] = append(zs[k], m.Z)
					vals[k] = append(vals[k], m.Value)
				}
				m.Zs, m.Values = zs[k][:len(zs[k]):len(zs[k])], vals[k][:len(vals[k]):len(vals[k])]
			}
		}
		s = e
	}
	return nil
}
