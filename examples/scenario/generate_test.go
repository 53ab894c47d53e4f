package scenario

import (
	"bytes"
	"fmt"
	"math"
	"regexp"
	"strings"
	"testing"
)

func TestConfigValidate(t *testing.T) {
	tests := []struct {
		name   string
		change func(*Config)
		want   string // "" means valid
	}{
		{"default", func(*Config) {}, ""},
		{"no reference", func(c *Config) { c.ReferenceWorkers = 0 }, "ReferenceWorkers is 0"},
		{"too many workers", func(c *Config) { c.WorkforceWorkers = 100000 }, "WorkforceWorkers is 100000"},
		{"share above 1", func(c *Config) { c.AffectedShare = 1.5 }, "AffectedShare is 1.5"},
		{"share NaN", func(c *Config) { c.AffectedShare = math.NaN() }, "AffectedShare is NaN"},
		{"phi 1", func(c *Config) { c.Phi = 1 }, "Phi is 1"},
		{"phi 0", func(c *Config) { c.Phi = 0 }, "Phi is 0"},
		{"c negative", func(c *Config) { c.Share[SBP] = -0.1 }, "Share[SBP] is -0.1"},
		{"c above 1", func(c *Config) { c.Share[FEV1] = 1.2 }, "Share[FEV1] is 1.2"},
		{"cross corr -1", func(c *Config) { c.CrossCorr = -1 }, "CrossCorr is -1"},
		{"diagnosed share above 1", func(c *Config) { c.DiagnosedShare = 1.1 }, "DiagnosedShare is 1.1"},
		{"other diagnosed share NaN", func(c *Config) { c.OtherDiagnosedShare = math.NaN() }, "OtherDiagnosedShare is NaN"},
		{"edge values", func(c *Config) { c.Share, c.AffectedShare, c.Phi = [2]float64{1, 0}, 0, 0.01 }, ""},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			cfg := DefaultConfig()
			tc.change(&cfg)
			err := cfg.Validate()
			_, genErr := Generate(cfg)
			if tc.want == "" {
				if err != nil || genErr != nil {
					t.Fatalf("Validate() = %v, Generate error %v; want both nil", err, genErr)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("Validate() = %v; want an error mentioning %q", err, tc.want)
			}
			if genErr == nil {
				t.Fatal("Generate accepted a config that Validate rejects")
			}
		})
	}
}

func TestGenerateReproducible(t *testing.T) {
	cfg := DefaultConfig()
	cfg.ReferenceWorkers, cfg.WorkforceWorkers = 60, 40
	a, err := Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := Generate(cfg)
	for _, f := range []struct {
		name string
		x, y []byte
	}{
		{"reference", a.ReferenceCSV(), b.ReferenceCSV()},
		{"workforce", a.WorkforceCSV(), b.WorkforceCSV()},
		{"truth", a.TruthCSV(), b.TruthCSV()},
	} {
		if !bytes.Equal(f.x, f.y) {
			t.Errorf("%s: two runs with the same config differ", f.name)
		}
	}

	other := cfg
	other.Seed++
	c, _ := Generate(other)
	if bytes.Equal(a.ReferenceCSV(), c.ReferenceCSV()) || bytes.Equal(a.WorkforceCSV(), c.WorkforceCSV()) {
		t.Error("a different seed gave the same exams")
	}

	// Each worker has its own stream: a larger cohort keeps the first workers.
	bigger := cfg
	bigger.ReferenceWorkers, bigger.WorkforceWorkers = 90, 55
	d, _ := Generate(bigger)
	if !bytes.HasPrefix(d.ReferenceCSV(), a.ReferenceCSV()) || !bytes.HasPrefix(d.WorkforceCSV(), a.WorkforceCSV()) ||
		!bytes.HasPrefix(d.TruthCSV(), a.TruthCSV()) {
		t.Error("growing a cohort changed the workers already generated")
	}
}

// TestSchedule checks the exam schedule of the documented model on the
// default scenario: ids, groups, ages in range and strictly increasing per
// worker, at least three exams, gaps within the mixture's ranges, and
// cohort sizes close to the documented ones.
func TestSchedule(t *testing.T) {
	s, err := Generate(DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name     string
		exams    []Exam
		id       *regexp.Regexp
		workers  int
		minExams int // documented size: about 8 exams a worker, ~12k and ~6.4k exams; bounds ±8%, over 7 SD (per-worker SD ≈ 2.5 exams)
		maxExams int
	}{
		{"reference", s.Reference, regexp.MustCompile(`^R\d{5}$`), 1500, 11000, 13000},
		{"workforce", s.Workforce, regexp.MustCompile(`^W\d{5}$`), 800, 5900, 6950},
	} {
		t.Run(c.name, func(t *testing.T) {
			if n := len(c.exams); n < c.minExams || n > c.maxExams {
				t.Errorf("%d exams, want %d to %d", n, c.minExams, c.maxExams)
			}
			count := map[string]int{}
			for i, e := range c.exams {
				count[e.Worker]++
				if !c.id.MatchString(e.Worker) {
					t.Fatalf("row %d: worker id %q", i, e.Worker)
				}
				if e.Group != Tower && e.Group != Workshop {
					t.Fatalf("row %d: group %q", i, e.Group)
				}
				if e.Age < MinAge || e.Age > MaxAge {
					t.Fatalf("row %d: age %v outside %v..%v", i, e.Age, MinAge, MaxAge)
				}
				if e.SBP < 60 || e.SBP > 260 || e.FEV1 < 0.5 || e.FEV1 > 7 {
					t.Fatalf("row %d: implausible readings SBP %v, FEV1 %v", i, e.SBP, e.FEV1)
				}
				if i == 0 || c.exams[i-1].Worker != e.Worker {
					continue
				}
				prev := c.exams[i-1]
				if prev.Worker > e.Worker {
					t.Fatalf("row %d: workers out of order", i)
				}
				if prev.Group != e.Group {
					t.Fatalf("row %d: worker %s changed group", i, e.Worker)
				}
				// Ages are rounded to 0.01, so a gap may move by up to 0.01.
				gap := e.Age - prev.Age
				inMix := (gap >= gapAdhocMin-0.01 && gap <= gapAdhocMax+0.01) ||
					(gap >= gapPeriodicMin-0.01 && gap <= gapPeriodicMax+0.01) ||
					(gap >= gapMissedMin-0.01 && gap <= gapMissedMax+0.01)
				if !(gap > 0) || !inMix {
					t.Fatalf("row %d: worker %s gap %v is not strictly positive or not in the gap mixture", i, e.Worker, gap)
				}
			}
			if len(count) != c.workers {
				t.Errorf("%d workers, want %d", len(count), c.workers)
			}
			for w, n := range count {
				if n < minExams {
					t.Errorf("worker %s has %d exams, want at least %d", w, n, minExams)
				}
			}
		})
	}
}

// TestReferenceMatchesCurves checks that the healthy reference cohort
// follows the documented curves: in every group, marker and 5-year age
// band the standardised readings z have mean 0 within 4 cluster-robust
// standard errors (clusters are workers, because a worker's exams are
// correlated) and mean square 1 within 5 of them. The mean square gets the
// wider bound because its estimated SE shrinks together with it, so the
// ratio has a heavy lower tail: over seeds 1-40, 1 of 1,440 mean-square
// checks passed 4 SE and none passed 5. Two seeds, so a lucky draw cannot
// pass.
func TestReferenceMatchesCurves(t *testing.T) {
	for _, seed := range []uint64{DefaultSeed, 99} {
		cfg := DefaultConfig()
		cfg.Seed = seed
		s, err := Generate(cfg)
		if err != nil {
			t.Fatal(err)
		}
		ex := standardiseAll(t, s.Reference)
		for _, m := range []Marker{SBP, FEV1} {
			for _, g := range Groups() {
				for lo := 20.0; lo < 65; lo += 5 {
					var z, z2 []float64
					var w []string
					for _, e := range ex {
						if e.Group == g && e.Age >= lo && (e.Age < lo+5 || lo+5 == MaxAge) {
							z = append(z, e.z[m])
							z2 = append(z2, e.z[m]*e.z[m])
							w = append(w, e.Worker)
						}
					}
					if len(z) < 100 {
						t.Errorf("seed %d %v %s %v-%v: only %d exams", seed, m, g, lo, lo+5, len(z))
						continue
					}
					mean, se := clusterMean(z, w)
					if math.Abs(mean) > 4*se {
						t.Errorf("seed %d %v %s ages %v-%v: mean z %.3f, more than 4 SE (%.3f) from 0", seed, m, g, lo, lo+5, mean, se)
					}
					ms, se2 := clusterMean(z2, w)
					if math.Abs(ms-1) > 5*se2 {
						t.Errorf("seed %d %v %s ages %v-%v: mean z² %.3f, more than 5 SE (%.3f) from 1", seed, m, g, lo, lo+5, ms, se2)
					}
				}
			}
		}
	}
}

// TestSerialCorrelation checks that the reference residuals carry the
// documented serial correlation: the least-squares fit of
// z_j z_{j+1} = c φ^d recovers φ and each marker's c, for the default and
// for other settings, and the same-exam correlation of the markers is
// ρ·(√(c₁c₂) + √((1-c₁)(1-c₂))). Tolerances are about 3.5 standard errors
// of the fits: with ~10,500 pairs scipy.optimize.curve_fit reports SE ≈
// 0.02 for φ and 0.03 for c at the default (testdata/fixtures.json), and
// SE up to about 0.045 at φ = 0.6.
func TestSerialCorrelation(t *testing.T) {
	tests := []struct {
		phi  float64
		c    [2]float64
		rho  float64
		tolP float64
	}{
		{0.95, [2]float64{0.7, 0.85}, -0.2, 0.09},
		{0.6, [2]float64{0.6, 0.6}, 0, 0.16},
		{0.8, [2]float64{0.4, 0.9}, 0.3, 0.16},
	}
	for _, tc := range tests {
		t.Run(fmt.Sprintf("phi=%v c=%v rho=%v", tc.phi, tc.c, tc.rho), func(t *testing.T) {
			cfg := DefaultConfig()
			cfg.Phi, cfg.Share, cfg.CrossCorr = tc.phi, tc.c, tc.rho
			s, err := Generate(cfg)
			if err != nil {
				t.Fatal(err)
			}
			ex := standardiseAll(t, s.Reference)
			for _, m := range []Marker{SBP, FEV1} {
				c, phi := fitSerial(lagPairs(ex, m))
				if math.Abs(phi-tc.phi) > tc.tolP || math.Abs(c-tc.c[m]) > 0.16 {
					t.Errorf("%v: fitted φ = %.3f, c = %.3f; want %v, %v", m, phi, c, tc.phi, tc.c[m])
				}
			}
			zs, zf := make([]float64, len(ex)), make([]float64, len(ex))
			for i, e := range ex {
				zs[i], zf[i] = e.z[SBP], e.z[FEV1]
			}
			// SE of a correlation from ~12,000 exams in 1,500 clusters is
			// below 0.02; 0.07 allows for the clustering.
			want := tc.rho * (math.Sqrt(tc.c[0]*tc.c[1]) + math.Sqrt((1-tc.c[0])*(1-tc.c[1])))
			if r := correlation(zs, zf); math.Abs(r-want) > 0.07 {
				t.Errorf("same-exam correlation of the markers = %.3f, want %.3f", r, want)
			}
		})
	}
}

// TestTruth checks the affected workers: share near AffectedShare for each
// marker, onset strictly inside the worker's exam span at the documented
// fraction with several exams after it, plateaus and growth times in the
// documented ranges with the documented sign, and readings that carry
// exactly the documented drift: after onset, z − δ(t) has mean 0 within 4
// cluster-robust SE (clusters are workers), the mean drift two or more
// years after onset is at least 0.9 SD in the right direction, and
// unaffected workers' z has mean 0 within 4 SE.
func TestTruth(t *testing.T) {
	for _, share := range []float64{0.15, 0.4} {
		cfg := DefaultConfig()
		cfg.AffectedShare = share
		s, err := Generate(cfg)
		if err != nil {
			t.Fatal(err)
		}
		if len(s.Truth) != cfg.WorkforceWorkers {
			t.Fatalf("%d truth rows, want %d", len(s.Truth), cfg.WorkforceWorkers)
		}
		span := map[string][2]float64{}
		for _, e := range s.Workforce {
			sp, ok := span[e.Worker]
			if !ok {
				sp[0] = e.Age
			}
			sp[1] = e.Age
			span[e.Worker] = sp
		}
		ex := standardiseAll(t, s.Workforce)
		for _, m := range []Marker{SBP, FEV1} {
			sign := 1.0
			if m == FEV1 {
				sign = -1
			}
			onsets := map[string]Onset{}
			for _, tr := range s.Truth {
				o := tr.SBP
				if m == FEV1 {
					o = tr.FEV1
				}
				if !o.Affected {
					if o != (Onset{}) {
						t.Errorf("%v %s: unaffected worker has onset %+v", m, tr.Worker, o)
					}
					continue
				}
				onsets[tr.Worker] = o
				sp := span[tr.Worker]
				frac := (o.Age - sp[0]) / (sp[1] - sp[0])
				if !(o.Age > sp[0] && o.Age < sp[1]) || frac < onsetFracMin-0.01 || frac > onsetFracMax+0.01 {
					t.Errorf("%v %s: onset %v not inside exams %v-%v at fraction %v-%v", m, tr.Worker, o.Age, sp[0], sp[1], onsetFracMin, onsetFracMax)
				}
				// The slope is rounded to 3 decimals, so the growth time
				// A/β may miss its range by 0.0005/0.25 = 0.2%.
				a, ramp := sign*o.Plateau, o.Plateau/o.Slope
				if a < plateauMin || a > plateauMax || ramp < rampMin*0.998 || ramp > rampMax*1.002 {
					t.Errorf("%v %s: plateau %v and growth time %v years; want sign %v, size %v-%v SD, %v-%v years",
						m, tr.Worker, o.Plateau, ramp, sign, plateauMin, plateauMax, rampMin, rampMax)
				}
			}
			n := float64(len(s.Truth))
			got := float64(len(onsets)) / n
			if se := math.Sqrt(share * (1 - share) / n); math.Abs(got-share) > 4*se {
				t.Errorf("%v: share affected %.3f, want %v within 4 binomial SE (%.3f)", m, got, share, se)
			}
			var resid, healthy, lateShift []float64
			var residW, healthyW []string
			after := map[string]int{}
			for _, e := range ex {
				o, ok := onsets[e.Worker]
				switch {
				case !ok:
					healthy = append(healthy, e.z[m])
					healthyW = append(healthyW, e.Worker)
				case e.Age > o.Age:
					after[e.Worker]++
					resid = append(resid, e.z[m]-o.Shift(e.Age))
					residW = append(residW, e.Worker)
					if e.Age >= o.Age+2 {
						lateShift = append(lateShift, o.Shift(e.Age))
					}
				}
			}
			if mr, se := clusterMean(resid, residW); math.Abs(mr) > 4*se {
				t.Errorf("%v: after onset, mean of z − δ(t) is %.3f, more than 4 SE (%.3f) from 0", m, mr, se)
			}
			if mh, se := clusterMean(healthy, healthyW); math.Abs(mh) > 4*se {
				t.Errorf("%v: unaffected workers' mean z %.3f, more than 4 SE (%.3f) from 0", m, mh, se)
			}
			if ls := sign * mean(lateShift); ls < 0.9 {
				t.Errorf("%v: mean drift two or more years after onset %.2f SD, want at least 0.9", m, ls)
			}
			// Several exams after onset: every case has one, most have three or more.
			var three int
			for w := range onsets {
				if after[w] < 1 {
					t.Errorf("%v %s: no exam after onset", m, w)
				}
				if after[w] >= 3 {
					three++
				}
			}
			if f := float64(three) / float64(len(onsets)); f < 0.8 {
				t.Errorf("%v: %.0f%% of cases have 3 or more exams after onset, want at least 80%%", m, 100*f)
			}
		}
	}
}

func mean(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += v
	}
	return s / float64(len(x))
}

func TestNoneAffected(t *testing.T) {
	cfg := DefaultConfig()
	cfg.AffectedShare = 0
	cfg.ReferenceWorkers, cfg.WorkforceWorkers = 10, 200
	s, err := Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	for _, tr := range s.Truth {
		if tr.SBP.Affected || tr.FEV1.Affected {
			t.Fatalf("worker %s affected with AffectedShare 0", tr.Worker)
		}
	}
}

func BenchmarkGenerate(b *testing.B) {
	cfg := DefaultConfig()
	for b.Loop() {
		s, err := Generate(cfg)
		if err != nil {
			b.Fatal(err)
		}
		_ = s.ReferenceCSV()
		_ = s.WorkforceCSV()
		_ = s.TruthCSV()
	}
}

// TestOutcomes checks the documented outcome model on a large workforce: a
// drifting worker's condition is diagnosed 2 to 6 years after the onset
// with probability DiagnosedShare (less the diagnoses that would fall more
// than a year after the last exam), a worker who does not drift with
// probability OtherDiagnosedShare at an age within their exams; and the
// outcomes do not change the exams.
func TestOutcomes(t *testing.T) {
	cfg := DefaultConfig()
	cfg.WorkforceWorkers = 20000
	cfg.ReferenceWorkers = 1
	s, err := Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Outcomes) != len(s.Truth) {
		t.Fatalf("%d outcomes for %d workers", len(s.Outcomes), len(s.Truth))
	}
	span := map[string][2]float64{}
	for _, e := range s.Workforce {
		sp, ok := span[e.Worker]
		if !ok {
			sp[0] = e.Age
		}
		sp[1] = e.Age
		span[e.Worker] = sp
	}
	type tally struct{ drifting, dxDrifting, offRecord, other, dxOther int }
	var tl [2]tally
	for i, o := range s.Outcomes {
		tr := s.Truth[i]
		if o.Worker != tr.Worker {
			t.Fatalf("outcome %d is %s, truth %s", i, o.Worker, tr.Worker)
		}
		sp := span[o.Worker]
		for m, pair := range []struct {
			on Onset
			dx Diagnosis
		}{{tr.SBP, o.Hypertension}, {tr.FEV1, o.Obstruction}} {
			d := pair.dx
			if d.Diagnosed && d.Age > sp[1]+1+1e-9 {
				t.Errorf("%s: diagnosed at %v, more than a year after the last exam %v", o.Worker, d.Age, sp[1])
			}
			if pair.on.Affected {
				tl[m].drifting++
				// A diagnosis that would be off record: lag >= 2 years past
				// an onset such that onset + 2 > last + 1 cannot be.
				if pair.on.Age+6 > sp[1]+1 {
					tl[m].offRecord++
				}
				if d.Diagnosed {
					tl[m].dxDrifting++
					if lag := d.Age - pair.on.Age; lag < 2-0.006 || lag > 6+0.006 {
						t.Errorf("%s: diagnosed %.2f years after the onset; want 2 to 6", o.Worker, lag)
					}
				}
				continue
			}
			tl[m].other++
			if d.Diagnosed {
				tl[m].dxOther++
				if d.Age < sp[0]-0.006 || d.Age > sp[1]+0.006 {
					t.Errorf("%s: diagnosed at %v outside the exams %v–%v", o.Worker, d.Age, sp[0], sp[1])
				}
			}
		}
	}
	for m, x := range tl {
		share := float64(x.dxDrifting) / float64(x.drifting)
		other := float64(x.dxOther) / float64(x.other)
		t.Logf("marker %d: %d of %d drifting diagnosed (%.2f; %d could fall off record), %d of %d others (%.3f)",
			m, x.dxDrifting, x.drifting, share, x.offRecord, x.dxOther, x.other, other)
		// At most DiagnosedShare, and at least that share of those whose
		// whole lag window is on record (binomial, 5 SE).
		lo := cfg.DiagnosedShare * float64(x.drifting-x.offRecord) / float64(x.drifting)
		se := math.Sqrt(cfg.DiagnosedShare * (1 - cfg.DiagnosedShare) / float64(x.drifting))
		if share > cfg.DiagnosedShare+5*se || share < lo-5*se {
			t.Errorf("marker %d: %.3f of drifting workers diagnosed; want between %.3f and %.3f", m, share, lo, cfg.DiagnosedShare)
		}
		seO := math.Sqrt(cfg.OtherDiagnosedShare * (1 - cfg.OtherDiagnosedShare) / float64(x.other))
		if math.Abs(other-cfg.OtherDiagnosedShare) > 5*seO {
			t.Errorf("marker %d: %.4f of other workers diagnosed; want %.2f", m, other, cfg.OtherDiagnosedShare)
		}
	}
	// The exams do not depend on the outcome model.
	cfg2 := cfg
	cfg2.DiagnosedShare, cfg2.OtherDiagnosedShare = 0, 1
	s2, err := Generate(cfg2)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(s.WorkforceCSV(), s2.WorkforceCSV()) || !bytes.Equal(s.TruthCSV(), s2.TruthCSV()) {
		t.Error("changing the outcome model changed the exams or the truth")
	}
}
