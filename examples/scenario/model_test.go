package scenario

import (
	"math"
	"strings"
	"testing"
)

func TestCurveErrors(t *testing.T) {
	tests := []struct {
		name   string
		marker Marker
		group  string
		age    float64
		want   string
	}{
		{"unknown group", SBP, "office", 40, `unknown group "office"`},
		{"unknown marker", Marker(7), Tower, 40, "unknown marker Marker(7)"},
		{"too young", SBP, Tower, 19.99, "outside the scenario's range"},
		{"too old", FEV1, Workshop, 65.01, "outside the scenario's range"},
		{"not a number", FEV1, Tower, math.NaN(), "outside the scenario's range"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := Curve(tc.marker, tc.group, tc.age)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("Curve(%v, %q, %v) error = %v, want it to mention %q", tc.marker, tc.group, tc.age, err, tc.want)
			}
		})
	}
}

// TestCurveShape checks the documented direction of the curves: SBP rises
// and FEV1 falls with age in both groups, sd stays positive, and the
// workshop crew has higher SBP and lower FEV1 than the tower crew.
func TestCurveShape(t *testing.T) {
	for _, g := range Groups() {
		prevS, prevF := math.Inf(-1), math.Inf(1)
		for age := MinAge; age <= MaxAge; age += 0.5 {
			ms, ss, err := Curve(SBP, g, age)
			if err != nil {
				t.Fatal(err)
			}
			mf, sf, err := Curve(FEV1, g, age)
			if err != nil {
				t.Fatal(err)
			}
			if ms <= prevS || mf >= prevF {
				t.Errorf("%s at %v: SBP mean %v (previous %v) must rise, FEV1 mean %v (previous %v) must fall", g, age, ms, prevS, mf, prevF)
			}
			if ss <= 0 || sf <= 0 {
				t.Errorf("%s at %v: sd %v, %v must be positive", g, age, ss, sf)
			}
			prevS, prevF = ms, mf
		}
	}
	for age := MinAge; age <= MaxAge; age += 5 {
		mts, _, _ := Curve(SBP, Tower, age)
		mws, _, _ := Curve(SBP, Workshop, age)
		mtf, _, _ := Curve(FEV1, Tower, age)
		mwf, _, _ := Curve(FEV1, Workshop, age)
		if mws <= mts || mwf >= mtf {
			t.Errorf("age %v: workshop SBP %v vs tower %v, workshop ln FEV1 %v vs tower %v", age, mws, mts, mwf, mtf)
		}
	}
}

func TestStandardise(t *testing.T) {
	tests := []struct {
		marker  Marker
		group   string
		age     float64
		z       float64 // reading is placed at mean + z·sd on the model scale
		wantErr bool
	}{
		{SBP, Tower, 40, 0, false},
		{SBP, Workshop, 62.5, 1.7, false},
		{FEV1, Tower, 25, -2.2, false},
		{FEV1, Workshop, 50, 0.4, false},
	}
	for _, tc := range tests {
		mean, sd, err := Curve(tc.marker, tc.group, tc.age)
		if err != nil {
			t.Fatal(err)
		}
		y := mean + tc.z*sd
		if tc.marker == FEV1 {
			y = math.Exp(y)
		}
		got, err := Standardise(tc.marker, tc.group, tc.age, y)
		if err != nil || math.Abs(got-tc.z) > 1e-12 {
			t.Errorf("Standardise(%v, %s, %v, %v) = %v, %v; want %v", tc.marker, tc.group, tc.age, y, got, err, tc.z)
		}
	}
	for _, y := range []float64{0, -1, math.NaN()} {
		if _, err := Standardise(FEV1, Tower, 40, y); err == nil || !strings.Contains(err.Error(), "positive") {
			t.Errorf("Standardise(FEV1, %v) error = %v, want a positive-litres error", y, err)
		}
	}
	if _, err := Standardise(SBP, "office", 40, 120); err == nil {
		t.Error("Standardise with an unknown group gave no error")
	}
}

func TestOnsetShift(t *testing.T) {
	up := Onset{Affected: true, Age: 40, Slope: 0.5, Plateau: 1.25}
	down := Onset{Affected: true, Age: 30, Slope: -0.25, Plateau: -1}
	tests := []struct {
		name  string
		o     Onset
		age   float64
		shift float64
	}{
		{"not affected", Onset{}, 50, 0},
		{"before onset", up, 39, 0},
		{"at onset", up, 40, 0},
		{"two years after", up, 42, 1},
		{"reaches the plateau", up, 42.5, 1.25},
		{"stays at the plateau", up, 60, 1.25},
		{"downward", down, 32, -0.5},
		{"downward plateau", down, 34, -1},
		{"downward stays", down, 60, -1},
	}
	for _, tc := range tests {
		if got := tc.o.Shift(tc.age); math.Abs(got-tc.shift) > 1e-12 {
			t.Errorf("%s: Shift(%v) = %v, want %v", tc.name, tc.age, got, tc.shift)
		}
	}
}

func TestMarkerString(t *testing.T) {
	for m, want := range map[Marker]string{SBP: "sbp", FEV1: "fev1", Marker(9): "Marker(9)"} {
		if got := m.String(); got != want {
			t.Errorf("Marker(%d).String() = %q, want %q", int(m), got, want)
		}
	}
}
