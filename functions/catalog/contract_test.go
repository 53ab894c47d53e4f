package catalog_test

import (
	"context"
	"slices"
	"strings"
	"testing"

	"veer/functions/cell"
	"veer/functions/chart"
	"veer/functions/joint"
	"veer/functions/monitor"
	"veer/functions/screening"
	"veer/functions/transform"
)

// TestErrorContract drives every kind of failure of the error-code
// contract (cell.Failure) through the catalogue and checks that the cell
// shows the code the contract gives it, in the row or for the whole call
// as the help texts say. UnknownFunction is the dispatcher's (tested in
// package server).
func TestErrorContract(t *testing.T) {
	env, m := newEnv(t)
	ref, _ := reference(t)
	lo, hi, err := m.Curves.Range("office")
	if err != nil {
		t.Fatal(err)
	}
	mustCall(t, env, "VEER.SAVERULES", "rules", "high = z > 2.0")
	// A model with a log transform, for readings it cannot take.
	mustCall(t, env, "VEER.FIT", "logsbp", ref.ids, ref.ages, ref.vals, ref.groups, "transform=log")
	dup := synth(3, 6, 120, 0)
	dup.ages[2] = dup.ages[1]
	dup.ids[2] = dup.ids[1]
	cancelled, cancel := context.WithCancel(context.Background())
	cancel()

	tests := []struct {
		failure cell.Failure
		ctx     context.Context // nil: not cancelled
		fn      string
		args    []any
		row     int // the failing row of a spilled column; -1: the call fails
	}{
		{cell.WrongArgument, nil, "VEER.ZSCORE", []any{"sbp", []float64{40, 41}, []any{120.0, "abc"}, "office"}, -1},
		{cell.WrongArgument, nil, "VEER.LIMIT", []any{20, blank, "gap=1; colour=red"}, -1},
		{cell.BadData, nil, "VEER.CHART", []any{"sbp", anyCol(dup.ids), anyCol(dup.ages), anyCol(dup.vals), anyCol(dup.groups), "limit=4"}, 1},
		{cell.BadData, nil, "VEER.FIT", []any{"few", ref.ids[:20], ref.ages[:20], ref.vals[:20], ref.groups[:20]}, -1},
		{cell.BlankInput, nil, "VEER.ZSCORE", []any{"sbp", []float64{40, 41}, []any{120.0, nil}, "office"}, 1},
		{cell.BlankInput, nil, "VEER.CHART", []any{"sbp", []any{"a", nil}, []float64{40, 41}, []float64{120, 130}, "office", "limit=4"}, 1},
		{cell.UnknownGroup, nil, "VEER.REFMEAN", []any{"sbp", []float64{40, 41}, []any{"office", "lab"}}, 1},
		{cell.UnknownGroup, nil, "VEER.CHART", []any{"sbp", []any{"a", "b"}, []float64{40, 41}, []float64{120, 130}, []any{"office", "lab"}, "limit=4"}, 1},
		{cell.UnknownRule, nil, "VEER.RULE", []any{"@rules/low", "sbp", []any{"a"}, []float64{40}, []float64{120}, "office", "limit=4"}, -1},
		{cell.OutsideReference, nil, "VEER.ZSCORE", []any{"sbp", []float64{40, hi + 5}, []float64{120, 120}, "office"}, 1},
		{cell.OutsideReference, nil, "VEER.CENTILE", []any{"sbp", []float64{lo - 1, 40}, 97.5, "office"}, 0},
		{cell.OutsideReference, nil, "VEER.CHART", []any{"sbp", []any{"a", "a"}, []float64{40, hi + 5}, []float64{120, 130}, "office", "limit=4"}, 1},
		{cell.OutOfDomain, nil, "VEER.ZSCORE", []any{"logsbp", []float64{40, 41}, []float64{120, -3}, "office"}, 1},
		{cell.OutOfDomain, nil, "VEER.CHART", []any{"logsbp", []any{"a", "a"}, []float64{40, 41}, []float64{120, 0}, "office", "limit=4"}, 1},
		{cell.OutOfRange, nil, "VEER.LIMIT", []any{20, blank, "gap=1; chart=ewma; lambda=2"}, -1},
		{cell.OutOfRange, nil, "VEER.LIMIT", []any{-5, "sbp"}, -1},
		{cell.OutOfRange, nil, "VEER.CENTILE", []any{"sbp", 40, 100, "office"}, -1},
		{cell.OutOfRange, nil, "VEER.DELAY", []any{1, blank, "gap=1; limit=4; onset=-1"}, -1},
		{cell.UnknownModel, nil, "VEER.REFMEAN", []any{"nosuch", 40, "office"}, -1},
		{cell.UnknownModel, nil, "VEER.ZSCORE", []any{"rules", 40, 120, "office"}, -1},
		{cell.Busy, cancelled, "VEER.LIMIT", []any{20, "sbp", "method=bootstrap"}, -1},
	}
	covered := map[cell.Failure]bool{cell.UnknownFunction: true}
	for _, tt := range tests {
		name := tt.fn + " " + tt.failure.Meaning()
		ctx := tt.ctx
		if ctx == nil {
			ctx = context.Background()
		}
		v, e := callCtx(ctx, t, env, tt.fn, tt.args...)
		if tt.row >= 0 {
			if e != nil {
				t.Errorf("%s: the call failed (%v); want %s in row %d only", name, e, tt.failure.Code(), tt.row+1)
				continue
			}
			e = rowOf(t, v, tt.row)
		}
		if e == nil {
			t.Errorf("%s: no error", name)
			continue
		}
		if e.Code != tt.failure.Code() {
			t.Errorf("%s: %v; the contract says %s", name, e, tt.failure.Code())
		}
		// The function is named once: by the dispatcher (call above) for
		// the call's error, by the encoder for a row's; never by the entry.
		wantNames := 1
		if tt.row >= 0 {
			wantNames = 0
		}
		if n := strings.Count(e.Message, tt.fn); n != wantNames {
			t.Errorf("%s: message %q names %s %d times; want %d", name, e.Message, tt.fn, n, wantNames)
		}
		covered[tt.failure] = true
	}
	for _, f := range cell.Failures() {
		if !covered[f] {
			t.Errorf("no test drives the failure %q", f.Meaning())
		}
	}
}

// rowOf returns the error in row i of a spilled column or table.
func rowOf(t *testing.T, v any, i int) *cell.Error {
	t.Helper()
	var c any
	switch r := v.(type) {
	case []any:
		c = r[i]
	case [][]any:
		c = r[i][0]
	default:
		t.Fatalf("result %T is not a spilled column or table", v)
	}
	e, _ := c.(*cell.Error)
	return e
}

// The help texts state the contract's codes: they are made from it.
func TestHelpStatesTheContract(t *testing.T) {
	for _, fn := range []string{"VEER.ZSCORE", "VEER.CHART", "VEER.RULE", "VEER.REFMEAN"} {
		f, _ := cat.Lookup(fn)
		for _, want := range []string{
			cell.OutsideReference.Meaning() + " gives " + string(cell.OutsideReference.Code()),
			cell.BlankInput.Meaning() + " gives " + string(cell.BlankInput.Code()),
		} {
			if !strings.Contains(f.Help, want) {
				t.Errorf("%s's help does not say %q:\n%s", fn, want, f.Help)
			}
		}
	}
	o, _ := cell.LookupOption(cell.OptionExtrapolate)
	if !strings.Contains(o.Help, "off: "+string(cell.OutsideReference.Code())) {
		t.Errorf("the extrapolate option's help %q disagrees with the contract", o.Help)
	}
}

// The choices of the shared options are the statistics' own typed sets, so
// a cell accepts exactly what the engine does.
func TestOptionChoicesAreTheTypedSets(t *testing.T) {
	want := map[string][]string{
		cell.OptionChart:     names(joint.Kinds), // chart.Kinds and the kinds over several markers
		cell.OptionSide:      names(chart.Sides),
		cell.OptionTransform: names(transform.Names),
		cell.OptionMethod:    names([]monitor.Method{monitor.Normal, monitor.Bootstrap}),
		cell.OptionHorizon:   names([]monitor.Horizon{monitor.HorizonFollowUp, monitor.HorizonLong}),
		cell.OptionSerial:    append(names([]screening.Serial{screening.SerialWhiten, screening.SerialDirect, screening.SerialOff}), "on"),
	}
	if !slices.Equal(names(joint.Kinds)[:len(chart.Kinds)], names(chart.Kinds)) {
		t.Errorf("the kinds over several markers %q do not start with one marker's %q", joint.Kinds, chart.Kinds)
	}
	for name, choices := range want {
		o, ok := cell.LookupOption(name)
		if !ok || o.Type != cell.TypeChoice || !slices.Equal(o.Choices, choices) {
			t.Errorf("option %s: %s %q; want choices %q", name, o.Type, o.Choices, choices)
		}
	}
}

func names[T ~string](xs []T) []string {
	out := make([]string, len(xs))
	for i, x := range xs {
		out[i] = string(x)
	}
	return out
}
