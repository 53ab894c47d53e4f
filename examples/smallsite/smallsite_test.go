package smallsite

import (
	"bytes"
	"context"
	"math"
	"testing"

	"veer/functions/published"
	"veer/functions/serial"
)

// TestCommittedFiles: the committed files are what the generator writes
// from DefaultSeed.
func TestCommittedFiles(t *testing.T) {
	gen, err := Generated(DefaultSeed)
	if err != nil {
		t.Fatal(err)
	}
	for name, want := range Files() {
		if !bytes.Equal(gen[name], want) {
			t.Errorf("data/%s differs from what the generator writes; run go run ./examples/smallsite/gen", name)
		}
	}
}

// TestSite checks the generated site against its documented model: 60
// workers, healthy readings standardised against the references have mean
// about 0 and SD about 1, and the serial model estimated from the site
// (as veer fit does without a reference cohort) is near the generating one.
func TestSite(t *testing.T) {
	s, err := Generate(DefaultSeed)
	if err != nil {
		t.Fatal(err)
	}
	sbp, fev1, err := References()
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Truth) != Workers {
		t.Fatalf("%d workers", len(s.Truth))
	}
	drift := map[string]Truth{}
	var nSBP, nFEV1, women int
	for _, tr := range s.Truth {
		drift[tr.Worker] = tr
		if tr.SBP.Affected {
			nSBP++
		}
		if tr.FEV1.Affected {
			nFEV1++
		}
		if tr.Sex == Female {
			women++
		}
	}
	t.Logf("%d exams of %d workers (%d women); %d drift in SBP, %d in FEV1", len(s.Exams), Workers, women, nSBP, nFEV1)
	var zs, zf []float64
	series := map[string]*[2]serial.Series{}
	var order []string
	for _, e := range s.Exams {
		a, err := sbp.Z(e.Sex, e.Age, nil, e.SBP, false)
		if err != nil {
			t.Fatal(err)
		}
		b, err := fev1.Z(e.Sex, e.Age, []float64{e.Height}, e.FEV1, false)
		if err != nil {
			t.Fatal(err)
		}
		tr := drift[e.Worker]
		if !tr.SBP.Affected || e.Age <= tr.SBP.Onset {
			zs = append(zs, a)
		}
		if !tr.FEV1.Affected || e.Age <= tr.FEV1.Onset {
			zf = append(zf, b)
		}
		w, ok := series[e.Worker]
		if !ok {
			w = &[2]serial.Series{}
			series[e.Worker] = w
			order = append(order, e.Worker)
		}
		w[0].Time, w[0].Z = append(w[0].Time, e.Age), append(w[0].Z, a)
		w[1].Time, w[1].Z = append(w[1].Time, e.Age), append(w[1].Z, b)
	}
	for _, c := range []struct {
		name string
		z    []float64
	}{{"SBP", zs}, {"FEV1", zf}} {
		m, sd := meanSD(c.z)
		t.Logf("%s: healthy readings' z mean %.3f, SD %.3f (n %d)", c.name, m, sd, len(c.z))
		// Persistent personal levels make 60 workers' mean wander: one SE
		// is about sqrt(c/60) ≈ 0.11.
		if math.Abs(m) > 0.35 || sd < 0.75 || sd > 1.25 {
			t.Errorf("%s: z mean %.3f, SD %.3f", c.name, m, sd)
		}
	}
	for k, name := range []string{"SBP", "FEV1"} {
		var ws []serial.Series
		for _, w := range order {
			ws = append(ws, series[w][k])
		}
		est, err := published.EstimateSerial(context.Background(), ws, nil)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: serial model from the site: phi %.3f (SE %.3f), c %.3f (SE %.3f), %d workers", name,
			est.Params.Phi, est.Params.SEPhi, est.Params.C, est.Params.SEC, est.Params.Workers)
	}
}

func meanSD(v []float64) (float64, float64) {
	var s, s2 float64
	for _, x := range v {
		s += x
	}
	m := s / float64(len(v))
	for _, x := range v {
		s2 += (x - m) * (x - m)
	}
	return m, math.Sqrt(s2 / float64(len(v)-1))
}
