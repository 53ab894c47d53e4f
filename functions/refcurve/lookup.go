package refcurve

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"strings"
	"sync"

	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/transform"
)

// place checks t against the curve's valid range and returns the time to
// look up: t itself, or the nearest end when extrapolating.
func (c *Curve) place(t float64, extrapolate bool) (float64, error) {
	if math.IsNaN(t) || math.IsInf(t, 0) {
		return 0, fmt.Errorf("age %g is not a finite number", t)
	}
	if t < c.TimeMin || t > c.TimeMax {
		if !extrapolate {
			return 0, &RangeError{Group: c.Group, Time: t, Min: c.TimeMin, Max: c.TimeMax}
		}
		return math.Min(math.Max(t, c.TimeMin), c.TimeMax), nil
	}
	return t, nil
}

// interp returns mean and sd at t in [TimeMin, TimeMax] by linear
// interpolation between grid times.
func (c *Curve) interp(t float64) (mean, sd float64) {
	n := len(c.Time)
	pos := (t - c.TimeMin) / (c.TimeMax - c.TimeMin) * float64(n-1)
	k := int(pos)
	if k >= n-1 {
		k = n - 2
	}
	if k < 0 {
		k = 0
	}
	f := pos - float64(k)
	mean = c.Mean[k] + f*(c.Mean[k+1]-c.Mean[k])
	sd = c.SD[k] + f*(c.SD[k+1]-c.SD[k])
	return mean, sd
}

// At returns the reference mean and sd of group at time t, on the
// transformed scale. Outside the group's valid range it is an error unless
// extrapolate, in which case the end values are held.
func (m *Model) At(group string, t float64, extrapolate bool) (mean, sd float64, err error) {
	c, err := m.curve(group)
	if err != nil {
		return 0, 0, err
	}
	t, err = c.place(t, extrapolate)
	if err != nil {
		return 0, 0, err
	}
	mean, sd = c.interp(t)
	return mean, sd, nil
}

// Centile returns the p-th centile (0 < p < 100) of group at time t on the
// user's scale: the back-transform of μ(t) + Φ⁻¹(p/100)·σ(t). It fails
// where the Box-Cox back-transform has no value (far tails with λ ≠ 0).
func (m *Model) Centile(group string, t, p float64, extrapolate bool) (float64, error) {
	if !(p > 0 && p < 100) {
		return 0, fmt.Errorf("centile %s must lie strictly between 0 and 100", num(p))
	}
	mean, sd, err := m.At(group, t, extrapolate)
	if err != nil {
		return 0, err
	}
	q := mean + distuv.UnitNormal.Quantile(p/100)*sd
	y, err := m.transform().Inverse(q)
	if err != nil {
		return 0, fmt.Errorf("the %s centile at age %s of %s: %w", ordinal(p), num(t), groupLabel(group), err)
	}
	return y, nil
}

func ordinal(p float64) string {
	s := num(p)
	switch {
	case strings.HasSuffix(s, "1") && !strings.HasSuffix(s, "11"):
		return s + "st"
	case strings.HasSuffix(s, "2") && !strings.HasSuffix(s, "12"):
		return s + "nd"
	case strings.HasSuffix(s, "3") && !strings.HasSuffix(s, "13"):
		return s + "rd"
	}
	return s + "th"
}

func (m *Model) transform() transform.Transform {
	if m.tr.Name == "" {
		tr, err := transform.New(m.Transform, m.Lambda)
		if err != nil {
			panic("refcurve: model with invalid transform; build models with Fit or Decode")
		}
		return tr
	}
	return m.tr
}

// Z returns the standardised score (T(y) - μ(t))/σ(t) of value y at time t
// in group, T the model's transform.
func (m *Model) Z(group string, t, y float64, extrapolate bool) (float64, error) {
	mean, sd, err := m.At(group, t, extrapolate)
	if err != nil {
		return 0, err
	}
	ty, err := m.transform().Forward(y)
	if err != nil {
		return 0, err
	}
	return (ty - mean) / sd, nil
}

const maxReportedEntries = 5

// ZMany computes Z for many exams at once into out: out[i] is the score of
// value y[i] at time t[i] in group groups[i] (or groups[0] for every entry
// when len(groups) == 1). t, y and out must have equal lengths. Entries
// that cannot be scored get NaN in out and are reported together in a
// *ScoreErrors (count and the first few by index); the others are still
// computed. Large inputs are split over up to GOMAXPROCS goroutines; the
// result does not depend on how many.
func (m *Model) ZMany(groups []string, t, y []float64, extrapolate bool, out []float64) error {
	n := len(t)
	if len(y) != n || len(out) != n {
		return fmt.Errorf("times (%d), values (%d) and output (%d) must have the same length", n, len(y), len(out))
	}
	if len(groups) != n && len(groups) != 1 {
		return fmt.Errorf("give one group per entry (%d) or a single group for all, not %d", n, len(groups))
	}
	b := zBatch{m: m, groups: groups, t: t, y: y, extrapolate: extrapolate, out: out}
	const chunk = 1 << 16
	parts := min((n+chunk-1)/chunk, runtime.GOMAXPROCS(0))
	if parts <= 1 {
		if e := b.score(0, n); e != nil {
			return e
		}
		return nil
	}
	found := make([]*ScoreErrors, parts)
	var wg sync.WaitGroup
	for p := range parts {
		wg.Add(1)
		go func() {
			defer wg.Done()
			found[p] = b.score(p*n/parts, (p+1)*n/parts)
		}()
	}
	wg.Wait()
	var errs *ScoreErrors
	for _, e := range found {
		if e == nil {
			continue
		}
		if errs == nil {
			errs = &ScoreErrors{Total: n}
		}
		errs.Count += e.Count
		for _, f := range e.First {
			if len(errs.First) < maxReportedEntries {
				errs.First = append(errs.First, f)
			}
		}
	}
	if errs != nil {
		return errs
	}
	return nil
}

// zBatch is one call of ZMany: its inputs and output.
type zBatch struct {
	m           *Model
	groups      []string
	t, y        []float64
	extrapolate bool
	out         []float64
}

// score is ZMany for entries from to to-1.
func (b zBatch) score(from, to int) *ScoreErrors {
	m, groups, t, y, extrapolate, out := b.m, b.groups, b.t, b.y, b.extrapolate, b.out
	n := len(t)
	tr := m.transform()
	var errs *ScoreErrors
	fail := func(i int, err error) {
		out[i] = math.NaN()
		if errs == nil {
			errs = &ScoreErrors{Total: n}
		}
		errs.Count++
		if len(errs.First) < maxReportedEntries {
			errs.First = append(errs.First, EntryError{Index: i, Err: err})
		}
	}
	var (
		cur     *Curve
		curName string
		scale   float64
		last    int
	)
	kind := 0
	switch tr.Name {
	case transform.Log:
		kind = 1
	case transform.BoxCox:
		kind = 2
	}
	lambda := tr.Lambda
	for i := from; i < to; i++ {
		g := groups[0]
		if len(groups) == n {
			g = groups[i]
		}
		if cur == nil || g != curName {
			c, err := m.curve(g)
			if err != nil {
				fail(i, err)
				continue
			}
			cur, curName = c, g
			last = len(c.Time) - 1
			scale = float64(last) / (c.TimeMax - c.TimeMin)
		}
		ti := t[i]
		if !(ti >= cur.TimeMin && ti <= cur.TimeMax) {
			p, err := cur.place(ti, extrapolate)
			if err != nil {
				fail(i, err)
				continue
			}
			ti = p
		}
		yi := y[i]
		switch {
		case math.IsNaN(yi) || math.IsInf(yi, 0):
			fail(i, fmt.Errorf("value %g is not a finite number", yi))
			continue
		case kind == 1 && yi > 0:
			yi = math.Log(yi)
		case kind == 2 && yi > 0:
			yi = math.Log(yi)
			if lambda != 0 {
				yi = math.Expm1(lambda*yi) / lambda
			}
		case kind != 0:
			_, err := tr.Forward(yi)
			fail(i, err)
			continue
		}
		pos := (ti - cur.TimeMin) * scale
		k := int(pos)
		if k >= last {
			k = last - 1
		}
		if k < 0 {
			k = 0
		}
		f := pos - float64(k)
		mean := cur.Mean[k] + f*(cur.Mean[k+1]-cur.Mean[k])
		sd := cur.SD[k] + f*(cur.SD[k+1]-cur.SD[k])
		out[i] = (yi - mean) / sd
	}
	return errs
}

// WorkerSeries is the standardised residual series of one worker in one
// group, in time order.
type WorkerSeries struct {
	Worker, Group string
	Time, Z       []float64
}

// Residuals standardises rows against the model (no extrapolation) and
// returns one series per (worker, group), sorted by worker, then group,
// each in time order. Rows follow Fit's rules (finite numbers, a worker
// id, one exam per worker and time); errors name the data row (1-based).
func (m *Model) Residuals(rows []Row) ([]WorkerSeries, error) {
	if len(rows) == 0 {
		return nil, errors.New("no data rows")
	}
	ix, err := indexRows(rows)
	if err != nil {
		return nil, err
	}
	z := make([]float64, len(rows))
	for i, r := range rows {
		v, err := m.Z(r.Group, r.Time, r.Value, false)
		if err != nil {
			return nil, &RowError{Rows: []int{i + 1}, Reason: err.Error(), Err: err}
		}
		z[i] = v
	}
	// ix.order is sorted by worker, then time; make it worker, group, time
	// (stable within each worker block).
	order := ix.order
	for a := 0; a < len(order); {
		b := a + 1
		for b < len(order) && ix.wid[order[b]] == ix.wid[order[a]] {
			b++
		}
		blk := order[a:b]
		for i := 1; i < len(blk); i++ {
			for j := i; j > 0 && ix.grank[ix.gid[blk[j]]] < ix.grank[ix.gid[blk[j-1]]]; j-- {
				blk[j], blk[j-1] = blk[j-1], blk[j]
			}
		}
		a = b
	}
	var out []WorkerSeries
	for a := 0; a < len(order); {
		r0 := rows[order[a]]
		b := a + 1
		for b < len(order) && ix.wid[order[b]] == ix.wid[order[a]] && ix.gid[order[b]] == ix.gid[order[a]] {
			b++
		}
		s := WorkerSeries{Worker: r0.Worker, Group: r0.Group, Time: make([]float64, b-a), Z: make([]float64, b-a)}
		for k := a; k < b; k++ {
			s.Time[k-a] = rows[order[k]].Time
			s.Z[k-a] = z[order[k]]
		}
		out = append(out, s)
		a = b
	}
	return out, nil
}
