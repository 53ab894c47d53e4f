package joint

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"
)

// records reads a CSV fixture as one map from column to field per row.
func records(t testing.TB, name string) []map[string]string {
	t.Helper()
	data, err := os.ReadFile(name)
	if err != nil {
		t.Fatal(err)
	}
	all, err := csv.NewReader(strings.NewReader(string(data))).ReadAll()
	if err != nil || len(all) == 0 {
		t.Fatalf("%s: %v", name, err)
	}
	out := make([]map[string]string, 0, len(all)-1)
	for _, rec := range all[1:] {
		row := make(map[string]string, len(rec))
		for i, field := range rec {
			row[all[0][i]] = field
		}
		out = append(out, row)
	}
	return out
}

func parse(t testing.TB, s string) float64 {
	t.Helper()
	if s == "" {
		return math.NaN()
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// fixtureSeries reads testdata/corr_data.csv into one Series per worker.
func fixtureSeries(t testing.TB) []Series {
	var out []Series
	last := ""
	for _, r := range records(t, "testdata/corr_data.csv") {
		if r["worker"] != last {
			out = append(out, Series{Z: make([][]float64, 3)})
			last = r["worker"]
		}
		s := &out[len(out)-1]
		s.Time = append(s.Time, parse(t, r["time"]))
		for k, c := range []string{"a", "b", "c"} {
			s.Z[k] = append(s.Z[k], parse(t, r[c]))
		}
	}
	return out
}

// TestCorrelateFixture compares the pairwise-complete correlations and
// their worker-level sandwich SEs with pandas and statsmodels
// (testdata/make_fixtures.py, source in each row).
func TestCorrelateFixture(t *testing.T) {
	c, err := Correlate([]string{"a", "b", "c"}, "readings", fixtureSeries(t))
	if err != nil {
		t.Fatal(err)
	}
	idx := map[string]int{"a": 0, "b": 1, "c": 2}
	for _, w := range records(t, "testdata/corr_want.csv") {
		a, b := idx[w["a"]], idx[w["b"]]
		r, se := parse(t, w["r"]), parse(t, w["se"])
		if !near(c.R[a][b], r, 1e-10) || c.R[b][a] != c.R[a][b] {
			t.Errorf("%s-%s: r %.12f, want %.12f (%s)", w["a"], w["b"], c.R[a][b], r, w["source"])
		}
		if !near(c.SE[a][b], se, 1e-9) {
			t.Errorf("%s-%s: SE %.12f, want %.12f (%s)", w["a"], w["b"], c.SE[a][b], se, w["source"])
		}
		if strconv.Itoa(c.Exams[a][b]) != w["exams"] || strconv.Itoa(c.Workers[a][b]) != w["workers"] {
			t.Errorf("%s-%s: %d exams of %d workers, want %s of %s", w["a"], w["b"], c.Exams[a][b], c.Workers[a][b], w["exams"], w["workers"])
		}
	}
}

func TestCorrelateBadInput(t *testing.T) {
	ws := fixtureSeries(t)
	names := []string{"sbp", "chol", "fev1"}
	// Two identical columns: named, perfectly correlated.
	same := make([]Series, len(ws))
	for i, w := range ws {
		same[i] = Series{Time: w.Time, Z: [][]float64{w.Z[0], w.Z[1], w.Z[0]}}
	}
	_, err := Correlate(names, "standardised readings", same)
	var ce *CorrelationError
	if !errors.As(err, &ce) || !errors.Is(err, ErrNotPositiveDefinite) || ce.Marker != "fev1" || ce.Partner != "sbp" ||
		!strings.Contains(err.Error(), `"sbp" and "fev1" are perfectly correlated`) {
		t.Errorf("identical columns: %v", err)
	}
	// A marker never measured with another.
	apart := make([]Series, len(ws))
	for i, w := range ws {
		b := make([]float64, len(w.Time))
		for j := range b {
			b[j] = w.Z[1][j]
			if !math.IsNaN(w.Z[2][j]) {
				b[j] = math.NaN()
			}
		}
		apart[i] = Series{Time: w.Time, Z: [][]float64{w.Z[0], b, w.Z[2]}}
	}
	_, err = Correlate(names, "readings", apart)
	var pe *PairError
	if !errors.As(err, &pe) || !errors.Is(err, ErrTooFewReadings) || pe.A != "chol" || pe.B != "fev1" || !strings.Contains(err.Error(), "never measured at the same exam") {
		t.Errorf("never together: %v", err)
	}
	// Too few exams together.
	few := ws[:4]
	if _, err := Correlate(names, "readings", few); !errors.As(err, &pe) || !strings.Contains(err.Error(), "at least 20 exams") {
		t.Errorf("few exams: %v", err)
	}
	// A marker that does not vary.
	flat := make([]Series, len(ws))
	for i, w := range ws {
		c := make([]float64, len(w.Time))
		for j := range c {
			c[j] = 1.5
		}
		flat[i] = Series{Time: w.Time, Z: [][]float64{w.Z[0], w.Z[1], c}}
	}
	var me *MarkerError
	if _, err := Correlate(names, "readings", flat); !errors.As(err, &me) || me.Marker != "fev1" || !strings.Contains(err.Error(), "do not vary") {
		t.Errorf("constant marker: %v", err)
	}
	// Pairwise correlations that cannot hold together.
	bad := [][]float64{{1, 0.9, 0.9}, {0.9, 1, -0.9}, {0.9, -0.9, 1}}
	err = CheckCorrelation(names, "innovations", bad)
	if !errors.As(err, &ce) || ce.Marker != "fev1" || !strings.Contains(err.Error(), "not consistent at marker \"fev1\"") {
		t.Errorf("inconsistent correlations: %v", err)
	}
}

// The sandwich SE describes the spread of r over fresh reference samples:
// on simulated cohorts with dependent exams within workers, the SE's
// average is within 15% of the SD of r across samples.
func TestCorrelationSECoverage(t *testing.T) {
	m := Independent(2)
	m.Innovation.R = [][]float64{{1, 0.4}, {0.4, 1}}
	m.Serial[0].Phi, m.Serial[0].C = 0.9, 0.8
	m.Serial[1].Phi, m.Serial[1].C = 0.9, 0.8
	const reps = 200
	var rs, ses []float64
	for rep := range reps {
		ref := simulateCohort(m, 150, 6, uint64(rep), nil)
		c, err := Correlate([]string{"a", "b"}, "readings", ref)
		if err != nil {
			t.Fatal(err)
		}
		rs = append(rs, c.R[0][1])
		ses = append(ses, c.SE[0][1])
	}
	sd, meanSE := sdOf(rs), meanOf(ses)
	t.Logf("SD of r over %d cohorts %.4f, mean sandwich SE %.4f", reps, sd, meanSE)
	if math.Abs(meanSE/sd-1) > 0.15 {
		t.Errorf("mean SE %.4f, SD of r %.4f", meanSE, sd)
	}
}

func meanOf(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

func sdOf(x []float64) float64 {
	m := meanOf(x)
	var s float64
	for _, v := range x {
		s += (v - m) * (v - m)
	}
	return math.Sqrt(s / float64(len(x)-1))
}
