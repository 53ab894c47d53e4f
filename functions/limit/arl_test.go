package limit

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"strconv"
	"testing"

	"veer/functions/chart"
)

func readCSV(t testing.TB, name string) []map[string]string {
	t.Helper()
	f, err := os.Open(name)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var out []map[string]string
	for _, r := range recs[1:] {
		m := map[string]string{}
		for i, k := range recs[0] {
			m[k] = r[i]
		}
		out = append(out, m)
	}
	return out
}

func num(t testing.TB, m map[string]string, k string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(m[k], 64)
	if err != nil {
		t.Fatalf("field %s: %v", k, err)
	}
	return v
}

// Check values quoted in the task, each with its outside source.
func TestARLCheckValues(t *testing.T) {
	cusum := chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 0.5}
	both := cusum
	both.Side = chart.Both
	ewma := chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: 0.1}
	tests := []struct {
		name      string
		spec      chart.Spec
		h, mu     float64
		want, tol float64
		source    string
	}{
		{"cusum up h=4", cusum, 4, 0, 335.37, 0.01, "R spc 0.6.7 xcusum.arl(0.5,4,0) = 335.3676"},
		{"cusum up h=5", cusum, 5, 0, 930.89, 0.01, "R spc 0.6.7 xcusum.arl(0.5,5,0) = 930.887"},
		{"cusum both h=4", both, 4, 0, 167.68, 0.01, "R spc xcusum.arl(0.5,4,0,sided='two') = 167.6838; Montgomery's table 168"},
		{"cusum both h=5", both, 5, 0, 465.44, 0.01, "R spc xcusum.arl(0.5,5,0,sided='two'); Montgomery's table 465"},
		{"cusum up h=5 1SD", cusum, 5, 1, 10.38, 0.01, "R spc xcusum.arl(0.5,5,1) = 10.37598; Montgomery's table 10.4"},
		{"ewma both L=2.814", ewma, 2.814, 0, 499.58, 0.01, "R spc xewma.arl(0.1,2.814,0,sided='two'); Lucas & Saccucci (1990) ~500"},
		{"ewma both L=2.814 1SD", ewma, 2.814, 1, 10.33, 0.01, "R spc xewma.arl(0.1,2.814,1,sided='two') = 10.33067; Lucas & Saccucci (1990) 10.3"},
	}
	for _, tc := range tests {
		got, err := ARL(tc.spec, tc.h, tc.mu, 1)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-tc.want) > tc.tol {
			t.Errorf("%s: ARL = %.4f, want %.2f (%s)", tc.name, got, tc.want, tc.source)
		}
	}
	// The limit for a target: must print 5.00 +- 0.01 (task's CLI check).
	for _, tc := range []struct {
		spec   chart.Spec
		target float64
	}{{cusum, 930.887}, {both, 465.44}} {
		h, err := Solve(tc.spec, tc.target, 1)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(h-5) > 0.005 {
			t.Errorf("Solve(%s, %v) = %.4f, want 5.00 (R spc xcusum.arl at h=5)", tc.spec.Side, tc.target, h)
		}
	}
}

// TestARLFixtureGrid compares with testdata/arl_grid.csv, produced by
// testdata/make_fixtures.R from R spc; tolerance 0.5% relative (task).
func TestARLFixtureGrid(t *testing.T) {
	rows := readCSV(t, "testdata/arl_grid.csv")
	worst := 0.0
	for _, r := range rows {
		spec := chart.Spec{Kind: chart.Kind(r["kind"]), Side: chart.Side(r["side"]), Allowance: num(t, r, "k"), Lambda: num(t, r, "lambda"), HeadStart: num(t, r, "hs"), Unit: 1}
		// spc runs every exam at the effective lambda: compare with the
		// same convention (sameFirst); at gap 1 it is the public ARL.
		c, err := newCalc(spec, num(t, r, "gap"))
		if err != nil {
			t.Fatalf("%s: %v", r["source"], err)
		}
		c.sameFirst = true
		got := c.arl(num(t, r, "h"), num(t, r, "mu"))
		if num(t, r, "gap") == 1 {
			pub, _ := ARL(spec, num(t, r, "h"), num(t, r, "mu"), 1)
			if pub != got {
				t.Errorf("public ARL %v differs from the fixture convention %v at gap 1", pub, got)
			}
		}
		want := num(t, r, "arl")
		rel := math.Abs(got-want) / want
		worst = math.Max(worst, rel)
		if rel > 0.005 {
			t.Errorf("ARL = %.6g, want %.6g (%s): off by %.3g%%", got, want, r["source"], 100*rel)
		}
	}
	t.Logf("%d fixture rows, worst relative difference %.2g", len(rows), worst)
}

// TestSolveFixtureGrid compares limits with R spc's xcusum.crit / xewma.crit
// in testdata/crit_grid.csv.
func TestSolveFixtureGrid(t *testing.T) {
	for _, r := range readCSV(t, "testdata/crit_grid.csv") {
		spec := chart.Spec{Kind: chart.Kind(r["kind"]), Side: chart.Side(r["side"]), Allowance: num(t, r, "k"), Lambda: num(t, r, "lambda")}
		got, err := Solve(spec, num(t, r, "arl0"), 1)
		if err != nil {
			t.Fatal(err)
		}
		want := num(t, r, "h")
		if math.Abs(got-want) > 0.005*want {
			t.Errorf("Solve = %.6g, want %.6g (%s)", got, want, r["source"])
		}
	}
}

// TestNodesConverge checks that the node counts are past convergence:
// doubling them changes the ARL by less than 1e-6 relative.
func TestNodesConverge(t *testing.T) {
	for _, tc := range []struct {
		spec chart.Spec
		h    float64
	}{
		{chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 0.25}, 12},
		{chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 1, HeadStart: 0.5}, 3},
		{chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: 0.02}, 2.8},
		{chart.Spec{Kind: chart.EWMA, Side: chart.Up, Lambda: 0.3, HeadStart: 0.5}, 2.8},
	} {
		c, _ := newCalc(tc.spec, 1)
		l := c.arl(tc.h, 0)
		n := c.nodes(tc.h)
		c.sv = newSolver(2 * n)
		k := kernel{alpha: 1, beta: 1, gamma: -tc.spec.Allowance, lo: 0, hi: tc.h, reflect: true}
		var l2 float64
		if tc.spec.Kind == chart.CUSUM {
			l2 = c.sv.arl(k, tc.spec.HeadStart*tc.h)
		} else {
			w := tc.spec.Weight(1)
			k = kernel{alpha: 1 - w, beta: w / tc.spec.EWMAScale(), lo: 0, hi: tc.h, reflect: true}
			start := tc.spec.HeadStart * tc.h
			if tc.spec.Side == chart.Both {
				k.lo, k.reflect, start = -tc.h, false, 0
			}
			l2 = c.sv.arl(k, start)
		}
		if rel := math.Abs(l-l2) / l2; rel > 1e-6 {
			t.Errorf("%+v h=%v: %d nodes give %.10g, %d give %.10g", tc.spec, tc.h, n, l, 2*n, l2)
		}
	}
}

func TestARLMonotoneAndSymmetric(t *testing.T) {
	for _, spec := range []chart.Spec{
		{Kind: chart.CUSUM, Side: chart.Both, Allowance: 0.5},
		{Kind: chart.EWMA, Side: chart.Both, Lambda: 0.2},
	} {
		prev := 0.0
		for h := 0.5; h < 6; h += 0.5 {
			a, _ := ARL(spec, h, 0, 1)
			if a <= prev {
				t.Errorf("%s: ARL not increasing in h at %v", spec.Kind, h)
			}
			prev = a
			p, _ := ARL(spec, h, 0.7, 1)
			m, _ := ARL(spec, h, -0.7, 1)
			if math.Abs(p-m) > 1e-9*p {
				t.Errorf("%s two-sided ARL not symmetric in the shift: %v vs %v", spec.Kind, p, m)
			}
		}
	}
	up := chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 0.5}
	dn := up
	dn.Side = chart.Down
	a, _ := ARL(up, 4, 1, 1)
	b, _ := ARL(dn, 4, -1, 1)
	if math.Abs(a-b) > 1e-9*a {
		t.Errorf("down chart for -mu should equal up chart for mu: %v vs %v", a, b)
	}
}

func TestBadInput(t *testing.T) {
	good := chart.DefaultSpec()
	if _, err := ARL(good, -1, 0, 1); err == nil {
		t.Error("negative limit accepted")
	}
	if _, err := ARL(good, 4, math.NaN(), 1); err == nil {
		t.Error("NaN shift accepted")
	}
	if _, err := ARL(good, 4, 0, -2); err == nil {
		t.Error("negative gap accepted")
	}
	bad := good
	bad.Allowance = -1
	if _, err := Solve(bad, 100, 1); err == nil {
		t.Error("negative allowance accepted")
	}
	for _, target := range []float64{0, -5, 1, math.NaN(), math.Inf(1)} {
		if _, err := Solve(good, target, 1); err == nil {
			t.Errorf("target ARL %v accepted", target)
		}
	}
	// k = 3: even the smallest limit gives an ARL of about 1/P(X > 3) = 741.
	big := good
	big.Allowance = 3
	if _, err := Solve(big, 10, 1); !errors.Is(err, ErrTargetTooShort) {
		t.Errorf("target below the chart's minimum ARL: got %v", err)
	}
	if _, err := Solve(good, 1e300, 1); err == nil {
		t.Error("absurdly long target accepted")
	}
}

func BenchmarkSolveCUSUM(b *testing.B) {
	spec := chart.Spec{Kind: chart.CUSUM, Side: chart.Up, Allowance: 0.5}
	for b.Loop() {
		if _, err := Solve(spec, 930.887, 1); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSolveCUSUMTwoSided(b *testing.B) {
	spec := chart.Spec{Kind: chart.CUSUM, Side: chart.Both, Allowance: 0.5}
	for b.Loop() {
		if _, err := Solve(spec, 465.44, 1); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSolveEWMA(b *testing.B) {
	spec := chart.Spec{Kind: chart.EWMA, Side: chart.Both, Lambda: 0.1}
	for b.Loop() {
		if _, err := Solve(spec, 499.58, 1); err != nil {
			b.Fatal(err)
		}
	}
}
