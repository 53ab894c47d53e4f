package joint

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"strings"
	"testing"

	"veer/functions/chart"
	"veer/functions/monitor"
)

// The charts compared: every kind at its default setting (lambda 0.1,
// allowance 0.5, as for one marker), then the directed CUSUM and the
// single-marker CUSUMs with allowance 0.3 (nearer half the size of a
// modest drift once whitened). Only the first five enter the choice of the
// default.
var evidenceCharts = []struct {
	name string
	spec Spec
}{
	{"cusum", Spec{Kind: CUSUM, Allowance: 0.5}},
	{"ewma", Spec{Kind: EWMA, Lambda: 0.1, Unit: 1}},
	{"mewma", Spec{Kind: MEWMA, Lambda: 0.1, Unit: 1}},
	{"mcusum", Spec{Kind: MCUSUM, Allowance: 0.5}},
	{"any", Spec{Kind: Any, Allowance: 0.5}},
	{"cusum k0.3", Spec{Kind: CUSUM, Allowance: 0.3}},
	{"any k0.3", Spec{Kind: Any, Allowance: 0.3}},
}

const defaultCharts = 5

var evidenceSides = []chart.Side{chart.Up, chart.Up, chart.Down}

func evidenceSpec(s Spec) Spec {
	if sided(s.Kind) {
		s.Sides = evidenceSides
	}
	return s
}

// TestChartEvidence is the comparison behind DefaultKind, quoted in doc.go.
// World: testModel (sbp, chol, fev1 with persistent personal levels;
// innovation correlations sbp-chol 0.4, sbp-fev1 -0.25, chol-fev1 -0.2),
// harmful directions up, up, down, gaps uniform on 0.5-3 years, mode
// whiten, method normal, long horizon, 4000 paths with common random
// numbers. Expected years from the onset of a sustained shift, 10 years
// after the start of monitoring, to the signal, at the same ATS0.
// Screening looks for harmful drifts: the default's mean delay over the
// harmful scenarios must be within 3% of the best kind's (Monte Carlo
// error is 2-3%), and the directed CUSUM must beat the single-marker
// CUSUMs combined by "any of them" on the joint drift of 0.5 SD in the two
// correlated markers at either allowance.
func TestChartEvidence(t *testing.T) {
	model := testModel()
	pool := make([]float64, 4000)
	rng := rand.New(rand.NewPCG(5, 5))
	for i := range pool {
		pool[i] = uniformGap(rng)
	}
	scenarios := []struct {
		name    string
		shift   []float64
		harmful bool
	}{
		{"sbp+chol 0.5", []float64{0.5, 0.5, 0}, true},
		{"all three 0.5", []float64{0.5, 0.5, -0.5}, true},
		{"sbp 1", []float64{1, 0, 0}, true},
		{"fev1 1", []float64{0, 0, -1}, true},
		{"sbp 1, chol -1", []float64{1, -1, 0}, false},
	}
	targets := []float64{20, 50}
	if testing.Short() {
		targets = targets[:1]
	}
	var header strings.Builder
	for _, sc := range scenarios {
		fmt.Fprintf(&header, " %14s", sc.name)
	}
	for _, target := range targets {
		t.Logf("ATS0 %v years; chart, limit; years from onset to signal (SE):%s; mean over harmful", target, header.String())
		mean := map[string]float64{}
		first := map[string]float64{}
		for _, ec := range evidenceCharts {
			c := Calibration{Settings: Settings{Chart: evidenceSpec(ec.spec), Mode: monitor.Whiten, Model: model}, Method: monitor.Normal, Gaps: pool, Seed: 1, Horizon: monitor.HorizonLong}
			lr, err := Limit(c, target)
			if err != nil {
				t.Fatal(err)
			}
			c.Seed = 2
			line := fmt.Sprintf("%-10s %7.3f ", ec.name, lr.H)
			var sum float64
			n := 0
			for i, sc := range scenarios {
				r, err := Delay(c, lr.H, sc.shift, 10)
				if err != nil {
					t.Fatal(err)
				}
				line += fmt.Sprintf(" %7.2f (%4.2f)", r.Years, r.SE)
				if sc.harmful {
					sum += r.Years
					n++
				}
				if i == 0 {
					first[ec.name] = r.Years
				}
			}
			mean[ec.name] = sum / float64(n)
			t.Logf("%s; %6.2f", line, mean[ec.name])
		}
		best := math.Inf(1)
		for _, ec := range evidenceCharts[:defaultCharts] {
			best = math.Min(best, mean[ec.name])
		}
		if mean[string(DefaultKind)] > 1.03*best {
			t.Errorf("ATS0 %v: the default %s's mean delay over harmful drifts %.2f is more than 3%% above the best, %.2f", target, DefaultKind, mean[string(DefaultKind)], best)
		}
		for _, pair := range [][2]string{{"cusum", "any"}, {"cusum k0.3", "any k0.3"}} {
			if !(first[pair[0]] < first[pair[1]]) {
				t.Errorf("ATS0 %v, joint drift: %s %.2f years, single-marker charts combined (%s) %.2f", target, pair[0], first[pair[0]], pair[1], first[pair[1]])
			}
		}
	}
}

// cohortOutcome is the result of charting a labelled cohort.
type cohortOutcome struct {
	h, falseRate    float64 // limit, worker-years per false signal
	caught          float64 // share of drifting workers signalled after onset
	median, restrMn float64 // median delay of the caught; mean of min(delay, follow-up after onset)
	km              float64 // Kaplan-Meier median delay, uncaught workers censored at their follow-up
}

// TestJointDriftCohort: at the same realised false-signal rate on healthy
// workers, the default chart catches at least as many workers drifting
// 0.5 SD in the two correlated markers (sbp and chol), and sooner, than the
// single-marker charts combined by "any of them signals" (at allowance 0.5,
// and again both at 0.3), and more and sooner than the other kinds.
// "Sooner" is judged over every drifting worker, not only those caught: by
// the Kaplan-Meier median and the restricted mean of the years from onset
// to signal, an uncaught worker counting with its follow-up after onset
// (the median over caught workers alone favours a chart that catches only
// the easy ones; it is reported too). Healthy and
// drifting workers have 10 exams at gaps of 0.5-3 years; the drift starts
// after the fourth exam; each chart's limit is set on the healthy cohort
// itself so that both realise exactly 20 worker-years per false signal.
// Figures are quoted in doc.go.
func TestJointDriftCohort(t *testing.T) {
	model := testModel()
	nh, nd := 12000, 4000
	if testing.Short() {
		nh, nd = 4000, 1500
	}
	healthy := simulateCohort(model, nh, 10, 21, nil)
	drifting := simulateCohort(model, nd, 10, 22, nil)
	onset := make([]float64, nd)
	for i, w := range drifting {
		onset[i] = w.Time[4]
		for j := 4; j < len(w.Time); j++ {
			w.Z[0][j] += 0.5
			w.Z[1][j] += 0.5
		}
	}
	const target = 20.0
	out := map[string]cohortOutcome{}
	for _, ec := range evidenceCharts {
		set := Settings{Chart: evidenceSpec(ec.spec), Mode: monitor.Whiten, Model: model}
		hs := statsOf(t, set, healthy)
		ds := statsOf(t, set, drifting)
		// Bisection on h for 20 worker-years per false signal.
		lo, hi := 0.0, 1000.0
		for range 60 {
			mid := (lo + hi) / 2
			if rate(healthy, hs, mid) < target {
				lo = mid
			} else {
				hi = mid
			}
		}
		h := hi
		o := cohortOutcome{h: h, falseRate: rate(healthy, hs, h)}
		var delays, restr []float64
		for i, w := range drifting {
			d := math.NaN()
			early := false
			for j, s := range ds[i] {
				if s > h {
					if w.Time[j] < onset[i] {
						early = true
					} else {
						d = w.Time[j] - onset[i]
					}
					break
				}
			}
			if early {
				continue
			}
			if !math.IsNaN(d) {
				delays = append(delays, d)
				restr = append(restr, d)
			} else {
				restr = append(restr, w.Time[len(w.Time)-1]-onset[i])
			}
		}
		o.caught = float64(len(delays)) / float64(len(restr))
		o.km = kmMedian(delays, restr)
		sort.Float64s(delays)
		o.median = delays[len(delays)/2]
		o.restrMn = meanOf(restr)
		out[ec.name] = o
		t.Logf("%-10s limit %7.3f: %.2f worker-years per false signal; caught %.1f%% of the drifting workers; years from onset to signal: Kaplan-Meier median %.2f, restricted mean %.2f, median of the caught %.2f",
			ec.name, o.h, o.falseRate, 100*o.caught, o.km, o.restrMn, o.median)
	}
	for _, pair := range [][2]string{{"cusum", "any"}, {"cusum k0.3", "any k0.3"}} {
		d, a := out[pair[0]], out[pair[1]]
		if !(d.caught >= a.caught) || !(d.restrMn < a.restrMn) || !(d.km < a.km) {
			t.Errorf("%s caught %.3f (restricted mean delay %.2f, Kaplan-Meier median %.2f); %s caught %.3f (%.2f, %.2f)",
				pair[0], d.caught, d.restrMn, d.km, pair[1], a.caught, a.restrMn, a.km)
		}
	}
	for _, ec := range evidenceCharts[:defaultCharts] {
		if o := out[ec.name]; ec.spec.Kind != DefaultKind && (o.caught > out[string(DefaultKind)].caught || o.km < out[string(DefaultKind)].km) {
			t.Errorf("%s catches more drifting workers or sooner than the default %s: %+v against %+v", ec.name, DefaultKind, o, out[string(DefaultKind)])
		}
	}
}

// statsOf returns each worker's chart statistic at every exam.
func statsOf(t *testing.T, set Settings, ws []Series) [][]float64 {
	t.Helper()
	out := make([][]float64, len(ws))
	for i, w := range ws {
		rows, err := Run(set, 1e9, w)
		if err != nil {
			t.Fatal(err)
		}
		out[i] = make([]float64, len(rows))
		for j, r := range rows {
			out[i][j] = r.Stat
		}
	}
	return out
}

// rate returns worker-years per false signal at limit h.
func rate(ws []Series, st [][]float64, h float64) float64 {
	var years float64
	n := 0
	for i, w := range ws {
		end := w.Time[len(w.Time)-1]
		for j, s := range st[i] {
			if s > h {
				end = w.Time[j]
				n++
				break
			}
		}
		years += end - w.Time[0]
	}
	if n == 0 {
		return math.Inf(1)
	}
	return years / float64(n)
}

// kmMedian is the Kaplan-Meier median of the years from onset to signal
// (delays: the caught workers'; all: every worker's delay or, uncaught,
// follow-up after onset, which is censored), +Inf when not reached.
func kmMedian(delays, all []float64) float64 {
	type ev struct {
		t   float64
		det bool
	}
	left := map[float64]int{}
	for _, d := range delays {
		left[d]++
	}
	evs := make([]ev, len(all))
	for i, a := range all {
		evs[i] = ev{a, left[a] > 0}
		if left[a] > 0 {
			left[a]--
		}
	}
	sort.SliceStable(evs, func(i, j int) bool { return evs[i].t < evs[j].t || (evs[i].t == evs[j].t && evs[i].det && !evs[j].det) })
	s := 1.0
	for i, e := range evs {
		if e.det {
			s *= 1 - 1/float64(len(evs)-i)
			if s <= 0.5 {
				return e.t
			}
		}
	}
	return math.Inf(1)
}
