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

	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/serial"
)

// cohort simulates healthy workers: value = 120 + 0.5 (age - 40) + 10 e,
// e = s + w with corr(s(t), s(t+d)) = phi^d, var s = c, var w = 1 - c
// (the model of package serial), first exam at a uniform age in 20–55,
// 3–10 exams at gaps uniform on 0.6–2.4 years. Ids start with prefix.
func cohort(n int, par serial.Params, seed uint64, prefix string) []refcurve.Row {
	rng := rand.New(rand.NewPCG(seed, 7))
	var rows []refcurve.Row
	for w := 0; w < n; w++ {
		k := 3 + rng.IntN(8)
		t := 20 + 35*rng.Float64()
		times := make([]float64, k)
		for j := range times {
			times[j] = math.Round(t*100) / 100
			t += 0.6 + 1.8*rng.Float64()
		}
		e := serial.Simulate(par, times, rng, nil)
		for j := range times {
			rows = append(rows, refcurve.Row{
				Worker: fmt.Sprintf("%s%05d", prefix, w), Time: times[j],
				Value: 120 + 0.5*(times[j]-40) + 10*e[j],
			})
		}
	}
	return rows
}

func exams(rows []refcurve.Row) []Exam {
	out := make([]Exam, len(rows))
	for i, r := range rows {
		out[i] = Exam{Worker: r.Worker, Group: r.Group, Time: r.Time, Value: r.Value}
	}
	return out
}

func fit(t testing.TB, rows []refcurve.Row) *Model {
	t.Helper()
	m, err := Fit(context.Background(), rows, FitOptions{Name: "sim"})
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestRealisedFalseSignalRate checks the promise behind a target: on fresh
// healthy workers followed like the reference workers, worker-years of exams
// per false signal match the target (follow-up horizon), for both methods
// and serial modes, in a persistent setting (phi 0.95 per year, c 0.8)
// where the textbook long-horizon limit gives clearly more false signals.
func TestRealisedFalseSignalRate(t *testing.T) {
	par := serial.Params{Phi: 0.95, C: 0.8}
	m := fit(t, cohort(1500, par, 1, "R"))
	fresh := exams(cohort(6000, par, 2, "H"))
	const target = 20.0
	realised := func(set Settings, o LimitOptions) (float64, float64) {
		lr, err := m.Limit(set, o, target)
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
		// Relative SE of a Poisson count of false signals.
		return ev.YearsAtRisk / float64(ev.FalseSignals), 1 / math.Sqrt(float64(ev.FalseSignals))
	}
	for _, serialMode := range []Serial{SerialWhiten, SerialDirect} {
		for _, method := range []monitor.Method{monitor.Normal, monitor.Bootstrap} {
			set := DefaultSettings()
			set.Extrapolate = MaxExtrapolation
			set.Serial = serialMode
			ats, rse := realised(set, LimitOptions{Method: method})
			t.Logf("%s/%s, follow-up horizon: %.1f worker-years per false signal for a %g-year target (relative SE %.1f%%)", serialMode, method, ats, target, 100*rse)
			if math.Abs(ats/target-1) > 0.08+3*rse {
				t.Errorf("%s/%s: realised %.1f years per false signal, target %g", serialMode, method, ats, target)
			}
		}
	}
	set := DefaultSettings()
	set.Extrapolate = MaxExtrapolation
	set.Serial = SerialDirect
	ats, _ := realised(set, LimitOptions{Horizon: monitor.HorizonLong})
	t.Logf("direct/normal, long horizon: %.1f worker-years per false signal for a %g-year target", ats, target)
	if ats > 0.8*target {
		t.Errorf("long horizon realised %.1f years per false signal; expected clearly below the %g target with persistent readings", ats, target)
	}
}

func TestScreenOrderAndErrors(t *testing.T) {
	m := fit(t, cohort(300, serial.Params{Phi: 0.6, C: 0.6}, 3, "R"))
	in := []Exam{
		{Worker: "b", Time: 45, Value: 150},
		{Worker: "a", Time: 41, Value: 170},
		{Worker: "a", Time: 40, Value: 160},
		{Worker: "b", Time: 44, Value: 120},
	}
	set := DefaultSettings()
	res, err := m.Screen(in, set, 1)
	if err != nil {
		t.Fatal(err)
	}
	want := []struct{ exam, exams int }{{2, 2}, {2, 2}, {1, 2}, {1, 2}}
	for i, w := range want {
		if res[i].Exam != w.exam || res[i].Exams != w.exams {
			t.Errorf("row %d: exam %d of %d, want %d of %d", i+1, res[i].Exam, res[i].Exams, w.exam, w.exams)
		}
		z, err := m.Curves.Z("", in[i].Time, in[i].Value, false)
		if err != nil || math.Abs(z-res[i].Z) > 1e-12 {
			t.Errorf("row %d: z %v, want %v (%v)", i+1, res[i].Z, z, err)
		}
	}
	if !math.IsNaN(res[2].Gap) || math.Abs(res[1].Gap-1) > 1e-12 {
		t.Errorf("gaps: first exam %v (want NaN), second %v (want 1)", res[2].Gap, res[1].Gap)
	}
	// Worker a: both readings far above the reference, so the chart signals
	// and first_signal is the age of the first signalling exam.
	if !res[1].Signal || res[1].FirstSignal != res[2].FirstSignal {
		t.Errorf("worker a: signal %v, first signals %v and %v", res[1].Signal, res[1].FirstSignal, res[2].FirstSignal)
	}
	bad := []struct {
		name string
		in   []Exam
		set  func(*Settings)
		h    float64
		want string
		kind error // the errors.Is kind callers map the error by
	}{
		{"same age twice", []Exam{{Worker: "a", Time: 40, Value: 1}, {Worker: "b", Time: 40, Value: 1}, {Worker: "a", Time: 40, Value: 2}}, nil, 1, `rows 1 and 3 hold two exams of worker "a" at the same age 40`, refcurve.ErrDuplicateExam},
		{"empty", nil, nil, 1, "there are no exams", ErrNoExams},
		{"outside range", []Exam{{Worker: "a", Time: 90, Value: 1}}, nil, 1, "outside the reference range", refcurve.ErrOutsideRange},
		{"bad serial", []Exam{{Worker: "a", Time: 40, Value: 1}}, func(s *Settings) { s.Serial = "sometimes" }, 1, "serial must be whiten, direct or off", chart.ErrSetting},
		{"bad limit", []Exam{{Worker: "a", Time: 40, Value: 1}}, nil, -1, "limit", chart.ErrSetting},
		{"bad allowance", []Exam{{Worker: "a", Time: 40, Value: 1}}, func(s *Settings) { s.Chart.Allowance = -1 }, 1, "allowance", chart.ErrSetting},
	}
	for _, tc := range bad {
		t.Run(tc.name, func(t *testing.T) {
			s := DefaultSettings()
			if tc.set != nil {
				tc.set(&s)
			}
			_, err := m.Screen(tc.in, s, tc.h)
			if err == nil || !strings.Contains(err.Error(), tc.want) || !errors.Is(err, tc.kind) {
				t.Errorf("error %v, want it to contain %q and be %v", err, tc.want, tc.kind)
			}
		})
	}
	// The duplicate carries its facts: worker, age and both rows.
	_, err = m.Screen(bad[0].in, DefaultSettings(), 1)
	var dup *refcurve.DuplicateError
	if !errors.As(err, &dup) || dup.Worker != "a" || dup.Time != 40 || dup.Rows != [2]int{1, 3} {
		t.Errorf("duplicate: %#v", err)
	}
	// An age outside the range carries the group, age and range.
	_, err = m.Screen([]Exam{{Worker: "a", Time: 40, Value: 1}, {Worker: "a", Time: 90, Value: 1}}, DefaultSettings(), 1)
	var re *refcurve.RangeError
	if lo, hi, _ := m.Curves.Range(""); !errors.As(err, &re) || re.Time != 90 || re.Min != lo || re.Max != hi {
		t.Errorf("outside the range: %#v", err)
	}
	// With extrapolation an age outside the range is screened and marked.
	s := DefaultSettings()
	s.Extrapolate = MaxExtrapolation
	res, err = m.Screen([]Exam{{Worker: "a", Time: 90, Value: 150}}, s, 1)
	if err != nil || res[0].InRange {
		t.Errorf("extrapolated exam: %+v, %v", res, err)
	}
}

func TestEncodeDecode(t *testing.T) {
	rows := cohort(200, serial.Params{Phi: 0.6, C: 0.6}, 4, "R")
	m := fit(t, rows)
	doc, err := m.Encode()
	if err != nil {
		t.Fatal(err)
	}
	back, err := Decode(doc)
	if err != nil {
		t.Fatal(err)
	}
	doc2, _ := back.Encode()
	if !bytes.Equal(doc, doc2) || back.Hash != m.Hash {
		t.Error("a decoded model does not encode to the same document")
	}
	// Same data in another row order: same document.
	rev := append([]refcurve.Row(nil), rows...)
	for i, j := 0, len(rev)-1; i < j; i, j = i+1, j-1 {
		rev[i], rev[j] = rev[j], rev[i]
	}
	if m2 := fit(t, rev); m2.Hash != m.Hash {
		t.Error("the same rows in another order give another model hash")
	}
	tampered := bytes.Replace(doc, []byte(`"mean_gap":`), []byte(`"mean_gap":1`), 1)
	for name, b := range map[string][]byte{
		"tampered":  tampered,
		"not json":  []byte("hello"),
		"other doc": []byte(`{"format":"something-else","version":1}`),
		"newer":     bytes.Replace(doc, []byte(`"version":1`), []byte(`"version":99`), 1),
	} {
		if _, err := Decode(b); err == nil {
			t.Errorf("%s: Decode accepted it", name)
		}
	}
	if len(m.Items()) < 10 || m.Items()[0].Value != "sim" {
		t.Errorf("diagnostics items: %v", m.Items())
	}
}

func BenchmarkScreen1M(b *testing.B) {
	m := fit(b, cohort(1000, serial.Params{Phi: 0.9, C: 0.7}, 5, "R"))
	ex := exams(cohort(160000, serial.Params{Phi: 0.9, C: 0.7}, 6, "W"))
	s := DefaultSettings()
	s.Extrapolate = MaxExtrapolation
	b.ResetTimer()
	for range b.N {
		if _, err := m.Screen(ex, s, 1); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(ex)), "exams")
}

// TestFitIndependentReadings fits readings with no serial correlation at
// all, where the correlation's standard errors are undefined: the model must
// still be written and read back.
func TestFitIndependentReadings(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	var rows []refcurve.Row
	for w := 0; w < 200; w++ {
		for j := 0; j < 6; j++ {
			rows = append(rows, refcurve.Row{Worker: fmt.Sprintf("w%d", w), Time: 30 + float64(j) + rng.Float64()*0.5, Value: 100 + rng.NormFloat64()})
		}
	}
	m := fit(t, rows)
	doc, err := m.Encode()
	if err != nil {
		t.Fatalf("encoding a model of independent readings: %v", err)
	}
	if _, err := Decode(doc); err != nil {
		t.Fatal(err)
	}
}
