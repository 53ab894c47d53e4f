package joint

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
)

// Estimate recovers the truth of a simulated cohort: serial parameters and
// innovation correlations within 4 standard errors.
func TestEstimateRecovers(t *testing.T) {
	truth := testModel()
	ref := simulateCohort(truth, 800, 7, 41, []float64{0, 0.3, 0.1})
	m, err := Estimate(context.Background(), truth.Markers, ref, nil)
	if err != nil {
		t.Fatal(err)
	}
	for k, s := range m.Serial {
		if math.Abs(s.Phi-truth.Serial[k].Phi) > 4*s.SEPhi+0.01 || math.Abs(s.C-truth.Serial[k].C) > 4*s.SEC+0.01 {
			t.Errorf("%s: phi %.3f (SE %.3f), c %.3f (SE %.3f); truth %v", m.Markers[k], s.Phi, s.SEPhi, s.C, s.SEC, truth.Serial[k])
		}
	}
	for a := range 3 {
		for b := a + 1; b < 3; b++ {
			got, se, want := m.Innovation.R[a][b], m.Innovation.SE[a][b], truth.Innovation.R[a][b]
			if math.Abs(got-want) > 4*se {
				t.Errorf("innovation correlation %s-%s %.3f (SE %.3f), truth %.3f", m.Markers[a], m.Markers[b], got, se, want)
			}
		}
	}
	if m.Innovation.Exams[0][1] >= m.Innovation.Exams[0][0] || m.Innovation.Exams[0][0] != 800*7 {
		t.Errorf("pairwise counts %v", m.Innovation.Exams)
	}
	if err := m.Check(); err != nil {
		t.Errorf("a fitted model fails its own check: %v", err)
	}
	// Given serial models are used as they are.
	again, err := Estimate(context.Background(), truth.Markers, ref, truth.Serial)
	if err != nil || again.Serial[0] != truth.Serial[0] {
		t.Errorf("given serial models: %v %v", again.Serial, err)
	}
}

func TestEstimateBadInput(t *testing.T) {
	truth := testModel()
	ref := simulateCohort(truth, 100, 5, 42, nil)
	ctx := context.Background()
	var de *DuplicateError
	if _, err := Estimate(ctx, []string{"sbp", "chol", "sbp"}, ref, nil); !errors.As(err, &de) || de.Marker != "sbp" || !errors.Is(err, ErrDuplicateMarker) {
		t.Errorf("marker twice: %v", err)
	}
	// A marker measured at only a few exams.
	few := make([]Series, len(ref))
	n := 0
	for i, w := range ref {
		z := make([]float64, len(w.Time))
		for j := range z {
			z[j] = math.NaN()
			if n < 12 {
				z[j] = w.Z[1][j]
				n++
			}
		}
		few[i] = Series{Time: w.Time, Z: [][]float64{w.Z[0], z, w.Z[2]}}
	}
	var re *ReadingsError
	if _, err := Estimate(ctx, truth.Markers, few, nil); !errors.As(err, &re) || re.Marker != "chol" || re.Readings != 12 || !errors.Is(err, ErrTooFewReadings) ||
		!strings.Contains(err.Error(), `marker "chol" has only 12 reference readings`) {
		t.Errorf("few readings: %v", err)
	}
	// A marker measured once per worker: no serial model can be estimated.
	once := make([]Series, len(ref))
	for i, w := range ref {
		z := make([]float64, len(w.Time))
		for j := range z {
			z[j] = math.NaN()
		}
		z[0] = w.Z[2][0]
		once[i] = Series{Time: w.Time, Z: [][]float64{w.Z[0], w.Z[1], z}}
	}
	var me *MarkerError
	if _, err := Estimate(ctx, truth.Markers, once, nil); !errors.As(err, &me) || me.Marker != "fev1" {
		t.Errorf("one reading per worker: %v", err)
	}
	// Two identical columns.
	same := make([]Series, len(ref))
	for i, w := range ref {
		same[i] = Series{Time: w.Time, Z: [][]float64{w.Z[0], w.Z[1], w.Z[0]}}
	}
	var ce *CorrelationError
	if _, err := Estimate(ctx, []string{"sbp", "chol", "sbp2"}, same, nil); !errors.As(err, &ce) || ce.Marker != "sbp2" || ce.Partner != "sbp" {
		t.Errorf("identical columns: %v", err)
	}
	// Shapes.
	bad := []Series{{Time: []float64{1, 2}, Z: [][]float64{{0, 1}, {0}, {0, 1}}}}
	if _, err := Estimate(ctx, truth.Markers, bad, nil); err == nil || !strings.Contains(err.Error(), "reference worker 1: marker 2 has 1 values for 2 exams") {
		t.Errorf("short marker: %v", err)
	}
	back := []Series{{Time: []float64{2, 1}, Z: [][]float64{{0, 1}, {0, 1}, {0, 1}}}}
	if _, err := Estimate(ctx, truth.Markers, back, nil); err == nil || !strings.Contains(err.Error(), "reference worker 1") {
		t.Errorf("times backwards: %v", err)
	}
	// A cancelled estimate stops with the context's error.
	cctx, cancel := context.WithCancel(ctx)
	cancel()
	if _, err := Estimate(cctx, truth.Markers, ref, nil); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: %v", err)
	}
}

func TestModelCheck(t *testing.T) {
	for _, tc := range []struct {
		name string
		edit func(*Model)
		want string
	}{
		{"no markers", func(m *Model) { m.Markers = nil }, "no markers"},
		{"serial count", func(m *Model) { m.Serial = m.Serial[:2] }, "2 serial models for 3 markers"},
		{"bad phi", func(m *Model) { m.Serial[1].Phi = 1.5 }, `marker "chol"`},
		{"rows", func(m *Model) { m.Reading.R = m.Reading.R[:2] }, "2 rows for 3 markers"},
		{"entry", func(m *Model) { m.Innovation.R = [][]float64{{1, 2, 0}, {2, 1, 0}, {0, 0, 1}} }, "lie in [-1, 1]"},
		{"not positive definite", func(m *Model) {
			m.Innovation.R = [][]float64{{1, 0.9, 0.9}, {0.9, 1, -0.9}, {0.9, -0.9, 1}}
		}, `not consistent at marker "fev1"`},
	} {
		m := testModel()
		tc.edit(m)
		if err := m.Check(); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v, want an error about %q", tc.name, err, tc.want)
		}
	}
}
