package main

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"veer/functions/joint"
	"veer/functions/serial"
	"veer/internal/table"
)

// writeJointCSV writes workers with sbp, chol and fev1 (cholesterol blank
// at a fifth of the exams), drifting by shift (SDs per marker) from the
// fourth exam when shift is not nil.
func writeJointCSV(t *testing.T, path string, n int, seed uint64, prefix string, shift []float64) {
	t.Helper()
	m := joint.Independent(3)
	m.Markers = []string{"sbp", "chol", "fev1"}
	m.Serial = []serial.Params{{Phi: 0.95, C: 0.8}, {Phi: 0.9, C: 0.7}, {Phi: 0.95, C: 0.85}}
	m.Innovation.R = [][]float64{{1, 0.4, -0.25}, {0.4, 1, -0.2}, {-0.25, -0.2, 1}}
	m.Reading.R = m.Innovation.R
	rng := rand.New(rand.NewPCG(seed, 5))
	var b strings.Builder
	b.WriteString("worker,age,sbp,chol,fev1\n")
	for w := range n {
		k := 3 + rng.IntN(6)
		a := 22 + 30*rng.Float64()
		times := make([]float64, k)
		for j := range times {
			times[j] = math.Round(a*100) / 100
			a += 0.6 + 1.8*rng.Float64()
		}
		s := m.Simulate(times, func(j, k int) bool { return k != 1 || rng.Float64() > 0.2 }, rng)
		for j, age := range times {
			z := []float64{s.Z[0][j], s.Z[1][j], s.Z[2][j]}
			if shift != nil && j >= 3 {
				for q := range z {
					z[q] += shift[q]
				}
			}
			u := age - 40
			chol := ""
			if !math.IsNaN(z[1]) {
				chol = strconv.FormatFloat(math.Round(100*math.Exp(1.6+0.005*u+0.15*z[1]))/100, 'f', -1, 64)
			}
			fmt.Fprintf(&b, "%s%04d,%g,%g,%s,%g\n", prefix, w, age, math.Round(120+0.5*u+10*z[0]), chol, math.Round(100*(4-0.03*u+0.4*z[2]))/100)
		}
	}
	if err := os.WriteFile(path, []byte(b.String()), 0o600); err != nil {
		t.Fatal(err)
	}
}

func TestJointCommands(t *testing.T) {
	dir := t.TempDir()
	ref, work, model := filepath.Join(dir, "ref.csv"), filepath.Join(dir, "work.csv"), filepath.Join(dir, "panel.json")
	writeJointCSV(t, ref, 1200, 1, "R", nil)
	writeJointCSV(t, work, 400, 2, "W", []float64{1, 1, 0})
	code, _, errs := cli("fit", "--in", ref, "--id", "worker", "--time", "age", "--value", "sbp,chol,fev1", "--transform", "none,log,none", "--name", "panel", "--out", model)
	if code != 0 || !strings.Contains(errs, "sbp-chol correlation") {
		t.Fatalf("fit: %d %s", code, errs)
	}
	code, out, errs := cli("limit", "--model", model, "--target", "20", "--side", "up,up,down")
	h, err := strconv.ParseFloat(strings.TrimSpace(out), 64)
	if code != 0 || err != nil || !strings.Contains(errs, "Monte Carlo") {
		t.Fatalf("limit: %d %q %s", code, out, errs)
	}
	code, out, errs = cli("delay", "--model", model, "--limit", strconv.FormatFloat(h, 'f', 4, 64), "--shift", "1,1,0", "--side", "up,up,down")
	if d, err := strconv.ParseFloat(strings.TrimSpace(out), 64); code != 0 || err != nil || !(d > 0 && d < 20) {
		t.Errorf("delay: %d %q %s", code, out, errs)
	}
	screened := filepath.Join(dir, "out.csv")
	code, _, errs = cli("screen", "--model", model, "--in", work, "--id", "worker", "--time", "age", "--value", "fev1,sbp,chol",
		"--side", "down,up,up", "--target", "20", "--extrapolate", "--rule", "both_high=z_sbp > 1.0 && z_chol > 1.0", "--out", screened)
	if code != 0 || !strings.Contains(errs, "workers with a chart signal") || !strings.Contains(errs, "not a diagnosis") {
		t.Fatalf("screen: %d %s", code, errs)
	}
	f, err := os.Open(screened)
	if err != nil {
		t.Fatal(err)
	}
	tab, err := table.Read(f)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []string{"z_sbp", "centile_chol", "innovation_fev1", "chart", "limit", "signal", "leading_marker", "first_signal", "both_high"} {
		if _, err := tab.Column(c); err != nil {
			t.Errorf("screen output: %v", err)
		}
	}
	sig, _ := tab.Column("signal")
	lead, _ := tab.Column("leading_marker")
	zc, _ := tab.Column("z_chol")
	chol, _ := tab.Column("chol")
	signals, blanks := 0, 0
	for _, r := range tab.Rows {
		if r[sig] == "1" {
			signals++
			if r[lead] == "" {
				t.Errorf("a signal without its leading marker: %v", r)
			}
		}
		if r[chol] == "" {
			blanks++
			if r[zc] != "" {
				t.Errorf("a blank reading has a z: %v", r)
			}
		}
	}
	if signals == 0 || blanks == 0 {
		t.Errorf("%d signals, %d blank cholesterol readings", signals, blanks)
	}
}

// TestJointTextbook: without a model, the textbook MEWMA limit and delay
// (R spc 0.6.7: mewma.crit(0.1, 200, 3) = 10.78365, mewma.crit(0.1, 200, 2)
// = 8.633581, mewma.arl(0.1, 8.633581, 2, delta = 1, r = 40) = 10.12143).
func TestJointTextbook(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want float64
	}{
		{[]string{"limit", "--markers", "3", "--chart", "mewma", "--lambda", "0.1", "--target", "200", "--gap", "1"}, 10.78365},
		{[]string{"limit", "--markers", "2", "--chart", "mewma", "--lambda", "0.1", "--target", "200", "--gap", "1"}, 8.633581},
		{[]string{"delay", "--markers", "2", "--chart", "mewma", "--lambda", "0.1", "--limit", "8.633581", "--gap", "1", "--shift", "1,0"}, 10.12143},
	} {
		code, out, errs := cli(tc.args...)
		got, err := strconv.ParseFloat(strings.TrimSpace(out), 64)
		if code != 0 || err != nil || math.Abs(got-tc.want) > 1e-4 {
			t.Errorf("%v: %d %q %s, want %.4f", tc.args, code, out, errs, tc.want)
		}
	}
}

// TestJointBadInput: each a clear message naming the column, nothing
// written, exit 1 for bad data and 2 for a wrong command line.
func TestJointBadInput(t *testing.T) {
	dir := t.TempDir()
	ref := filepath.Join(dir, "ref.csv")
	writeJointCSV(t, ref, 300, 3, "R", nil)
	b, _ := os.ReadFile(ref)
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	copyCol := make([]string, len(lines))
	fewCol := make([]string, len(lines))
	for i, l := range lines {
		c := strings.Split(l, ",")
		switch {
		case i == 0:
			copyCol[i], fewCol[i] = l+",sbp2", l+",ldl"
		case i <= 10:
			copyCol[i], fewCol[i] = l+","+c[2], l+",3.1"
		default:
			copyCol[i], fewCol[i] = l+","+c[2], l+","
		}
	}
	dup, few := filepath.Join(dir, "dup.csv"), filepath.Join(dir, "few.csv")
	os.WriteFile(dup, []byte(strings.Join(copyCol, "\n")+"\n"), 0o600)
	os.WriteFile(few, []byte(strings.Join(fewCol, "\n")+"\n"), 0o600)
	model := filepath.Join(dir, "m.json")
	fit := func(in, value string) []string {
		return []string{"fit", "--in", in, "--id", "worker", "--time", "age", "--value", value, "--name", "m", "--out", model}
	}
	for _, tc := range []struct {
		name string
		args []string
		code int
		want string
	}{
		{"missing column", fit(ref, "sbp,ldl"), 1, `--value: there is no column "ldl"`},
		{"same marker twice", fit(ref, "sbp,chol,sbp"), 2, `--value names the column "sbp" twice`},
		{"too few readings", fit(few, "sbp,ldl"), 1, `marker "ldl" has only 10 reference readings`},
		{"identical columns", fit(dup, "sbp,sbp2"), 1, `markers "sbp" and "sbp2" are perfectly correlated`},
		{"transform count", append(fit(ref, "sbp,chol,fev1"), "--transform", "none,log"), 2, "one per marker (3), got 2"},
	} {
		code, _, errs := cli(tc.args...)
		if code != tc.code || !strings.Contains(errs, tc.want) {
			t.Errorf("%s: exit %d, %s; want exit %d and %q", tc.name, code, errs, tc.code, tc.want)
		}
		if _, err := os.Stat(model); err == nil {
			t.Fatalf("%s: a model was written", tc.name)
		}
	}
	if code, _, errs := cli(fit(ref, "sbp,chol,fev1")...); code != 0 {
		t.Fatal(errs)
	}
	out := filepath.Join(dir, "out.csv")
	screen := func(extra ...string) []string {
		return append([]string{"screen", "--model", model, "--in", ref, "--id", "worker", "--time", "age", "--target", "20", "--extrapolate", "--out", out}, extra...)
	}
	for _, tc := range []struct {
		name string
		args []string
		code int
		want string
	}{
		{"sides count", screen("--value", "sbp,chol,fev1", "--side", "up,up"), 2, "3 markers need 3 sides"},
		{"one side", screen("--value", "sbp,chol,fev1", "--side", "up"), 2, "3 markers need 3 sides"},
		{"sides on mewma", screen("--value", "sbp,chol,fev1", "--chart", "mewma", "--side", "up,up,down"), 2, "watches every direction"},
		{"marker count", screen("--value", "sbp,chol"), 2, "holds 3 markers (sbp, chol, fev1)"},
		{"marker not in model", screen("--value", "sbp,chol,ldl"), 2, `does not name "fev1"`},
		{"same marker twice", screen("--value", "sbp,chol,chol"), 2, `"chol" twice`},
		{"rule name", screen("--value", "sbp,chol,fev1", "--rule", "x=z > 2.0"), 2, `unknown name "z"`},
		{"one marker's model path", []string{"report", "--model", model, "--in", ref, "--id", "worker", "--time", "age", "--value", "sbp", "--target", "20", "--out", out}, 1, "holds several markers (sbp, chol, fev1)"},
	} {
		code, _, errs := cli(tc.args...)
		if code != tc.code || !strings.Contains(errs, tc.want) {
			t.Errorf("%s: exit %d, %s; want exit %d and %q", tc.name, code, errs, tc.code, tc.want)
		}
		if _, err := os.Stat(out); err == nil {
			t.Fatalf("%s: a result was written", tc.name)
		}
	}
	if code, _, errs := cli("limit", "--model", model, "--markers", "3", "--target", "20"); code != 2 || !strings.Contains(errs, "--markers goes without --model") {
		t.Errorf("--markers with a model: %d %s", code, errs)
	}
	if code, _, errs := cli("delay", "--model", model, "--target", "20", "--shift", "1"); code != 2 || !strings.Contains(errs, "one shift per marker (3)") {
		t.Errorf("one shift for three markers: %d %s", code, errs)
	}
}
