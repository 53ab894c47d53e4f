package joint

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"veer/functions/serial"
)

// Series is one worker's exams over p markers: Time[j] is the age at exam j
// (years, strictly increasing) and Z[m][j] the standardised reading of
// marker m there, NaN when the marker was not measured at that exam.
type Series struct {
	Time []float64
	Z    [][]float64
}

// check reports the first problem with s for p markers; i is the worker's
// number for messages (0: none).
func (s Series) check(p int) error {
	if len(s.Z) != p {
		return fmt.Errorf("%d markers expected, the worker has values of %d", p, len(s.Z))
	}
	for m, z := range s.Z {
		if len(z) != len(s.Time) {
			return fmt.Errorf("marker %d has %d values for %d exams", m+1, len(z), len(s.Time))
		}
		for j, v := range z {
			if math.IsInf(v, 0) {
				return fmt.Errorf("exam %d, marker %d: the standardised value is not a number (%v)", j+1, m+1, v)
			}
		}
	}
	return serial.CheckTimes(s.Time)
}

// marker returns marker m's measured exams as a single-marker series.
func (s Series) marker(m int) serial.Series {
	n := 0
	for _, z := range s.Z[m] {
		if !math.IsNaN(z) {
			n++
		}
	}
	out := serial.Series{Time: make([]float64, 0, n), Z: make([]float64, 0, n)}
	for j, z := range s.Z[m] {
		if !math.IsNaN(z) {
			out.Time = append(out.Time, s.Time[j])
			out.Z = append(out.Z, z)
		}
	}
	return out
}

// Model is the healthy-worker model of p markers measured at the same
// exams: per marker the serial model of its standardised readings, and
// across markers the correlation at the same exam of the standardised
// readings (Reading) and of the per-marker Kalman innovations
// (Innovation).
//
// As a generating model for simulation (method normal), a healthy
// worker's innovation vectors are independent from exam to exam and, at an
// exam where the markers M are measured, N(0, Innovation.R[M,M]); each
// marker's innovations are coloured into its readings by its own serial
// model over its own measured exams (serial.Filter.Colour). So every
// marker keeps exactly its single-marker law, and the per-marker
// innovations of a healthy worker are exactly what the joint chart
// assumes. Bootstrap limits resample reference workers' innovation
// vectors instead and need no such assumption.
type Model struct {
	Markers    []string        `json:"markers"`
	Serial     []serial.Params `json:"serial"`
	Reading    Correlation     `json:"reading"`
	Innovation Correlation     `json:"innovation"`
}

// MinReadings is the least number of reference readings per marker.
const MinReadings = 20

// CheckMarkers reports an empty, over-long or repeated list of marker
// names.
func CheckMarkers(markers []string) error {
	if len(markers) == 0 {
		return errors.New("no markers given")
	}
	if len(markers) > MaxMarkers {
		return fmt.Errorf("at most %d markers can be charted together, got %d", MaxMarkers, len(markers))
	}
	seen := make(map[string]bool, len(markers))
	for _, m := range markers {
		if seen[m] {
			return &DuplicateError{Marker: m}
		}
		seen[m] = true
	}
	return nil
}

// Estimate fits the model from reference workers' standardised readings.
// serials, when not nil, gives each marker's serial model (estimated with
// its own reference curves); otherwise each marker's is estimated from its
// measured exams (serial.Estimate). A marker with fewer than MinReadings
// readings is a *ReadingsError, a failed serial estimate a *MarkerError,
// and correlations that cannot be estimated or are not positive definite
// are *PairError or *CorrelationError (see Correlate). A cancelled ctx
// stops the serial estimates with its error.
func Estimate(ctx context.Context, markers []string, ref []Series, serials []serial.Params) (*Model, error) {
	if err := CheckMarkers(markers); err != nil {
		return nil, err
	}
	p := len(markers)
	for i, w := range ref {
		if err := w.check(p); err != nil {
			return nil, fmt.Errorf("reference worker %d: %w", i+1, err)
		}
	}
	if serials != nil && len(serials) != p {
		return nil, fmt.Errorf("%d serial models for %d markers", len(serials), p)
	}
	m := &Model{Markers: append([]string(nil), markers...), Serial: make([]serial.Params, p)}
	for k := range p {
		n := 0
		for _, w := range ref {
			for _, z := range w.Z[k] {
				if !math.IsNaN(z) {
					n++
				}
			}
		}
		if n < MinReadings {
			return nil, &ReadingsError{Marker: markers[k], Readings: n, Min: MinReadings}
		}
		if serials != nil {
			if err := serials[k].Validate(); err != nil {
				return nil, &MarkerError{Marker: markers[k], Err: err}
			}
			m.Serial[k] = serials[k]
			continue
		}
		ser := make([]serial.Series, 0, len(ref))
		for _, w := range ref {
			if s := w.marker(k); len(s.Z) > 0 {
				ser = append(ser, s)
			}
		}
		par, err := serial.Estimate(ctx, ser)
		if err != nil {
			return nil, &MarkerError{Marker: markers[k], Err: err}
		}
		m.Serial[k] = par
	}
	var err error
	if m.Reading, err = Correlate(markers, "standardised readings", ref); err != nil {
		return nil, err
	}
	inn := make([]Series, len(ref))
	f := m.innovator()
	total := 0
	for _, w := range ref {
		total += len(w.Time) * p
	}
	buf := make([]float64, total)
	for i, w := range ref {
		k := len(w.Time) * p
		inn[i] = Series{Time: w.Time, Z: f.innovations(w, buf[:k:k])}
		buf = buf[k:]
	}
	if m.Innovation, err = Correlate(markers, "innovations", inn); err != nil {
		return nil, err
	}
	return m, nil
}

// Innovations returns the per-marker Kalman innovations of a worker's
// series (checked by the caller): marker m's filter runs over the exams
// where m was measured, with gaps since its own previous measurement, and
// the innovation is NaN where m was not measured.
func (m *Model) Innovations(s Series) [][]float64 {
	return m.innovator().innovations(s, nil)
}

// innovator holds one reusable filter per marker.
type innovator []*serial.Filter

func (m *Model) innovator() innovator {
	f := make(innovator, len(m.Serial))
	for k, p := range m.Serial {
		f[k] = serial.NewFilter(p)
	}
	return f
}

// innovations is Innovations with the innovator's filters, writing into
// buf (reallocated when too short) for all markers at once.
func (f innovator) innovations(s Series, buf []float64) [][]float64 {
	n := len(s.Time)
	if cap(buf) < n*len(f) {
		buf = make([]float64, n*len(f))
	}
	out := make([][]float64, len(f))
	for k, z := range s.Z {
		u := buf[k*n : (k+1)*n : (k+1)*n]
		f[k].Reset()
		last := math.NaN()
		for j, v := range z {
			if math.IsNaN(v) {
				u[j] = math.NaN()
				continue
			}
			gap := 0.0
			if !math.IsNaN(last) {
				gap = s.Time[j] - last
			}
			u[j] = f[k].Whiten(gap, v)
			last = s.Time[j]
		}
		out[k] = u
	}
	return out
}

// Check reports the first problem with a model (from a file or built by
// hand): marker names, serial parameters, and correlation matrices that
// are square, within [-1, 1] and positive definite.
func (m *Model) Check() error {
	if err := CheckMarkers(m.Markers); err != nil {
		return err
	}
	p := len(m.Markers)
	if len(m.Serial) != p {
		return fmt.Errorf("the model has %d serial models for %d markers", len(m.Serial), p)
	}
	for k, s := range m.Serial {
		if err := s.Validate(); err != nil {
			return &MarkerError{Marker: m.Markers[k], Err: err}
		}
	}
	for _, c := range []struct {
		what string
		r    [][]float64
	}{{"standardised readings", m.Reading.R}, {"innovations", m.Innovation.R}} {
		if len(c.r) != p {
			return fmt.Errorf("the correlation matrix of the %s has %d rows for %d markers", c.what, len(c.r), p)
		}
		if _, err := flatten(c.r); err != nil {
			return err
		}
		if err := CheckCorrelation(m.Markers, c.what, c.r); err != nil {
			return err
		}
	}
	return nil
}

// Independent returns the model of p markers with no serial correlation
// and no correlation between markers (the textbook case: i.i.d. N(0, I)
// vectors), named "1" to "p".
func Independent(p int) *Model {
	m := &Model{Markers: make([]string, p), Serial: make([]serial.Params, p)}
	for k := range p {
		m.Markers[k] = fmt.Sprint(k + 1)
	}
	m.Reading.R = identity(p)
	m.Innovation.R = identity(p)
	return m
}

func identity(p int) [][]float64 {
	r := square[float64](p)
	for i := range p {
		r[i][i] = 1
	}
	return r
}

// Simulate returns a healthy worker's standardised readings drawn from the
// model at the given strictly increasing times; measured(j, m), if not
// nil, says whether marker m is measured at exam j (otherwise every marker
// is). It panics if the model is invalid (check it with Check).
func (m *Model) Simulate(times []float64, measured func(j, k int) bool, rng *rand.Rand) Series {
	p := len(m.Markers)
	g := newGenerator(m)
	s := Series{Time: times, Z: make([][]float64, p)}
	for k := range p {
		s.Z[k] = make([]float64, len(times))
	}
	u, e := make([]float64, p), make([]float64, p)
	since := make([]float64, p)
	seen := make([]bool, p)
	filters := make([]*serial.Filter, p)
	for k := range p {
		filters[k] = serial.NewFilter(m.Serial[k])
	}
	for j, t := range times {
		g.draw(rng, u, e)
		for k := range p {
			if j > 0 {
				since[k] += t - times[j-1]
			}
			if measured != nil && !measured(j, k) {
				s.Z[k][j] = math.NaN()
				continue
			}
			gap := 0.0
			if seen[k] {
				gap = since[k]
			}
			s.Z[k][j] = filters[k].Colour(gap, u[k])
			since[k], seen[k] = 0, true
		}
	}
	return s
}

// generator draws N(0, R) vectors by the Cholesky factor of R. It is
// shared by concurrent simulations and never written after creation.
type generator struct {
	p int
	l []float64
}

func newGenerator(m *Model) *generator {
	p := len(m.Markers)
	r, err := flatten(m.Innovation.R)
	if err != nil || !cholesky(r, p) {
		panic("joint: the model's innovation correlation is not a positive definite correlation matrix")
	}
	return &generator{p: p, l: r}
}

// draw fills u with a N(0, R) vector, using e (length p) as scratch.
func (g *generator) draw(rng *rand.Rand, u, e []float64) {
	p := g.p
	for i := range p {
		e[i] = rng.NormFloat64()
	}
	for i := range p {
		var s float64
		for k := 0; k <= i; k++ {
			s += g.l[i*p+k] * e[k]
		}
		u[i] = s
	}
}
