package published

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"strconv"
	"testing"
)

// readCSV reads a committed fixture as a header and rows of text.
func readCSV(t *testing.T, path string) ([]string, [][]string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return recs[0], recs[1:]
}

func atof(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestVGAMFixture checks centiles and z against R's VGAM
// (testdata/make_fixtures.R: qlms.bcn, and qlnorm/plnorm for L = 0; z by
// numerically inverting qlms.bcn), over L from −2 to 2, two medians, CVs
// 0.05 to 0.3 and centiles from the 0.1st to the 99.9th.
func TestVGAMFixture(t *testing.T) {
	_, rows := readCSV(t, "testdata/lms_vgam.csv")
	var nCent, nZ, nNone int
	for _, r := range rows {
		p := LMS{L: atof(t, r[1]), M: atof(t, r[2]), S: atof(t, r[3])}
		x, want := atof(t, r[4]), atof(t, r[5])
		switch r[0] {
		case "centile":
			got, err := p.Centile(100 * x)
			if math.IsNaN(want) {
				nNone++
				if !errors.Is(err, ErrNoCentile) {
					t.Errorf("%+v p %g: VGAM has no centile; got %v, %v", p, x, got, err)
				}
				continue
			}
			nCent++
			if err != nil || math.Abs(got-want) > 1e-11*want {
				t.Errorf("%+v p %g: centile %.15g, VGAM qlms.bcn %.15g (%v)", p, x, got, want, err)
			}
		case "z":
			nZ++
			got, err := p.Z(x)
			if err != nil || math.Abs(got-want) > 1e-9 {
				t.Errorf("%+v y %g: z %.15g, VGAM (inverted qlms.bcn) %.15g (%v)", p, x, got, want, err)
			}
		}
	}
	if nCent < 300 || nZ < 200 || nNone < 5 {
		t.Fatalf("fixture too small: %d centiles, %d z, %d without a centile", nCent, nZ, nNone)
	}
}

// TestIssueCheckValues: the values the issue quotes, checked there with
// VGAM's qlms.bcn (L −0.5, M 120, S 0.1 → 3rd/50th/97th centiles
// 100.2571, 120.0000, 146.2052).
func TestIssueCheckValues(t *testing.T) {
	p := LMS{L: -0.5, M: 120, S: 0.1}
	for _, c := range []struct{ centile, want float64 }{{3, 100.2571}, {50, 120.0000}, {97, 146.2052}} {
		got, err := p.Centile(c.centile)
		if err != nil || math.Abs(got-c.want) > 0.00005 {
			t.Errorf("%gth centile %.6f, want %.4f (%v)", c.centile, got, c.want, err)
		}
		z, err := p.Z(c.want)
		if wantZ := []float64{-1.880794, 0, 1.880794}[int(c.centile)/47]; err != nil || math.Abs(z-wantZ) > 1e-5 {
			t.Errorf("z of %g: %.6f, want %.6f (%v)", c.want, z, wantZ, err)
		}
	}
}

func TestLMSEdges(t *testing.T) {
	// L = 1 is the normal distribution with mean M and SD M·S: any reading.
	normal := LMS{L: 1, M: 100, S: 0.1}
	for _, c := range []struct{ y, z float64 }{{100, 0}, {110, 1}, {-10, -11}, {0, -10}} {
		if z, err := normal.Z(c.y); err != nil || math.Abs(z-c.z) > 1e-12 {
			t.Errorf("L=1, y %g: z %g (%v), want %g", c.y, z, err, c.z)
		}
	}
	if y, err := normal.At(-11); err != nil || math.Abs(y+10) > 1e-12 {
		t.Errorf("L=1 centile at z −11: %g (%v), want −10", y, err)
	}
	// L ≠ 1 needs positive readings.
	for _, p := range []LMS{{L: 0, M: 1, S: 0.1}, {L: -0.5, M: 1, S: 0.1}, {L: 2, M: 1, S: 0.1}} {
		for _, y := range []float64{0, -1, math.NaN(), math.Inf(1)} {
			_, err := p.Z(y)
			var re *ReadingError
			if !errors.Is(err, ErrReading) || !errors.As(err, &re) || re.L != p.L {
				t.Errorf("%+v y %g: got %v, want a reading error", p, y, err)
			}
		}
	}
	// L → 0 is continuous (expm1 form).
	for _, y := range []float64{0.5, 1.3, 4} {
		z0, _ := LMS{L: 0, M: 1, S: 0.2}.Z(y)
		zs, _ := LMS{L: 1e-12, M: 1, S: 0.2}.Z(y)
		if math.Abs(z0-zs) > 1e-10 {
			t.Errorf("y %g: z at L=0 %g, at L=1e-12 %g", y, z0, zs)
		}
		c0, _ := LMS{L: 0, M: 1, S: 0.2}.At(z0)
		cs, _ := LMS{L: -1e-12, M: 1, S: 0.2}.At(z0)
		if math.Abs(c0-y) > 1e-12 || math.Abs(cs-y) > 1e-9 {
			t.Errorf("y %g: back from z: %g (L=0), %g (L=-1e-12)", y, c0, cs)
		}
	}
	// Round trip over a grid.
	for _, p := range []LMS{{-1.3, 7, 0.2}, {0.4, 250, 0.05}, {2.5, 3, 0.1}} {
		for z := -3.0; z <= 3; z += 0.25 {
			y, err := p.At(z)
			if err != nil {
				t.Fatal(err)
			}
			back, err := p.Z(y)
			if err != nil || math.Abs(back-z) > 1e-10 {
				t.Errorf("%+v z %g → y %g → z %g (%v)", p, z, y, back, err)
			}
		}
	}
	// Bad parameters and centiles.
	for _, p := range []LMS{{1, 0, 0.1}, {1, -1, 0.1}, {1, 1, 0}, {1, 1, -0.1}, {math.NaN(), 1, 0.1}, {1, math.Inf(1), 0.1}} {
		if err := p.Validate(); err == nil {
			t.Errorf("%+v accepted", p)
		}
	}
	for _, c := range []float64{0, 100, -5, 120, math.NaN()} {
		if _, err := (LMS{1, 1, 0.1}).Centile(c); !errors.Is(err, ErrNoCentile) {
			t.Errorf("centile %g: %v", c, err)
		}
	}
}
