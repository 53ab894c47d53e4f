package monitor

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"veer/functions/chart"
	"veer/functions/limit"
	"veer/functions/serial"
)

// Mode says what the chart is run on.
type Mode string

const (
	// Whiten charts the Kalman-filter innovations of the worker's z under
	// the serial model: i.i.d. N(0,1) for a healthy worker, so limits for
	// i.i.d. values apply exactly; a sustained shift is partly absorbed by
	// the filter.
	Whiten Mode = "whiten"
	// Direct charts z itself; the limit carries the serial correlation
	// (calibrated on correlated sequences), and a shift is kept whole.
	Direct Mode = "direct"
)

// DefaultMode is the mode chosen from the delay comparison documented in
// the package comment (TestModeEvidence).
const DefaultMode = Whiten

// Settings are everything needed to chart a worker.
type Settings struct {
	Chart  chart.Spec
	Mode   Mode
	Serial serial.Params
}

// Validate reports the first problem with s, or nil.
func (s Settings) Validate() error {
	if err := s.Chart.Validate(); err != nil {
		return err
	}
	switch s.Mode {
	case Whiten, Direct:
	default:
		return &chart.SettingError{Setting: "mode", Value: string(s.Mode), Want: fmt.Sprintf("%q or %q", Whiten, Direct)}
	}
	return s.Serial.Validate()
}

// Row is the result for one exam.
type Row struct {
	// Time of the exam (years) and its standardised value.
	Time, Z float64
	// Innovation is the Kalman innovation of Z under the serial model (equal
	// to Z when the model has no correlation). It is computed in both modes.
	Innovation float64
	// Up, Down, Stat and Signal are as in chart.Point; the charted value is
	// Innovation in mode whiten and Z in mode direct.
	Up, Down, Stat float64
	Signal         bool
}

// Run charts one worker's exams, given in time order with strictly
// increasing times (years) and standardised values z, against limit h, and
// appends one Row per exam to out. A single exam is charted like any other.
// A signal prompts review by a licensed clinician under local
// occupational-health rules; it is not a diagnosis.
func Run(set Settings, h float64, time, z []float64, out []Row) ([]Row, error) {
	if err := set.Validate(); err != nil {
		return out, err
	}
	if err := chart.ValidateLimit(h); err != nil {
		return out, err
	}
	u, err := serial.Innovations(set.Serial, time, z, make([]float64, 0, len(z)))
	if err != nil {
		return out, err
	}
	gaps := make([]float64, len(time))
	for j := 1; j < len(time); j++ {
		gaps[j] = time[j] - time[j-1]
	}
	x := u
	if set.Mode == Direct {
		x = z
	}
	pts := chart.Run(set.Chart, h, gaps, x, make([]chart.Point, 0, len(x)))
	for j, p := range pts {
		out = append(out, Row{Time: time[j], Z: z[j], Innovation: u[j], Up: p.Up, Down: p.Down, Stat: p.Stat, Signal: p.Signal})
	}
	return out, nil
}

// FirstSignal returns the time of the first signalling row.
func FirstSignal(rows []Row) (float64, bool) {
	for _, r := range rows {
		if r.Signal {
			return r.Time, true
		}
	}
	return 0, false
}

// Method is how a limit or delay is computed.
type Method string

const (
	// Normal assumes normal data: exact integral-equation ARLs for i.i.d.
	// N(0,1) values when they apply, otherwise Gaussian sequences simulated
	// from the serial model at realistic gaps.
	Normal Method = "normal"
	// Bootstrap resamples whole reference workers' innovation sequences with
	// their own gaps (distribution-free in the innovations).
	Bootstrap Method = "bootstrap"
)

// Calibration describes how limits and delays are computed.
type Calibration struct {
	Settings Settings
	Method   Method
	// Gap, if positive, makes every gap between exams Gap years (the
	// officer's planned schedule). Otherwise gaps are resampled from Gaps,
	// or, if Gaps is empty, from the within-worker gaps of Reference.
	Gap  float64
	Gaps []float64
	// Reference holds the healthy reference workers' standardised residuals;
	// needed for method bootstrap and as the default gap source.
	Reference []serial.Series
	// Seed selects the random numbers of Monte Carlo methods; Paths is their
	// number of paths (default 4000, about 1.6% standard error).
	Seed  uint64
	Paths int
	// Progress, if not nil, reports Monte Carlo progress (see
	// limit.MonteCarlo.Progress).
	Progress func(done, total int)
	// Stop, if not nil, is asked during Monte Carlo work (before each path
	// and every thousand or so exams within one); answering true cancels it
	// (limit.ErrStopped).
	Stop func() bool
	// MaxExams bounds the exams a limit or delay simulates in all (0:
	// DefaultMaxExams). A computation estimated to need more is refused
	// before it starts with a *WorkError saying how to ask for less.
	MaxExams int64
	// Horizon says what the average time to a false signal counts:
	// HorizonLong (the default) follows one healthy worker through an
	// unending exam history, the textbook ATS; HorizonFollowUp follows a
	// chain of healthy workers, each examined as long (and as often) as a
	// reference worker drawn at random, the chart starting afresh for each,
	// so the ATS is worker-years of exams per false signal — the rate an
	// officer sees across a workforce. The two agree for independent
	// readings and long histories; with persistent serial correlation the
	// time to a false signal is far from exponential and HorizonLong
	// understates the false signals seen per worker-year over real
	// follow-ups. Limits only; Delay always uses HorizonLong.
	Horizon Horizon
}

// Horizon is what an average time to a false signal counts (see
// Calibration.Horizon).
type Horizon string

// Horizons.
const (
	HorizonLong     Horizon = "long"
	HorizonFollowUp Horizon = "followup"
)

// Ranges of the inputs, so that no input can make a computation run away.
const (
	// MaxTarget is the longest target time accepted (years).
	MaxTarget = 10000
	// MinBootstrapWorkers is the least number of reference workers for
	// method bootstrap.
	MinBootstrapWorkers = 10
	// MinGap and MaxGap bound a planned gap between exams (Calibration.Gap):
	// a day to 20 years.
	MinGap = 1 / 365.25
	MaxGap = 20
	// MaxOnset is the latest onset of a shift accepted by Delay (years).
	MaxOnset = 100
	// DefaultMaxExams is the most exams a limit or delay simulates in all
	// (Calibration.MaxExams): with the default 4000 paths, 12,500 exams a
	// path. A computation that would need more is refused before it starts
	// (see WorkError); about 5 s of two cores at most.
	DefaultMaxExams = 50_000_000
)

// LimitResult is a control limit for a target time.
type LimitResult struct {
	// H is the control limit.
	H float64
	// ATS is the average time to a false signal at H (years) and SE its
	// Monte Carlo standard error (0 when Exact); SEH is that error carried
	// to H.
	ATS, SE, SEH float64
	// MeanGap is the mean gap between exams used (years).
	MeanGap float64
	// Exact is true when H came from the exact ARL of i.i.d. N(0,1) values
	// times the mean gap (no simulation).
	Exact bool
	// Paths and Censored are as in limit.Calibration (0 when Exact).
	Paths, Censored int
}

// prepared is a validated Calibration with its gap pool and reference
// innovation blocks.
type prepared struct {
	c       Calibration
	pool    []float64 // gaps to resample (nil when c.Gap > 0)
	meanGap float64
	blocks  []block
	// spans holds the reference workers' gap sequences (gap[0] unused)
	// for HorizonFollowUp.
	spans [][]float64
}

type block struct{ gap, u []float64 } // gap[0] unused

func prepare(c Calibration) (*prepared, error) {
	if err := c.Settings.Validate(); err != nil {
		return nil, err
	}
	switch c.Method {
	case Normal, Bootstrap:
	default:
		return nil, &chart.SettingError{Setting: "method", Value: string(c.Method), Want: fmt.Sprintf("%q or %q", Normal, Bootstrap)}
	}
	if c.Paths < 0 {
		return nil, &chart.SettingError{Setting: "reps", Value: c.Paths, Want: "a positive number of simulated paths"}
	}
	p := &prepared{c: c}
	switch c.Horizon {
	case "", HorizonLong:
	case HorizonFollowUp:
		for i, w := range c.Reference {
			if err := serial.CheckTimes(w.Time); err != nil {
				return nil, fmt.Errorf("reference worker %d, %w", i+1, err)
			}
			if len(w.Time) < 2 {
				continue
			}
			g := make([]float64, len(w.Time))
			for j := 1; j < len(w.Time); j++ {
				g[j] = w.Time[j] - w.Time[j-1]
				if c.Gap > 0 {
					g[j] = c.Gap
				}
			}
			p.spans = append(p.spans, g)
		}
		if len(p.spans) == 0 {
			return nil, errors.New("the follow-up horizon needs reference workers with at least two exams")
		}
	default:
		return nil, &chart.SettingError{Setting: "horizon", Value: string(c.Horizon), Want: fmt.Sprintf("%q or %q", HorizonLong, HorizonFollowUp)}
	}
	if c.Gap == 0 && len(c.Gaps) == 0 {
		for i, w := range c.Reference {
			if err := serial.CheckTimes(w.Time); err != nil {
				return nil, fmt.Errorf("reference worker %d, %w", i+1, err)
			}
		}
	}
	var err error
	p.pool, p.meanGap, err = GapPool(c.Gap, c.Gaps, func() []float64 {
		var pool []float64
		for _, w := range c.Reference {
			for j := 1; j < len(w.Time); j++ {
				pool = append(pool, w.Time[j]-w.Time[j-1])
			}
		}
		return pool
	})
	if err != nil {
		return nil, err
	}
	if c.Method == Bootstrap {
		if len(c.Reference) < MinBootstrapWorkers {
			return nil, fmt.Errorf("method bootstrap needs at least %d reference workers, got %d", MinBootstrapWorkers, len(c.Reference))
		}
		for i, w := range c.Reference {
			u, err := serial.Innovations(c.Settings.Serial, w.Time, w.Z, nil)
			if err != nil {
				return nil, fmt.Errorf("reference worker %d, %w", i+1, err)
			}
			if len(u) == 0 {
				continue
			}
			g := make([]float64, len(u))
			for j := 1; j < len(u); j++ {
				g[j] = w.Time[j] - w.Time[j-1]
				if c.Gap > 0 {
					g[j] = c.Gap
				}
			}
			p.blocks = append(p.blocks, block{g, u})
		}
		if len(p.blocks) < MinBootstrapWorkers {
			return nil, fmt.Errorf("method bootstrap needs at least %d reference workers with exams, got %d", MinBootstrapWorkers, len(p.blocks))
		}
		// Standardise the pooled innovations to mean 0 and SD 1, as
		// Chatterjee & Qiu (2009) standardise their in-control sample: the
		// reference model makes z standard by construction, so only the
		// shape of the innovation distribution is taken from the data, and
		// the sampling noise of the reference mean and SD (which a direct
		// chart would amplify through the correlation) is removed.
		var n, s, s2 float64
		for _, b := range p.blocks {
			for _, v := range b.u {
				n++
				s += v
				s2 += v * v
			}
		}
		mean := s / n
		sd := math.Sqrt((s2 - n*mean*mean) / (n - 1))
		if !(sd > 0) {
			return nil, errors.New("the reference innovations are all equal; method bootstrap needs varied reference values")
		}
		for _, b := range p.blocks {
			for j := range b.u {
				b.u[j] = (b.u[j] - mean) / sd
			}
		}
	}
	return p, nil
}

func (p *prepared) constantGaps() bool {
	if p.pool == nil {
		return true
	}
	for _, g := range p.pool {
		if g != p.pool[0] {
			return false
		}
	}
	return true
}

func (p *prepared) mc() limit.MonteCarlo {
	return p.budget().MonteCarlo(p.c.Seed, p.c.Progress, p.c.Stop)
}

// budget is the work budget of the calibration's simulations.
func (p *prepared) budget() Budget {
	var spanExams []int
	for _, s := range p.spans {
		spanExams = append(spanExams, len(s))
	}
	return Budget{Paths: p.c.Paths, MaxExams: p.c.MaxExams, MeanGap: p.meanGap, WorkerExams: spanExams}
}

// iid reports whether the charted values are i.i.d. N(0,1) for a healthy
// worker under method normal.
func (p *prepared) iid() bool {
	return p.c.Method == Normal && (p.c.Settings.Mode == Whiten || p.c.Settings.Serial.Independent())
}

// stream is one simulated worker: innovations (standard normal or chained
// reference blocks) coloured into z by the serial model, shifted by delta
// from onset, then whitened again (mode whiten) or charted as they are.
type stream struct {
	p            *prepared
	rng          *rand.Rand
	colour, whit *serial.Filter
	shift, onset float64
	t            float64
	blk          *block
	pos          int
	span         []float64 // follow-up horizon: the current worker's gaps
	spanPos      int
}

// newWorker starts a fresh healthy worker (follow-up horizon): the serial
// state starts from its stationary distribution.
func (s *stream) newWorker() {
	s.colour.Reset()
	if s.whit != nil {
		s.whit.Reset()
	}
}

func (s *stream) gap() float64 {
	if s.p.pool == nil {
		return s.p.c.Gap
	}
	return s.p.pool[s.rng.IntN(len(s.p.pool))]
}

func (s *stream) Next() (float64, float64) {
	if s.p.spans != nil {
		return s.nextFollowUp()
	}
	var gap, u float64
	if s.p.c.Method == Bootstrap {
		if s.blk == nil || s.pos == len(s.blk.u) {
			s.blk = &s.p.blocks[s.rng.IntN(len(s.p.blocks))]
			s.pos = 0
		}
		if s.pos == 0 {
			gap = s.gap() // the junction between chained workers
		} else {
			gap = s.blk.gap[s.pos]
		}
		u = s.blk.u[s.pos]
		s.pos++
	} else {
		gap, u = s.gap(), s.rng.NormFloat64()
	}
	s.t += gap
	z := s.colour.Colour(gap, u)
	if s.t >= s.onset {
		z += s.shift
	}
	if s.whit != nil {
		return gap, s.whit.Whiten(gap, z)
	}
	return gap, z
}

// nextFollowUp is Next for the follow-up horizon: workers one after the
// other, each with the exams of a reference worker (method normal: its gaps
// with fresh Gaussian values; method bootstrap: a whole reference worker's
// innovations and gaps). A worker's first exam is marked by a negative gap.
func (s *stream) nextFollowUp() (float64, float64) {
	var gap, u float64
	if s.p.c.Method == Bootstrap {
		if s.blk == nil || s.pos == len(s.blk.u) {
			s.blk = &s.p.blocks[s.rng.IntN(len(s.p.blocks))]
			s.pos = 0
		}
		gap, u = s.blk.gap[s.pos], s.blk.u[s.pos]
		s.pos++
	} else {
		if s.span == nil || s.spanPos == len(s.span) {
			s.span = s.p.spans[s.rng.IntN(len(s.p.spans))]
			s.spanPos = 0
		}
		gap, u = s.span[s.spanPos], s.rng.NormFloat64()
		s.spanPos++
	}
	first := (s.p.c.Method == Bootstrap && s.pos == 1) || (s.p.c.Method != Bootstrap && s.spanPos == 1)
	if first {
		s.newWorker()
		gap = 0
	}
	z := s.colour.Colour(gap, u)
	if s.whit != nil {
		u = s.whit.Whiten(gap, z)
	} else {
		u = z
	}
	if first {
		return -1, u
	}
	return gap, u
}

func (p *prepared) streams(shift, onset float64) limit.StreamFunc {
	return func(rng *rand.Rand) limit.Stream {
		s := &stream{p: p, rng: rng, shift: shift, onset: onset, colour: serial.NewFilter(p.c.Settings.Serial)}
		if p.c.Settings.Mode == Whiten {
			s.whit = serial.NewFilter(p.c.Settings.Serial)
		}
		return s
	}
}

// Limit returns the control limit at which a healthy worker's average time
// to a false signal (ATS0) equals target years.
//
//   - Method normal, when the charted values are i.i.d. N(0,1) for a healthy
//     worker (mode whiten, or mode direct with no serial correlation): ATS0 =
//     ARL0(h) x mean gap, which holds whenever gaps do not depend on the
//     values (Wald's identity); ARL0 is exact (limit.Solve) and h is found by
//     root search. For EWMA this needs equal gaps (the weight depends on the
//     gap); with varying gaps the i.i.d. values are simulated at resampled
//     gaps instead.
//   - Method normal, mode direct with correlation: Gaussian sequences from
//     the serial model at resampled (or equal) gaps, calibrated by Monte
//     Carlo (limit.MonteCarlo.Calibrate).
//   - Method bootstrap: whole reference workers' innovation sequences, drawn
//     with replacement and chained with their own gaps until a signal
//     (Chatterjee & Qiu 2009, "Distribution-free cumulative sum control
//     charts using bootstrap-based control limits", Annals of Applied
//     Statistics 3); the gap between chained workers is drawn from the gap
//     pool. In mode direct the chained innovations are coloured back into z
//     by the serial model, so the correlation carries across the junctions.
//
// Monte Carlo results use common random numbers and a fixed seed, so they
// are reproducible and monotone in h; SE is reported.
func Limit(c Calibration, target float64) (LimitResult, error) {
	p, err := prepare(c)
	if err != nil {
		return LimitResult{}, err
	}
	if !(target > 0) || math.IsNaN(target) {
		return LimitResult{}, &chart.SettingError{Setting: "target", Value: target, Want: "a positive number of years"}
	}
	if target > MaxTarget {
		return LimitResult{}, &chart.SettingError{Setting: "target", Value: target, Want: fmt.Sprintf("at most %d years", MaxTarget)}
	}
	if target < p.meanGap {
		return LimitResult{}, &chart.SettingError{Setting: "target", Value: target, Want: "at least one mean gap between exams (" + chart.Years(p.meanGap) + ")"}
	}
	spec := c.Settings.Chart
	exactGap := spec.Kind == chart.CUSUM || p.constantGaps()
	hint := 0.0
	if h, err := limit.Solve(spec, target/p.meanGap, p.meanGap); err == nil {
		hint = h
		if p.iid() && exactGap && p.spans == nil {
			return LimitResult{H: h, ATS: target, MeanGap: p.meanGap, Exact: true}, nil
		}
	} else if p.iid() && exactGap && p.spans == nil {
		return LimitResult{}, err
	}
	// A calibration simulates a pilot of up to 400 paths over 4 x target
	// and the main pass over about 1.4 x target (see
	// limit.MonteCarlo.Calibrate).
	b := p.budget()
	if err := b.CheckLimit(target); err != nil {
		return LimitResult{}, err
	}
	cal, err := p.mc().Calibrate(spec, target, p.streams(0, 0), hint)
	if err != nil {
		return LimitResult{}, b.Stopped(err, target, 0)
	}
	return LimitResult{H: cal.H, ATS: cal.ATS, SE: cal.SE, SEH: cal.SEH, MeanGap: p.meanGap, Paths: cal.Paths, Censored: cal.Censored}, nil
}

// DelayResult is an expected time to signal.
type DelayResult struct {
	// Years is the expected time from the onset of the shift to the first
	// signal and SE its Monte Carlo standard error.
	Years, SE float64
	// Paths simulated; Early signalled before the onset and are left out;
	// Censored reached the cap without signalling (see limit.RunLength).
	Paths, Early, Censored int
}

// Delay returns the expected years from the onset of a sustained shift of
// shift SDs in the readings (added to z from onset on, onset in years after
// the start of monitoring, 0 for a shift present from the first exam) to
// the first signal with limit h, pushed through the same filter (mode
// whiten) and chart, by simulation: Gaussian model sequences (method normal)
// or chained reference innovations coloured by the model (method
// bootstrap). Shift 0 with onset 0 gives the in-control ATS at h.
func Delay(c Calibration, h, shift, onset float64) (DelayResult, error) {
	p, err := prepare(c)
	if err != nil {
		return DelayResult{}, err
	}
	if math.IsNaN(shift) || math.IsInf(shift, 0) {
		return DelayResult{}, &chart.SettingError{Setting: "shift", Value: shift, Want: "a finite number of SDs"}
	}
	if !(onset >= 0 && onset <= MaxOnset) {
		return DelayResult{}, &chart.SettingError{Setting: "onset", Value: onset, Want: fmt.Sprintf("from 0 to %d years after the first exam", MaxOnset)}
	}
	p.spans = nil // delays follow one worker (HorizonLong)
	b := p.budget()
	if err := b.CheckDelay(onset); err != nil {
		return DelayResult{}, err
	}
	mc := p.mc()
	mc.CapExams = b.DelayCapExams()
	r, err := mc.Delay(c.Settings.Chart, h, p.streams(shift, onset), onset)
	if err != nil {
		return DelayResult{}, b.Stopped(err, 0, onset)
	}
	if err := b.CheckCensored(r); err != nil {
		return DelayResult{}, err
	}
	return DelayResult{Years: r.Mean, SE: r.SE, Paths: r.Paths, Early: r.Early, Censored: r.Censored}, nil
}
