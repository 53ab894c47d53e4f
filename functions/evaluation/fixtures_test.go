package evaluation_test

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"veer/functions/evaluation"
)

// methodFixture holds the figures testdata/make_fixtures.py computes for
// one method, independently of the Go code.
type methodFixture struct {
	Diag              int                 `json:"diagnosed"`
	Flag              int                 `json:"flagged"`
	AtFirst           int                 `json:"at_first_exam"`
	After             int                 `json:"after_diagnosis"`
	FlaggedShare      [3]float64          `json:"flagged_share"`
	MedianLeadFlagged *float64            `json:"median_lead_flagged"`
	LeadTimes         []float64           `json:"lead_km_times"`
	LeadSurv          []float64           `json:"lead_km_surv"`
	Healthy           int                 `json:"healthy"`
	HealthyFlagged    int                 `json:"healthy_flagged"`
	HealthyShare      [3]float64          `json:"healthy_flagged_share"`
	YearsAtRisk       float64             `json:"years_at_risk"`
	FalsePer100       [3]float64          `json:"false_per_100"`
	HealthyTimes      []float64           `json:"healthy_km_times"`
	HealthySurv       []float64           `json:"healthy_km_surv"`
	FlaggedWithin     map[string]*float64 `json:"flagged_within"`
}

func readCSV(t *testing.T, name string) [][]string {
	t.Helper()
	f, err := os.Open(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return rows
}

func num(t *testing.T, s string) float64 {
	t.Helper()
	if s == "" || s == "NA" {
		return math.NaN()
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestAgainstReferences scores the committed synthetic cohort and compares
// every figure with testdata/fixtures.json (statsmodels 0.13.5: Wilson
// intervals by proportion_confint, Kaplan–Meier curves by SurvfuncRight;
// scipy chi2.ppf for Garwood's Poisson interval) and the Kaplan–Meier
// quantiles with testdata/km_quantiles.csv (R survival 3.5.3,
// quantile.survfit). Both files are made by the committed scripts in
// testdata.
func TestAgainstReferences(t *testing.T) {
	var fx struct {
		Methods map[string]methodFixture `json:"methods"`
	}
	b, err := os.ReadFile(filepath.Join("testdata", "fixtures.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &fx); err != nil {
		t.Fatal(err)
	}
	rows := readCSV(t, "cohort_exams.csv")
	head := rows[0]
	exams := make([]evaluation.Exam, len(rows)-1)
	flags := map[string][]bool{}
	for i, r := range rows[1:] {
		exams[i] = evaluation.Exam{Worker: r[0], Age: num(t, r[1])}
		for j := 2; j < len(head); j++ {
			flags[head[j]] = append(flags[head[j]], r[j] == "1")
		}
	}
	var outs []evaluation.Outcome
	for _, r := range readCSV(t, "cohort_outcomes.csv")[1:] {
		outs = append(outs, evaluation.Outcome{Worker: r[0], Diagnosed: r[1], Age: num(t, r[2])})
	}
	quant := map[string]float64{} // method/curve/p -> R's quantile
	for _, r := range readCSV(t, "km_quantiles.csv")[1:] {
		quant[r[0]+"/"+r[1]+"/"+years(num(t, r[2]))] = num(t, r[3])
	}
	c, err := evaluation.NewCohort(context.Background(), exams, outs, evaluation.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if len(fx.Methods) != len(head)-2 || len(quant) != 6*len(fx.Methods) {
		t.Fatalf("%d methods in the fixture, %d flag columns, %d quantiles", len(fx.Methods), len(head)-2, len(quant))
	}
	reached := 0
	for m, py := range fx.Methods {
		t.Run(m, func(t *testing.T) {
			r, err := c.Evaluate(context.Background(), flags[m])
			if err != nil {
				t.Fatal(err)
			}
			s := c.Summary()
			if r.Diagnosed != py.Diag || r.Flagged != py.Flag || s.AtFirstExam != py.AtFirst || s.AfterDiagnosis != py.After ||
				r.Healthy != py.Healthy || r.HealthyFlagged != py.HealthyFlagged {
				t.Errorf("counts: Go %d/%d diagnosed flagged, %d at first exam, %d exams after, %d/%d healthy flagged; Python %d/%d, %d, %d, %d/%d",
					r.Flagged, r.Diagnosed, s.AtFirstExam, s.AfterDiagnosis, r.HealthyFlagged, r.Healthy,
					py.Flag, py.Diag, py.AtFirst, py.After, py.HealthyFlagged, py.Healthy)
			}
			close := func(name string, got, want float64) {
				t.Helper()
				if !same(got, want) && !(math.Abs(got-want) <= 1e-10*math.Max(1, math.Abs(want))) {
					t.Errorf("%s: Go %v, reference %v", name, got, want)
				}
			}
			iv := func(name string, got evaluation.Interval, want [3]float64) {
				t.Helper()
				close(name, got.Estimate, want[0])
				close(name+" low", got.Low, want[1])
				close(name+" high", got.High, want[2])
			}
			iv("flagged share (Wilson, statsmodels)", r.FlaggedShare, py.FlaggedShare)
			iv("healthy flagged share (Wilson, statsmodels)", r.HealthyFlaggedShare, py.HealthyShare)
			iv("false signals per 100 worker-years (Garwood, scipy)", r.FalsePer100, py.FalsePer100)
			close("years at risk", r.YearsAtRisk, py.YearsAtRisk)
			mf := math.NaN()
			if py.MedianLeadFlagged != nil {
				mf = *py.MedianLeadFlagged
			}
			close("median lead of the flagged (numpy)", r.Lead.MedianFlagged, mf)
			curve := func(name string, got evaluation.Curve, times, surv []float64) {
				t.Helper()
				if len(got.Times) != len(times) {
					t.Errorf("%s: Go %d event times, statsmodels %d", name, len(got.Times), len(times))
					return
				}
				for i := range times {
					close(name+" time", got.Times[i], times[i])
					close(name+" S", got.Surv[i], surv[i])
				}
			}
			curve("lead curve (SurvfuncRight)", r.Lead.Curve, py.LeadTimes, py.LeadSurv)
			curve("healthy curve (SurvfuncRight)", r.HealthyCurve, py.HealthyTimes, py.HealthySurv)
			for y, want := range py.FlaggedWithin {
				v := math.NaN()
				if want != nil {
					v = *want
				}
				close("flagged within "+y+" years", r.FlaggedWithin(num(t, y)), v)
			}
			// Quantiles from R's survival.
			close("lead median (R)", r.Lead.Median, -quant[m+"/lead/0.5"])
			close("lead lower quartile (R)", r.Lead.Q25, -quant[m+"/lead/0.75"])
			close("lead upper quartile (R)", r.Lead.Q75, -quant[m+"/lead/0.25"])
			for _, p := range []string{"0.25", "0.5", "0.75"} {
				close("healthy curve quantile "+p+" (R)", r.HealthyCurve.Quantile(num(t, p)), quant[m+"/healthy/"+p])
			}
			if !math.IsNaN(r.Lead.Q25) {
				reached++
			}
		})
	}
	if reached == 0 {
		t.Error("no method reaches the lower lead quartile; the fixture exercises too little")
	}
}
