package screening

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"veer/functions/joint"
	"veer/functions/refcurve"
	"veer/functions/serial"
)

// JointRow is one reference exam of several markers: Values[k] is marker
// k's reading, NaN when it was not measured at that exam.
type JointRow struct {
	Worker string
	Group  string
	Time   float64
	Values []float64
}

// JointFitOptions control FitJoint.
type JointFitOptions struct {
	// Name is the model's name, e.g. "panel".
	Name string
	// Markers names the markers in the order of JointRow.Values (the value
	// columns, e.g. "sbp", "chol", "fev1").
	Markers []string
	// Curves holds each marker's reference-curve options (its own
	// transform); one entry applies to every marker.
	Curves []refcurve.Options
	// SampleWorkers caps the reference workers kept for limits (0:
	// DefaultSampleWorkers).
	SampleWorkers int
}

// JointSequence is one reference worker's standardised readings of every
// marker at its exams (Z[k][j] NaN when marker k was not measured at exam j).
type JointSequence struct {
	Group string     `json:"group,omitempty"`
	Time  []float64  `json:"time"`
	Z     []Readings `json:"z"`
}

// Readings are numbers of which some may be missing (NaN); in JSON a
// missing one is null.
type Readings []float64

// MarshalJSON writes NaN as null.
func (r Readings) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	b.WriteByte('[')
	for i, v := range r {
		if i > 0 {
			b.WriteByte(',')
		}
		if math.IsNaN(v) {
			b.WriteString("null")
		} else {
			b.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
		}
	}
	b.WriteByte(']')
	return b.Bytes(), nil
}

// UnmarshalJSON reads null as NaN.
func (r *Readings) UnmarshalJSON(data []byte) error {
	var v []*float64
	if err := json.Unmarshal(data, &v); err != nil {
		return err
	}
	out := make(Readings, len(v))
	for i, p := range v {
		out[i] = math.NaN()
		if p != nil {
			out[i] = *p
		}
	}
	*r = out
	return nil
}

// Joint is a fitted model of several markers measured at the same exams:
// each marker's own model (reference curves with its own transform, serial
// model, diagnostics), the correlations across markers (package joint) and
// a sample of reference workers for limits. Build one with FitJoint or
// DecodeJoint.
type Joint struct {
	Name string
	// Markers holds each marker's model, named by its marker.
	Markers []*Model
	// Model holds the serial models and the cross-marker correlations.
	Model *joint.Model
	// MeanGap is the mean years between consecutive exams of reference
	// workers (any marker measured).
	MeanGap float64
	// Sample holds reference workers' standardised readings (see
	// DefaultSampleWorkers).
	Sample []JointSequence
	Hash   string
}

// MarkerNames returns the names of the markers, in order.
func (j *Joint) MarkerNames() []string { return j.Model.Markers }

// Marker returns the model of the named marker, or nil.
func (j *Joint) Marker(name string) *Model {
	for _, m := range j.Markers {
		if m.Name == name {
			return m
		}
	}
	return nil
}

// jointExams groups rows into each worker's exams in time order: rows of
// one worker at the same age are one exam (a marker given twice there is a
// *refcurve.DuplicateError naming both rows).
type jointExam struct {
	worker, group string
	time          float64
	rows          []int // row of each marker's value, -1 when not measured
}

func groupJoint(rows []JointRow, p int) ([][]jointExam, error) {
	type key struct {
		w string
		t float64
	}
	pos := map[string]int{}
	var workers [][]jointExam
	at := map[key]int{}
	for i, r := range rows {
		if len(r.Values) != p {
			return nil, fmt.Errorf("data row %d has %d values for %d markers", i+1, len(r.Values), p)
		}
		k, ok := pos[r.Worker]
		if !ok {
			k = len(workers)
			pos[r.Worker] = k
			workers = append(workers, nil)
		}
		e, ok := at[key{r.Worker, r.Time}]
		if !ok {
			e = len(workers[k])
			at[key{r.Worker, r.Time}] = e
			ex := jointExam{worker: r.Worker, group: r.Group, time: r.Time, rows: make([]int, p)}
			for m := range ex.rows {
				ex.rows[m] = -1
			}
			workers[k] = append(workers[k], ex)
		}
		ex := &workers[k][e]
		for m, v := range r.Values {
			if math.IsNaN(v) {
				continue
			}
			if prev := ex.rows[m]; prev >= 0 {
				return nil, &refcurve.DuplicateError{Worker: r.Worker, Time: r.Time, Rows: [2]int{prev + 1, i + 1}}
			}
			ex.rows[m] = i
		}
	}
	for _, w := range workers {
		sort.SliceStable(w, func(a, b int) bool { return w[a].time < w[b].time })
	}
	return workers, nil
}

// FitJoint fits a model of several markers from the exams of healthy
// reference workers. Each marker's model is fitted from the rows where it
// was measured (as Fit would, named by the marker); the cross-marker
// correlations come from the standardised readings and the Kalman
// innovations at the same exams (joint.Estimate). A marker's failure is a
// *joint.MarkerError naming it; the same marker twice is a
// *joint.DuplicateError; correlations that cannot be estimated or are not
// positive definite are *joint.PairError or *joint.CorrelationError.
func FitJoint(ctx context.Context, rows []JointRow, opt JointFitOptions) (*Joint, error) {
	if strings.TrimSpace(opt.Name) == "" {
		return nil, errors.New("the model needs a name")
	}
	if err := joint.CheckMarkers(opt.Markers); err != nil {
		return nil, err
	}
	p := len(opt.Markers)
	if len(opt.Curves) != 1 && len(opt.Curves) != p {
		return nil, fmt.Errorf("%d markers need one set of curve options or %d, got %d", p, p, len(opt.Curves))
	}
	workers, err := groupJoint(rows, p)
	if err != nil {
		return nil, err
	}
	j := &Joint{Name: opt.Name, Markers: make([]*Model, p)}
	for k, name := range opt.Markers {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		var mrows []refcurve.Row
		for _, r := range rows {
			if v := r.Values[k]; !math.IsNaN(v) {
				mrows = append(mrows, refcurve.Row{Worker: r.Worker, Group: r.Group, Time: r.Time, Value: v})
			}
		}
		if len(mrows) < joint.MinReadings {
			return nil, &joint.ReadingsError{Marker: name, Readings: len(mrows), Min: joint.MinReadings}
		}
		co := opt.Curves[0]
		if len(opt.Curves) == p {
			co = opt.Curves[k]
		}
		m, err := Fit(ctx, mrows, FitOptions{Name: name, Curves: co, SampleWorkers: opt.SampleWorkers})
		if err != nil {
			if cerr := ctx.Err(); cerr != nil {
				return nil, cerr
			}
			var de *refcurve.DuplicateError
			if errors.As(err, &de) {
				return nil, err
			}
			return nil, &joint.MarkerError{Marker: name, Err: err}
		}
		j.Markers[k] = m
	}
	series, seqs, err := j.standardise(workers, rows)
	if err != nil {
		return nil, err
	}
	serials := make([]serial.Params, p)
	for k, m := range j.Markers {
		serials[k] = m.Serial
	}
	if j.Model, err = joint.Estimate(ctx, opt.Markers, series, serials); err != nil {
		return nil, err
	}
	var gapSum float64
	var gapN int
	for _, s := range series {
		for i := 1; i < len(s.Time); i++ {
			gapSum += s.Time[i] - s.Time[i-1]
			gapN++
		}
	}
	if gapN == 0 {
		return nil, errors.New("no reference worker has two or more exams, so the time between exams cannot be estimated")
	}
	j.MeanGap = gapSum / float64(gapN)
	ids := make([]string, len(workers))
	for i, w := range workers {
		ids[i] = w[0].worker
	}
	for _, i := range sampleIndex(ids, opt.SampleWorkers) {
		s := seqs[i]
		js := JointSequence{Group: s.Group, Time: round(s.Time, 1e6), Z: make([]Readings, p)}
		for k := range p {
			js.Z[k] = Readings(round(s.Z[k], 1e9))
		}
		j.Sample = append(j.Sample, js)
	}
	if err := j.rehash(); err != nil {
		return nil, err
	}
	return j, nil
}

// standardise returns the reference workers' standardised readings, as
// joint series and as sequences with their groups.
func (j *Joint) standardise(workers [][]jointExam, rows []JointRow) ([]joint.Series, []JointSequence, error) {
	p := len(j.Markers)
	series := make([]joint.Series, len(workers))
	seqs := make([]JointSequence, len(workers))
	for i, w := range workers {
		s := joint.Series{Time: make([]float64, len(w)), Z: make([][]float64, p)}
		for k := range p {
			s.Z[k] = make([]float64, len(w))
		}
		for e, ex := range w {
			s.Time[e] = ex.time
			for k, r := range ex.rows {
				s.Z[k][e] = math.NaN()
				if r < 0 {
					continue
				}
				z, err := j.Markers[k].Curves.Z(ex.group, ex.time, rows[r].Values[k], false)
				if err != nil {
					return nil, nil, &joint.MarkerError{Marker: j.Markers[k].Name, Err: fmt.Errorf("data row %d: %w", r+1, err)}
				}
				s.Z[k][e] = z
			}
		}
		series[i] = s
		seqs[i] = JointSequence{Group: w[0].group, Time: s.Time}
		seqs[i].Z = make([]Readings, p)
		for k := range p {
			seqs[i].Z[k] = s.Z[k]
		}
	}
	return series, seqs, nil
}

// jointDocument is the JSON form of a Joint: each marker's own model
// document, then what joins them.
type jointDocument struct {
	Format  string            `json:"format"`
	Version int               `json:"version"`
	Name    string            `json:"name"`
	Hash    string            `json:"hash"`
	Markers []json.RawMessage `json:"markers"`
	Joint   *joint.Model      `json:"joint"`
	MeanGap float64           `json:"mean_gap"`
	Sample  []JointSequence   `json:"sample"`
}

func (j *Joint) document() (jointDocument, error) {
	d := jointDocument{Format: Format, Version: FormatVersion, Name: j.Name, Joint: j.Model, MeanGap: j.MeanGap, Sample: j.Sample}
	for _, m := range j.Markers {
		b, err := m.Encode()
		if err != nil {
			return d, err
		}
		d.Markers = append(d.Markers, b)
	}
	return d, nil
}

func jointHash(d jointDocument) (string, error) {
	d.Hash = ""
	b, err := json.Marshal(d)
	if err != nil {
		return "", err
	}
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:]), nil
}

func (j *Joint) rehash() error {
	d, err := j.document()
	if err != nil {
		return err
	}
	j.Hash, err = jointHash(d)
	return err
}

// Encode returns the model as a versioned JSON document carrying its hash.
func (j *Joint) Encode() ([]byte, error) {
	d, err := j.document()
	if err != nil {
		return nil, err
	}
	if d.Hash, err = jointHash(d); err != nil {
		return nil, err
	}
	return json.Marshal(d)
}

// IsJoint reports whether a model document holds several markers (written
// by Joint.Encode).
func IsJoint(data []byte) bool {
	var probe struct {
		Markers json.RawMessage `json:"markers"`
	}
	return json.Unmarshal(data, &probe) == nil && len(probe.Markers) > 0 && string(probe.Markers) != "null"
}

// DecodeJoint reads a document written by Joint.Encode, checking its
// format, version, hash and every marker's document; a damaged or edited
// file is refused.
func DecodeJoint(data []byte) (*Joint, error) {
	var d jointDocument
	if err := json.Unmarshal(data, &d); err != nil {
		return nil, fmt.Errorf("this is not a veer model file (%v)", err)
	}
	if d.Format != Format {
		return nil, fmt.Errorf("this is not a veer model file (format %q, want %q)", d.Format, Format)
	}
	if d.Version != FormatVersion {
		return nil, fmt.Errorf("this model file has version %d; this veer reads version %d", d.Version, FormatVersion)
	}
	if len(d.Markers) == 0 || d.Joint == nil {
		return nil, errors.New("this model file holds one marker; it is not a model of several markers")
	}
	want, err := jointHash(d)
	if err != nil {
		return nil, err
	}
	if d.Hash != want {
		return nil, errors.New("the model file is damaged or was edited by hand (its checksum does not match); fit the model again")
	}
	j := &Joint{Name: d.Name, Model: d.Joint, MeanGap: d.MeanGap, Sample: d.Sample, Hash: d.Hash}
	for _, b := range d.Markers {
		m, err := Decode(b)
		if err != nil {
			return nil, err
		}
		if m.Curves == nil {
			return nil, errors.New("the model file is damaged: a marker has no reference curves")
		}
		j.Markers = append(j.Markers, m)
	}
	if err := j.Model.Check(); err != nil {
		return nil, fmt.Errorf("the model file is damaged: %w", err)
	}
	if len(j.Markers) != len(j.Model.Markers) {
		return nil, errors.New("the model file is damaged: its markers do not match")
	}
	for k, m := range j.Markers {
		if m.Name != j.Model.Markers[k] {
			return nil, errors.New("the model file is damaged: its markers do not match")
		}
	}
	if !(j.MeanGap > 0) {
		return nil, errors.New("the model file has no valid mean gap between exams")
	}
	for i, s := range j.Sample {
		if len(s.Z) != len(j.Markers) {
			return nil, fmt.Errorf("the model file's reference sequence %d is damaged", i+1)
		}
		for _, z := range s.Z {
			if len(z) != len(s.Time) {
				return nil, fmt.Errorf("the model file's reference sequence %d is damaged", i+1)
			}
		}
	}
	return j, nil
}

// Summary is a one-line description for people.
func (j *Joint) Summary() string {
	var b strings.Builder
	fmt.Fprintf(&b, "markers %s; mean gap %.2f years", strings.Join(j.MarkerNames(), ", "), j.MeanGap)
	r := j.Model.Innovation
	for a := range r.R {
		for c := a + 1; c < len(r.R); c++ {
			fmt.Fprintf(&b, "; %s-%s correlation %.2f (SE %.2f)", j.Model.Markers[a], j.Model.Markers[c], r.R[a][c], r.SE[a][c])
		}
	}
	return b.String()
}
