package catalog_test

import (
	"bytes"
	"fmt"
	"math"
	"sort"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/cell"
	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/screening"
)

// Outside check values (R package spc 0.6.7, Debian r-cran-spc; the same
// values are in functions/limit/testdata/arl_grid.csv, written by the
// committed functions/limit/testdata/make_fixtures.R):
//
//	xcusum.arl(k=0.5, h=5, mu=0, sided="one") = 930.88701
//	xcusum.arl(k=0.5, h=5, mu=0, sided="two") = 465.44351
//	xcusum.arl(k=0.5, h=5, mu=1, sided="one") = 10.375975
//
// With one exam a year, the average time to a false signal in years is the
// ARL, so a target of 930.887 years must give the limit h = 5 (one-sided)
// and 465.44 years h = 5 (two-sided). k = 0.5, h = 5 is also the common
// practice textbook CUSUM (common practice).
const (
	spcARL0Up   = 930.88701
	spcARL0Both = 465.44351
	spcARL1Up   = 10.375975
)

func TestCatalogueEntries(t *testing.T) {
	want := []string{"VEER.FIT", "VEER.MODELS", "VEER.INFO", "VEER.REFMEAN", "VEER.REFSD", "VEER.CENTILE",
		"VEER.ZSCORE", "VEER.CHART", "VEER.LIMIT", "VEER.DELAY", "VEER.RULE", "VEER.RULECOLS", "VEER.SAVERULES"}
	for _, name := range want {
		f, ok := cat.Lookup(name)
		if !ok {
			t.Errorf("the catalogue has no %s (CATALOGUE.md lists it)", name)
			continue
		}
		if f.Summary == "" || f.Help == "" {
			t.Errorf("%s has no summary or help", name)
		}
		for _, p := range f.Params {
			if p.Help == "" {
				t.Errorf("%s parameter %s has no help", name, p.Name)
			}
		}
	}
	// Functions whose text describes a signal say that it prompts review
	// by a clinician, not a diagnosis.
	for _, f := range cat.Funcs() {
		text := strings.ToLower(f.Summary + " " + f.Help)
		if strings.Contains(text, "signal") && !strings.Contains(text, "not a diagnosis") && f.Name != "VEER.LIMIT" && f.Name != "VEER.DELAY" {
			t.Errorf("%s talks about signals without saying a signal is not a diagnosis", f.Name)
		}
	}
	// Only fitting and saving write.
	for _, f := range cat.Funcs() {
		if f.Writes != (f.Name == "VEER.FIT" || f.Name == "VEER.SAVERULES") {
			t.Errorf("%s Writes = %v", f.Name, f.Writes)
		}
	}
}

func TestFitHandle(t *testing.T) {
	ref, doc := reference(t)
	env := &cell.MemoryEnv{}
	fit := func(e exams, extra ...any) (any, *cell.Error) {
		args := append([]any{"sbp", e.ids, e.ages, e.vals, e.groups}, extra...)
		return call(t, env, "VEER.FIT", args...)
	}
	h, e := fit(ref)
	if e != nil || h != "sbp@v1" {
		t.Fatalf("first fit = %v, %v; want sbp@v1", h, e)
	}
	// The stored document is the engine's own fit of the same rows.
	got, err := env.Model("sbp@v1")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got.Doc, doc) {
		t.Errorf("VEER.FIT stored a document different from screening.Fit of the same rows")
	}
	for _, c := range []struct {
		name string
		data exams
		opts any
		want string
	}{
		{"identical data", ref, nil, "sbp@v1"},
		{"same rows in another order", ref.shuffled(3), nil, "sbp@v1"},
		{"different data", synth(2, 160, 120, 0), nil, "sbp@v2"},
		{"back to the first data", ref, nil, "sbp@v3"},
		{"same data again", ref, nil, "sbp@v3"},
		{"same data, other options", ref, "bandwidth=8", "sbp@v4"},
		{"options as a two-column range", ref, [][]any{{"bandwidth", 8}}, "sbp@v4"},
	} {
		var args []any
		if c.opts != nil {
			args = append(args, c.opts)
		}
		h, e := fit(c.data, args...)
		if e != nil || h != c.want {
			t.Errorf("%s: handle %v, %v; want %s", c.name, h, e, c.want)
		}
	}
	// Handles name exact versions; the bare name is the latest.
	v1, _ := env.Model("sbp@v1")
	v3, _ := env.Model("sbp@v3")
	if v1.SHA256 != v3.SHA256 {
		t.Errorf("sbp@v1 and sbp@v3 were fitted from the same data but differ")
	}
	if latest, _ := env.Model("sbp"); latest.Handle != "sbp@v4" {
		t.Errorf("bare name resolves to %s; want sbp@v4", latest.Handle)
	}
}

func TestFitErrors(t *testing.T) {
	ref, _ := reference(t)
	n := ref.len()
	withAge := func(i int, c any) []any {
		out := anyCol(ref.ages)
		out[i] = c
		return out
	}
	few := synth(5, 3, 120, 0)
	twoBlanks := withAge(n-1, nil)
	twoBlanks[4] = nil
	for _, c := range []struct {
		name  string
		args  []any
		code  cell.Code
		parts []string
	}{
		{"blank age", []any{"x", ref.ids, withAge(2, nil), ref.vals, ref.groups}, cell.CodeValue,
			[]string{"row 3", "age is blank"}},
		{"blank ages report the first row", []any{"x", ref.ids, twoBlanks, ref.vals, ref.groups}, cell.CodeValue,
			[]string{"row 5:"}},
		{"text in ages", []any{"x", ref.ids, withAge(1, "forty"), ref.vals, ref.groups}, cell.CodeValue,
			[]string{"'ages'", "row 2", `"forty"`}},
		{"error cell in values", []any{"x", ref.ids, ref.ages, append(anyCol(ref.vals[:n-1]), &cell.Error{Code: cell.CodeDiv0}), ref.groups}, cell.CodeValue,
			[]string{fmt.Sprintf("row %d", n)}},
		{"mismatched lengths", []any{"x", ref.ids, ref.ages[:n-1], ref.vals, ref.groups}, cell.CodeValue,
			[]string{"same number of rows", fmt.Sprint(n - 1)}},
		{"groups of another length", []any{"x", ref.ids, ref.ages, ref.vals, ref.groups[:3]}, cell.CodeValue,
			[]string{"'groups'", "3 cells"}},
		{"unknown option", []any{"x", ref.ids, ref.ages, ref.vals, ref.groups, "bandwith=5"}, cell.CodeValue,
			[]string{`unknown option "bandwith"`, "bandwidth", "transform"}},
		{"bad option value", []any{"x", ref.ids, ref.ages, ref.vals, ref.groups, "transform=sqrt"}, cell.CodeValue,
			[]string{"transform", "none, log, boxcox"}},
		{"name with @", []any{"a@b", ref.ids, ref.ages, ref.vals, ref.groups}, cell.CodeValue, []string{"@"}},
		{"blank name", []any{"  ", ref.ids, ref.ages, ref.vals, ref.groups}, cell.CodeValue, []string{"name"}},
		{"too few workers", []any{"x", few.ids, few.ages, few.vals, few.groups}, cell.CodeValue, []string{"workers"}},
		{"negative bandwidth", []any{"x", ref.ids, ref.ages, ref.vals, ref.groups, "bandwidth=-1"}, cell.CodeNum, []string{"bandwidth"}},
		{"missing values argument", []any{"x", ref.ids, ref.ages}, cell.CodeValue, []string{"VEER.FIT: the function takes 4 to 6 arguments"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			env := &cell.MemoryEnv{}
			_, e := call(t, env, "VEER.FIT", c.args...)
			wantErr(t, e, c.code, c.parts...)
			if len(env.Names()) != 0 {
				t.Errorf("a failed fit saved models %v", env.Names())
			}
		})
	}
	// A log transform of non-positive readings names the problem.
	bad := anyCol(ref.vals)
	bad[6] = -3.0
	_, e := call(t, &cell.MemoryEnv{}, "VEER.FIT", "x", ref.ids, ref.ages, bad, ref.groups, "transform=log")
	if e == nil || !strings.Contains(e.Message, "-3") {
		t.Errorf("log transform of -3: %v; want an error naming the value", e)
	}
}

func TestInfo(t *testing.T) {
	env, m := newEnv(t)
	tab := table(t, mustCall(t, env, "VEER.INFO", "sbp"))
	items := m.Items()
	if len(tab) != len(items)+1 {
		t.Fatalf("VEER.INFO has %d rows; want %d items and the handle", len(tab), len(items))
	}
	if tab[0][0] != "handle" || tab[0][1] != "sbp@v1" {
		t.Errorf("first row %v; want handle sbp@v1", tab[0])
	}
	for i, it := range items {
		row := tab[i+1]
		if len(row) != 2 || row[0] != it.Name || fmt.Sprint(row[1]) != fmt.Sprint(it.Value) {
			t.Errorf("row %d = %v; want %s, %v", i+2, row, it.Name, it.Value)
		}
	}
	// The synthetic cohort has 160 workers in two groups of 80.
	found := map[string]any{}
	for _, r := range tab {
		found[r[0].(string)] = r[1]
	}
	if found["group office: workers"] != 80 || found["group plant: workers"] != 80 {
		t.Errorf("workers per group: %v, %v; want 80 each", found["group office: workers"], found["group plant: workers"])
	}
	_, e := call(t, env, "VEER.INFO", "nosuch")
	wantErr(t, e, cell.CodeRef, "nosuch")
}

func TestLookups(t *testing.T) {
	env, m := newEnv(t)
	ages := []float64{30, 41.5, 55}
	groups := []string{"office", "plant", "office"}
	readings := []float64{118, 150, 131}
	z975 := distuv.UnitNormal.Quantile(0.975) // 1.959964, common practice
	for i, a := range ages {
		mean, sd, err := m.Curves.At(groups[i], a, false)
		if err != nil {
			t.Fatal(err)
		}
		z, _ := m.Curves.Z(groups[i], a, readings[i], false)
		c975, _ := m.Curves.Centile(groups[i], a, 97.5, false)
		for _, c := range []struct {
			fn   string
			args []any
			want float64
		}{
			{"VEER.REFMEAN", []any{"sbp", a, groups[i]}, mean},
			{"VEER.REFSD", []any{"sbp", a, groups[i]}, sd},
			{"VEER.CENTILE", []any{"sbp", a, 97.5, groups[i]}, c975},
			{"VEER.CENTILE", []any{"sbp", a, 50, groups[i]}, mean},             // no transform: median = mean
			{"VEER.CENTILE", []any{"sbp", a, 97.5, groups[i]}, mean + z975*sd}, // normal quantile
			{"VEER.ZSCORE", []any{"sbp", a, readings[i], groups[i]}, z},
			{"VEER.ZSCORE", []any{"sbp", a, readings[i], groups[i]}, (readings[i] - mean) / sd},
			{"VEER.ZSCORE", []any{"sbp", a, mean + 2*sd, groups[i]}, 2},
		} {
			got := num(t, mustCall(t, env, c.fn, c.args...))
			if !near(got, c.want, 1e-9*math.Max(1, math.Abs(c.want))) {
				t.Errorf("%s%v = %v; want %v", c.fn, c.args, got, c.want)
			}
		}
	}
	// Columns: one result per row, in order; a blank row is #N/A in its
	// row only.
	agesCol := []any{30.0, nil, 55.0}
	for _, fn := range []string{"VEER.REFMEAN", "VEER.REFSD", "VEER.CENTILE", "VEER.ZSCORE"} {
		args := []any{"sbp", agesCol}
		switch fn {
		case "VEER.CENTILE":
			args = append(args, 90)
		case "VEER.ZSCORE":
			args = append(args, []float64{118, 150, 131})
		}
		args = append(args, []string{"office", "plant", "office"})
		col := column(t, mustCall(t, env, fn, args...))
		if len(col) != 3 {
			t.Fatalf("%s spilled %d rows; want 3", fn, len(col))
		}
		num(t, col[0])
		num(t, col[2])
		wantErr(t, cellErr(t, col[1]), cell.CodeNA, "row 2", "blank")
	}
	// A single group applies to every row.
	col := column(t, mustCall(t, env, "VEER.REFMEAN", "sbp", []float64{30, 40}, "plant"))
	for i, a := range []float64{30, 40} {
		mean, _, _ := m.Curves.At("plant", a, false)
		if num(t, col[i]) != mean {
			t.Errorf("REFMEAN(plant) row %d = %v; want %v", i+1, col[i], mean)
		}
	}
}

func TestLookupErrors(t *testing.T) {
	env, m := newEnv(t)
	lo, hi, _ := m.Curves.Range("office")
	for _, c := range []struct {
		name  string
		fn    string
		args  []any
		code  cell.Code
		parts []string
	}{
		{"text in ages", "VEER.REFMEAN", []any{"sbp", []any{30.0, 40.0, "fifty"}, "office"}, cell.CodeValue, []string{"'ages'", "row 3", `"fifty"`}},
		{"boolean in values", "VEER.ZSCORE", []any{"sbp", []float64{30, 40}, []any{120.0, true}, "office"}, cell.CodeValue, []string{"'values'", "row 2"}},
		{"mismatched ages and values", "VEER.ZSCORE", []any{"sbp", []float64{30, 40, 50}, []float64{120, 130}, "office"}, cell.CodeValue, []string{"3", "2"}},
		{"mismatched groups", "VEER.REFSD", []any{"sbp", []float64{30, 40, 50}, []string{"office", "plant"}}, cell.CodeValue, []string{"'groups'", "2 cells", "3 rows"}},
		{"unknown model", "VEER.REFMEAN", []any{"nosuch", 40, "office"}, cell.CodeRef, []string{"nosuch"}},
		{"unknown version", "VEER.REFMEAN", []any{"sbp@v7", 40, "office"}, cell.CodeRef, []string{"version 7"}},
		{"malformed handle", "VEER.REFMEAN", []any{"sbp@seven", 40, "office"}, cell.CodeRef, []string{"sbp@seven"}},
		{"unknown group", "VEER.REFMEAN", []any{"sbp", 40, "lab"}, cell.CodeNA, []string{`"lab"`, `"office"`, `"plant"`}},
		{"group missing", "VEER.REFMEAN", []any{"sbp", 40}, cell.CodeValue, []string{"group"}},
		{"age above the range", "VEER.REFMEAN", []any{"sbp", hi + 5, "office"}, cell.CodeNum, []string{"outside the reference range", "extrapolate=true"}},
		{"age below the range", "VEER.ZSCORE", []any{"sbp", lo - 1, 120, "office"}, cell.CodeNum, []string{"outside the reference range", "extrapolate=true"}},
		{"centile out of range", "VEER.CENTILE", []any{"sbp", 40, 100, "office"}, cell.CodeNum, []string{"between 0 and 100"}},
		{"unknown option", "VEER.REFMEAN", []any{"sbp", 40, "office", "extrapolat=true"}, cell.CodeValue, []string{`unknown option "extrapolat"`, "known options: extrapolate"}},
		{"bad option value", "VEER.REFMEAN", []any{"sbp", 40, "office", "extrapolate=maybe"}, cell.CodeValue, []string{"extrapolate", "on or off"}},
		{"blank single age", "VEER.REFMEAN", []any{"sbp", []any{nil}, "office"}, cell.CodeNA, []string{"blank"}},
		{"a 2-D range of ages", "VEER.REFMEAN", []any{"sbp", [][]float64{{30, 40}, {50, 60}}, "office"}, cell.CodeValue, []string{"one column or one row"}},
		{"model is a rule set", "VEER.REFMEAN", []any{"rules", 40, "office"}, cell.CodeRef, []string{"rule set"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			if c.args[0] == "rules" {
				mustCall(t, env, "VEER.SAVERULES", "rules", "high = z > 2.0")
			}
			_, e := call(t, env, c.fn, c.args...)
			wantErr(t, e, c.code, c.parts...)
		})
	}
	// A blank group cell is #N/A in its row; no groups at all is a mistake
	// in the call (#VALUE!, "group missing" above).
	col := column(t, mustCall(t, env, "VEER.ZSCORE", "sbp", []float64{40, 41}, []float64{120, 130}, []any{"office", nil}))
	num(t, col[0])
	wantErr(t, cellErr(t, col[1]), cell.CodeNA, "row 2", "group is blank", `"office"`)
	// In a column an out-of-range age fails its row only.
	col = column(t, mustCall(t, env, "VEER.REFMEAN", "sbp", []float64{40, hi + 5}, "office"))
	num(t, col[0])
	wantErr(t, cellErr(t, col[1]), cell.CodeNum, "outside the reference range")
	// extrapolate=true holds the curve at its end.
	end, _, _ := m.Curves.At("office", hi, false)
	for _, opts := range []any{"extrapolate=true", "Extrapolate = yes", [][]any{{"extrapolate", true}}} {
		got := num(t, mustCall(t, env, "VEER.REFMEAN", "sbp", hi+5, "office", opts))
		if got != end {
			t.Errorf("REFMEAN beyond the range with %v = %v; want the end value %v", opts, got, end)
		}
	}
}

// chartOf runs VEER.CHART and returns its table.
func chartOf(t *testing.T, env cell.Env, e exams, opts any) [][]any {
	t.Helper()
	tab := table(t, mustCall(t, env, "VEER.CHART", "sbp", anyCol(e.ids), anyCol(e.ages), anyCol(e.vals), anyCol(e.groups), opts))
	if len(tab) != e.len() {
		t.Fatalf("VEER.CHART spilled %d rows for %d exams", len(tab), e.len())
	}
	return tab
}

func TestChart(t *testing.T) {
	env, m := newEnv(t)
	sheet := inRange(m, synth(11, 60, 120, 2.5)).shuffled(4) // a fifth of the workers drift up 2.5 mmHg a year
	lim, err := m.Limit(screening.DefaultSettings(), screening.LimitOptions{}, 20)
	if err != nil {
		t.Fatal(err)
	}
	tab := chartOf(t, env, sheet, "target=20")
	// Same as the engine called directly, row for row in input order.
	res, err := m.Screen(sheet.screening(), screening.DefaultSettings(), lim.H)
	if err != nil {
		t.Fatal(err)
	}
	signals := 0
	for i, r := range res {
		row := tab[i]
		var fs any
		if !math.IsNaN(r.FirstSignal) {
			fs = r.FirstSignal
		}
		want := []any{r.Z, r.Innovation, r.Stat, lim.H, r.Signal, fs}
		if fmt.Sprint(row) != fmt.Sprint(want) {
			t.Fatalf("row %d = %v; want %v", i+1, row, want)
		}
		if r.Signal {
			signals++
		}
	}
	if signals == 0 {
		t.Errorf("no signal on a sheet where a fifth of the workers drift; the test does not exercise signals")
	}
	// Independent check: the default charts the Kalman innovations
	// (serial=whiten), serial=direct charts z itself.
	pageCheck(t, sheet, tab, 1, lim.H)
	pageCheck(t, sheet, chartOf(t, env, sheet, "limit=3; serial=direct"), 0, 3)
	// The z column is the standardised score of VEER.ZSCORE.
	z := num(t, mustCall(t, env, "VEER.ZSCORE", "sbp", sheet.ages[0], sheet.vals[0], sheet.groups[0]))
	if !near(z, tab[0][0].(float64), 1e-12) {
		t.Errorf("chart z %v != ZSCORE %v", tab[0][0], z)
	}
	// A given limit is used as is; the other options reach the engine.
	for _, opts := range []string{"limit=3", "limit=2.5; side=both; allowance=0.25", "limit=0.8; chart=ewma; lambda=0.2", "target=30; serial=whiten", "target=25; serial=off; restart=on"} {
		o, _ := cell.ParseOptions("t", []string{"limit", "target", "side", "allowance", "chart", "lambda", "serial", "restart"}, cell.ScalarValue(cell.TextCell(opts)), "o")
		set := screening.DefaultSettings()
		set.Chart.Side = chart.Side(o.Text("side", string(set.Chart.Side)))
		set.Chart.Allowance = o.Number("allowance", set.Chart.Allowance)
		set.Chart.Kind = chart.Kind(o.Text("chart", string(set.Chart.Kind)))
		set.Chart.Lambda = o.Number("lambda", set.Chart.Lambda)
		set.Chart.Restart = o.Bool("restart", false)
		set.Serial = screening.Serial(o.Text("serial", string(set.Serial)))
		h := o.Number("limit", 0)
		if o.Has("target") {
			r, err := m.Limit(set, screening.LimitOptions{}, o.Number("target", 0))
			if err != nil {
				t.Fatal(err)
			}
			h = r.H
		}
		res, err := m.Screen(sheet.screening(), set, h)
		if err != nil {
			t.Fatal(err)
		}
		tab := chartOf(t, env, sheet, opts)
		for i, r := range res {
			if tab[i][2] != r.Stat || tab[i][3] != h || tab[i][4] != r.Signal {
				t.Fatalf("%s row %d = %v; engine gives chart %v limit %v signal %v", opts, i+1, tab[i], r.Stat, h, r.Signal)
			}
		}
	}
}

// pageCheck checks a chart table against the upward CUSUM of Page (1954),
// S_j = max(0, S_{j-1} + x_j - k), S_0 = 0, k = 0.5, over each worker's
// charted values x (column col of the table) in age order: the chart
// column is S_j, signal is S_j > h and first_signal the age of the first.
func pageCheck(t *testing.T, sheet exams, tab [][]any, col int, h float64) {
	t.Helper()
	byWorker := map[string][]int{}
	for i, id := range sheet.ids {
		byWorker[id] = append(byWorker[id], i)
	}
	for id, idx := range byWorker {
		sort.Slice(idx, func(a, b int) bool { return sheet.ages[idx[a]] < sheet.ages[idx[b]] })
		s, first := 0.0, any(nil)
		for _, i := range idx {
			s = math.Max(0, s+tab[i][col].(float64)-0.5)
			if !near(tab[i][2].(float64), s, 1e-9) || tab[i][4] != (s > h) {
				t.Fatalf("worker %s age %v: chart %v signal %v; Page's recursion gives %v, %v", id, sheet.ages[i], tab[i][2], tab[i][4], s, s > h)
			}
			if s > h && first == nil {
				first = sheet.ages[i]
			}
		}
		for _, i := range idx {
			if fmt.Sprint(tab[i][5]) != fmt.Sprint(first) {
				t.Fatalf("worker %s: first_signal %v; want %v", id, tab[i][5], first)
			}
		}
	}
}

func TestChartRowsPolicy(t *testing.T) {
	env, m := newEnv(t)
	sheet := synth(12, 8, 120, 0)
	lo, hi, _ := m.Curves.Range(sheet.groups[0])
	ids, ages, vals := anyCol(sheet.ids), anyCol(sheet.ages), anyCol(sheet.vals)
	ages[1] = nil // blank age: #N/A in its row
	vals[4] = nil // blank reading
	ids[6] = ""   // blank id
	groups := anyCol(sheet.groups)
	groups[15] = nil  // blank group
	ages[9] = hi + 10 // outside the reference range
	ages[12] = lo - 3 // below it
	tab := table(t, mustCall(t, env, "VEER.CHART", "sbp", ids, ages, vals, groups, "limit=4"))
	if len(tab) != sheet.len() {
		t.Fatalf("%d rows for %d exams", len(tab), sheet.len())
	}
	for _, c := range []struct {
		row   int
		code  cell.Code
		parts []string
	}{
		{2, cell.CodeNA, []string{"row 2", "age is blank"}},
		{5, cell.CodeNA, []string{"row 5", "reading is blank"}},
		{7, cell.CodeNA, []string{"row 7", "id is blank"}},
		{10, cell.CodeNum, []string{"row 10", "outside the reference range", "extrapolate=true"}},
		{13, cell.CodeNum, []string{"row 13", "outside the reference range"}},
		{16, cell.CodeNA, []string{"row 16", "group is blank"}},
	} {
		if len(tab[c.row-1]) != 6 {
			t.Fatalf("row %d has %d columns", c.row, len(tab[c.row-1]))
		}
		for _, v := range tab[c.row-1] {
			wantErr(t, cellErr(t, v), c.code, c.parts...)
		}
	}
	// The other rows are charted as if the failed rows were not there.
	var kept exams
	for i := range sheet.ids {
		switch i {
		case 1, 4, 6, 9, 12, 15:
			continue
		}
		kept.ids = append(kept.ids, sheet.ids[i])
		kept.ages = append(kept.ages, sheet.ages[i])
		kept.vals = append(kept.vals, sheet.vals[i])
		kept.groups = append(kept.groups, sheet.groups[i])
	}
	res, err := m.Screen(kept.screening(), screening.DefaultSettings(), 4)
	if err != nil {
		t.Fatal(err)
	}
	k := 0
	for i := range sheet.ids {
		switch i {
		case 1, 4, 6, 9, 12, 15:
			continue
		}
		if tab[i][2] != res[k].Stat || tab[i][0] != res[k].Z {
			t.Errorf("row %d = %v; want z %v chart %v", i+1, tab[i], res[k].Z, res[k].Stat)
		}
		k++
	}
	// With extrapolate=true the row 3 years below the range is charted;
	// the one 10 years above only when reach allows it.
	tab = table(t, mustCall(t, env, "VEER.CHART", "sbp", ids, ages, vals, groups, "limit=4; extrapolate=true"))
	wantErr(t, cellErr(t, tab[9][0]), cell.CodeNum, "row 10", "10 years outside", "reach=YEARS")
	num(t, tab[12][0])
	tab = table(t, mustCall(t, env, "VEER.CHART", "sbp", ids, ages, vals, groups, "limit=4; reach=12"))
	num(t, tab[9][0])
	num(t, tab[12][0])
	_, e := call(t, env, "VEER.CHART", "sbp", ids, ages, vals, groups, "limit=4; extrapolate=false; reach=12")
	wantErr(t, e, cell.CodeValue, "reach", "extrapolate is off")
	_, e = call(t, env, "VEER.CHART", "sbp", ids, ages, vals, groups, "limit=4; reach=0")
	wantErr(t, e, cell.CodeNum, "reach must be")
	// Two exams of a worker at one age with different readings are
	// #VALUE! in both rows, naming the sheet's rows (not the rows left
	// after the blank ones); the rest is charted. A repeat with the same
	// reading is #VALUE! in the repeat alone.
	dupAges := anyCol(sheet.ages)
	dupAges[0] = nil // rows 1 to 3 are the first worker's
	dupAges[2] = dupAges[1]
	tab = table(t, mustCall(t, env, "VEER.CHART", "sbp", anyCol(sheet.ids), dupAges, anyCol(sheet.vals), anyCol(sheet.groups), "limit=4"))
	for _, r := range []int{1, 2} {
		wantErr(t, cellErr(t, tab[r][0]), cell.CodeValue, "rows 2 and 3", "same age", "different readings")
	}
	num(t, tab[3][0])
	dupVals := anyCol(sheet.vals)
	dupVals[2] = dupVals[1]
	tab = table(t, mustCall(t, env, "VEER.CHART", "sbp", anyCol(sheet.ids), dupAges, dupVals, anyCol(sheet.groups), "limit=4"))
	num(t, tab[1][0])
	wantErr(t, cellErr(t, tab[2][0]), cell.CodeValue, "row 3", "repeats the exam", "in row 2")
	// A text cell fails the call, naming the argument and the cell.
	vals[3] = "n/a"
	_, e = call(t, env, "VEER.CHART", "sbp", ids, ages, vals, anyCol(sheet.groups), "limit=4")
	wantErr(t, e, cell.CodeValue, "'values'", "row 4", `"n/a"`)
}

func TestChartErrors(t *testing.T) {
	env, _ := newEnv(t)
	s := synth(13, 5, 120, 0)
	dup := synth(13, 5, 120, 0)
	dup.ages[2] = dup.ages[1] // two exams of a worker at one age
	for _, c := range []struct {
		name  string
		e     exams
		opts  any
		code  cell.Code
		parts []string
	}{
		{"no target or limit", s, nil, cell.CodeValue, []string{"target", "limit"}},
		{"options without target", s, "side=both", cell.CodeValue, []string{"target", "limit"}},
		{"both target and limit", s, "target=20; limit=4", cell.CodeValue, []string{"not both"}},
		{"negative limit", s, "limit=-1", cell.CodeNum, []string{"limit"}},
		{"unknown option", s, "target=20; alowance=1", cell.CodeValue, []string{`unknown option "alowance"`, "allowance", "target"}},
		{"bad side", s, "target=20; side=upward", cell.CodeValue, []string{"side", "up, down, both"}},
		{"lambda out of range", s, "target=20; chart=ewma; lambda=1.5", cell.CodeNum, []string{"lambda"}},
		{"target too short", s, "target=0.5", cell.CodeNum, []string{"target"}},
		{"bootstrap with too many reps", s, "target=20; method=bootstrap; reps=2000000", cell.CodeNum, []string{"reps"}},
		{"fractional seed", s, "target=20; seed=1.5", cell.CodeNum, []string{"seed"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			args := []any{"sbp", c.e.ids, c.e.ages, c.e.vals, c.e.groups}
			if c.opts != nil {
				args = append(args, c.opts)
			}
			_, e := call(t, env, "VEER.CHART", args...)
			wantErr(t, e, c.code, c.parts...)
		})
	}
	_, e := call(t, env, "VEER.CHART", "sbp", s.ids, s.ages[:3], s.vals, s.groups, "limit=4")
	wantErr(t, e, cell.CodeValue, "same number of rows")
	_, e = call(t, env, "VEER.CHART", "gone", s.ids, s.ages, s.vals, s.groups, "limit=4")
	wantErr(t, e, cell.CodeRef, "gone")
}

func TestLimit(t *testing.T) {
	env, m := newEnv(t)
	// Textbook values (see spcARL0Up): VEER.LIMIT(930.887,,"allowance=0.5;
	// side=up; gap=1") = 5.00 ± 0.01.
	for _, c := range []struct {
		target float64
		opts   string
		want   float64
	}{
		{spcARL0Up, "allowance=0.5; side=up; gap=1", 5},
		{spcARL0Both, "allowance=0.5; side=both; gap=1", 5},
		{2 * spcARL0Up, "allowance=0.5; side=up; gap=2", 5}, // ATS = ARL x gap
	} {
		h := num(t, mustCall(t, env, "VEER.LIMIT", c.target, blank, c.opts))
		if !near(h, c.want, 0.01) {
			t.Errorf("VEER.LIMIT(%v,,%q) = %.4f; want %v ± 0.01 (R spc xcusum.arl)", c.target, c.opts, h, c.want)
		}
	}
	// Without a model the engine's i.i.d. normal calibration is used.
	for _, opts := range []string{"gap=1", "gap=0.5; allowance=1", "gap=1; chart=ewma; lambda=0.2", "gap=2; side=down; headstart=0.5"} {
		o, _ := cell.ParseOptions("t", []string{"gap", "allowance", "chart", "lambda", "side", "headstart"}, cell.ScalarValue(cell.TextCell(opts)), "o")
		spec := chart.DefaultSpec()
		spec.Allowance = o.Number("allowance", spec.Allowance)
		spec.Kind = chart.Kind(o.Text("chart", string(spec.Kind)))
		spec.Lambda = o.Number("lambda", spec.Lambda)
		spec.Side = chart.Side(o.Text("side", string(spec.Side)))
		spec.HeadStart = o.Number("headstart", 0)
		c := monitor.Calibration{Settings: monitor.Settings{Chart: spec, Mode: monitor.Direct}, Method: monitor.Normal, Gap: o.Number("gap", 0), Seed: screening.DefaultSeed}
		want, err := monitor.Limit(c, 20)
		if err != nil {
			t.Fatal(err)
		}
		got := num(t, mustCall(t, env, "VEER.LIMIT", 20, blank, opts))
		if got != want.H {
			t.Errorf("VEER.LIMIT(20,,%q) = %v; monitor.Limit gives %v", opts, got, want.H)
		}
	}
	// With a model: the model's serial correlation and gaps (screening.Model.Limit).
	for _, opts := range []string{"", "side=both", "serial=whiten", "serial=off", "serial=direct", "method=bootstrap; reps=500", "horizon=long", "horizon=followup; seed=7"} {
		o, _ := cell.ParseOptions("t", []string{"side", "serial", "method", "reps", "horizon", "seed"}, cell.ScalarValue(cell.TextCell(opts)), "o")
		set := screening.DefaultSettings()
		set.Chart.Side = chart.Side(o.Text("side", string(set.Chart.Side)))
		set.Serial = screening.Serial(o.Text("serial", string(set.Serial)))
		lo := screening.LimitOptions{Method: monitor.Method(o.Text("method", "normal")), Paths: int(o.Number("reps", 0)),
			Seed: uint64(o.Number("seed", screening.DefaultSeed)), Horizon: monitor.Horizon(o.Text("horizon", ""))}
		want, err := m.Limit(set, lo, 20)
		if err != nil {
			t.Fatal(err)
		}
		args := []any{20, "sbp"}
		if opts != "" {
			args = append(args, opts)
		}
		got := num(t, mustCall(t, env, "VEER.LIMIT", args...))
		if got != want.H {
			t.Errorf("VEER.LIMIT(20, sbp, %q) = %v; Model.Limit gives %v", opts, got, want.H)
		}
		// The same call again gives the same number (deterministic, cached).
		if again := num(t, mustCall(t, env, "VEER.LIMIT", args...)); again != got {
			t.Errorf("VEER.LIMIT(20, sbp, %q) changed from %v to %v", opts, got, again)
		}
	}
	for _, c := range []struct {
		name  string
		args  []any
		code  cell.Code
		parts []string
	}{
		{"no model and no gap", []any{20}, cell.CodeValue, []string{"gap=1"}},
		{"bootstrap without a model", []any{20, blank, "gap=1; method=bootstrap"}, cell.CodeValue, []string{"bootstrap needs a model"}},
		{"target in the options", []any{20, "sbp", "target=30"}, cell.CodeValue, []string{"first argument"}},
		{"target shorter than a gap", []any{0.5, blank, "gap=1"}, cell.CodeNum, []string{"target"}},
		{"negative target", []any{-5, blank, "gap=1"}, cell.CodeNum, []string{"target"}},
		{"text target", []any{"twenty", blank, "gap=1"}, cell.CodeValue, []string{"'target'", "number"}},
		{"negative gap", []any{20, blank, "gap=-1"}, cell.CodeNum, []string{"gap option must be from a day (0.0027 years) to 20 years, not -1"}},
		{"zero gap", []any{20, blank, "gap=0"}, cell.CodeNum, []string{"gap option must be from a day (0.0027 years) to 20 years, not 0"}},
		{"gap of a nanosecond", []any{20, "sbp", "gap=1e-9"}, cell.CodeNum, []string{"from a day", "not 0.000000001"}},
		{"gap beyond a career", []any{200, "sbp", "gap=21"}, cell.CodeNum, []string{"to 20 years"}},
		{"too much work", []any{5000, "sbp", "gap=0.003; serial=direct; reps=100000"}, cell.CodeNum, []string{"would simulate about 315 billion exams", "ask for less", "shorter target (now 5000 years)"}},
		{"fewer reps would do", []any{1000, "sbp", "gap=0.1; serial=direct; reps=200000"}, cell.CodeNum, []string{"would simulate", "reps=2600 or less"}},
		{"unknown option", []any{20, blank, "gap=1; sides=up"}, cell.CodeValue, []string{`unknown option "sides"`, "side"}},
		{"unknown model", []any{20, "nosuch"}, cell.CodeRef, []string{"nosuch"}},
		{"negative seed", []any{20, "sbp", "seed=-4"}, cell.CodeNum, []string{"seed"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, e := call(t, env, "VEER.LIMIT", c.args...)
			wantErr(t, e, c.code, c.parts...)
		})
	}
}

func TestDelay(t *testing.T) {
	env, m := newEnv(t)
	// No model: a shift of 1 SD present from the start, one exam a year,
	// k = 0.5, h = 5. The delay in years at a gap of 1 is the out-of-control
	// ARL, 10.376 exams by R spc (spcARL1Up); the Monte Carlo error is about
	// a tenth of a year.
	got := num(t, mustCall(t, env, "VEER.DELAY", 1, blank, "limit=5; gap=1"))
	spec := chart.DefaultSpec()
	c := monitor.Calibration{Settings: monitor.Settings{Chart: spec, Mode: monitor.Direct}, Method: monitor.Normal, Gap: 1, Seed: screening.DefaultSeed}
	d, err := monitor.Delay(c, 5, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	if got != d.Years {
		t.Errorf("VEER.DELAY(1,,limit=5;gap=1) = %v; monitor.Delay gives %v", got, d.Years)
	}
	if math.Abs(got-spcARL1Up) > 4*d.SE {
		t.Errorf("delay %v (SE %v) is more than 4 SE from the ARL1 %v of R spc", got, d.SE, spcARL1Up)
	}
	// With a model and a target (the limit comes from Model.Limit).
	set := screening.DefaultSettings()
	lim, err := m.Limit(set, screening.LimitOptions{}, 20)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		shift, onset float64
		opts         string
	}{{1, 0, "target=20"}, {2, 0, "target=20"}, {1, 5, "target=20; onset=5"}} {
		want, err := m.Delay(set, screening.LimitOptions{}, lim.H, c.shift, c.onset)
		if err != nil {
			t.Fatal(err)
		}
		got := num(t, mustCall(t, env, "VEER.DELAY", c.shift, "sbp", c.opts))
		if got != want.Years {
			t.Errorf("VEER.DELAY(%v, sbp, %q) = %v; Model.Delay gives %v", c.shift, c.opts, got, want.Years)
		}
	}
	// A bigger shift is found sooner.
	d1 := num(t, mustCall(t, env, "VEER.DELAY", 1, "sbp", "target=20"))
	d2 := num(t, mustCall(t, env, "VEER.DELAY", 2, "sbp", "target=20"))
	if !(d2 < d1) {
		t.Errorf("delay for 2 SD (%v) is not shorter than for 1 SD (%v)", d2, d1)
	}
	for _, c := range []struct {
		name  string
		args  []any
		code  cell.Code
		parts []string
	}{
		{"no target or limit", []any{1, "sbp"}, cell.CodeValue, []string{"target", "limit"}},
		{"negative onset", []any{1, "sbp", "target=20; onset=-2"}, cell.CodeNum, []string{"onset"}},
		{"no model and no gap", []any{1, blank, "limit=5"}, cell.CodeValue, []string{"gap"}},
		{"text shift", []any{"big", "sbp", "target=20"}, cell.CodeValue, []string{"'shift'"}},
		{"unknown option", []any{1, "sbp", "target=20; onsett=1"}, cell.CodeValue, []string{`unknown option "onsett"`, "onset"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, e := call(t, env, "VEER.DELAY", c.args...)
			wantErr(t, e, c.code, c.parts...)
		})
	}
}

func TestModels(t *testing.T) {
	env, m := newEnv(t)
	other := synth(2, 160, 125, 0)
	mustCall(t, env, "VEER.FIT", "sbp", other.ids, other.ages, other.vals, other.groups)
	mustCall(t, env, "VEER.SAVERULES", "bp-rules", "high = z > 2.0")
	tab := table(t, mustCall(t, env, "VEER.MODELS"))
	want := [][]any{
		{"name", "handle", "versions", "groups", "exams"},
		{"bp-rules", "bp-rules@v1", 1, "rule set", nil},
		{"sbp", "sbp@v2", 2, strings.Join(m.Curves.Groups(), ", "), other.len()},
	}
	if fmt.Sprint(tab) != fmt.Sprint(want) {
		t.Errorf("VEER.MODELS = %v; want %v", tab, want)
	}
	// An environment that cannot list models says so.
	_, e := call(t, noList{env}, "VEER.MODELS")
	wantErr(t, e, cell.CodeValue, "cannot list")
}

// noList is an Env without a way to list models.
type noList struct{ cell.Env }
