package screening

import (
	"context"
	"errors"
	"math/rand/v2"
	"strings"
	"testing"

	"veer/functions/refcurve"
	"veer/functions/serial"
)

// The serial finding is stated in the summary and the diagnostics items,
// survives encoding, and a fit does not depend on the order of the rows,
// with and without serial correlation.
func TestSerialFinding(t *testing.T) {
	tests := []struct {
		name     string
		par      serial.Params
		detected bool
	}{
		// The test has a false detection rate of 5% by design; with this
		// seed the independent cohort is (rightly) not detected.
		{"independent", serial.Params{}, false},
		{"correlated", serial.Params{Phi: 0.7, C: 0.6}, true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rows := cohort(400, tc.par, 1, "R")
			m := fit(t, rows)
			if !m.Serial.Tested() {
				t.Fatal("the fitted model has no test of serial correlation")
			}
			if got := !m.Serial.NoCorrelationDetected(); got != tc.detected {
				t.Errorf("detected = %v, want %v (%s)", got, tc.detected, m.Serial.Finding())
			}
			want := "serial correlation detected"
			if !tc.detected {
				want = "no serial correlation detected"
			}
			if s := m.Summary(); !strings.Contains(s, want) {
				t.Errorf("summary %q does not say %q", s, want)
			}
			items := map[string]any{}
			for _, it := range m.Items() {
				items[it.Name] = it.Value
			}
			if items["serial correlation"] != want {
				t.Errorf("items: serial correlation = %v, want %q", items["serial correlation"], want)
			}
			if p, ok := items["no-correlation test p-value (one-sided t)"].(float64); !ok || p != m.Serial.Test.P {
				t.Errorf("items: test p-value %v, model %v", items["no-correlation test p-value (one-sided t)"], m.Serial.Test.P)
			}
			doc, err := m.Encode()
			if err != nil {
				t.Fatal(err)
			}
			back, err := Decode(doc)
			if err != nil {
				t.Fatal(err)
			}
			if back.Serial != m.Serial || back.Summary() != m.Summary() {
				t.Errorf("decoded model: %+v, fitted %+v", back.Serial, m.Serial)
			}
			shuffled := append([]refcurve.Row(nil), rows...)
			rand.New(rand.NewPCG(1, 2)).Shuffle(len(shuffled), func(i, j int) { shuffled[i], shuffled[j] = shuffled[j], shuffled[i] })
			if m2 := fit(t, shuffled); m2.Hash != m.Hash || m2.Serial.Phi != m.Serial.Phi || m2.Serial.C != m.Serial.C {
				t.Errorf("shuffled rows: serial %+v, hash %.12s; in order: %+v, %.12s", m2.Serial, m2.Hash, m.Serial, m.Hash)
			}
		})
	}
}

// A cancelled fit stops with the context's error, so a server can tell a
// cancelled call from bad data.
func TestFitCancelled(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	_, err := Fit(ctx, cohort(100, serial.Params{Phi: 0.7, C: 0.6}, 4, "R"), FitOptions{Name: "x"})
	if !errors.Is(err, context.Canceled) {
		t.Errorf("error %v, want one wrapping context.Canceled", err)
	}
}
