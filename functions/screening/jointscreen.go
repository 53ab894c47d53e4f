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
	"veer/functions/joint"
	"veer/functions/monitor"
	"veer/functions/refcurve"
	"veer/functions/serial"
)

// JointSettings choose the chart over several markers and how serial
// correlation is handled (as in Settings).
type JointSettings struct {
	Chart  joint.Spec
	Serial Serial
	// Extrapolate is how many years beyond a marker's reference age range
	// an exam may lie and be scored against the curves' end values (as in
	// Settings); farther out it is a *refcurve.RangeError.
	Extrapolate float64
}

// DefaultJointSettings are the default chart of package joint over p
// markers (every side up) on the markers' Kalman innovations.
func DefaultJointSettings(p int) JointSettings {
	return JointSettings{Chart: joint.DefaultSpec(p), Serial: SerialWhiten}
}

// jointSettings turns JointSettings into package joint's for the model.
func (j *Joint) jointSettings(s JointSettings) (joint.Settings, error) {
	out := joint.Settings{Chart: s.Chart, Model: j.Model, Mode: monitor.Whiten}
	switch s.Serial {
	case "", "on", SerialWhiten:
	case SerialDirect:
		out.Mode = monitor.Direct
	case SerialOff:
		// Readings treated as independent: no serial model, and the
		// innovations are the readings themselves.
		m := *j.Model
		m.Serial = make([]serial.Params, len(j.Model.Serial))
		m.Innovation = m.Reading
		out.Model = &m
	default:
		return out, &chart.SettingError{Setting: "serial", Value: string(s.Serial),
			Want: fmt.Sprintf("%s, %s or %s (on means %s)", SerialWhiten, SerialDirect, SerialOff, SerialWhiten)}
	}
	return out, out.Validate()
}

// JointExam is one row of a sheet to screen with several markers:
// Values[k] is marker k's reading (in the model's marker order), NaN when
// it was not measured.
type JointExam struct {
	Worker string
	Group  string
	Time   float64
	Values []float64
}

// JointResult is the screening of one exam of several markers. Per-marker
// slices follow the model's markers and hold NaN where a marker was not
// measured.
type JointResult struct {
	Mean, SD, Z, Centile, Innovation []float64
	// Stat is the joint chart statistic, Signal whether it crossed the
	// limit, and Leading, at a signal, the marker contributing most
	// (otherwise -1).
	Stat    float64
	Signal  bool
	Leading int
	// Exam, Exams, Gap and FirstSignal are as in Result.
	Exam, Exams int
	Gap         float64
	FirstSignal float64
	// InRange says whether the age is inside every measured marker's
	// reference range.
	InRange bool
}

// Screen screens a sheet of exams of the model's markers against limit h.
// Exams may come in any order; each worker's exams are ordered by age
// inside and results come back in the input order. A marker's reading that
// cannot be scored is a *joint.MarkerError over the *refcurve.ScoreErrors
// (entries are positions in exams); two exams of one worker at the same
// age are a *refcurve.DuplicateError. A signal prompts review by a
// licensed clinician under local occupational-health rules; it is not a
// diagnosis.
func (j *Joint) Screen(exams []JointExam, set JointSettings, h float64) ([]JointResult, error) {
	js, err := j.jointSettings(set)
	if err != nil {
		return nil, err
	}
	if err := chart.ValidateLimit(h); err != nil {
		return nil, err
	}
	n, p := len(exams), len(j.Markers)
	if n == 0 {
		return nil, ErrNoExams
	}
	for i, e := range exams {
		if len(e.Values) != p {
			return nil, fmt.Errorf("row %d has %d values for the %d markers of the model", i+1, len(e.Values), p)
		}
	}
	out := make([]JointResult, n)
	flat := make([]float64, 5*n*p)
	for i := range out {
		r := &out[i]
		b := flat[i*5*p : (i+1)*5*p]
		r.Mean, r.SD, r.Z, r.Centile, r.Innovation = b[:p:p], b[p:2*p:2*p], b[2*p:3*p:3*p], b[3*p:4*p:4*p], b[4*p:]
		for k := range b {
			b[k] = math.NaN()
		}
		r.InRange, r.Leading = true, -1
	}
	if err := checkExtrapolate(set.Extrapolate); err != nil {
		return nil, err
	}
	if err := j.score(exams, set.Extrapolate, out); err != nil {
		return nil, err
	}
	workers, err := groupJointExams(exams)
	if err != nil {
		return nil, err
	}
	var first error
	var mu sync.Mutex
	var wg sync.WaitGroup
	next := make(chan []int, 64)
	for range runtime.GOMAXPROCS(0) {
		wg.Go(func() {
			run, err := joint.NewRunner(js, h)
			if err != nil {
				mu.Lock()
				first = err
				mu.Unlock()
				for range next {
				}
				return
			}
			var rows []joint.Row
			s := joint.Series{Z: make([][]float64, p)}
			for idx := range next {
				s.Time = s.Time[:0]
				for k := range p {
					s.Z[k] = s.Z[k][:0]
				}
				for _, i := range idx {
					s.Time = append(s.Time, exams[i].Time)
					for k := range p {
						s.Z[k] = append(s.Z[k], out[i].Z[k])
					}
				}
				rows, err = run.Run(s, rows[:0])
				if err != nil {
					mu.Lock()
					if first == nil {
						first = &WorkerError{Worker: exams[idx[0]].Worker, Err: err}
					}
					mu.Unlock()
					continue
				}
				fs := math.NaN()
				for e, r := range rows {
					if r.Signal {
						fs = s.Time[e]
						break
					}
				}
				for e, i := range idx {
					r, res := rows[e], &out[i]
					copy(res.Innovation, r.Innovation)
					res.Stat, res.Signal, res.Leading = r.Stat, r.Signal, r.Top
					res.Exam, res.Exams = e+1, len(idx)
					res.Gap = math.NaN()
					if e > 0 {
						res.Gap = s.Time[e] - s.Time[e-1]
					}
					res.FirstSignal = fs
				}
			}
		})
	}
	for _, idx := range workers {
		next <- idx
	}
	close(next)
	wg.Wait()
	if first != nil {
		return nil, first
	}
	return out, nil
}

// score fills each measured marker's Z, Mean, SD and Centile and InRange.
func (j *Joint) score(exams []JointExam, reach float64, out []JointResult) error {
	extrapolate := reach > 0
	std := distuv.UnitNormal
	for k, m := range j.Markers {
		var idx []int
		for i, e := range exams {
			if !math.IsNaN(e.Values[k]) {
				idx = append(idx, i)
			}
		}
		if len(idx) == 0 {
			continue
		}
		groups := make([]string, len(idx))
		times := make([]float64, len(idx))
		values := make([]float64, len(idx))
		for a, i := range idx {
			groups[a], times[a], values[a] = exams[i].Group, exams[i].Time, exams[i].Values[k]
		}
		z := make([]float64, len(idx))
		if err := m.Curves.ZMany(groups, times, values, extrapolate, z); err != nil {
			var se *refcurve.ScoreErrors
			if errors.As(err, &se) {
				mapped := &refcurve.ScoreErrors{Count: se.Count, Total: len(exams)}
				for _, f := range se.First {
					mapped.First = append(mapped.First, refcurve.EntryError{Index: idx[f.Index], Err: f.Err})
				}
				err = mapped
			}
			return &joint.MarkerError{Marker: m.Name, Err: err}
		}
		// Ages outside the range by more than the reach.
		var far *refcurve.ScoreErrors
		for a, i := range idx {
			lo, hi, err := m.Curves.Range(groups[a])
			if err != nil {
				continue
			}
			if err := refcurve.Outside(groups[a], times[a], lo, hi, reach); err != nil {
				if far == nil {
					far = &refcurve.ScoreErrors{Total: len(exams)}
				}
				far.Count++
				if len(far.First) < 5 {
					far.First = append(far.First, refcurve.EntryError{Index: i, Err: err})
				}
			}
		}
		if far != nil {
			return &joint.MarkerError{Marker: m.Name, Err: far}
		}
		for a, i := range idx {
			mean, sd, err := m.Curves.At(groups[a], times[a], true)
			if err != nil {
				return &joint.MarkerError{Marker: m.Name, Err: fmt.Errorf("row %d: %w", i+1, err)}
			}
			r := &out[i]
			r.Z[k], r.Mean[k], r.SD[k] = z[a], mean, sd
			r.Centile[k] = 100 * std.CDF(z[a])
			if lo, hi, err := m.Curves.Range(groups[a]); err == nil && (times[a] < lo || times[a] > hi) {
				r.InRange = false
			}
		}
	}
	return nil
}

// groupJointExams returns, per worker in order of first appearance, the
// row indices of its exams sorted by age; two at the same age are a
// *refcurve.DuplicateError.
func groupJointExams(exams []JointExam) ([][]int, error) {
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
		sort.SliceStable(idx, func(a, b int) bool { return exams[idx[a]].Time < exams[idx[b]].Time })
		for e := 1; e < len(idx); e++ {
			a, b := idx[e-1], idx[e]
			if exams[a].Time == exams[b].Time {
				return nil, &refcurve.DuplicateError{Worker: exams[a].Worker, Time: exams[a].Time, Rows: [2]int{min(a, b) + 1, max(a, b) + 1}}
			}
		}
	}
	return workers, nil
}

// Calibration returns package joint's calibration for the settings and
// options (defaults as in Model.Calibration), the reference being the
// model's sample of reference workers.
func (j *Joint) Calibration(set JointSettings, o LimitOptions) (joint.Calibration, error) {
	js, err := j.jointSettings(set)
	if err != nil {
		return joint.Calibration{}, err
	}
	if o.Method == "" {
		o.Method = monitor.Normal
	}
	if o.Seed == 0 {
		o.Seed = DefaultSeed
	}
	if o.Horizon == "" {
		o.Horizon = monitor.HorizonFollowUp
	}
	ref := make([]joint.Series, len(j.Sample))
	for i, s := range j.Sample {
		ref[i] = joint.Series{Time: s.Time, Z: make([][]float64, len(s.Z))}
		for k, z := range s.Z {
			ref[i].Z[k] = z
		}
	}
	return joint.Calibration{
		Settings: js, Method: o.Method, Gap: o.Gap, Reference: ref,
		Seed: o.Seed, Paths: o.Paths, Progress: o.Progress, Stop: o.Stop, Horizon: o.Horizon,
	}, nil
}

// Limit returns the control limit of the joint chart whose average time to
// a false signal for a healthy worker is target years.
func (j *Joint) Limit(set JointSettings, o LimitOptions, target float64) (monitor.LimitResult, error) {
	c, err := j.Calibration(set, o)
	if err != nil {
		return monitor.LimitResult{}, err
	}
	return joint.Limit(c, target)
}

// Delay returns the expected years from the start of sustained shifts of
// shift[k] reference SDs in marker k's readings, onset years after the
// first exam, to a signal at limit h.
func (j *Joint) Delay(set JointSettings, o LimitOptions, h float64, shift []float64, onset float64) (monitor.DelayResult, error) {
	c, err := j.Calibration(set, o)
	if err != nil {
		return monitor.DelayResult{}, err
	}
	return joint.Delay(c, h, shift, onset)
}
