package limit

import (
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"sort"
	"sync"
	"sync/atomic"

	"veer/functions/chart"
)

// Stream is one simulated worker history: each call to Next returns the gap
// in years since the previous exam (for the first exam, since the start of
// monitoring) and the value to chart. A negative gap marks the first exam of
// a new worker in a chain of workers: the chart starts afresh there and no
// time passes (the time counted is then worker-years of exams).
type Stream interface {
	Next() (gap, u float64)
}

// StreamFunc returns the stream of one Monte Carlo path drawing all its
// randomness from rng. It is called once per path, possibly from several
// goroutines at once, so it must not share mutable state between paths.
type StreamFunc func(rng *rand.Rand) Stream

// StatStream is one simulated history of a chart that computes its own
// statistic (for example a chart over several markers at once): each call
// to Next returns the gap in years since the previous exam and the chart's
// critical limit after that exam — the chart signals there for every limit
// below it (the statistic itself when there is no head start; see
// chart.Tracker). A negative gap marks the first exam of a new worker in a
// chain of workers: the stream has restarted its chart there, and no time
// passes.
type StatStream interface {
	Next() (gap, g float64)
}

// StatStreamFunc returns the statistic stream of one Monte Carlo path, with
// the same contract as StreamFunc.
type StatStreamFunc func(rng *rand.Rand) StatStream

// tracked charts a Stream of values with a chart.Tracker.
type tracked struct {
	tr *chart.Tracker
	s  Stream
}

func (t *tracked) Next() (float64, float64) {
	gap, u := t.s.Next()
	if gap < 0 {
		t.tr.Reset()
		return gap, t.tr.Next(0, u)
	}
	return gap, t.tr.Next(gap, u)
}

// trackedStreams turns a stream of values into a stream of the critical
// limits of spec (already validated).
func trackedStreams(spec chart.Spec, ns StreamFunc) StatStreamFunc {
	return func(rng *rand.Rand) StatStream {
		tr, err := chart.NewTracker(spec)
		if err != nil {
			panic("limit: " + err.Error()) // spec was validated by the caller
		}
		return &tracked{tr, ns(rng)}
	}
}

// MonteCarlo configures the simulation of times to signal. Path i draws from
// its own PCG source seeded (Seed, i), so results do not depend on the
// number of goroutines and the same inputs always give the same answer
// (common random numbers across limits).
type MonteCarlo struct {
	// Paths is the number of simulated paths (default 4000: the time to
	// signal is roughly exponential, so the relative standard error of the
	// average time is about 1/sqrt(Paths), 1.6%).
	Paths int
	// Seed selects the random numbers.
	Seed uint64
	// Workers is the number of goroutines (default GOMAXPROCS).
	Workers int
	// CapFactor truncates each path at CapFactor times the target (Calibrate)
	// or at CapExams exams (ATS, Delay); default 20. For a roughly exponential
	// time to signal the truncation bias is about exp(-CapFactor) relative.
	CapFactor float64
	// CapExams bounds the exams per path (default 200000); a path that
	// reaches it is censored.
	CapExams int
	// MaxExams, if positive, bounds the exams simulated by all paths of all
	// passes together; a simulation that reaches it ends with a *WorkError
	// (ErrTooMuchWork). Callers estimate the work first and refuse what
	// would not fit; this is the hard stop.
	MaxExams int64
	// Progress, if not nil, is called with the number of finished paths and
	// the total of the current pass (a calibration makes a pilot pass and one
	// or more main passes). Calls may come from any goroutine but never
	// concurrently, and within a pass done increases.
	Progress func(done, total int)
	// Stop, if not nil, is asked before each path and every stopEvery exams
	// within one; when it answers true the simulation ends early with
	// ErrStopped (a cancelled computation).
	Stop func() bool
}

// stopEvery is how many exams a path simulates between two asks of
// MonteCarlo.Stop, so that a long path stops promptly too.
const stopEvery = 1024

// budget counts the exams a simulation has stepped through against
// MaxExams.
type budget struct {
	max  int64
	used atomic.Int64
}

// spend adds n exams and reports whether the budget still holds.
func (b *budget) spend(n int) bool {
	if b == nil || b.max <= 0 {
		return true
	}
	return b.used.Add(int64(n)) <= b.max
}

func (mc MonteCarlo) newBudget() *budget { return &budget{max: mc.MaxExams} }

func (mc MonteCarlo) withDefaults() MonteCarlo {
	if mc.Paths <= 0 {
		mc.Paths = 4000
	}
	if mc.Workers <= 0 {
		mc.Workers = runtime.GOMAXPROCS(0)
	}
	if mc.CapFactor <= 0 {
		mc.CapFactor = 20
	}
	if mc.CapExams <= 0 {
		mc.CapExams = 200000
	}
	return mc
}

// Calibration is the result of a Monte Carlo limit search.
type Calibration struct {
	// H is the limit whose simulated ATS equals the target.
	H float64
	// ATS is the simulated average time to signal at H (years) and SE its
	// Monte Carlo standard error (sd of the path times / sqrt(Paths)).
	ATS, SE float64
	// SEH is the standard error carried over to the limit, SE divided by the
	// slope of ATS(h) at H (delta method).
	SEH float64
	// Paths simulated; Censored of them reached the cap without signalling
	// at H (they count with their truncated time).
	Paths, Censored int
}

// record is a new running maximum of the critical limit g at a time.
type record struct{ g, t float64 }

type path struct {
	rec []record
	end float64 // time at which simulation of the path stopped
}

// first returns the time of the first signal for limit h and whether the
// path was censored.
func (p *path) first(h float64) (float64, bool) {
	i := sort.Search(len(p.rec), func(i int) bool { return p.rec[i].g > h })
	if i == len(p.rec) {
		return p.end, true
	}
	return p.rec[i].t, false
}

// simulate runs paths [0,n) until the critical limit exceeds hMax, the time
// exceeds capTime or the path has CapExams exams, recording the running
// maxima of g (the running-maximum construction: the first-passage time
// T(h) of a path is non-decreasing in h, so ATS(h) = mean T(h) is monotone
// and can be searched exactly).
func (mc MonteCarlo) simulate(ns StatStreamFunc, n int, hMax, capTime float64, out []path, work *budget) error {
	var (
		next     atomic.Int64
		done     atomic.Int64
		mu       sync.Mutex
		wg       sync.WaitGroup
		firstErr error
		failed   atomic.Bool
		reported int64
	)
	fail := func(err error) {
		mu.Lock()
		if firstErr == nil {
			firstErr = err
		}
		mu.Unlock()
		failed.Store(true)
	}
	step := max(1, n/100)
	for range min(mc.Workers, n) {
		wg.Go(func() {
			for {
				i := int(next.Add(1) - 1)
				if i >= n || failed.Load() {
					return
				}
				if mc.Stop != nil && mc.Stop() {
					fail(ErrStopped)
					return
				}
				rng := rand.New(rand.NewPCG(mc.Seed, uint64(i)))
				s := ns(rng)
				p := &out[i]
				p.rec = p.rec[:0]
				best, t := math.Inf(-1), 0.0
				k := 0
				for ; k < mc.CapExams; k++ {
					if k%stopEvery == stopEvery-1 && mc.Stop != nil && mc.Stop() {
						fail(ErrStopped)
						return
					}
					gap, g := s.Next()
					gap = max(gap, 0)
					t += gap
					if t > capTime {
						t -= gap
						break
					}
					if g > best {
						best = g
						p.rec = append(p.rec, record{g, t})
						if g > hMax {
							break
						}
					}
				}
				p.end = t
				if !work.spend(min(k+1, mc.CapExams)) {
					fail(&WorkError{Max: work.max})
					return
				}
				if d := done.Add(1); mc.Progress != nil && (d%int64(step) == 0 || d == int64(n)) {
					mu.Lock()
					if d > reported {
						reported = d
						mc.Progress(int(d), n)
					}
					mu.Unlock()
				}
			}
		})
	}
	wg.Wait()
	return firstErr
}

// atsAt returns the mean and standard error of T(h) over paths, and the
// number censored.
func atsAt(ps []path, h float64) (mean, se float64, censored int) {
	var s, s2 float64
	for i := range ps {
		t, c := ps[i].first(h)
		if c {
			censored++
		}
		s += t
		s2 += t * t
	}
	n := float64(len(ps))
	mean = s / n
	v := (s2 - n*mean*mean) / math.Max(n-1, 1)
	return mean, math.Sqrt(math.Max(v, 0) / n), censored
}

// invert returns the smallest record value v with ATS(v) >= target among
// the paths' breakpoints, linearly interpolated from the previous breakpoint,
// and false if even the largest breakpoint up to hMax falls short.
func invert(ps []path, target, hMax float64) (float64, bool) {
	var gs []float64
	for i := range ps {
		for _, r := range ps[i].rec {
			if r.g <= hMax {
				gs = append(gs, r.g)
			}
		}
	}
	if len(gs) == 0 {
		return 0, false
	}
	sort.Float64s(gs)
	ats := func(h float64) float64 { m, _, _ := atsAt(ps, h); return m }
	j := sort.Search(len(gs), func(j int) bool { return ats(gs[j]) >= target })
	if j == len(gs) {
		return 0, false
	}
	if j == 0 {
		return gs[0], true
	}
	lo, hi := gs[j-1], gs[j]
	alo, ahi := ats(lo), ats(hi)
	if ahi <= alo {
		return hi, true
	}
	return lo + (hi-lo)*(target-alo)/(ahi-alo), true
}

// Calibrate finds the limit h at which the average time to the first signal
// of spec over the simulated streams equals target years. hint is a
// starting guess for h (e.g. the exact limit for i.i.d. values; 0 if none).
//
// The paths are simulated once per pass with common random numbers; for each
// path the times where the running maximum of the critical limit (see
// chart.Tracker) increases are recorded, so T(h) is known for every h up to
// the pass's ceiling and ATS(h) is searched exactly. A pilot pass of
// min(Paths, 400) paths truncated at 4*target sets the ceiling; if the main
// pass falls short of the target at the ceiling it is raised by 20% and the
// pass repeated. Head start is honoured (through the critical limits);
// restarts do not affect the first signal.
func (mc MonteCarlo) Calibrate(spec chart.Spec, target float64, ns StreamFunc, hint float64) (Calibration, error) {
	if err := spec.Validate(); err != nil {
		return Calibration{}, err
	}
	return mc.CalibrateStat(target, trackedStreams(spec, ns), hint)
}

// CalibrateStat is Calibrate for streams that compute their chart's
// critical limit themselves (StatStream), e.g. charts over several markers.
func (mc MonteCarlo) CalibrateStat(target float64, ns StatStreamFunc, hint float64) (Calibration, error) {
	mc = mc.withDefaults()
	if !(target > 0) || math.IsInf(target, 1) {
		return Calibration{}, &chart.SettingError{Setting: "target", Value: target, Want: "a positive number of years"}
	}
	pilotN := min(mc.Paths, 400)
	ps := make([]path, mc.Paths)
	work := mc.newBudget()
	if err := mc.simulate(ns, pilotN, math.Inf(1), 4*target, ps[:pilotN], work); err != nil {
		return Calibration{}, err
	}
	hMax, ok := invert(ps[:pilotN], 1.4*target, math.Inf(1))
	if !ok {
		hMax, ok = invert(ps[:pilotN], target, math.Inf(1))
		if !ok {
			return Calibration{}, reachErrorf(ErrTargetTooLong, "the simulated paths never run long enough without a signal to reach the target; the target is too long for this chart and data")
		}
		hMax *= 1.2
	}
	hMax = math.Max(hMax, hint)
	capTime := mc.CapFactor * target
	for range 12 {
		if err := mc.simulate(ns, mc.Paths, hMax, capTime, ps, work); err != nil {
			return Calibration{}, err
		}
		h, ok := invert(ps, target, hMax)
		if !ok {
			hMax *= 1.2
			continue
		}
		if !(h > 0) {
			return Calibration{}, reachErrorf(ErrTargetTooShort, "a target of %.4g years is shorter than this chart can give on these data even at the smallest positive limit", target)
		}
		m, se, cens := atsAt(ps, h)
		c := Calibration{H: h, ATS: m, SE: se, Paths: mc.Paths, Censored: cens}
		// Slope of ATS(h) over a window of +-3% of h for the delta method.
		d := 0.03 * h
		a, _, _ := atsAt(ps, math.Max(0, h-d))
		b, _, _ := atsAt(ps, math.Min(hMax, h+d))
		if slope := (b - a) / (math.Min(hMax, h+d) - math.Max(0, h-d)); slope > 0 {
			c.SEH = se / slope
		} else {
			c.SEH = math.NaN()
		}
		return c, nil
	}
	return Calibration{}, reachErrorf(ErrTargetTooLong, "could not bracket the limit for this target; the target may be too long for this chart and data")
}

// RunLength is a Monte Carlo average time to signal.
type RunLength struct {
	// Mean time in years from onset to the first signal, and its Monte Carlo
	// standard error.
	Mean, SE float64
	// Paths used; Early of them signalled before the onset and were left out
	// (the delay is conditional on no earlier signal); Censored reached the
	// cap without signalling and count with their truncated time.
	Paths, Early, Censored int
}

// Delay simulates the time from onset (years after the start of the
// stream) to the first signal of spec with limit h. With onset 0 it is the
// average time to signal from the start (ATS). Paths that signal before the
// onset are left out, giving the conditional delay (common practice for
// steady-state comparisons). Each path is truncated at CapExams exams.
func (mc MonteCarlo) Delay(spec chart.Spec, h float64, ns StreamFunc, onset float64) (RunLength, error) {
	if err := spec.Validate(); err != nil {
		return RunLength{}, err
	}
	return mc.DelayStat(h, trackedStreams(spec, ns), onset)
}

// DelayStat is Delay for streams that compute their chart's critical limit
// themselves (StatStream).
func (mc MonteCarlo) DelayStat(h float64, ns StatStreamFunc, onset float64) (RunLength, error) {
	mc = mc.withDefaults()
	if err := chart.ValidateLimit(h); err != nil {
		return RunLength{}, err
	}
	if !(onset >= 0) || math.IsInf(onset, 1) {
		return RunLength{}, &chart.SettingError{Setting: "onset", Value: onset, Want: "0 or a positive number of years"}
	}
	times := make([]float64, mc.Paths)
	flags := make([]int8, mc.Paths) // 0 ok, 1 early, 2 censored
	var (
		next, done atomic.Int64
		stopped    atomic.Bool
		overspent  atomic.Bool
		mu         sync.Mutex
		wg         sync.WaitGroup
		reported   int64
	)
	work := mc.newBudget()
	step := max(1, mc.Paths/100)
	for range min(mc.Workers, mc.Paths) {
		wg.Go(func() {
			for {
				i := int(next.Add(1) - 1)
				if i >= mc.Paths || stopped.Load() || overspent.Load() {
					return
				}
				if mc.Stop != nil && mc.Stop() {
					stopped.Store(true)
					return
				}
				rng := rand.New(rand.NewPCG(mc.Seed, uint64(i)))
				s := ns(rng)
				t := 0.0
				flags[i] = 2
				k := 0
				for ; k < mc.CapExams; k++ {
					if k%stopEvery == stopEvery-1 && mc.Stop != nil && mc.Stop() {
						stopped.Store(true)
						return
					}
					gap, g := s.Next()
					t += max(gap, 0)
					if g > h {
						flags[i] = 0
						if t < onset {
							flags[i] = 1
						}
						break
					}
				}
				times[i] = t - onset
				if !work.spend(min(k+1, mc.CapExams)) {
					overspent.Store(true)
					return
				}
				if d := done.Add(1); mc.Progress != nil && (d%int64(step) == 0 || d == int64(mc.Paths)) {
					mu.Lock()
					if d > reported {
						reported = d
						mc.Progress(int(d), mc.Paths)
					}
					mu.Unlock()
				}
			}
		})
	}
	wg.Wait()
	if stopped.Load() {
		return RunLength{}, ErrStopped
	}
	if overspent.Load() {
		return RunLength{}, &WorkError{Max: work.max}
	}
	var r RunLength
	var s, s2 float64
	n := 0
	for i, t := range times {
		switch flags[i] {
		case 1:
			r.Early++
			continue
		case 2:
			r.Censored++
		}
		n++
		s += t
		s2 += t * t
	}
	r.Paths = mc.Paths
	if n == 0 {
		return r, errors.New("every simulated path signalled before the onset; choose an earlier onset or a higher limit")
	}
	r.Mean = s / float64(n)
	v := (s2 - float64(n)*r.Mean*r.Mean) / math.Max(float64(n-1), 1)
	r.SE = math.Sqrt(math.Max(v, 0) / float64(n))
	return r, nil
}
