package screening

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"veer/functions/chart"
	"veer/functions/joint"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/serial"
)

// jointTruth: blood pressure, cholesterol (log-normal, rising with age)
// and lung function, persistent personal levels, correlated innovations.
func jointTruth() *joint.Model {
	m := joint.Independent(3)
	m.Markers = []string{"sbp", "chol", "fev1"}
	m.Serial = []serial.Params{{Phi: 0.95, C: 0.8}, {Phi: 0.9, C: 0.7}, {Phi: 0.95, C: 0.85}}
	m.Innovation.R = [][]float64{{1, 0.4, -0.25}, {0.4, 1, -0.2}, {-0.25, -0.2, 1}}
	m.Reading.R = m.Innovation.R
	return m
}

// jointCohort simulates healthy workers' rows: sbp = 120 + 0.5 (age-40) +
// 10 z, chol = exp(1.6 + 0.005 (age-40) + 0.15 z) mmol/L, fev1 = 4 - 0.03
// (age-40) + 0.4 z; cholesterol is missing at a fifth of the exams.
// shift, if not nil, is added to the z of marker k from the worker's
// fourth exam on.
func jointCohort(n int, seed uint64, prefix string, shift []float64) []JointRow {
	truth := jointTruth()
	rng := rand.New(rand.NewPCG(seed, 3))
	var rows []JointRow
	for w := range n {
		k := 3 + rng.IntN(6)
		t := 20 + 35*rng.Float64()
		times := make([]float64, k)
		for j := range times {
			times[j] = math.Round(t*100) / 100
			t += 0.6 + 1.8*rng.Float64()
		}
		s := truth.Simulate(times, func(j, m int) bool { return m != 1 || rng.Float64() > 0.2 }, rng)
		for j, a := range times {
			z := []float64{s.Z[0][j], s.Z[1][j], s.Z[2][j]}
			if shift != nil && j >= 3 {
				for m := range z {
					z[m] += shift[m]
				}
			}
			u := a - 40
			rows = append(rows, JointRow{Worker: fmt.Sprintf("%s%05d", prefix, w), Time: a, Values: []float64{
				math.Round(120 + 0.5*u + 10*z[0]),
				math.Round(100*math.Exp(1.6+0.005*u+0.15*z[1])) / 100,
				math.Round(100*(4-0.03*u+0.4*z[2])) / 100,
			}})
		}
	}
	return rows
}

func jointOptions() JointFitOptions {
	return JointFitOptions{Name: "panel", Markers: []string{"sbp", "chol", "fev1"},
		Curves: []refcurve.Options{{}, {Transform: "log"}, {}}}
}

func jointExams(rows []JointRow) []JointExam {
	out := make([]JointExam, len(rows))
	for i, r := range rows {
		out[i] = JointExam{Worker: r.Worker, Group: r.Group, Time: r.Time, Values: r.Values}
	}
	return out
}

func TestFitJointEncodeDecode(t *testing.T) {
	j, err := FitJoint(context.Background(), jointCohort(800, 1, "R", nil), jointOptions())
	if err != nil {
		t.Fatal(err)
	}
	t.Log(j.Summary())
	if j.Markers[1].Curves.Transform != "log" || j.Markers[0].Name != "sbp" {
		t.Errorf("markers %s / %s", j.Markers[0].Name, j.Markers[1].Curves.Transform)
	}
	if r := j.Model.Innovation.R[0][1]; math.Abs(r-0.4) > 4*j.Model.Innovation.SE[0][1]+0.02 {
		t.Errorf("sbp-chol innovation correlation %.3f, truth 0.4", r)
	}
	doc, err := j.Encode()
	if err != nil {
		t.Fatal(err)
	}
	if !IsJoint(doc) || !strings.Contains(string(doc), "null") {
		t.Error("the document is not recognised as a joint model, or keeps no missing reading")
	}
	back, err := DecodeJoint(doc)
	if err != nil {
		t.Fatal(err)
	}
	again, _ := back.Encode()
	if string(again) != string(doc) || back.Hash != j.Hash {
		t.Error("the model does not survive encoding")
	}
	// A model of one marker is read by Decode as before; a joint one is
	// refused there with the markers named.
	_, err = Decode(doc)
	var sm *SeveralMarkersError
	if !errors.As(err, &sm) || !errors.Is(err, ErrSeveralMarkers) || strings.Join(sm.Markers, ",") != "sbp,chol,fev1" {
		t.Errorf("Decode of a joint model: %v", err)
	}
	single, _ := j.Markers[0].Encode()
	if _, err := DecodeJoint(single); err == nil || IsJoint(single) {
		t.Error("a model of one marker was read as a joint one")
	}
	bad := strings.Replace(string(doc), `"mean_gap":`, `"mean_gap":1`, 1)
	if _, err := DecodeJoint([]byte(bad)); err == nil || !strings.Contains(err.Error(), "checksum") {
		t.Errorf("an edited file: %v", err)
	}
}

func TestFitJointBadInput(t *testing.T) {
	ctx := context.Background()
	rows := jointCohort(200, 2, "R", nil)
	o := jointOptions()
	o.Markers = []string{"sbp", "chol", "sbp"}
	if _, err := FitJoint(ctx, rows, o); !errors.Is(err, joint.ErrDuplicateMarker) {
		t.Errorf("marker twice: %v", err)
	}
	// Two identical columns.
	same := make([]JointRow, len(rows))
	for i, r := range rows {
		same[i] = r
		same[i].Values = []float64{r.Values[0], r.Values[1], r.Values[0]}
	}
	o = jointOptions()
	o.Markers = []string{"sbp", "chol", "sbp_copy"}
	o.Curves = []refcurve.Options{{}}
	var ce *joint.CorrelationError
	if _, err := FitJoint(ctx, same, o); !errors.As(err, &ce) || ce.Marker != "sbp_copy" || ce.Partner != "sbp" {
		t.Errorf("identical columns: %v", err)
	}
	// A marker with too few readings.
	few := make([]JointRow, len(rows))
	for i, r := range rows {
		few[i] = r
		few[i].Values = []float64{r.Values[0], r.Values[1], math.NaN()}
		if i < 10 {
			few[i].Values[2] = r.Values[2]
		}
	}
	var re *joint.ReadingsError
	if _, err := FitJoint(ctx, few, jointOptions()); !errors.As(err, &re) || re.Marker != "fev1" {
		t.Errorf("few readings: %v", err)
	}
	// A marker whose curves cannot be fitted names it.
	neg := make([]JointRow, len(rows))
	for i, r := range rows {
		neg[i] = r
		neg[i].Values = []float64{r.Values[0], -r.Values[1], r.Values[2]}
	}
	var me *joint.MarkerError
	if _, err := FitJoint(ctx, neg, jointOptions()); !errors.As(err, &me) || me.Marker != "chol" {
		t.Errorf("negative cholesterol under a log transform: %v", err)
	}
	// The same marker twice at one exam of a worker.
	dup := append([]JointRow{}, rows...)
	dup = append(dup, rows[0])
	var de *refcurve.DuplicateError
	if _, err := FitJoint(ctx, dup, jointOptions()); !errors.As(err, &de) {
		t.Errorf("a repeated exam: %v", err)
	}
}

// TestJointScreenRealisedRate: on fresh healthy workers followed like the
// reference, the default joint chart's limit for 20 worker-years per false
// signal is kept (both methods), and a joint drift is caught.
func TestJointScreenRealisedRate(t *testing.T) {
	j, err := FitJoint(context.Background(), jointCohort(1500, 3, "R", nil), jointOptions())
	if err != nil {
		t.Fatal(err)
	}
	fresh := jointExams(jointCohort(6000, 4, "H", nil))
	set := DefaultJointSettings(3)
	set.Chart.Sides = []chart.Side{chart.Up, chart.Up, chart.Down}
	set.Extrapolate = MaxExtrapolation
	const target = 20.0
	for _, method := range []monitor.Method{monitor.Normal, monitor.Bootstrap} {
		lr, err := j.Limit(set, LimitOptions{Method: method}, target)
		if err != nil {
			t.Fatal(err)
		}
		res, err := j.Screen(fresh, set, lr.H)
		if err != nil {
			t.Fatal(err)
		}
		single := make([]Exam, len(fresh))
		sig := make([]bool, len(fresh))
		for i, e := range fresh {
			single[i] = Exam{Worker: e.Worker, Time: e.Time}
			sig[i] = res[i].Signal
		}
		ev := Evaluate(single, sig, nil)
		got := ev.YearsAtRisk / float64(ev.FalseSignals)
		rse := 1 / math.Sqrt(float64(ev.FalseSignals))
		t.Logf("%s: limit %.3f; %.1f worker-years per false signal for %g (relative SE %.1f%%)", method, lr.H, got, target, 100*rse)
		if math.Abs(got/target-1) > 0.10+2*rse {
			t.Errorf("%s: realised %.1f worker-years per false signal, target %g", method, got, target)
		}
	}
	lr, _ := j.Limit(set, LimitOptions{}, target)
	drift := jointExams(jointCohort(1000, 5, "D", []float64{1, 1, 0}))
	res, err := j.Screen(drift, set, lr.H)
	if err != nil {
		t.Fatal(err)
	}
	caught, leads := 0, map[int]int{}
	for _, r := range res {
		if r.Exam == r.Exams && !math.IsNaN(r.FirstSignal) {
			caught++
		}
		if r.Signal {
			leads[r.Leading]++
		}
	}
	t.Logf("1-SD drift in sbp and chol: %d of 1000 workers signalled; leading markers at signals %v", caught, leads)
	if caught < 500 || leads[2] > leads[0] || leads[2] > leads[1] {
		t.Errorf("drift: %d caught, leading markers %v", caught, leads)
	}
}

func TestJointScreenErrors(t *testing.T) {
	j, err := FitJoint(context.Background(), jointCohort(300, 6, "R", nil), jointOptions())
	if err != nil {
		t.Fatal(err)
	}
	set := DefaultJointSettings(3)
	ex := jointExams(jointCohort(3, 7, "W", nil))
	ex[1].Values = []float64{130, 5}
	if _, err := j.Screen(ex, set, 3); err == nil || !strings.Contains(err.Error(), "row 2 has 2 values") {
		t.Errorf("short row: %v", err)
	}
	ex = jointExams(jointCohort(3, 7, "W", nil))
	ex[2].Time = 90
	var me *joint.MarkerError
	if _, err := j.Screen(ex, set, 3); !errors.As(err, &me) || !errors.Is(err, refcurve.ErrOutsideRange) || !strings.Contains(err.Error(), "entry 3") {
		t.Errorf("age outside the range: %v", err)
	}
	ex = jointExams(jointCohort(3, 7, "W", nil))
	ex[1].Time = ex[0].Time
	var de *refcurve.DuplicateError
	set.Extrapolate = MaxExtrapolation
	if _, err := j.Screen(ex, set, 3); !errors.As(err, &de) || de.Rows != [2]int{1, 2} {
		t.Errorf("two exams at one age: %v", err)
	}
	set.Chart.Sides = []chart.Side{chart.Up}
	if _, err := j.Screen(jointExams(jointCohort(3, 7, "W", nil)), set, 3); !errors.Is(err, joint.ErrSides) {
		t.Errorf("one side for three markers: %v", err)
	}
}
