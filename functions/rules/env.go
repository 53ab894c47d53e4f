package rules

import (
	"math"

	"github.com/google/cel-go/cel"
	"github.com/google/cel-go/common/types"
	"github.com/google/cel-go/common/types/ref"
	"github.com/google/cel-go/interpreter"
)

// Variable describes one name a rule can use, for help text and listings.
type Variable struct {
	Name string // CEL name, snake_case
	Type string // "number", "whole number", "true/false", "text", "list of numbers", "list of true/false"
	Doc  string // one line for rule writers
}

// examVar is a declared exam variable: its documentation and CEL type.
type examVar struct {
	Variable
	typ *cel.Type
}

func examVars() []examVar {
	num, whole, flag, text := cel.DoubleType, cel.IntType, cel.BoolType, cel.StringType
	nums, flags := cel.ListType(cel.DoubleType), cel.ListType(cel.BoolType)
	v := func(name string, t *cel.Type, doc string) examVar {
		return examVar{Variable{name, typeWords(t), doc}, t}
	}
	return []examVar{
		v("value", num, "the reading, in its own units"),
		v("time", num, "age at the exam, in years"),
		v("group", text, `reference group of the worker (sex, job group, ...); "" if none`),
		v("worker", text, "worker identifier"),
		v("z", num, "standardised reading: (value - mean) / sd for this age and group"),
		v("mean", num, "reference mean at this age and group"),
		v("sd", num, "reference standard deviation at this age and group"),
		v("centile", num, "the reading's centile in the reference, 0 to 100"),
		v("innovation", num, "the charted residual for this exam"),
		v("chart_up", num, "upward chart statistic (readings drifting high); 0 when the chart watches only a fall"),
		v("chart_down", num, "downward chart statistic (readings drifting low); 0 when the chart watches only a rise"),
		v("chart", num, "the chart statistic compared with the limit: the larger of chart_up and chart_down"),
		v("limit", num, "the chart's control limit"),
		v("signal", flag, "true when the chart signals at this exam"),
		v("in_range", flag, "true when the age lies inside the age range of the reference data"),
		v("exam", whole, "number of this exam for the worker: 1 for the first, in time order"),
		v("exams", whole, "number of exams of this worker in the data (exam == exams on the latest)"),
		v("has_previous", flag, "true from the worker's second exam on (same as exam > 1)"),
		v("gap", num, "years since the worker's previous exam; 0 on the first exam"),
		v("prev_z", num, "z at the previous exam; NaN on the first exam (comparisons with NaN are false)"),
		v("prev_value", num, "value at the previous exam; NaN on the first exam"),
		v("has_signalled", flag, "true if the chart has signalled at this exam or an earlier one"),
		v("years_since_first_signal", num, "years since the worker's first signal, counting up to this exam; NaN if none yet"),
		v("zs", nums, "the worker's z values up to and including this exam, oldest first"),
		v("values", nums, "the worker's readings up to and including this exam, oldest first"),
		v("times", nums, "the worker's ages at each exam up to and including this one, oldest first"),
		v("signals", flags, "the chart's signal at each exam up to and including this one, oldest first"),
	}
}

// Variables lists the names an exam rule can use, in documentation order.
func Variables() []Variable {
	ev := examVars()
	out := make([]Variable, len(ev))
	for i := range ev {
		out[i] = ev[i].Variable
	}
	return out
}

// examActivation is the cel Activation over one Exam. It binds names with
// a switch rather than a map, and keeps the history list views inside
// itself, so EvalAll, which reuses one activation for every exam, allocates
// nothing per exam beyond the boxed numbers CEL itself needs.
type examActivation struct {
	e                 *Exam
	zs, values, times floatList
	signals           boolList
}

func (a *examActivation) Parent() interpreter.Activation { return nil }

func (a *examActivation) ResolveName(name string) (any, bool) {
	e := a.e
	switch name {
	case "value":
		return types.Double(e.Value), true
	case "time":
		return types.Double(e.Time), true
	case "group":
		return types.String(e.Group), true
	case "worker":
		return types.String(e.Worker), true
	case "z":
		return types.Double(e.Z), true
	case "mean":
		return types.Double(e.Mean), true
	case "sd":
		return types.Double(e.SD), true
	case "centile":
		return types.Double(e.Centile), true
	case "innovation":
		return types.Double(e.Innovation), true
	case "chart_up":
		return types.Double(e.ChartUp), true
	case "chart_down":
		return types.Double(e.ChartDown), true
	case "chart":
		return types.Double(e.Chart), true
	case "limit":
		return types.Double(e.Limit), true
	case "signal":
		return types.Bool(e.Signal), true
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
	case "prev_z":
		return types.Double(e.PrevZ), true
	case "prev_value":
		return types.Double(e.PrevValue), true
	case "has_signalled":
		return types.Bool(!math.IsNaN(e.YearsSinceFirstSignal)), true
	case "years_since_first_signal":
		return types.Double(e.YearsSinceFirstSignal), true
	case "zs":
		a.zs.v = e.Zs
		return &a.zs, true
	case "values":
		a.values.v = e.Values
		return &a.values, true
	case "times":
		a.times.v = e.Times
		return &a.times, true
	case "signals":
		a.signals.v = e.Signals
		return &a.signals, true
	}
	return nil, false
}

func (v Value) celVal() ref.Val {
	switch v.kind {
	case Bool:
		return types.Bool(v.b)
	case Number:
		return types.Double(v.n)
	case String:
		return types.String(v.s)
	}
	return types.NullValue
}

// typeWords names a CEL type in words a spreadsheet user knows.
func typeWords(t *cel.Type) string {
	if t == nil {
		return "value"
	}
	return typeNameWords(t.String())
}

func typeNameWords(s string) string {
	switch s {
	case "double":
		return "number"
	case "int", "uint":
		return "whole number"
	case "bool":
		return "true/false"
	case "string":
		return "text"
	case "null_type":
		return "empty (null)"
	case "dyn", "":
		return "value"
	case "bytes":
		return "bytes"
	case "list(double)":
		return "list of numbers"
	case "list(int)", "list(uint)":
		return "list of whole numbers"
	case "list(bool)":
		return "list of true/false"
	case "list(string)":
		return "list of text"
	case "google.protobuf.Timestamp":
		return "timestamp"
	case "google.protobuf.Duration":
		return "duration"
	}
	if len(s) > 5 && s[:5] == "list(" {
		return "list"
	}
	if len(s) > 4 && s[:4] == "map(" {
		return "map"
	}
	if len(s) > 5 && s[:5] == "type(" {
		return "type name " + s[5:len(s)-1]
	}
	return s
}
