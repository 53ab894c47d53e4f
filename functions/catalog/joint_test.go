package catalog_test

import (
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"

	"veer/functions/cell"
	"veer/functions/joint"
	"veer/functions/serial"
)

// jointExams is a synthetic sheet of blood pressure, cholesterol (blank at
// a fifth of the exams) and lung function; workers whose index is a
// multiple of 5 drift 1 SD in the first two from their fourth exam when
// drift is set.
type jointExams struct {
	ids  []string
	ages []float64
	vals [][]cell.Cell
}

func jointSynth(seed uint64, workers int, drift bool) jointExams {
	m := joint.Independent(3)
	m.Serial = []serial.Params{{Phi: 0.95, C: 0.8}, {Phi: 0.9, C: 0.7}, {Phi: 0.95, C: 0.85}}
	m.Innovation.R = [][]float64{{1, 0.4, -0.25}, {0.4, 1, -0.2}, {-0.25, -0.2, 1}}
	m.Reading.R = m.Innovation.R
	r := rand.New(rand.NewPCG(seed, 11))
	var e jointExams
	for w := range workers {
		k := 3 + r.IntN(6)
		times := make([]float64, k)
		a := 25 + 30*r.Float64()
		for j := range times {
			times[j] = math.Round(a*100) / 100
			a += 0.6 + 1.8*r.Float64()
		}
		s := m.Simulate(times, func(j, k int) bool { return k != 1 || r.Float64() > 0.2 }, r)
		for j, t := range times {
			z := []float64{s.Z[0][j], s.Z[1][j], s.Z[2][j]}
			if drift && w%5 == 0 && j >= 3 {
				z[0]++
				z[1]++
			}
			u := t - 40
			row := []cell.Cell{cell.NumberCell(math.Round(120 + 0.5*u + 10*z[0])), {}, cell.NumberCell(math.Round(100*(4-0.03*u+0.4*z[2])) / 100)}
			if !math.IsNaN(z[1]) {
				row[1] = cell.NumberCell(math.Round(100*math.Exp(1.6+0.005*u+0.15*z[1])) / 100)
			}
			e.ids = append(e.ids, "W"+strconv.Itoa(w))
			e.ages = append(e.ages, t)
			e.vals = append(e.vals, row)
		}
	}
	return e
}

func TestJointCells(t *testing.T) {
	env := &cell.MemoryEnv{}
	ref := jointSynth(1, 500, false)
	h := mustCall(t, env, "VEER.FIT", "panel", ref.ids, ref.ages, ref.vals, nil, "markers=sbp,chol,fev1; transform=none,log,none")
	if h != "panel@v1" {
		t.Fatalf("fit: %v", h)
	}
	info := table(t, mustCall(t, env, "VEER.INFO", "panel"))
	found := false
	for _, r := range info {
		if r[0] == "correlation of the innovations sbp-chol" {
			found = num(t, r[1]) > 0.2
		}
	}
	if !found {
		t.Errorf("VEER.INFO: %v", info[:6])
	}
	if v := num(t, mustCall(t, env, "VEER.REFMEAN", "panel/chol", 40.0)); !(v > 1.4 && v < 1.8) {
		t.Errorf("the cholesterol curve of the model: %v (log scale)", v)
	}
	_, e := call(t, env, "VEER.REFMEAN", "panel", 40.0)
	wantErr(t, e, cell.CodeValue, "holds several markers (sbp, chol, fev1)", "panel/sbp")
	_, e = call(t, env, "VEER.REFMEAN", "panel/ldl", 40.0)
	wantErr(t, e, cell.CodeRef, "not \"ldl\"")

	hJoint := num(t, mustCall(t, env, "VEER.LIMIT", 20.0, "panel", "side=up,up,down"))
	work := jointSynth(2, 150, true)
	out := table(t, mustCall(t, env, "VEER.CHART", "panel", work.ids, work.ages, work.vals, nil, "target=20; side=up,up,down; extrapolate=on"))
	if len(out) != len(work.ids) || len(out[0]) != 8 {
		t.Fatalf("VEER.CHART spills %d rows of %d columns", len(out), len(out[0]))
	}
	signals := 0
	for i, r := range out {
		if !near(num(t, r[4]), hJoint, 1e-12) {
			t.Fatalf("row %d: limit %v, VEER.LIMIT %v", i+1, r[4], hJoint)
		}
		if work.vals[i][1].Kind == cell.KindBlank && r[1] != nil {
			t.Errorf("row %d: a blank cholesterol has z %v", i+1, r[1])
		}
		if r[5] == true {
			signals++
			if r[6] == "" {
				t.Errorf("row %d: a signal without its leading marker", i+1)
			}
		}
	}
	if signals == 0 {
		t.Error("no signal among drifting workers")
	}
	d := num(t, mustCall(t, env, "VEER.DELAY", []float64{1, 1, 0}, "panel", "target=20; side=up,up,down"))
	if !(d > 0 && d < 20) {
		t.Errorf("delay %v", d)
	}
	// Without a model: the textbook MEWMA limit (R spc 0.6.7
	// mewma.crit(0.1, 200, 3) = 10.78365).
	if v := num(t, mustCall(t, env, "VEER.LIMIT", 200.0, nil, "markers=3; chart=mewma; lambda=0.1; gap=1")); !near(v, 10.78365, 1e-4) {
		t.Errorf("textbook MEWMA limit %v", v)
	}
	models := table(t, mustCall(t, env, "VEER.MODELS"))
	if len(models) != 2 || !strings.Contains(models[1][3].(string), "markers sbp, chol, fev1") {
		t.Errorf("VEER.MODELS: %v", models)
	}

	for _, tc := range []struct {
		name string
		fn   string
		args []any
		code cell.Code
		want string
	}{
		{"sides count", "VEER.LIMIT", []any{20.0, "panel", "side=up,up"}, cell.CodeValue, "3 markers need 3 sides"},
		{"bad side", "VEER.LIMIT", []any{20.0, "panel", "side=up,upward,down"}, cell.CodeValue, "comma-separated list"},
		{"columns", "VEER.CHART", []any{"panel", work.ids, work.ages, work.ages, nil, "target=20"}, cell.CodeValue, "holds 3 markers but values has 1 columns"},
		{"shifts", "VEER.DELAY", []any{[]float64{1, 1}, "panel", "target=20"}, cell.CodeValue, "3 markers need 3 shifts"},
		{"markers with a model", "VEER.LIMIT", []any{20.0, "panel", "markers=3"}, cell.CodeValue, "goes without a model"},
		{"marker names", "VEER.FIT", []any{"p2", ref.ids, ref.ages, ref.vals, nil, "markers=sbp,chol"}, cell.CodeValue, "names 2 markers but values has 3 columns"},
		{"marker twice", "VEER.FIT", []any{"p2", ref.ids, ref.ages, ref.vals, nil, "markers=sbp,chol,sbp"}, cell.CodeValue, `"sbp" is listed twice`},
		{"rule", "VEER.RULE", []any{"z > 2.0", "panel", work.ids, work.ages, work.vals, nil, "target=20"}, cell.CodeValue, "several markers"},
	} {
		_, e := call(t, env, tc.fn, tc.args...)
		if e == nil || e.Code != tc.code || !strings.Contains(e.Message, tc.want) {
			t.Errorf("%s: %v, want %s with %q", tc.name, e, tc.code, tc.want)
		}
	}
	// Two identical columns: not positive definite, naming them.
	same := make([][]cell.Cell, len(ref.vals))
	for i, r := range ref.vals {
		same[i] = []cell.Cell{r[0], r[0]}
	}
	_, e = call(t, env, "VEER.FIT", "p3", ref.ids, ref.ages, same, nil, "markers=sbp,sbp_again")
	wantErr(t, e, cell.CodeValue, `"sbp" and "sbp_again" are perfectly correlated`)
}
