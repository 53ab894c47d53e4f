package main

import (
	"math"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"veer/examples/smallsite"
	"veer/functions/cell"
	"veer/functions/screening"
)

// smallSite writes the small-site demo files into a fresh folder.
func smallSite(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	for name, b := range smallsite.Files() {
		writeFile(t, filepath.Join(dir, name), b)
	}
	return dir
}

// TestCLIPublished runs the whole job on the small site with no reference
// cohort: a model on the LMS table and one on the equations with height,
// their curves, limits, screening and report.
func TestCLIPublished(t *testing.T) {
	dir := smallSite(t)
	in := filepath.Join(dir, smallsite.ExamsFile)
	sbp := filepath.Join(dir, "sbp.json")
	code, _, errs := cli("fit", "--lms-table", filepath.Join(dir, smallsite.SBPTableFile), "--in", in,
		"--id", "worker", "--time", "age", "--value", "sbp", "--group", "sex", "--name", "sbp", "--out", sbp)
	if code != 0 {
		t.Fatalf("fit: %d %s", code, errs)
	}
	for _, want := range []string{"built \"sbp\" on the LMS table", "group female: ages 18 to 75",
		"serial model: estimated from the workforce's own exams", "left out", "the workforce's z against the reference: mean"} {
		if !strings.Contains(errs, want) {
			t.Errorf("fit says %q, lacking %q", errs, want)
		}
	}
	m, err := loadModel(sbp)
	if err != nil || m.Published == nil || m.SerialSource != screening.SerialFromWorkforce || m.Workforce.FirstPassTarget != 50 {
		t.Fatalf("model: %+v %v", m, err)
	}
	// The curve at the table's own ages is the table (female, 30: M 113.54).
	code, out, errs := cli("curve", "--model", sbp, "--at", "30,40", "--group", "female", "--centiles", "50")
	if code != 0 || !strings.Contains(out, "30,female,113.540000,") || !strings.Contains(out, ",113.540000\n") {
		t.Errorf("curve: %d %q %s", code, out, errs)
	}
	// Equations with height.
	fev1 := filepath.Join(dir, "fev1.json")
	code, _, errs = cli("fit", "--equations", filepath.Join(dir, smallsite.FEV1EquationsFile), "--in", in,
		"--id", "worker", "--time", "age", "--value", "fev1", "--group", "sex", "--covariate", "height=height",
		"--side", "down", "--name", "fev1", "--out", fev1)
	if code != 0 || !strings.Contains(errs, "covariates besides age: height") {
		t.Fatalf("fit equations: %d %s", code, errs)
	}
	// By hand from the synthetic equations (smallsite.FEV1EquationsJSON):
	// a woman of 164 cm at 30: M = exp(−10.0275 + 2.2 ln 164 − 0.00018·8²)
	// = exp(−10.0275 + 11.21971 − 0.01152) = exp(1.18069) = 3.2566.
	code, out, _ = cli("curve", "--model", fev1, "--at", "30", "--group", "female", "--covariate", "height=164")
	fields := strings.Split(strings.TrimSpace(strings.Split(out, "\n")[1]), ",")
	if v, _ := strconv.ParseFloat(fields[2], 64); code != 0 || math.Abs(v-3.2566) > 0.0001 {
		t.Errorf("curve of the equations: %q", out)
	}
	code, _, errs = cli("curve", "--model", fev1, "--at", "30")
	if code != 2 || !strings.Contains(errs, "needs the covariate height: add --covariate height=") {
		t.Errorf("curve without height: %d %s", code, errs)
	}
	// Screening and the report.
	tab := screenOut(t, in, "--model", fev1, "--value", "fev1", "--group", "sex", "--covariate", "height=height",
		"--side", "down", "--target", "50", "--rule", "below_lln=centile < 5.0")
	zc, _ := tab.Column("z")
	hc, _ := tab.Column("height")
	if len(tab.Rows) != 425 || tab.Rows[0][hc] != "196" || tab.Rows[0][zc] == "" {
		t.Errorf("screened: %d rows, first %v", len(tab.Rows), tab.Rows[0])
	}
	rep := filepath.Join(dir, "fev1.html")
	code, _, errs = cli("report", "--model", fev1, "--in", in, "--id", "worker", "--time", "age", "--value", "fev1",
		"--group", "sex", "--covariate", "height=height", "--side", "down", "--target", "50", "--marker", "FEV1", "--value-unit", "L", "--out", rep)
	if code != 0 {
		t.Fatalf("report: %d %s", code, errs)
	}
	html, _ := os.ReadFile(rep)
	for _, want := range []string{"Assumptions to review", "estimated from the screened workforce", "FEV1, synthetic example",
		"drawn at the group&#39;s median height", "at the worker&#39;s own height", "LMS method (Cole &amp; Green 1992)", "cm · "} {
		if !strings.Contains(string(html), want) {
			t.Errorf("report lacks %q", want)
		}
	}
	// Set by the user, without exams: limits then need a planned gap.
	user := filepath.Join(dir, "user.json")
	code, _, errs = cli("fit", "--lms-table", filepath.Join(dir, smallsite.SBPTableFile), "--serial-phi", "0.9", "--serial-c", "0.7", "--name", "sbp", "--out", user)
	if code != 0 || !strings.Contains(errs, "serial model: set by the user: phi 0.900 per year, persistent share c 0.700") {
		t.Fatalf("fit set by hand: %d %s", code, errs)
	}
	code, _, errs = cli("limit", "--model", user, "--target", "20")
	if code != 1 || !strings.Contains(errs, "use the long horizon with the planned gap") {
		t.Errorf("limit without gaps: %d %s", code, errs)
	}
	code, out, errs = cli("limit", "--model", user, "--target", "20", "--horizon", "long", "--gap", "1")
	if code != 0 || lastLine(out) == "" {
		t.Errorf("limit with a gap: %d %q %s", code, out, errs)
	}
}

// TestCLIPublishedBadInput: every bad table, file or exam sheet is refused
// with the row and column at fault, and nothing is written.
func TestCLIPublishedBadInput(t *testing.T) {
	dir := smallSite(t)
	in := filepath.Join(dir, smallsite.ExamsFile)
	table := func(name, body string) string { return writeFile(t, filepath.Join(dir, name), []byte(body)) }
	head := "group,age,L,M,S\n"
	cases := []struct {
		name, table, want string
	}{
		{"S not positive", head + "f,20,1,100,0.1\nf,30,1,101,0\n", `data row 2 (line 3), column "S": S (the coefficient of variation) must be positive, not 0`},
		{"M not positive", head + "f,20,1,-100,0.1\nf,30,1,101,0.1\n", `data row 1 (line 2), column "M": M (the median) must be positive`},
		{"L missing", head + "f,20,,100,0.1\nf,30,1,101,0.1\n", `data row 1 (line 2), column "L": the L cell is blank`},
		{"duplicate", head + "f,20,1,100,0.1\nf,20,1,101,0.1\n", `data rows 1 and 2 (lines 2 and 3), column "age": two rows for group "f" at age 20`},
		{"unsorted", head + "f,30,1,100,0.1\nf,20,1,101,0.1\n", `age 20 comes after age 30 of group "f"`},
		{"text", head + "f,20,1,100,0.1\nf,30,1,abc,0.1\n", `data row 2 (line 3), column "M": "abc" is not a number`},
		{"no S column", "group,age,L,M\nf,20,1,100\n", `an LMS table needs the columns age, L, M and S`},
		{"blank group", head + "f,20,1,100,0.1\n,30,1,101,0.1\n", `data row 2 (line 3), column "group": the group is blank`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(dir, "m.json")
			code, _, errs := cli("fit", "--lms-table", table("t.csv", c.table), "--serial-phi", "0.9", "--serial-c", "0.5", "--name", "x", "--out", out)
			if code != 1 || !strings.Contains(errs, c.want) {
				t.Errorf("%d %s", code, errs)
			}
			if _, err := os.Stat(out); !os.IsNotExist(err) {
				t.Errorf("a model was written")
			}
		})
	}
	// A reading of 0 where L ≠ 1, and a blank height.
	eq := filepath.Join(dir, smallsite.FEV1EquationsFile)
	lines := strings.Split(string(smallsite.Files()[smallsite.ExamsFile]), "\n")
	for _, c := range []struct {
		name, edit, want string
	}{
		{"reading 0", "fev1", `bad.csv: line 4, column "fev1": the reading 0 is not positive`},
		{"blank height", "height", `line 4, column "height": the height is missing`},
	} {
		t.Run(c.name, func(t *testing.T) {
			bad := append([]string(nil), lines...)
			f := strings.Split(bad[3], ",")
			if c.edit == "fev1" {
				f[5] = "0"
			} else {
				f[3] = ""
			}
			bad[3] = strings.Join(f, ",")
			p := writeFile(t, filepath.Join(dir, "bad.csv"), []byte(strings.Join(bad, "\n")))
			out := filepath.Join(dir, "m.json")
			code, _, errs := cli("fit", "--equations", eq, "--in", p, "--id", "worker", "--time", "age", "--value", "fev1",
				"--group", "sex", "--covariate", "height=height", "--name", "x", "--out", out)
			if code != 1 || !strings.Contains(errs, c.want) {
				t.Errorf("%d %s", code, errs)
			}
			if _, err := os.Stat(out); !os.IsNotExist(err) {
				t.Errorf("a model was written")
			}
		})
	}
	// A damaged equations file names the line and column.
	badEq := writeFile(t, filepath.Join(dir, "eq.json"), []byte("{\"format\": \"veer.equations\",\n \"version\": 1,\n \"form\": lms}"))
	if code, _, errs := cli("fit", "--equations", badEq, "--serial-phi", "0.9", "--serial-c", "0.5", "--name", "x", "--out", filepath.Join(dir, "m.json")); code != 1 || !strings.Contains(errs, "line 3, column 10") {
		t.Errorf("damaged equations: %d %s", code, errs)
	}
	// Wrong command lines.
	tbl := filepath.Join(dir, smallsite.SBPTableFile)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"fit", "--lms-table", tbl, "--name", "x", "--out", "x.json"}, "give them with --in"},
		{[]string{"fit", "--lms-table", tbl, "--equations", eq, "--name", "x", "--out", "x.json"}, "give one of --lms-table and --equations"},
		{[]string{"fit", "--lms-table", tbl, "--serial-phi", "0.9", "--name", "x", "--out", "x.json"}, "both --serial-phi and --serial-c"},
		{[]string{"fit", "--lms-table", tbl, "--serial-phi", "1.2", "--serial-c", "0.5", "--name", "x", "--out", "x.json"}, "phi must be at least 0 and below 1"},
		{[]string{"fit", "--lms-table", tbl, "--transform", "log", "--serial-phi", "0.9", "--serial-c", "0.5", "--name", "x", "--out", "x.json"}, "--transform is for curves fitted from a reference cohort"},
		{[]string{"fit", "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--serial-phi", "0.9", "--name", "x", "--out", "x.json"}, "--serial-phi goes with a published reference"},
		{[]string{"fit", "--lms-table", tbl, "--interpolate", "spline", "--serial-phi", "0.9", "--serial-c", "0.5", "--name", "x", "--out", "x.json"}, "--interpolate must be linear or cubic"},
		{[]string{"fit", "--equations", eq, "--in", in, "--id", "worker", "--time", "age", "--value", "fev1", "--group", "sex", "--name", "x", "--out", "x.json"}, "needs the covariate height"},
		{[]string{"fit", "--equations", eq, "--in", in, "--id", "worker", "--time", "age", "--value", "fev1", "--group", "sex", "--covariate", "height=height", "--covariate", "weight=w", "--name", "x", "--out", "x.json"}, "--covariate weight: the model's reference has no such covariate; it uses height"},
		{[]string{"fit", "--lms-table", tbl, "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "sex", "--covariate", "height", "--name", "x", "--out", "x.json"}, "write --covariate NAME=COLUMN"},
		{[]string{"fit", "--lms-table", tbl, "--in", in, "--id", "worker", "--time", "age", "--value", "sbp,fev1", "--group", "sex", "--name", "x", "--out", "x.json"}, "a published reference describes one marker"},
	} {
		code, _, errs := cli(c.args...)
		if code != 2 || !strings.Contains(errs, c.want) {
			t.Errorf("%v: %d %s", c.args, code, errs)
		}
	}
}

// TestDemoSmallSite: the small-site part of veer demo writes what an
// officer gets — models on the published references with the serial model
// estimated from the workforce, screened CSV files with the trade
// thresholds as rule columns, and a report stating the assumptions — and
// prints how the chart and the trade thresholds did against the truth.
func TestDemoSmallSite(t *testing.T) {
	dir := t.TempDir()
	var stdout, stderr strings.Builder
	e := &env{stdout: &stdout, stderr: &stderr, stdin: strings.NewReader("")}
	if err := runSmallSiteDemo(e, dir, DefaultSmallSiteTarget); err != nil {
		t.Fatalf("%v\n%s", err, stderr.String())
	}
	for _, name := range []string{"sbp.model.json", "fev1.model.json", "sbp.screened.csv", "fev1.screened.csv", "report.html",
		smallsite.SBPTableFile, smallsite.FEV1EquationsFile, smallsite.ExamsFile} {
		if _, err := os.Stat(filepath.Join(dir, name)); err != nil {
			t.Errorf("missing %s", name)
		}
	}
	for _, name := range []string{"sbp", "fev1"} {
		m, err := loadModel(filepath.Join(dir, name+".model.json"))
		if err != nil || m.SerialSource != screening.SerialFromWorkforce {
			t.Errorf("%s model: %v", name, err)
		}
	}
	b, _ := os.ReadFile(filepath.Join(dir, "fev1.screened.csv"))
	header := strings.SplitN(string(b), "\n", 2)[0]
	for _, col := range []string{"height", "z", "centile", "chart", "limit", "signal", "chart_over_limit", "below_lln", "fev1_fall_15pct"} {
		if !strings.Contains(","+header+",", ","+col+",") {
			t.Errorf("fev1.screened.csv lacks the column %s: %s", col, header)
		}
	}
	out := stdout.String()
	for _, want := range []string{"sbp (up)     chart, 50-year target", "rule sbp_at_or_above_140", "fev1 (down)  rule below_lln", "rule fev1_fall_15pct"} {
		if !strings.Contains(out, want) {
			t.Errorf("summary lacks %q:\n%s", want, out)
		}
	}
	html, _ := os.ReadFile(filepath.Join(dir, "report.html"))
	for _, want := range []string{"Assumptions to review", "sbp-lms.csv", "FEV1, synthetic example", "not a diagnosis"} {
		if !strings.Contains(string(html), want) {
			t.Errorf("report lacks %q", want)
		}
	}
	t.Logf("\n%s", out)
}

// TestCLIScreenRowsNamed: exams the reference cannot score are named by
// their data row and column, also for fitted models.
func TestCLIScreenRowsNamed(t *testing.T) {
	f := fixture(t)
	in := writeFile(t, filepath.Join(t.TempDir(), "old.csv"), []byte("worker,group,age,sbp\nA,tower,40,120\nA,tower,99,130\nB,nowhere,40,120\n"))
	code, _, errs := cli("screen", "--model", f.model, "--in", in, "--id", "worker", "--time", "age", "--value", "sbp", "--group", "group", "--limit", "4")
	for _, want := range []string{"2 rows not screened", `line 3, column "age": age 99 is`, `line 4, column "group": unknown group "nowhere"`} {
		if code != exitSkipped || !strings.Contains(errs, want) {
			t.Errorf("%d %s: lacks %q", code, errs, want)
		}
	}
}

// TestServePublished: a model built by veer fit on published equations is
// stored in a running server (PUT /v1/models/NAME with the token) and the
// cells use it with heights as their covariates, over HTTP.
func TestServePublished(t *testing.T) {
	dir := smallSite(t)
	model := filepath.Join(dir, "fev1.json")
	code, _, errs := cli("fit", "--equations", filepath.Join(dir, smallsite.FEV1EquationsFile), "--in", filepath.Join(dir, smallsite.ExamsFile),
		"--id", "worker", "--time", "age", "--value", "fev1", "--group", "sex", "--covariate", "height=height", "--side", "down", "--name", "fev1", "--out", model)
	if code != 0 {
		t.Fatalf("fit: %s", errs)
	}
	doc, _ := os.ReadFile(model)
	ls := startLive(t, t.TempDir())
	defer ls.stop(t)
	if status, b := ls.Do("PUT", "/v1/models/fev1", string(doc), ls.Auth); status != http.StatusCreated {
		t.Fatalf("PUT: status %d: %s", status, b)
	}
	m, _ := loadModel(model)
	want, _ := m.Reference().Z("female", 30, []float64{164}, 2.9, false)
	a := ls.Call("VEER.ZSCORE", "fev1", 30, 2.9, "female", nil, [][]float64{{164}})
	if got, ok := a.Decode(t).(float64); !ok || math.Abs(got-want) > 1e-9 {
		t.Errorf("VEER.ZSCORE: %v, want %g", a.Decode(t), want)
	}
	a = ls.Call("VEER.ZSCORE", "fev1", 30, 2.9, "female")
	if a.Error == nil || a.Error.Code != cell.CodeNA {
		t.Errorf("without height: %+v", a)
	}
}
