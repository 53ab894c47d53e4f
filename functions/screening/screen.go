package screening

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sort"
	"sync"

	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/serial"
	"veer/internal/numeric"
)

// Serial is how a worker's correlated readings are handled.
type Serial string

// Serial handling.
const (
	// SerialDirect charts z itself; limits are calibrated on correlated
	// sequences from the fitted serial model.
	SerialDirect Serial = "direct"
	// SerialWhiten charts the Kalman innovations of z: each reading against
	// the worker's own predicted level (the default, see package monitor).
	// "on" and "" mean SerialWhiten too.
	SerialWhiten Serial = "whiten"
	// SerialOff ignores serial correlation: z is treated as independent.
	// Limits are then too tight for correlated markers; offered for
	// comparison and for markers whose reference shows no correlation.
	SerialOff Serial = "off"
)

// Settings choose the chart and how serial correlation is handled.
type Settings struct {
	Chart chart.Spec
	// Serial is SerialWhiten (also "" or "on"), SerialDirect or SerialOff.
	Serial Serial
	// Extrapolate is how many years beyond a group's reference age range
	// an exam may lie and still be screened against the curves' end values
	// (constant extrapolation; such a result has InRange false). 0 screens
	// only ages inside the range. An exam farther out is not screened: its
	// Skipped is a *refcurve.RangeError carrying the reach.
	// DefaultExtrapolation is the usual value when extrapolation is asked
	// for without a distance.
	Extrapolate float64
}

// DefaultExtrapolation is how many years beyond the reference ages an exam
// is screened when extrapolation is asked for without a distance: a few
// years, where the curves' end values are still a fair reference; ages 5
// or 120 against a reference of 25 to 65 are not.
const DefaultExtrapolation = 5.0

// MaxExtrapolation bounds Settings.Extrapolate.
const MaxExtrapolation = 100.0

// checkExtrapolate validates the reach.
func checkExtrapolate(years float64) error {
	if !(years >= 0 && years <= MaxExtrapolation) {
		return &chart.SettingError{Setting: "extrapolate", Value: fmt.Sprint(years),
			Want: fmt.Sprintf("a number of years from 0 (no extrapolation) to %g", MaxExtrapolation)}
	}
	return nil
}

// DefaultSettings are an upward CUSUM with allowance 0.5 on the Kalman
// innovations of z (serial whiten).
func DefaultSettings() Settings {
	return Settings{Chart: chart.DefaultSpec(), Serial: SerialWhiten}
}

// monitorSettings turns Settings into the monitor's settings for model m.
func (m *Model) monitorSettings(s Settings) (monitor.Settings, error) {
	out := monitor.Settings{Chart: s.Chart, Serial: m.Serial, Mode: monitor.Direct}
	switch s.Serial {
	case SerialDirect:
	case "", "on", SerialWhiten:
		out.Mode = monitor.Whiten
	case SerialOff:
		out.Serial = serial.Params{}
	default:
		return out, &chart.SettingError{Setting: "serial", Value: string(s.Serial),
			Want: fmt.Sprintf("%s, %s or %s (on means %s)", SerialWhiten, SerialDirect, SerialOff, SerialWhiten)}
	}
	if err := out.Validate(); err != nil {
		return out, err
	}
	return out, nil
}

// Exam is one row of a sheet to screen.
type Exam struct {
	Worker string
	Group  string
	// Time is the worker's age at the exam, in years.
	Time float64
	// Value is the marker's reading on the user's scale.
	Value float64
	// Covariates are the values of the reference's covariates besides age
	// (Reference().Covariates(), e.g. height), in that order; NaN or absent
	// for a blank one. Fitted curves have none.
	Covariates []float64
}

// Result is the screening of one exam.
type Result struct {
	// Mean and SD are the reference at the exam's age (Reference.MeanSD:
	// fitted curves on the model's transformed scale; a published
	// reference's median M and M·S); Z is the standardised reading and
	// Centile its centile in the reference (0–100).
	Mean, SD, Z, Centile float64
	// Innovation is the Kalman innovation of Z (equal to Z when the serial
	// model is off).
	Innovation float64
	// Up and Down are the chart statistics (the unused side is 0); Stat is
	// the one compared with the limit.
	Up, Down, Stat float64
	// Signal is true when Stat crossed the limit at this exam.
	Signal bool
	// Exam is the exam's number for its worker (1 = first by age) and
	// Exams how many exams the worker has in the sheet.
	Exam, Exams int
	// Gap is the years since the worker's previous exam (NaN on the first).
	Gap float64
	// FirstSignal is the age of the worker's first signal (NaN if none).
	FirstSignal float64
	// InRange says whether the age (and any covariate) is inside the
	// ranges the reference covers; a screened exam outside them was
	// extrapolated (see Extrapolated).
	InRange bool
	// Skipped, when not nil, says why the exam was not screened (see
	// Model.ScreenEach); every number above is then NaN or 0.
	Skipped error
}

// Extrapolated reports whether the exam was screened at an age outside the
// reference range, against the curves' end values.
func (r *Result) Extrapolated() bool { return r.Skipped == nil && !r.InRange }

// Screen screens a sheet of exams against limit h, all or nothing: when
// any exam cannot be screened (see ScreenEach) the error is an
// *ExamErrors naming every such exam with its reason, which errors.Is and
// errors.As see (a *refcurve.RangeError, *refcurve.DuplicateError, ...).
// Exams may come in any order; each worker's exams are ordered by age
// inside, and results come back in the input order.
func (m *Model) Screen(exams []Exam, set Settings, h float64) ([]Result, error) {
	res, err := m.ScreenEach(exams, set, h)
	if err != nil {
		return nil, err
	}
	errs := ExamErrors{Total: len(exams)}
	seen := map[error]bool{}
	for i := range res {
		if e := res[i].Skipped; e != nil && !seen[e] {
			seen[e] = true
			errs.add(i, e)
		}
	}
	if errs.Count > 0 {
		return nil, &errs
	}
	return res, nil
}

// ScreenEach screens every exam of a sheet that can be screened against
// limit h and sets the others aside, each with the reason in its
// Result.Skipped, so a few bad rows never stop the screening of a
// workforce. An exam is set aside for:
//
//   - a blank reading (a NaN value): ErrNoReading, a missing exam for
//     this marker rather than a fault;
//   - no worker id, or an age that is not a finite number: ErrNoWorker,
//     ErrNoAge;
//   - a group the model does not know, or none for a model with groups: a
//     *refcurve.GroupError;
//   - an age outside the reference range by more than Settings.Extrapolate
//     years: a *refcurve.RangeError;
//   - a reading the model's transform cannot take (not positive under
//     log): an error of kind transform.ErrDomain;
//   - another exam of the same worker at the same age: a
//     *refcurve.DuplicateError naming both (1-based positions in exams).
//     When both hold the same reading the later one alone is set aside
//     (Same is true); otherwise both are, since veer cannot tell which is
//     right.
//
// A worker's other exams are charted without the rows set aside. The
// error is for the call as a whole: settings, the limit, an empty sheet.
func (m *Model) ScreenEach(exams []Exam, set Settings, h float64) ([]Result, error) {
	ms, err := m.monitorSettings(set)
	if err != nil {
		return nil, err
	}
	if err := chart.ValidateLimit(h); err != nil {
		return nil, err
	}
	if err := checkExtrapolate(set.Extrapolate); err != nil {
		return nil, err
	}
	n := len(exams)
	if n == 0 {
		return nil, ErrNoExams
	}
	out := make([]Result, n)
	skip := func(i int, err error) {
		nan := math.NaN()
		out[i] = Result{Mean: nan, SD: nan, Z: nan, Centile: nan, Innovation: nan, Up: nan, Down: nan, Stat: nan,
			Gap: nan, FirstSignal: nan, Skipped: err}
	}
	groups := make([]string, n)
	times := make([]float64, n)
	values := make([]float64, n)
	for i, e := range exams {
		groups[i], times[i], values[i] = e.Group, e.Time, e.Value
		switch {
		case e.Worker == "":
			skip(i, ErrNoWorker)
		case !numeric.Finite(e.Time):
			skip(i, ErrNoAge)
		case math.IsNaN(e.Value):
			skip(i, ErrNoReading)
		}
	}
	ref := m.Reference()
	ncov := len(ref.Covariates())
	covOf := func(i int, buf []float64) []float64 {
		if ncov == 0 {
			return nil
		}
		buf = buf[:0]
		for c := range ncov {
			v := math.NaN()
			if c < len(exams[i].Covariates) {
				v = exams[i].Covariates[c]
			}
			buf = append(buf, v)
		}
		return buf
	}
	z := make([]float64, n)
	extrapolate := set.Extrapolate > 0
	var cov []float64
	if err := ref.ZMany(groups, times, values, covColumns(exams, ncov), extrapolate, z); err != nil {
		// The entries that failed are NaN; score each alone to learn why.
		for i := range z {
			if out[i].Skipped != nil || !math.IsNaN(z[i]) {
				continue
			}
			cov = covOf(i, cov)
			_, err := ref.Z(groups[i], times[i], cov, values[i], extrapolate)
			if err == nil {
				err = fmt.Errorf("the reading %g cannot be standardised", values[i])
			}
			skip(i, err)
		}
	}
	// Ages outside the range: within reach they are screened against the
	// curves' ends, farther out set aside.
	type span struct{ lo, hi float64 }
	spans := map[string]span{}
	var sp span
	last, haveLast := "", false
	for i := range out {
		if out[i].Skipped != nil {
			continue
		}
		if !haveLast || groups[i] != last {
			next, ok := spans[groups[i]]
			if !ok {
				lo, hi, err := ref.Range(groups[i])
				if err != nil {
					skip(i, err)
					continue
				}
				next = span{lo, hi}
				spans[groups[i]] = next
			}
			sp, last, haveLast = next, groups[i], true
		}
		if times[i] < sp.lo || times[i] > sp.hi {
			if err := refcurve.Outside(groups[i], times[i], sp.lo, sp.hi, set.Extrapolate); err != nil {
				skip(i, err)
			}
		}
	}
	workers := groupByWorker(exams, func(i int) bool { return out[i].Skipped == nil })
	for k, idx := range workers {
		workers[k] = setAsideRepeats(exams, idx, skip)
	}
	var first error
	var mu sync.Mutex
	var wg sync.WaitGroup
	next := make(chan []int, 64)
	nw := runtime.GOMAXPROCS(0)
	for w := 0; w < nw; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var tt, zz []float64
			var rows []monitor.Row
			for idx := range next {
				tt, zz = tt[:0], zz[:0]
				for _, i := range idx {
					tt = append(tt, times[i])
					zz = append(zz, z[i])
				}
				var err error
				rows, err = monitor.Run(ms, h, tt, zz, rows[:0])
				if err != nil {
					mu.Lock()
					if first == nil {
						first = &WorkerError{Worker: exams[idx[0]].Worker, Err: err}
					}
					mu.Unlock()
					continue
				}
				fs, ok := monitor.FirstSignal(rows)
				if !ok {
					fs = math.NaN()
				}
				for j, i := range idx {
					r := rows[j]
					res := &out[i]
					res.Z, res.Innovation = r.Z, r.Innovation
					res.Up, res.Down, res.Stat, res.Signal = r.Up, r.Down, r.Stat, r.Signal
					res.Exam, res.Exams = j+1, len(idx)
					res.Gap = math.NaN()
					if j > 0 {
						res.Gap = tt[j] - tt[j-1]
					}
					res.FirstSignal = fs
				}
			}
		}()
	}
	for _, idx := range workers {
		if len(idx) > 0 {
			next <- idx
		}
	}
	close(next)
	wg.Wait()
	if first != nil {
		return nil, first
	}
	std := distuv.UnitNormal
	for i := range out {
		if out[i].Skipped != nil {
			continue
		}
		cov = covOf(i, cov)
		mean, sd, err := ref.MeanSD(groups[i], times[i], cov, true)
		if err != nil {
			return nil, fmt.Errorf("row %d: %w", i+1, err)
		}
		out[i].InRange = ref.Within(groups[i], times[i], cov)
		out[i].Mean, out[i].SD = mean, sd
		out[i].Centile = 100 * std.CDF(out[i].Z)
	}
	return out, nil
}

// setAsideRepeats sets aside the exams of one worker (idx, sorted by age)
// that repeat an age: the later copies of a repeated reading, or every exam
// at an age with different readings. It returns the exams kept.
func setAsideRepeats(exams []Exam, idx []int, skip func(int, error)) []int {
	kept := idx[:0:0]
	for a := 0; a < len(idx); {
		b := a + 1
		for b < len(idx) && exams[idx[b]].Time == exams[idx[a]].Time {
			b++
		}
		if b == a+1 {
			kept = append(kept, idx[a])
			a = b
			continue
		}
		run := slices.Clone(idx[a:b])
		slices.Sort(run) // sheet order
		same := true
		for _, i := range run[1:] {
			if exams[i].Value != exams[run[0]].Value {
				same = false
			}
		}
		e0 := exams[run[0]]
		if same {
			kept = append(kept, run[0])
			for _, i := range run[1:] {
				skip(i, &refcurve.DuplicateError{Worker: e0.Worker, Time: e0.Time, Rows: [2]int{run[0] + 1, i + 1}, Same: true})
			}
		} else {
			first := &refcurve.DuplicateError{Worker: e0.Worker, Time: e0.Time, Rows: [2]int{run[0] + 1, run[1] + 1}}
			skip(run[0], first)
			for k, i := range run[1:] {
				if k == 0 {
					skip(i, first)
					continue
				}
				skip(i, &refcurve.DuplicateError{Worker: e0.Worker, Time: e0.Time, Rows: [2]int{run[0] + 1, i + 1}})
			}
		}
		a = b
	}
	return kept
}

// groupByWorker returns, per worker in order of first appearance, the row
// indices of its exams sorted by age, counting only the exams use keeps.
func groupByWorker(exams []Exam, use func(int) bool) [][]int {
	pos := make(map[string]int, len(exams)/4+1)
	var workers [][]int
	for i, e := range exams {
		if !use(i) {
			continue
		}
		k, ok := pos[e.Worker]
		if !ok {
			k = len(workers)
			pos[e.Worker] = k
			workers = append(workers, nil)
		}
		workers[k] = append(workers[k], i)
	}
	for _, idx := range workers {
		if !sort.SliceIsSorted(idx, func(a, b int) bool { return exams[idx[a]].Time < exams[idx[b]].Time }) {
			sort.SliceStable(idx, func(a, b int) bool { return exams[idx[a]].Time < exams[idx[b]].Time })
		}
	}
	return workers
}

// LimitOptions choose how a limit or a delay is computed.
type LimitOptions struct {
	// Method is monitor.Normal (default) or monitor.Bootstrap.
	Method monitor.Method
	// Gap, if positive, is the planned years between exams; otherwise gaps
	// are resampled from the reference workers' own gaps.
	Gap float64
	// Seed and Paths steer Monte Carlo methods (0: defaults).
	Seed  uint64
	Paths int
	// Progress, if not nil, reports Monte Carlo progress; Stop, if not
	// nil, is asked during Monte Carlo work and cancels it when true.
	Progress func(done, total int)
	Stop     func() bool
	// Horizon is what the target counts (see monitor.Calibration.Horizon):
	// "" or monitor.HorizonFollowUp, the default, means worker-years of
	// exams per false signal across workers followed as long as the
	// reference workers were; monitor.HorizonLong is the textbook average
	// time to a false signal of one worker with an unending exam history.
	// A model with no exam histories (a published reference with the
	// serial model set by hand and no exams) defaults to HorizonLong.
	Horizon monitor.Horizon
}

// DefaultSeed is the seed of Monte Carlo limits when none is given, so the
// same inputs always give the same limit.
const DefaultSeed = 20261202

// Calibration returns the monitor calibration for settings and options.
func (m *Model) Calibration(set Settings, o LimitOptions) (monitor.Calibration, error) {
	ms, err := m.monitorSettings(set)
	if err != nil {
		return monitor.Calibration{}, err
	}
	if o.Method == "" {
		o.Method = monitor.Normal
	}
	if o.Seed == 0 {
		o.Seed = DefaultSeed
	}
	if o.Horizon == "" {
		o.Horizon = monitor.HorizonFollowUp
		if len(m.Sample) == 0 {
			// A model on a published reference with a serial model set by
			// hand has no exam histories to follow.
			o.Horizon = monitor.HorizonLong
		}
	}
	if len(m.Sample) == 0 && o.Horizon == monitor.HorizonFollowUp {
		return monitor.Calibration{}, errors.New("this model holds no workers' exam histories (its serial model was set by hand), so the target cannot count worker-years over real follow-ups: use the long horizon with the planned gap between exams")
	}
	ref := make([]serial.Series, len(m.Sample))
	for i, s := range m.Sample {
		ref[i] = serial.Series{Time: s.Time, Z: s.Z}
	}
	return monitor.Calibration{
		Settings: ms, Method: o.Method, Gap: o.Gap, Reference: ref,
		Seed: o.Seed, Paths: o.Paths, Progress: o.Progress, Stop: o.Stop, Horizon: o.Horizon,
	}, nil
}

// Limit returns the control limit whose average time to a false signal for
// a healthy worker is target years.
func (m *Model) Limit(set Settings, o LimitOptions, target float64) (monitor.LimitResult, error) {
	c, err := m.Calibration(set, o)
	if err != nil {
		return monitor.LimitResult{}, err
	}
	return monitor.Limit(c, target)
}

// Delay returns the expected years from the start of a sustained shift of
// shift reference SDs in the readings to a signal at limit h, for a shift
// starting onset years after the first exam.
func (m *Model) Delay(set Settings, o LimitOptions, h, shift, onset float64) (monitor.DelayResult, error) {
	c, err := m.Calibration(set, o)
	if err != nil {
		return monitor.DelayResult{}, err
	}
	return monitor.Delay(c, h, shift, onset)
}
