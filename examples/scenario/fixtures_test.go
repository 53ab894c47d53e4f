package scenario

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"veer/functions/screening"
)

// fixtures mirrors testdata/fixtures.json, written by the committed script
// testdata/make_fixtures.py (Debian python3 with numpy, scipy and
// statsmodels) from the committed files in examples/data.
type fixtures struct {
	Source string            `json:"source"`
	SHA256 map[string]string `json:"sha256"`
	Curves []struct {
		Marker, Group string
		Age           float64
		Mean, SD      float64
	} `json:"curves"`
	Bands []struct {
		Marker, Group string
		Lo, Hi        float64
		N             int
		MeanZ         float64 `json:"mean_z"`
		SEMeanZ       float64 `json:"se_mean_z"`
		SDZ           float64 `json:"sd_z"`
	} `json:"bands"`
	Serial map[string]struct {
		Pairs  int
		C, Phi float64
		SEC    float64 `json:"se_c"`
		SEPhi  float64 `json:"se_phi"`
	} `json:"serial"`
	CrossCorr float64 `json:"cross_corr"`
	FEV1Skew  float64 `json:"fev1_ratio_skewness"`
	ZFEV1Skew float64 `json:"z_fev1_skewness"`
	OLSCubic  []struct {
		Marker, Group string
		Age           float64
		Pred, SE      float64
	} `json:"ols_cubic"`
	Reference, Workforce struct {
		Workers, Exams int
		MinExams       int `json:"min_exams"`
	}
	Truth map[string]struct {
		Affected         int
		OnsetsInsideSpan int     `json:"onsets_inside_span"`
		MeanZLate        float64 `json:"mean_z_2y_after_onset"`
		MeanResid        float64 `json:"mean_z_minus_drift_after_onset"`
		SEMeanResid      float64 `json:"se_mean_z_minus_drift_after_onset"`
		PlateauMin       float64 `json:"plateau_min"`
		PlateauMax       float64 `json:"plateau_max"`
		RampMin          float64 `json:"ramp_min"`
		RampMax          float64 `json:"ramp_max"`
	} `json:"truth"`
	Cutoff struct {
		Z    float64
		SBP  cutoffFixture `json:"sbp"`
		FEV1 cutoffFixture `json:"fev1"`
	} `json:"cutoff"`
}

// cutoffFixture is testdata/make_fixtures.py's scoring of the fixed cut-off
// rule on the committed workforce, with its Kaplan–Meier curve from
// statsmodels' SurvfuncRight.
type cutoffFixture struct {
	Workers, Cases, Flagged int
	TrueFlagged             int `json:"true_flagged"`
	Early, Detected         int
	FalseSignals            int                `json:"false_signals"`
	YearsAtRisk             float64            `json:"years_at_risk"`
	FalsePer100             float64            `json:"false_per_100"`
	MedianDelay             float64            `json:"median_delay_detected"`
	KMMedian                float64            `json:"km_median"` // null (read as 0) when not reached
	KMReached               bool               `json:"km_median_reached"`
	KMDetectedBy            map[string]float64 `json:"km_detected_by"`
	KMTimes                 []float64          `json:"km_times"`
	KMSurv                  []float64          `json:"km_surv"`
}

func markerNamed(t *testing.T, name string) Marker {
	t.Helper()
	switch name {
	case "sbp":
		return SBP
	case "fev1":
		return FEV1
	}
	t.Fatalf("fixture names unknown marker %q", name)
	return 0
}

// loadCommitted reads the fixture and the committed data files, and checks
// that the fixture was made from exactly these files.
func loadCommitted(t *testing.T) (fixtures, map[string][]byte) {
	t.Helper()
	raw, err := os.ReadFile(filepath.Join("testdata", "fixtures.json"))
	if err != nil {
		t.Fatal(err)
	}
	var fx fixtures
	if err := json.Unmarshal(raw, &fx); err != nil {
		t.Fatal(err)
	}
	files := map[string][]byte{}
	for _, name := range []string{"reference.csv", "workforce.csv", "truth.csv"} {
		b, err := os.ReadFile(filepath.Join("..", "data", name))
		if err != nil {
			t.Fatal(err)
		}
		sum := sha256.Sum256(b)
		if got := hex.EncodeToString(sum[:]); got != fx.SHA256[name] {
			t.Fatalf("examples/data/%s changed since testdata/fixtures.json was made; rerun /usr/bin/python3 examples/scenario/testdata/make_fixtures.py", name)
		}
		files[name] = b
	}
	return fx, files
}

// TestCurvesMatchPython compares Curve with the documented formulas as
// re-implemented in testdata/make_fixtures.py.
func TestCurvesMatchPython(t *testing.T) {
	fx, _ := loadCommitted(t)
	if len(fx.Curves) != 40 {
		t.Fatalf("fixture has %d curve points, want 40", len(fx.Curves))
	}
	for _, c := range fx.Curves {
		mean, sd, err := Curve(markerNamed(t, c.Marker), c.Group, c.Age)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(mean-c.Mean) > 1e-12*math.Max(1, math.Abs(c.Mean)) || math.Abs(sd-c.SD) > 1e-12 {
			t.Errorf("%s %s age %v: Curve = (%v, %v), Python (%v, %v)", c.Marker, c.Group, c.Age, mean, sd, c.Mean, c.SD)
		}
	}
}

// TestCommittedDataOutsideCheck checks the committed demo files against
// estimates made outside Go (testdata/make_fixtures.py): statsmodels' OLS
// cubic fits of each marker on age agree with the documented curves; scipy's
// least-squares fit of the serial correlation agrees with the generating φ
// and c; and the Go computations of the same statistics agree with Python's
// on the same files.
func TestCommittedDataOutsideCheck(t *testing.T) {
	fx, files := loadCommitted(t)
	ref, err := ParseExams(files["reference.csv"])
	if err != nil {
		t.Fatal(err)
	}
	wf, err := ParseExams(files["workforce.csv"])
	if err != nil {
		t.Fatal(err)
	}
	truth, err := ParseTruth(files["truth.csv"])
	if err != nil {
		t.Fatal(err)
	}
	cfg := DefaultConfig()

	// statsmodels OLS (cubic in age, cluster-robust SE by worker) against
	// the documented curves: within 4 SE.
	if len(fx.OLSCubic) != 16 {
		t.Fatalf("fixture has %d OLS predictions, want 16", len(fx.OLSCubic))
	}
	for _, f := range fx.OLSCubic {
		mean, _, err := Curve(markerNamed(t, f.Marker), f.Group, f.Age)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(f.Pred-mean) > 4*f.SE {
			t.Errorf("%s %s age %v: statsmodels OLS predicts %.4f ± %.4f, documented curve %.4f", f.Marker, f.Group, f.Age, f.Pred, f.SE, mean)
		}
	}

	// scipy curve_fit of c·φ^d against the generating values (4 SE), and
	// against the Go fit of the same criterion on the same pairs.
	ex := standardiseAll(t, ref)
	for _, m := range []Marker{SBP, FEV1} {
		py, ok := fx.Serial[m.String()]
		if !ok {
			t.Fatalf("fixture has no serial fit for %v", m)
		}
		if math.Abs(py.Phi-cfg.Phi) > 4*py.SEPhi || math.Abs(py.C-cfg.Share[m]) > 4*py.SEC {
			t.Errorf("%v: scipy fit φ = %.3f ± %.3f, c = %.3f ± %.3f; generated with φ = %v, c = %v", m, py.Phi, py.SEPhi, py.C, py.SEC, cfg.Phi, cfg.Share[m])
		}
		d, p := lagPairs(ex, m)
		if len(d) != py.Pairs {
			t.Errorf("%v: %d lag pairs, Python %d", m, len(d), py.Pairs)
		}
		c, phi := fitSerial(d, p)
		if math.Abs(phi-py.Phi) > 1e-4 || math.Abs(c-py.C) > 1e-4 {
			t.Errorf("%v: Go fit φ = %.6f, c = %.6f; scipy φ = %.6f, c = %.6f", m, phi, c, py.Phi, py.C)
		}
	}

	// Age bands: the Go statistics equal Python's, and the mean z is
	// within 4 SE of 0.
	if len(fx.Bands) != 36 {
		t.Fatalf("fixture has %d age bands, want 36", len(fx.Bands))
	}
	for _, b := range fx.Bands {
		m := markerNamed(t, b.Marker)
		var z []float64
		var w []string
		for _, e := range ex {
			if e.Group == b.Group && e.Age >= b.Lo && (e.Age < b.Hi || (b.Hi == MaxAge && e.Age == MaxAge)) {
				z = append(z, e.z[m])
				w = append(w, e.Worker)
			}
		}
		mean, se := clusterMean(z, w)
		if len(z) != b.N || math.Abs(mean-b.MeanZ) > 1e-9 || math.Abs(se-b.SEMeanZ) > 1e-9 {
			t.Errorf("%s %s %v-%v: Go n=%d mean=%v se=%v; Python n=%d mean=%v se=%v", b.Marker, b.Group, b.Lo, b.Hi, len(z), mean, se, b.N, b.MeanZ, b.SEMeanZ)
		}
		if math.Abs(b.MeanZ) > 4*b.SEMeanZ {
			t.Errorf("%s %s %v-%v: mean z %.3f more than 4 SE (%.3f) from 0", b.Marker, b.Group, b.Lo, b.Hi, b.MeanZ, b.SEMeanZ)
		}
	}

	// Same-exam correlation of the markers, and the skew of FEV1.
	zs, zf := make([]float64, len(ex)), make([]float64, len(ex))
	for i, e := range ex {
		zs[i], zf[i] = e.z[SBP], e.z[FEV1]
	}
	if r := correlation(zs, zf); math.Abs(r-fx.CrossCorr) > 1e-9 || math.Abs(r-cfg.CrossCorr) > 0.07 {
		t.Errorf("marker correlation: Go %.4f, numpy %.4f, generated with %v", r, fx.CrossCorr, cfg.CrossCorr)
	}
	// FEV1 over its median is log-normal with σ from 0.10 to 0.15:
	// skewness (e^{σ²}+2)·√(e^{σ²}-1) ≈ 3σ lies between 0.3 and 0.46
	// (log-normal skewness, common practice); ln FEV1 is symmetric.
	if fx.FEV1Skew < 0.25 || fx.FEV1Skew > 0.55 || math.Abs(fx.ZFEV1Skew) > 0.1 {
		t.Errorf("scipy skewness of FEV1/median %.3f (want 0.25-0.55), of z %.3f (want near 0)", fx.FEV1Skew, fx.ZFEV1Skew)
	}

	// Sizes and truth summaries agree with Go's reading of the files.
	if fx.Reference.Exams != len(ref) || fx.Workforce.Exams != len(wf) || len(truth) != fx.Workforce.Workers {
		t.Errorf("sizes: Go %d/%d/%d, Python %d/%d/%d", len(ref), len(wf), len(truth), fx.Reference.Exams, fx.Workforce.Exams, fx.Workforce.Workers)
	}
	for _, m := range []Marker{SBP, FEV1} {
		py := fx.Truth[m.String()]
		n := 0
		for _, tr := range truth {
			if (m == SBP && tr.SBP.Affected) || (m == FEV1 && tr.FEV1.Affected) {
				n++
			}
		}
		if n != py.Affected || py.OnsetsInsideSpan != py.Affected {
			t.Errorf("%v: Go counts %d affected, Python %d with %d onsets inside the exam span", m, n, py.Affected, py.OnsetsInsideSpan)
		}
		// The drift re-implemented in Python explains the readings after
		// onset, and plateaus and growth times lie in the documented ranges
		// (growth time |A/β| may miss by 0.2% because β is rounded).
		if math.Abs(py.MeanResid) > 4*py.SEMeanResid {
			t.Errorf("%v: after onset, Python's mean of z − drift is %.3f ± %.3f, want 0 within 4 SE", m, py.MeanResid, py.SEMeanResid)
		}
		if py.PlateauMin < plateauMin || py.PlateauMax > plateauMax || py.RampMin < rampMin*0.998 || py.RampMax > rampMax*1.002 {
			t.Errorf("%v: Python finds plateaus %v-%v SD and growth times %v-%v years; documented %v-%v and %v-%v",
				m, py.PlateauMin, py.PlateauMax, py.RampMin, py.RampMax, plateauMin, plateauMax, rampMin, rampMax)
		}
	}
}

// TestCutoffRuleMatchesPython scores the fixed cut-off rule ("any reading
// beyond the reference 97.5th centile", the 2.5th for FEV1) on the committed
// workforce with screening.Evaluate, using Go's Standardise under the
// documented curves, and compares every figure with the independent scoring
// in testdata/make_fixtures.py, whose Kaplan–Meier curve comes from
// statsmodels (SurvfuncRight).
func TestCutoffRuleMatchesPython(t *testing.T) {
	fx, files := loadCommitted(t)
	wf, err := ParseExams(files["workforce.csv"])
	if err != nil {
		t.Fatal(err)
	}
	truth, err := ParseTruth(files["truth.csv"])
	if err != nil {
		t.Fatal(err)
	}
	// 97.5th centile of N(0, 1), common practice; scipy.stats.norm.ppf(0.975)
	// in the fixture.
	const zcut = 1.959963984540054
	if math.Abs(fx.Cutoff.Z-zcut) > 1e-12 {
		t.Fatalf("fixture cut-off z %v, want %v", fx.Cutoff.Z, zcut)
	}
	ex := standardiseAll(t, wf)
	exams := make([]screening.Exam, len(ex))
	for i, e := range ex {
		exams[i] = screening.Exam{Worker: e.Worker, Group: e.Group, Time: e.Age}
	}
	for _, tc := range []struct {
		m  Marker
		py cutoffFixture
	}{{SBP, fx.Cutoff.SBP}, {FEV1, fx.Cutoff.FEV1}} {
		t.Run(tc.m.String(), func(t *testing.T) {
			sig := make([]bool, len(ex))
			for i, e := range ex {
				sig[i] = (tc.m == SBP && e.z[SBP] > zcut) || (tc.m == FEV1 && e.z[FEV1] < -zcut)
			}
			lab := map[string]screening.Truth{}
			for _, tr := range truth {
				o := tr.SBP
				if tc.m == FEV1 {
					o = tr.FEV1
				}
				lab[tr.Worker] = screening.Truth{Affected: o.Affected, Onset: o.Age}
			}
			ev := screening.Evaluate(exams, sig, lab)
			py := tc.py
			t.Logf("cut-off rule on the committed %v: %d of %d cases detected, %d early; median %.2f years (detected), KM median %.2f; %.2f false signals per 100 worker-years",
				tc.m, ev.Detected, ev.Cases, ev.EarlySignals, ev.MedianDelay, ev.MedianDelayKM, ev.FalsePer100)
			if ev.Workers != py.Workers || ev.Cases != py.Cases || ev.Flagged != py.Flagged || ev.TrueFlagged != py.TrueFlagged ||
				ev.EarlySignals != py.Early || ev.Detected != py.Detected || ev.FalseSignals != py.FalseSignals {
				t.Errorf("counts: Go %+v; Python %+v", ev, py)
			}
			close := func(name string, got, want float64) {
				if !(math.Abs(got-want) <= 1e-9*math.Max(1, math.Abs(want))) && got != want {
					t.Errorf("%s: Go %v, Python %v", name, got, want)
				}
			}
			close("years at risk", ev.YearsAtRisk, py.YearsAtRisk)
			close("false signals per 100 worker-years", ev.FalsePer100, py.FalsePer100)
			close("median delay of detected cases", ev.MedianDelay, py.MedianDelay)
			if !py.KMReached {
				py.KMMedian = math.Inf(1)
			}
			close("Kaplan–Meier median", ev.MedianDelayKM, py.KMMedian)
			for y, want := range py.KMDetectedBy {
				var years float64
				if _, err := fmt.Sscan(y, &years); err != nil {
					t.Fatal(err)
				}
				close("detected within "+y+" years", ev.DetectedBy(years), want)
			}
			if len(py.KMTimes) == 0 || len(py.KMTimes) != len(py.KMSurv) {
				t.Fatalf("fixture has %d Kaplan–Meier times and %d probabilities", len(py.KMTimes), len(py.KMSurv))
			}
			for i, tm := range py.KMTimes {
				close(fmt.Sprintf("1 − S(%v)", tm), ev.DetectedBy(tm), 1-py.KMSurv[i])
			}
		})
	}
}
