package joint

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"veer/functions/chart"
	"veer/functions/limit"
	"veer/functions/monitor"
	"veer/functions/serial"
)

// Settings are everything needed to chart a worker's markers.
type Settings struct {
	Chart Spec
	// Mode is monitor.Whiten (chart the per-marker Kalman innovations,
	// decorrelated by Model.Innovation.R) or monitor.Direct (chart the
	// standardised readings, decorrelated by Model.Reading.R; limits then
	// carry the serial correlation).
	Mode  monitor.Mode
	Model *Model
}

// Validate reports the first problem with s, or nil.
func (s Settings) Validate() error {
	if s.Model == nil {
		return errors.New("no model of the markers was given")
	}
	if err := s.Model.Check(); err != nil {
		return err
	}
	switch s.Mode {
	case monitor.Whiten, monitor.Direct:
	default:
		return &chart.SettingError{Setting: "serial", Value: string(s.Mode), Want: fmt.Sprintf("%q or %q", monitor.Whiten, monitor.Direct)}
	}
	return s.Chart.Validate(len(s.Model.Markers))
}

// corr is the correlation the chart removes.
func (s Settings) corr() [][]float64 {
	if s.Mode == monitor.Direct {
		return s.Model.Reading.R
	}
	return s.Model.Innovation.R
}

// NewChart returns the chart of the settings (validated first).
func (s Settings) NewChart() (*Chart, error) {
	if err := s.Validate(); err != nil {
		return nil, err
	}
	return NewChart(s.Chart, s.corr())
}

// independent reports whether no marker has serial correlation.
func (s Settings) independent() bool {
	for _, p := range s.Model.Serial {
		if !p.Independent() {
			return false
		}
	}
	return true
}

// Row is the result for one exam.
type Row struct {
	// Innovation holds each marker's Kalman innovation (NaN where the
	// marker was not measured).
	Innovation []float64
	// Stat is the chart statistic, Signal whether it crossed the limit and,
	// at a signal, Top the marker contributing most (otherwise -1).
	Stat   float64
	Signal bool
	Top    int
}

// Runner charts workers one after another with the same settings and
// limit, reusing its filters, chart and buffers. Create it with NewRunner;
// it is not safe for concurrent use (make one per goroutine).
type Runner struct {
	set  Settings
	h    float64
	p    int
	ch   *Chart
	inn  innovator
	ubuf []float64
	gaps []float64
	x    []float64
	pts  []Point
}

// NewRunner returns a Runner for the settings and limit h.
func NewRunner(set Settings, h float64) (*Runner, error) {
	ch, err := set.NewChart()
	if err != nil {
		return nil, err
	}
	if err := chart.ValidateLimit(h); err != nil {
		return nil, err
	}
	return &Runner{set: set, h: h, p: len(set.Model.Markers), ch: ch, inn: set.Model.innovator()}, nil
}

// Run charts one worker's exams and appends one Row per exam to out; each
// Row's Innovation is a fresh slice. It returns an error naming the exam if
// the times do not increase or a value is infinite.
func (r *Runner) Run(s Series, out []Row) ([]Row, error) {
	p := r.p
	if err := s.check(p); err != nil {
		return out, err
	}
	n := len(s.Time)
	if cap(r.ubuf) < n*p {
		r.ubuf = make([]float64, n*p)
	}
	u := r.inn.innovations(s, r.ubuf[:n*p])
	if cap(r.gaps) < n {
		r.gaps = make([]float64, n)
	}
	r.gaps = r.gaps[:n]
	clear(r.gaps)
	r.x = r.x[:0]
	for j := range n {
		if j > 0 {
			r.gaps[j] = s.Time[j] - s.Time[j-1]
		}
		for k := range p {
			if r.set.Mode == monitor.Direct {
				r.x = append(r.x, s.Z[k][j])
			} else {
				r.x = append(r.x, u[k][j])
			}
		}
	}
	r.pts = r.ch.Run(r.h, r.gaps, r.x, r.pts[:0])
	inn := make([]float64, n*p)
	for j, pt := range r.pts {
		row := inn[j*p : (j+1)*p : (j+1)*p]
		for k := range p {
			row[k] = u[k][j]
		}
		out = append(out, Row{Innovation: row, Stat: pt.Stat, Signal: pt.Signal, Top: pt.Top})
	}
	return out, nil
}

// Run charts one worker's exams against limit h and returns one Row per
// exam (see Runner). A signal prompts review by a licensed clinician under
// local occupational-health rules; it is not a diagnosis.
func Run(set Settings, h float64, s Series) ([]Row, error) {
	r, err := NewRunner(set, h)
	if err != nil {
		return nil, err
	}
	return r.Run(s, nil)
}

// Calibration describes how limits and delays are computed; the fields
// mean what they mean in monitor.Calibration.
type Calibration struct {
	Settings Settings
	// Method is monitor.Normal (simulation from the model: innovation
	// vectors N(0, Innovation.R) coloured by each marker's serial model) or
	// monitor.Bootstrap (reference workers' innovation vectors resampled
	// whole, with their gaps and their missing markers).
	Method monitor.Method
	// Gap, if positive, makes every gap between exams Gap years, with
	// every marker measured at every exam unless the reference says
	// otherwise; else gaps are resampled from Gaps or from the reference.
	Gap  float64
	Gaps []float64
	// Reference holds the healthy reference workers' standardised readings;
	// it gives the gaps, which markers are measured together, the
	// follow-ups (horizon followup) and the bootstrap sample.
	Reference []Series
	Seed      uint64
	Paths     int
	Progress  func(done, total int)
	Stop      func() bool
	Horizon   monitor.Horizon
	// MaxExams bounds the exams a limit or delay simulates in all (0:
	// monitor.DefaultMaxExams); see monitor.Budget.
	MaxExams int64
}

type span struct {
	gap  []float64 // gap[0] unused
	mask []uint32
}

type block struct {
	span
	u []float64 // exam-major innovations, NaN when not measured
}

type prepared struct {
	c       Calibration
	p       int
	full    uint32
	gen     *generator
	pool    []float64 // gaps (nil when c.Gap > 0)
	meanGap float64
	masks   []uint32 // measured markers per reference exam (nil: all)
	spans   []span   // follow-up horizon
	blocks  []block  // method bootstrap
}

func maskOf(s Series, j int) uint32 {
	var m uint32
	for k := range s.Z {
		if !math.IsNaN(s.Z[k][j]) {
			m |= 1 << k
		}
	}
	return m
}

func prepare(c Calibration) (*prepared, error) {
	if err := c.Settings.Validate(); err != nil {
		return nil, err
	}
	switch c.Method {
	case monitor.Normal, monitor.Bootstrap:
	default:
		return nil, &chart.SettingError{Setting: "method", Value: string(c.Method), Want: fmt.Sprintf("%q or %q", monitor.Normal, monitor.Bootstrap)}
	}
	if c.Paths < 0 {
		return nil, &chart.SettingError{Setting: "reps", Value: c.Paths, Want: "a positive number of simulated paths"}
	}
	p := len(c.Settings.Model.Markers)
	pr := &prepared{c: c, p: p, full: 1<<p - 1, gen: newGenerator(c.Settings.Model)}
	for i, w := range c.Reference {
		if err := w.check(p); err != nil {
			return nil, fmt.Errorf("reference worker %d: %w", i+1, err)
		}
	}
	// Which markers are measured together, exam by exam.
	partial := false
	for _, w := range c.Reference {
		for j := range w.Time {
			m := maskOf(w, j)
			if m != 0 {
				pr.masks = append(pr.masks, m)
				partial = partial || m != pr.full
			}
		}
	}
	if !partial {
		pr.masks = nil
	}
	switch c.Horizon {
	case "", monitor.HorizonLong:
	case monitor.HorizonFollowUp:
		for _, w := range c.Reference {
			sp, ok := spanOf(w, c.Gap)
			if ok && len(sp.gap) >= 2 {
				pr.spans = append(pr.spans, sp)
			}
		}
		if len(pr.spans) == 0 {
			return nil, errors.New("the follow-up horizon needs reference workers with at least two exams")
		}
	default:
		return nil, &chart.SettingError{Setting: "horizon", Value: string(c.Horizon), Want: fmt.Sprintf("%q or %q", monitor.HorizonLong, monitor.HorizonFollowUp)}
	}
	var err error
	pr.pool, pr.meanGap, err = monitor.GapPool(c.Gap, c.Gaps, func() []float64 {
		var pool []float64
		for _, w := range c.Reference {
			prev := math.NaN()
			for j, t := range w.Time {
				if maskOf(w, j) == 0 {
					continue
				}
				if !math.IsNaN(prev) {
					pool = append(pool, t-prev)
				}
				prev = t
			}
		}
		return pool
	})
	if err != nil {
		return nil, err
	}
	if c.Method == monitor.Bootstrap {
		if err := pr.bootstrapBlocks(); err != nil {
			return nil, err
		}
	}
	return pr, nil
}

// spanOf returns a reference worker's exams that measured any marker: the
// gaps between them (each gap if given) and which markers were measured.
func spanOf(w Series, gap float64) (span, bool) {
	var sp span
	prev := math.NaN()
	for j, t := range w.Time {
		m := maskOf(w, j)
		if m == 0 {
			continue
		}
		g := 0.0
		if !math.IsNaN(prev) {
			g = t - prev
			if gap > 0 {
				g = gap
			}
		}
		sp.gap = append(sp.gap, g)
		sp.mask = append(sp.mask, m)
		prev = t
	}
	return sp, len(sp.gap) > 0
}

// bootstrapBlocks keeps the reference workers' innovation vectors, each
// marker's pooled innovations standardised to mean 0 and SD 1 (as for one
// marker, see monitor: only their shape and their dependence across
// markers come from the data).
func (pr *prepared) bootstrapBlocks() error {
	c := pr.c
	p := pr.p
	if len(c.Reference) < monitor.MinBootstrapWorkers {
		return fmt.Errorf("method bootstrap needs at least %d reference workers, got %d", monitor.MinBootstrapWorkers, len(c.Reference))
	}
	f := c.Settings.Model.innovator()
	for _, w := range c.Reference {
		sp, ok := spanOf(w, c.Gap)
		if !ok {
			continue
		}
		inn := f.innovations(w, nil)
		b := block{span: sp}
		for j := range w.Time {
			if maskOf(w, j) == 0 {
				continue
			}
			for k := range p {
				b.u = append(b.u, inn[k][j])
			}
		}
		pr.blocks = append(pr.blocks, b)
	}
	if len(pr.blocks) < monitor.MinBootstrapWorkers {
		return fmt.Errorf("method bootstrap needs at least %d reference workers with exams, got %d", monitor.MinBootstrapWorkers, len(pr.blocks))
	}
	for k := range p {
		var n, s, s2 float64
		for _, b := range pr.blocks {
			for j := k; j < len(b.u); j += p {
				if v := b.u[j]; !math.IsNaN(v) {
					n++
					s += v
					s2 += v * v
				}
			}
		}
		mean := s / n
		sd := math.Sqrt((s2 - n*mean*mean) / (n - 1))
		if !(sd > 0) {
			return &MarkerError{Marker: c.Settings.Model.Markers[k], Err: errors.New("its reference innovations are all equal; method bootstrap needs varied reference values")}
		}
		for _, b := range pr.blocks {
			for j := k; j < len(b.u); j += p {
				b.u[j] = (b.u[j] - mean) / sd
			}
		}
	}
	return nil
}

func (pr *prepared) mc() limit.MonteCarlo {
	c := pr.c
	return pr.budget().MonteCarlo(c.Seed, c.Progress, c.Stop)
}

// budget is the work budget of the calibration's simulations.
func (pr *prepared) budget() monitor.Budget {
	var exams []int
	for _, sp := range pr.spans {
		exams = append(exams, len(sp.gap))
	}
	return monitor.Budget{Paths: pr.c.Paths, MaxExams: pr.c.MaxExams, MeanGap: pr.meanGap, WorkerExams: exams}
}

// textbook reports whether the charted vectors are i.i.d. N(0, R) with
// every marker measured at equal gaps of one unit and one unending worker:
// then the joint MEWMA is Lowry's chart and its ARL is exact.
func (pr *prepared) textbook() bool {
	c := pr.c
	s := c.Settings
	return s.Chart.Kind == MEWMA && c.Method == monitor.Normal && pr.masks == nil && pr.spans == nil &&
		(s.Mode == monitor.Whiten || s.independent()) && pr.pool == nil && c.Gap == s.Chart.ewma().UnitOrDefault()
}

// stream is one simulated worker (or chain of workers) feeding the chart.
type stream struct {
	pr           *prepared
	rng          *rand.Rand
	ch           *Chart
	colour, whit []*serial.Filter
	shift        []float64
	onset, t     float64
	since        []float64
	seen         []bool
	u, x, e      []float64
	blk          *block
	pos          int
	sp           *span
	spPos        int
}

func (pr *prepared) streams(shift []float64, onset float64) limit.StatStreamFunc {
	set := pr.c.Settings
	shifted := false
	for _, d := range shift {
		shifted = shifted || d != 0
	}
	if !shifted {
		shift = nil
	}
	return func(rng *rand.Rand) limit.StatStream {
		ch, err := NewChart(set.Chart, set.corr())
		if err != nil {
			panic("joint: " + err.Error()) // validated in prepare
		}
		s := &stream{pr: pr, rng: rng, ch: ch, shift: shift, onset: onset,
			since: make([]float64, pr.p), seen: make([]bool, pr.p), u: make([]float64, pr.p), x: make([]float64, pr.p), e: make([]float64, pr.p)}
		// Filters are needed to colour innovations into readings (mode
		// direct, or a shift to add) and to whiten them again (mode whiten
		// with a shift); in mode whiten without a shift the charted
		// innovations are the drawn ones.
		if set.Mode == monitor.Direct || shift != nil {
			s.colour = make([]*serial.Filter, pr.p)
			for k := range pr.p {
				s.colour[k] = serial.NewFilter(set.Model.Serial[k])
			}
			if set.Mode == monitor.Whiten {
				s.whit = make([]*serial.Filter, pr.p)
				for k := range pr.p {
					s.whit[k] = serial.NewFilter(set.Model.Serial[k])
				}
			}
		}
		return s
	}
}

func (s *stream) newWorker() {
	s.ch.Reset()
	clear(s.since)
	clear(s.seen)
	for k := range s.colour {
		s.colour[k].Reset()
	}
	for k := range s.whit {
		s.whit[k].Reset()
	}
}

func (s *stream) drawGap() float64 {
	if s.pr.pool == nil {
		return s.pr.c.Gap
	}
	return s.pr.pool[s.rng.IntN(len(s.pr.pool))]
}

func (s *stream) drawMask() uint32 {
	if s.pr.masks == nil {
		return s.pr.full
	}
	return s.pr.masks[s.rng.IntN(len(s.pr.masks))]
}

// Next returns the next exam's gap (-1 for the first exam of a new worker
// in a chain) and the chart statistic after it.
func (s *stream) Next() (float64, float64) {
	pr := s.pr
	boot := pr.c.Method == monitor.Bootstrap
	var gap float64
	var mask uint32
	first := false
	switch {
	case boot:
		if s.blk == nil || s.pos == len(s.blk.gap) {
			s.blk = &pr.blocks[s.rng.IntN(len(pr.blocks))]
			s.pos = 0
		}
		gap, mask = s.blk.gap[s.pos], s.blk.mask[s.pos]
		copy(s.u, s.blk.u[s.pos*pr.p:(s.pos+1)*pr.p])
		if s.pos == 0 {
			if pr.spans != nil {
				first = true
			} else {
				gap = s.drawGap() // the junction between chained workers
			}
		}
		s.pos++
	case pr.spans != nil:
		if s.sp == nil || s.spPos == len(s.sp.gap) {
			s.sp = &pr.spans[s.rng.IntN(len(pr.spans))]
			s.spPos = 0
			first = true
		}
		gap, mask = s.sp.gap[s.spPos], s.sp.mask[s.spPos]
		s.spPos++
		pr.gen.draw(s.rng, s.u, s.e)
	default:
		gap, mask = s.drawGap(), s.drawMask()
		pr.gen.draw(s.rng, s.u, s.e)
	}
	if first {
		s.newWorker()
		gap = 0
	}
	s.t += gap
	on := s.shift != nil && s.t >= s.onset
	for k := range pr.p {
		s.since[k] += gap
		if mask&(1<<k) == 0 {
			s.x[k] = math.NaN()
			continue
		}
		gk := 0.0
		if s.seen[k] {
			gk = s.since[k]
		}
		s.since[k], s.seen[k] = 0, true
		v := s.u[k]
		if s.colour != nil {
			z := s.colour[k].Colour(gk, v)
			if on {
				z += s.shift[k]
			}
			v = z
			if s.whit != nil {
				v = s.whit[k].Whiten(gk, z)
			}
		}
		s.x[k] = v
	}
	g := s.ch.Next(gap, s.x)
	if first && pr.spans != nil {
		return -1, g
	}
	return gap, g
}

// Limit returns the control limit at which a healthy worker's average time
// to a false signal equals target years (see monitor.Limit for the
// horizons). For MEWMA on i.i.d. vectors (method normal, mode whiten or no
// serial correlation) with every marker measured at equal gaps of one unit
// and the long horizon, the limit is exact (limit.SolveMEWMA); otherwise
// it is calibrated by Monte Carlo with common random numbers and a fixed
// seed (limit.MonteCarlo.CalibrateStat), with its standard error.
func Limit(c Calibration, target float64) (monitor.LimitResult, error) {
	pr, err := prepare(c)
	if err != nil {
		return monitor.LimitResult{}, err
	}
	if !(target > 0) || math.IsNaN(target) {
		return monitor.LimitResult{}, &chart.SettingError{Setting: "target", Value: target, Want: "a positive number of years"}
	}
	if target > monitor.MaxTarget {
		return monitor.LimitResult{}, &chart.SettingError{Setting: "target", Value: target, Want: fmt.Sprintf("at most %d years", monitor.MaxTarget)}
	}
	if target < pr.meanGap {
		return monitor.LimitResult{}, &chart.SettingError{Setting: "target", Value: target, Want: "at least one mean gap between exams (" + chart.Years(pr.meanGap) + ")"}
	}
	spec := c.Settings.Chart
	hint := 0.0
	if spec.Kind == MEWMA {
		h, err := limit.SolveMEWMA(spec.Lambda, pr.p, target/pr.meanGap)
		if pr.textbook() {
			if err != nil {
				return monitor.LimitResult{}, err
			}
			return monitor.LimitResult{H: h, ATS: target, MeanGap: pr.meanGap, Exact: true}, nil
		}
		if err == nil {
			hint = h
		}
	}
	b := pr.budget()
	if err := b.CheckLimit(target); err != nil {
		return monitor.LimitResult{}, err
	}
	cal, err := pr.mc().CalibrateStat(target, pr.streams(nil, 0), hint)
	if err != nil {
		return monitor.LimitResult{}, b.Stopped(err, target, 0)
	}
	return monitor.LimitResult{H: cal.H, ATS: cal.ATS, SE: cal.SE, SEH: cal.SEH, MeanGap: pr.meanGap, Paths: cal.Paths, Censored: cal.Censored}, nil
}

// Delay returns the expected years from the onset of sustained shifts of
// shift[m] SDs in marker m's readings (onset years after the start of
// monitoring) to the first signal at limit h, through the same filters and
// chart (one unending worker, as monitor.Delay). For MEWMA on i.i.d.
// vectors with no serial correlation, every marker measured at gaps of one
// unit and onset 0 it is exact: ARL(delta) x gap with delta the
// Mahalanobis length of the shift (limit.MEWMAARL).
func Delay(c Calibration, h float64, shift []float64, onset float64) (monitor.DelayResult, error) {
	pr, err := prepare(c)
	if err != nil {
		return monitor.DelayResult{}, err
	}
	if len(shift) != pr.p {
		return monitor.DelayResult{}, &chart.SettingError{Setting: "shift", Value: len(shift), Want: fmt.Sprintf("%d shifts, one per marker", pr.p)}
	}
	for _, d := range shift {
		if math.IsNaN(d) || math.IsInf(d, 0) {
			return monitor.DelayResult{}, &chart.SettingError{Setting: "shift", Value: d, Want: "a finite number of SDs"}
		}
	}
	if err := chart.ValidateLimit(h); err != nil {
		return monitor.DelayResult{}, err
	}
	if !(onset >= 0 && onset <= monitor.MaxOnset) {
		return monitor.DelayResult{}, &chart.SettingError{Setting: "onset", Value: onset, Want: fmt.Sprintf("from 0 to %d years after the first exam", monitor.MaxOnset)}
	}
	pr.spans = nil
	if pr.textbook() && c.Settings.independent() && onset == 0 {
		d := mahalanobis(c.Settings.corr(), shift)
		arl, err := limit.MEWMAARL(c.Settings.Chart.Lambda, h, pr.p, d)
		if err != nil {
			return monitor.DelayResult{}, err
		}
		return monitor.DelayResult{Years: arl * pr.meanGap}, nil
	}
	b := pr.budget()
	if err := b.CheckDelay(onset); err != nil {
		return monitor.DelayResult{}, err
	}
	mc := pr.mc()
	mc.CapExams = b.DelayCapExams()
	r, err := mc.DelayStat(h, pr.streams(shift, onset), onset)
	if err != nil {
		return monitor.DelayResult{}, b.Stopped(err, 0, onset)
	}
	if err := b.CheckCensored(r); err != nil {
		return monitor.DelayResult{}, err
	}
	return monitor.DelayResult{Years: r.Mean, SE: r.SE, Paths: r.Paths, Early: r.Early, Censored: r.Censored}, nil
}

// mahalanobis returns sqrt(d' R^-1 d).
func mahalanobis(corr [][]float64, d []float64) float64 {
	p := len(d)
	r, _ := flatten(corr)
	cholesky(r, p)
	return math.Sqrt(cholQuad(r, p, d, make([]float64, p)))
}
