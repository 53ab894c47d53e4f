package screening

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sort"
	"sync"

	"gonum.org/v1/gonum/stat/distuv"
	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/serial"
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
	// Extrapolate allows exams at ages outside the reference range; the
	// curves are then held at their ends (see refcurve). Without it such an
	// exam is an error naming the row.
	Extrapolate bool
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
	// ranges the reference covers.
	InRange bool
}

// Screen screens a sheet of exams against limit h. Exams may come in any
// order; each worker's exams are ordered by age inside, and results come
// back in the input order. Two exams of one worker at the same age are a
// *refcurve.DuplicateError naming both rows (positions in exams, counted
// from 1); an age outside the reference range without extrapolation makes
// the *refcurve.ScoreErrors of Model.Curves.ZMany.
func (m *Model) Screen(exams []Exam, set Settings, h float64) ([]Result, error) {
	ms, err := m.monitorSettings(set)
	if err != nil {
		return nil, err
	}
	if err := chart.ValidateLimit(h); err != nil {
		return nil, err
	}
	n := len(exams)
	if n == 0 {
		return nil, ErrNoExams
	}
	times := make([]float64, n)
	for i, e := range exams {
		times[i] = e.Time
	}
	out := make([]Result, n)
	z, err := m.scoreAll(exams, set.Extrapolate)
	if err != nil {
		return nil, err
	}
	workers := groupByWorker(exams)
	if err := checkDuplicates(exams, workers); err != nil {
		return nil, err
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
		next <- idx
	}
	close(next)
	wg.Wait()
	if first != nil {
		return nil, first
	}
	std := distuv.UnitNormal
	ref := m.Reference()
	var cov []float64
	if k := len(ref.Covariates()); k > 0 {
		cov = make([]float64, k)
	}
	for i, e := range exams {
		for c := range cov {
			cov[c] = math.NaN()
			if c < len(e.Covariates) {
				cov[c] = e.Covariates[c]
			}
		}
		mean, sd, err := ref.MeanSD(e.Group, e.Time, cov, true)
		if err != nil {
			return nil, fmt.Errorf("row %d: %w", i+1, err)
		}
		out[i].InRange = ref.Within(e.Group, e.Time, cov)
		out[i].Mean, out[i].SD = mean, sd
		out[i].Centile = 100 * std.CDF(out[i].Z)
	}
	return out, nil
}

// groupByWorker returns, per worker in order of first appearance, the row
// indices of its exams sorted by age.
func groupByWorker(exams []Exam) [][]int {
	pos := make(map[string]int, len(exams)/4+1)
	var workers [][]int
	for i, e := range exams {
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
