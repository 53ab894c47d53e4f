package screening

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"veer/functions/published"
	"veer/functions/serial"
)

// lmsOf is a known skewed reference for two sexes: L, M, S smooth in age.
func lmsOf(sex string, a float64) published.LMS {
	u := a - 18
	if sex == "f" {
		return published.LMS{L: -1.1 + 0.012*u, M: 110 + 0.3*u + 0.006*u*u, S: 0.09 + 0.0007*u}
	}
	return published.LMS{L: -0.9 + 0.012*u, M: 119 + 0.25*u + 0.005*u*u, S: 0.088 + 0.0006*u}
}

// lmsTable tabulates lmsOf every year from 18 to 75, as a published table.
func lmsTable(t testing.TB) *published.Reference {
	var rows []published.TableRow
	for _, g := range []string{"f", "m"} {
		for a := 18.0; a <= 75; a++ {
			p := lmsOf(g, a)
			rows = append(rows, published.TableRow{Group: g, Age: a, L: p.L, M: p.M, S: p.S})
		}
	}
	ref, err := published.NewTable(rows, published.Linear)
	if err != nil {
		t.Fatal(err)
	}
	return ref
}

// site simulates n workers of a site screened against lmsOf: exams as in
// cohort, readings the reference centile at serially correlated z.
func site(n int, par serial.Params, seed uint64, prefix string) []Exam {
	rng := rand.New(rand.NewPCG(seed, 15))
	var out []Exam
	for w := range n {
		sex := []string{"f", "m"}[rng.IntN(2)]
		k := 3 + rng.IntN(8)
		a := 20 + 35*rng.Float64()
		times := make([]float64, k)
		for j := range times {
			times[j] = math.Round(a*100) / 100
			a += 0.6 + 1.8*rng.Float64()
		}
		z := serial.Simulate(par, times, rng, nil)
		for j, t := range times {
			y, err := lmsOf(sex, t).At(z[j])
			if err != nil {
				panic(err)
			}
			out = append(out, Exam{Worker: fmt.Sprintf("%s%04d", prefix, w), Group: sex, Time: t, Value: y})
		}
	}
	return out
}

// TestPublishedModel: a model on a published LMS table, its serial model
// estimated from the site's own exams, standardises as the table does,
// round-trips through its file, and says where its serial model comes from.
func TestPublishedModel(t *testing.T) {
	ref := lmsTable(t)
	par := serial.Params{Phi: 0.9, C: 0.7}
	exams := site(300, par, 1, "S")
	m, err := FitPublished(context.Background(), ref, exams, PublishedOptions{Name: "sbp"})
	if err != nil {
		t.Fatal(err)
	}
	if m.SerialSource != SerialFromWorkforce || m.Workforce == nil || m.Workforce.Workers != 300 || m.Curves != nil {
		t.Fatalf("model %+v", m)
	}
	if math.Abs(m.Serial.Phi-par.Phi) > 2*m.Serial.SEPhi || math.Abs(m.Serial.C-par.C) > 2*m.Serial.SEC {
		t.Errorf("serial %+v, truth %+v", m.Serial, par)
	}
	if !strings.Contains(m.Summary(), "estimated from the screened workforce's own exams") {
		t.Errorf("summary %q", m.Summary())
	}
	res, err := m.Screen(exams[:50], DefaultSettings(), 4)
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range res[:50] {
		e := exams[i]
		z, _ := ref.Z(e.Group, e.Time, nil, e.Value, false)
		p, _ := ref.At(e.Group, e.Time, nil, false)
		if math.Abs(r.Z-z) > 1e-12 || r.Mean != p.M || math.Abs(r.SD-p.M*p.S) > 1e-12 || !r.InRange {
			t.Fatalf("row %d: %+v, want z %g, M %g", i+1, r, z, p.M)
		}
	}
	// The file.
	b, err := m.Encode()
	if err != nil {
		t.Fatal(err)
	}
	back, err := Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	b2, _ := back.Encode()
	if !bytes.Equal(b, b2) || back.Hash != m.Hash || back.Published == nil || back.SerialSource != SerialFromWorkforce || *back.Workforce != *m.Workforce {
		t.Errorf("round trip changed the model")
	}
	if !bytes.Contains(b, []byte(`"version":2`)) {
		t.Errorf("a published model is version 2")
	}
	// Outside the table's ages: an error, or held at the end.
	old := []Exam{{Worker: "X", Group: "f", Time: 80, Value: 150}}
	if _, err := m.Screen(old, DefaultSettings(), 4); !errors.Is(err, published.ErrOutOfRange) {
		t.Errorf("age 80: %v", err)
	}
	set := DefaultSettings()
	set.Extrapolate = MaxExtrapolation
	r, err := m.Screen(old, set, 4)
	z75, _ := ref.Z("f", 75, nil, 150, false)
	if err != nil || r[0].InRange || math.Abs(r[0].Z-z75) > 1e-12 {
		t.Errorf("extrapolated: %+v %v", r, err)
	}
	// A reading of 0 where L ≠ 1.
	if _, err := m.Screen([]Exam{{Worker: "X", Group: "f", Time: 40, Value: 0}}, DefaultSettings(), 4); !errors.Is(err, published.ErrReading) {
		t.Errorf("reading 0: %v", err)
	}
}

// TestPublishedFalseSignalRate: without a reference cohort the promise of
// a limit holds. A site of 400 workers gives the serial model and the
// follow-up pattern; the limit for 20 years (both serial modes, method
// normal) is kept within 10% on 6000 fresh healthy workers from the same
// published reference.
func TestPublishedFalseSignalRate(t *testing.T) {
	if testing.Short() {
		t.Skip("simulation")
	}
	par := serial.Params{Phi: 0.95, C: 0.8}
	m, err := FitPublished(context.Background(), lmsTable(t), site(400, par, 2, "S"), PublishedOptions{Name: "sbp"})
	if err != nil {
		t.Fatal(err)
	}
	fresh := site(6000, par, 3, "H")
	const target = 20.0
	for _, mode := range []Serial{SerialWhiten, SerialDirect} {
		set := DefaultSettings()
		set.Serial = mode
		lr, err := m.Limit(set, LimitOptions{}, target)
		if err != nil {
			t.Fatal(err)
		}
		res, err := m.Screen(fresh, set, lr.H)
		if err != nil {
			t.Fatal(err)
		}
		sig := make([]bool, len(res))
		for i, r := range res {
			sig[i] = r.Signal
		}
		ev := Evaluate(fresh, sig, nil)
		ats := ev.YearsAtRisk / float64(ev.FalseSignals)
		t.Logf("%s: estimated phi %.3f, c %.3f from 400 workers; limit %.3f; %.1f worker-years per false signal for a %g-year target (%d false signals)",
			mode, m.Serial.Phi, m.Serial.C, lr.H, ats, target, ev.FalseSignals)
		if math.Abs(ats/target-1) > 0.10 {
			t.Errorf("%s: realised %.1f years per false signal, target %g", mode, ats, target)
		}
	}
}

// TestPublishedEquationsWithHeight: covariates flow from the exams to z,
// and a blank height is an error naming the row.
func TestPublishedEquationsWithHeight(t *testing.T) {
	doc := `{"format": "veer.equations", "version": 1, "form": "lms",
	 "covariates": [{"name": "height", "unit": "cm", "min": 140, "max": 200}],
	 "groups": [{"group": "", "age_min": 18, "age_max": 80,
	   "L": {"terms": [{"term": "1", "coef": 1}]},
	   "M": {"link": "log", "terms": [{"term": "1", "coef": -10}, {"term": "ln(height)", "coef": 2.2}, {"term": "age", "coef": -0.008}]},
	   "S": {"link": "log", "terms": [{"term": "1", "coef": -2.1}]}}]}`
	ref, err := published.DecodeEquations([]byte(doc))
	if err != nil {
		t.Fatal(err)
	}
	p := serial.Params{Phi: 0.9, C: 0.7}
	m, err := FitPublished(context.Background(), ref, nil, PublishedOptions{Name: "fev1", Serial: &p})
	if err != nil {
		t.Fatal(err)
	}
	if m.SerialSource != SerialFromUser || m.Serial.SEPhi != 0 || m.MeanGap != 0 || len(m.Sample) != 0 {
		t.Fatalf("%+v", m)
	}
	exams := []Exam{
		{Worker: "A", Time: 30, Value: 3.9, Covariates: []float64{170}},
		{Worker: "A", Time: 31, Value: 3.7, Covariates: []float64{170}},
		{Worker: "B", Time: 50, Value: 3.1, Covariates: []float64{182}},
	}
	res, err := m.Screen(exams, DefaultSettings(), 4)
	if err != nil {
		t.Fatal(err)
	}
	for i, e := range exams {
		z, _ := ref.Z("", e.Time, e.Covariates, e.Value, false)
		if math.Abs(res[i].Z-z) > 1e-12 {
			t.Errorf("row %d: z %g, want %g", i+1, res[i].Z, z)
		}
	}
	exams[2].Covariates = nil
	_, err = m.Screen(exams, DefaultSettings(), 4)
	var ee *ExamErrors
	if !errors.Is(err, published.ErrMissingCovariate) || !errors.As(err, &ee) || ee.First[0].Index != 2 {
		t.Errorf("blank height: %v", err)
	}
	// No exam histories: the limit needs the planned gap.
	if _, err := m.Limit(DefaultSettings(), LimitOptions{}, 20); err == nil || !strings.Contains(err.Error(), "planned gap") {
		t.Errorf("limit without gaps: %v", err)
	}
	if lr, err := m.Limit(DefaultSettings(), LimitOptions{Gap: 1}, 20); err != nil || !(lr.H > 0) {
		t.Errorf("limit with a gap: %+v %v", lr, err)
	}
	b, _ := m.Encode()
	back, err := Decode(b)
	if err != nil || back.SerialSource != SerialFromUser || back.Workforce != nil {
		t.Errorf("decode: %v", err)
	}
	if _, err := FitPublished(context.Background(), ref, nil, PublishedOptions{Name: "x"}); err == nil {
		t.Errorf("no exams and no serial model accepted")
	}
}

// TestPublishedItems: the diagnostics of a model on a published reference
// say what the reference is and where the serial model comes from.
func TestPublishedItems(t *testing.T) {
	m, err := FitPublished(context.Background(), lmsTable(t).WithInfo(published.Info{Name: "table.csv"}), site(60, serial.Params{Phi: 0.9, C: 0.7}, 4, "S"), PublishedOptions{Name: "sbp"})
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]any{}
	for _, it := range m.Items() {
		got[it.Name] = it.Value
	}
	for name, want := range map[string]any{
		"reference": "published (lms)", "reference name": "table.csv", "group f: age from": 18.0, "group m: age to": 75.0,
		"serial model": "estimated from the screened workforce's own exams", "workforce workers": 60,
		"workforce workers kept for bootstrap": 60,
	} {
		if got[name] != want {
			t.Errorf("%s: %v, want %v", name, got[name], want)
		}
	}
}
