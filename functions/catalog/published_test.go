package catalog_test

import (
	"context"
	"fmt"
	"math"
	"strings"
	"testing"

	"veer/examples/smallsite"
	"veer/functions/cell"
	"veer/functions/published"
	"veer/functions/screening"
	"veer/functions/serial"
)

// publishedEnv holds "fev1", a model on the small site's synthetic FEV1
// equations in age and height (serial model set by hand), and "sbp" on its
// LMS table, beside the fitted reference model of newEnv.
func publishedEnv(t *testing.T) (*cell.MemoryEnv, *published.Reference) {
	t.Helper()
	env, _ := newEnv(t)
	eq, err := published.DecodeEquations(smallsite.Files()[smallsite.FEV1EquationsFile])
	if err != nil {
		t.Fatal(err)
	}
	m, err := screening.FitPublished(context.Background(), eq, nil, screening.PublishedOptions{Name: "fev1", Serial: &serial.Params{Phi: 0.9, C: 0.7}})
	if err != nil {
		t.Fatal(err)
	}
	doc, err := m.Encode()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := env.SaveModel("fev1", doc); err != nil {
		t.Fatal(err)
	}
	return env, eq
}

// TestPublishedLookups: the lookups answer from a published reference,
// with the covariates as their last argument, row by row.
func TestPublishedLookups(t *testing.T) {
	env, eq := publishedEnv(t)
	ages := []float64{30, 52.5, 30, 30, 90}
	heights := [][]float64{{164}, {180}, {math.NaN()}, {250}, {170}}
	vals := []float64{2.9, 3.4, 3.0, 3.0, 3.0}
	groups := []string{"female", "male", "female", "female", "female"}
	z := column(t, mustCall(t, env, "VEER.ZSCORE", "fev1", ages, vals, groups, nil, heights))
	for i := range 2 {
		want, _ := eq.Z(groups[i], ages[i], heights[i], vals[i], false)
		if got := num(t, z[i]); !near(got, want, 1e-12) {
			t.Errorf("row %d: z %g, want %g", i+1, got, want)
		}
	}
	wantErr(t, cellErr(t, z[2]), cell.CodeNA, "row 3", "the height is missing")
	wantErr(t, cellErr(t, z[3]), cell.CodeNum, "row 4", "height 250 is outside the range 140 to 200", "extrapolate=true")
	wantErr(t, cellErr(t, z[4]), cell.CodeNum, "row 5", "age 90 is outside the reference range")
	// A single row of covariates serves every age; extrapolation holds them.
	c := column(t, mustCall(t, env, "VEER.CENTILE", "fev1", []float64{30, 50}, 5, "female", "extrapolate=true", [][]float64{{250}}))
	want, _ := eq.Centile("female", 50, []float64{200}, 5, false)
	if got := num(t, c[1]); !near(got, want, 1e-12) {
		t.Errorf("5th centile at 50, height held at 200: %g, want %g", got, want)
	}
	// REFMEAN is the median M, REFSD M·S.
	mean := num(t, mustCall(t, env, "VEER.REFMEAN", "fev1", 30, "female", nil, [][]float64{{164}}))
	sd := num(t, mustCall(t, env, "VEER.REFSD", "fev1", 30, "female", nil, [][]float64{{164}}))
	p, _ := eq.At("female", 30, []float64{164}, false)
	if !near(mean, p.M, 1e-12) || !near(sd, p.M*p.S, 1e-12) {
		t.Errorf("mean %g sd %g, want %g %g", mean, sd, p.M, p.M*p.S)
	}
	// Without the covariates every row is #N/A; with the wrong shape the
	// call fails; a fitted model takes none.
	_, e := call(t, env, "VEER.ZSCORE", "fev1", 30, 3.0, "female")
	wantErr(t, e, cell.CodeNA, "the height is missing")
	_, e = call(t, env, "VEER.ZSCORE", "fev1", ages, vals, groups, nil, [][]float64{{164, 1}})
	wantErr(t, e, cell.CodeValue, "one column per covariate of the model (height)")
	_, e = call(t, env, "VEER.ZSCORE", "fev1", ages, vals, groups, nil, [][]float64{{164}, {170}})
	wantErr(t, e, cell.CodeValue, "has 2 rows but there are 5 rows")
	_, e = call(t, env, "VEER.ZSCORE", "sbp", 40, 120, "office", nil, [][]float64{{170}})
	wantErr(t, e, cell.CodeValue, "uses no covariates besides age")
	// A reading of 0 where L ≠ 1.
	_, e = call(t, env, "VEER.ZSCORE", "fev1", 30, 0, "female", nil, [][]float64{{164}})
	wantErr(t, e, cell.CodeNum, "the reading 0 is not positive")
}

// TestPublishedChartAndInfo: a sheet is charted against a published
// reference with its covariates; rows the reference cannot score answer
// their own error; INFO and MODELS describe the model.
func TestPublishedChartAndInfo(t *testing.T) {
	env, _ := publishedEnv(t)
	ids := []string{"A", "A", "A", "B", "B"}
	ages := []float64{30, 31.2, 32.5, 45, 46}
	vals := []float64{3.2, 3.0, 2.3, 3.9, 3.8}
	groups := []string{"female", "female", "female", "male", "male"}
	heights := [][]float64{{165}, {165}, {165}, {178}, {math.NaN()}}
	res := table(t, mustCall(t, env, "VEER.CHART", "fev1", ids, ages, vals, groups, "limit=2; side=down; gap=1; horizon=long", heights))
	if len(res) != 5 {
		t.Fatalf("%d rows", len(res))
	}
	wantErr(t, cellErr(t, res[4][0]), cell.CodeNA, "row 5", "the height is missing")
	for r := range 4 {
		if _, ok := res[r][0].(float64); !ok {
			t.Errorf("row %d: %v", r+1, res[r])
		}
	}
	// The same through a rule, with a trade threshold.
	col := column(t, mustCall(t, env, "VEER.RULE", "centile < 5.0", "fev1", ids, ages, vals, groups, "limit=2; side=down", heights))
	if col[0] != false || col[2] != true {
		t.Errorf("below the lower limit of normal: %v", col)
	}
	info := table(t, mustCall(t, env, "VEER.INFO", "fev1"))
	var text []string
	for _, row := range info {
		text = append(text, fmt.Sprint(row[0])+"="+fmt.Sprint(row[1]))
	}
	joined := strings.Join(text, "; ")
	for _, want := range []string{"reference=published (lms)", "covariate=height", "serial model=set by the user", "reference name=FEV1, synthetic example"} {
		if !strings.Contains(joined, want) {
			t.Errorf("INFO lacks %q: %s", want, joined)
		}
	}
	models := table(t, mustCall(t, env, "VEER.MODELS"))
	found := false
	for _, row := range models {
		if row[0] == "fev1" {
			found = row[3] == "female, male"
		}
	}
	if !found {
		t.Errorf("MODELS: %v", models)
	}
}
