package scenario

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
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
	} `json:"truth"`
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
		if math.Abs(py.Phi-cfg.Phi) > 4*py.SEPhi || math.Abs(py.C-cfg.Share) > 4*py.SEC {
			t.Errorf("%v: scipy fit φ = %.3f ± %.3f, c = %.3f ± %.3f; generated with φ = %v, c = %v", m, py.Phi, py.SEPhi, py.C, py.SEC, cfg.Phi, cfg.Share)
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
	}
}
