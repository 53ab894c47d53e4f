package screening

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/serial"
)

// TestExpectedLevels checks the one-step predictions against the Gaussian
// conditional law computed directly from the covariance matrix of the
// serial model (gonum's Cholesky solve; no filter involved):
//
//	Σ_ab = c·φ^|t_a − t_b| + (1 − c)·[a = b],
//	E[z_j | z_<j] = Σ_j,<j Σ_<j^-1 z_<j,  Var = Σ_jj − Σ_j,<j Σ_<j^-1 Σ_<j,j,
//
// that the innovation (z − Z)/SD is the one Screen charts, and that the
// predicted reading and its interval are the reference centiles at Φ(Z)
// and Φ(Z ± 1.96 SD).
func TestExpectedLevels(t *testing.T) {
	par := serial.Params{Phi: 0.9, C: 0.7}
	m := fit(t, cohort(400, par, 11, "r"))
	if m.Serial.Independent() {
		t.Fatal("the reference should carry serial correlation")
	}
	rows := cohort(3, par, 12, "w")
	ex := exams(rows)
	set := DefaultSettings()
	res, err := m.Screen(ex, set, 5)
	if err != nil {
		t.Fatal(err)
	}
	for _, idx := range groupByWorker(ex, func(int) bool { return true }) {
		n := len(idx)
		times, z := make([]float64, n), make([]float64, n)
		mine := make([]Exam, n)
		for j, i := range idx {
			times[j], z[j], mine[j] = ex[i].Time, res[i].Z, ex[i]
		}
		got, err := m.ExpectedLevels(set, mine, z)
		if err != nil {
			t.Fatal(err)
		}
		p := m.Serial
		cov := func(a, b int) float64 {
			v := p.C * math.Pow(p.Phi, math.Abs(times[a]-times[b]))
			if a == b {
				v += 1 - p.C
			}
			return v
		}
		for j := 0; j < n; j++ {
			wantZ, wantVar := 0.0, 1.0
			if j > 0 {
				s := mat.NewSymDense(j, nil)
				for a := 0; a < j; a++ {
					for b := 0; b < j; b++ {
						s.SetSym(a, b, cov(a, b))
					}
				}
				var ch mat.Cholesky
				if !ch.Factorize(s) {
					t.Fatal("covariance not positive definite")
				}
				k := mat.NewVecDense(j, nil)
				for a := 0; a < j; a++ {
					k.SetVec(a, cov(j, a))
				}
				var w mat.VecDense
				if err := ch.SolveVecTo(&w, k); err != nil {
					t.Fatal(err)
				}
				wantZ = mat.Dot(&w, mat.NewVecDense(j, append([]float64(nil), z[:j]...)))
				wantVar = cov(j, j) - mat.Dot(&w, k)
			}
			e := got[j]
			if math.Abs(e.Z-wantZ) > 1e-9 || math.Abs(e.SD-math.Sqrt(wantVar)) > 1e-9 {
				t.Fatalf("exam %d: predicted z %v sd %v, want %v and %v", j+1, e.Z, e.SD, wantZ, math.Sqrt(wantVar))
			}
			if u := (z[j] - e.Z) / e.SD; math.Abs(u-res[idx[j]].Innovation) > 1e-9 {
				t.Fatalf("exam %d: (z - Z)/SD = %v, the charted innovation is %v", j+1, u, res[idx[j]].Innovation)
			}
			std := distuv.UnitNormal
			for _, c := range []struct {
				got, q float64
			}{{e.Value, e.Z}, {e.Low, e.Z - 1.96*e.SD}, {e.High, e.Z + 1.96*e.SD}} {
				want, err := m.Curves.Centile("", times[j], 100*std.CDF(c.q), true)
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(c.got-want) > 1e-9*math.Abs(want) {
					t.Fatalf("exam %d: reading %v, want the centile %v", j+1, c.got, want)
				}
			}
		}
	}
	// Serial off: the reference itself.
	off := set
	off.Serial = SerialOff
	at := func(ages ...float64) []Exam {
		var out []Exam
		for _, a := range ages {
			out = append(out, Exam{Worker: "x", Time: a})
		}
		return out
	}
	got, err := m.ExpectedLevels(off, at(30, 31, 33), []float64{1, 2, -1})
	if err != nil {
		t.Fatal(err)
	}
	for j, e := range got {
		if e.Z != 0 || e.SD != 1 {
			t.Errorf("serial off, exam %d: Z %v SD %v, want 0 and 1", j+1, e.Z, e.SD)
		}
	}
	if _, err := m.ExpectedLevels(set, at(30, 30), []float64{1, 2}); err == nil {
		t.Error("two exams at one age should be refused")
	}
}
