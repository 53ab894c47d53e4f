package screening

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash/fnv"
	"math"
	"sort"
	"strconv"
	"strings"

	"veer/functions/published"
	"veer/functions/refcurve"
	"veer/functions/serial"
	"veer/internal/numeric"
)

// Format and FormatVersion identify a screening model document (fitted
// curves, and joint models of several markers). A model on a published
// reference is written as PublishedVersion, so that an older veer refuses
// it plainly.
const (
	Format           = "veer.model"
	FormatVersion    = 1
	PublishedVersion = 2
)

// DefaultSampleWorkers is how many reference workers' residual sequences a
// model keeps for bootstrap limits when FitOptions.SampleWorkers is 0.
const DefaultSampleWorkers = 4000

// FitOptions control Fit.
type FitOptions struct {
	// Name is the model's name, e.g. "sbp".
	Name string
	// Curves are the reference-curve options (transform, bandwidths, ...).
	Curves refcurve.Options
	// SampleWorkers caps the reference sequences kept in the model
	// (0: DefaultSampleWorkers). The sample is chosen by a hash of the worker
	// id, so it does not depend on row order.
	SampleWorkers int
}

// Sequence is one reference worker's standardised residuals in time order.
type Sequence struct {
	Group string    `json:"group,omitempty"`
	Time  []float64 `json:"time"`
	Z     []float64 `json:"z"`
}

// Where a model's serial correlation comes from (Model.SerialSource).
const (
	// SerialFromReference: estimated from the healthy reference cohort the
	// curves were fitted from.
	SerialFromReference = "reference"
	// SerialFromWorkforce: estimated from the screened workforce's own
	// exams against a published reference (published.EstimateSerial).
	SerialFromWorkforce = published.SerialFromWorkforce
	// SerialFromUser: set by the user.
	SerialFromUser = published.SerialFromUser
)

// Model is a screening model. Build one with Fit, FitPublished or Decode.
type Model struct {
	Name string
	// Curves are the fitted reference curves; nil when the model uses a
	// published reference. Reference gives either behind one interface.
	Curves *refcurve.Model
	// Published is the published reference (LMS table or equations), nil
	// for fitted curves.
	Published *published.Reference
	// Serial is the serial correlation of reference residuals within a worker.
	Serial serial.Params
	// SerialSource says where Serial comes from: SerialFromReference,
	// SerialFromWorkforce or SerialFromUser. Workforce describes the
	// estimate from the workforce (nil otherwise).
	SerialSource string
	Workforce    *WorkforceSerial
	// SerialDiagnostics checks the whitened reference residuals.
	SerialDiagnostics serial.Diagnostics
	// MeanGap is the mean years between consecutive exams of reference workers.
	MeanGap float64
	// Sample holds reference workers' residual sequences (see DefaultSampleWorkers).
	Sample []Sequence
	// Hash identifies the content; it is the same for the same data and options.
	Hash string
}

// Fit fits a screening model from the exams of healthy reference workers.
func Fit(ctx context.Context, rows []refcurve.Row, opt FitOptions) (*Model, error) {
	if strings.TrimSpace(opt.Name) == "" {
		return nil, errors.New("the model needs a name")
	}
	curves, err := refcurve.Fit(rows, opt.Curves)
	if err != nil {
		return nil, err
	}
	res, err := curves.Residuals(rows)
	if err != nil {
		return nil, err
	}
	series := make([]serial.Series, 0, len(res))
	var gapSum float64
	var gapN int
	for _, r := range res {
		series = append(series, serial.Series{Time: r.Time, Z: r.Z})
		for j := 1; j < len(r.Time); j++ {
			gapSum += r.Time[j] - r.Time[j-1]
			gapN++
		}
	}
	if gapN == 0 {
		return nil, errors.New("no reference worker has two or more exams, so the time between exams and the serial correlation cannot be estimated")
	}
	params, err := serial.Estimate(ctx, series)
	if err != nil {
		return nil, fmt.Errorf("serial correlation: %w", err)
	}
	// With (almost) no correlation the standard errors can be undefined;
	// they are stored as 0, "not available", so the model stays valid JSON.
	if !numeric.Finite(params.SEPhi) {
		params.SEPhi = 0
	}
	if !numeric.Finite(params.SEC) {
		params.SEC = 0
	}
	m := &Model{
		Name:         opt.Name,
		Curves:       curves,
		Serial:       params,
		SerialSource: SerialFromReference,
		MeanGap:      gapSum / float64(gapN),
	}
	if m.SerialDiagnostics, err = serial.Diagnose(params, series); err != nil {
		return nil, fmt.Errorf("serial correlation: %v", err)
	}
	m.Sample = sample(res, opt.SampleWorkers)
	if err := m.rehash(); err != nil {
		return nil, err
	}
	return m, nil
}

// sample keeps up to n sequences (those with the smallest hash of the worker
// id), in worker order, so the choice does not depend on row order.
func sample(res []refcurve.WorkerSeries, n int) []Sequence {
	ids := make([]string, len(res))
	for i, r := range res {
		ids[i] = r.Worker
	}
	keep := sampleIndex(ids, n)
	out := make([]Sequence, len(keep))
	for j, i := range keep {
		r := res[i]
		out[j] = Sequence{Group: r.Group, Time: round(r.Time, 1e6), Z: round(r.Z, 1e9)}
	}
	return out
}

// sampleOf is sample for any workers' series.
func sampleOf(res []workerSeries, n int) []Sequence {
	ids := make([]string, len(res))
	for i, r := range res {
		ids[i] = r.worker
	}
	keep := sampleIndex(ids, n)
	out := make([]Sequence, len(keep))
	for j, i := range keep {
		r := res[i]
		out[j] = Sequence{Group: r.group, Time: round(r.time, 1e6), Z: round(r.z, 1e9)}
	}
	return out
}

// sampleIndex returns the positions of up to n workers (those with the
// smallest hash of their id; 0 means DefaultSampleWorkers), in order.
func sampleIndex(ids []string, n int) []int {
	if n <= 0 {
		n = DefaultSampleWorkers
	}
	type keyed struct {
		key uint64
		i   int
	}
	ks := make([]keyed, len(ids))
	for i, id := range ids {
		h := fnv.New64a()
		h.Write([]byte(id))
		ks[i] = keyed{h.Sum64(), i}
	}
	if len(ks) > n {
		sort.Slice(ks, func(a, b int) bool {
			if ks[a].key != ks[b].key {
				return ks[a].key < ks[b].key
			}
			return ks[a].i < ks[b].i
		})
		ks = ks[:n]
		sort.Slice(ks, func(a, b int) bool { return ks[a].i < ks[b].i })
	}
	out := make([]int, len(ks))
	for j, k := range ks {
		out[j] = k.i
	}
	return out
}

// round keeps a stored number to a fixed precision so documents are compact
// and byte-stable.
func round(v []float64, scale float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = math.Round(x*scale) / scale
	}
	return out
}

// document is the JSON form of a Model: version 1 (fitted curves) has
// curves; version 2 (a published reference) has reference, the reference's
// equations document, and the serial model's source.
type document struct {
	Format            string             `json:"format"`
	Version           int                `json:"version"`
	Name              string             `json:"name"`
	Hash              string             `json:"hash"`
	Curves            json.RawMessage    `json:"curves,omitempty"`
	Reference         json.RawMessage    `json:"reference,omitempty"`
	Serial            serial.Params      `json:"serial"`
	SerialSource      string             `json:"serial_source,omitempty"`
	Workforce         *WorkforceSerial   `json:"workforce,omitempty"`
	SerialDiagnostics serial.Diagnostics `json:"serial_diagnostics"`
	MeanGap           float64            `json:"mean_gap"`
	Sample            []Sequence         `json:"sample"`
}

func (m *Model) document() (document, error) {
	d := document{
		Format: Format, Version: FormatVersion, Name: m.Name,
		Serial: m.Serial, SerialDiagnostics: m.SerialDiagnostics,
		MeanGap: m.MeanGap, Sample: m.Sample,
	}
	var err error
	if m.Published != nil {
		d.Version = PublishedVersion
		d.SerialSource, d.Workforce = m.SerialSource, m.Workforce
		d.Reference, err = m.Published.Encode()
		if err == nil {
			d.Reference, err = compactJSON(d.Reference)
		}
	} else {
		d.Curves, err = m.Curves.Encode()
	}
	return d, err
}

// compactJSON removes insignificant space, so a reference embedded in a
// model hashes the same however it was laid out.
func compactJSON(b []byte) ([]byte, error) {
	var buf bytes.Buffer
	if err := json.Compact(&buf, b); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

func contentHash(d document) (string, error) {
	d.Hash = ""
	b, err := json.Marshal(d)
	if err != nil {
		return "", err
	}
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:]), nil
}

func (m *Model) rehash() error {
	d, err := m.document()
	if err != nil {
		return err
	}
	m.Hash, err = contentHash(d)
	return err
}

// Encode returns the model as a versioned JSON document carrying its hash.
func (m *Model) Encode() ([]byte, error) {
	d, err := m.document()
	if err != nil {
		return nil, err
	}
	if d.Hash, err = contentHash(d); err != nil {
		return nil, err
	}
	return json.Marshal(d)
}

// Decode reads a document written by Encode, checking its format, version
// and hash: a damaged or edited file is refused.
func Decode(data []byte) (*Model, error) {
	if IsJoint(data) {
		var probe struct {
			Name    string            `json:"name"`
			Markers []json.RawMessage `json:"markers"`
		}
		_ = json.Unmarshal(data, &probe)
		e := &SeveralMarkersError{Name: probe.Name}
		for _, b := range probe.Markers {
			var n struct {
				Name string `json:"name"`
			}
			_ = json.Unmarshal(b, &n)
			e.Markers = append(e.Markers, n.Name)
		}
		return nil, e
	}
	var d document
	if err := json.Unmarshal(data, &d); err != nil {
		return nil, fmt.Errorf("this is not a veer model file (%v)", err)
	}
	if d.Format != Format {
		return nil, fmt.Errorf("this is not a veer model file (format %q, want %q)", d.Format, Format)
	}
	if d.Version != FormatVersion && d.Version != PublishedVersion {
		return nil, fmt.Errorf("this model file has version %d; this veer reads versions %d and %d", d.Version, FormatVersion, PublishedVersion)
	}
	want, err := contentHash(d)
	if err != nil {
		return nil, err
	}
	if d.Hash != want {
		return nil, errors.New("the model file is damaged or was edited by hand (its checksum does not match); fit the model again")
	}
	m := &Model{
		Name: d.Name, Serial: d.Serial, SerialSource: d.SerialSource, Workforce: d.Workforce,
		SerialDiagnostics: d.SerialDiagnostics, MeanGap: d.MeanGap, Sample: d.Sample, Hash: d.Hash,
	}
	switch d.Version {
	case FormatVersion:
		if m.Curves, err = refcurve.Decode(d.Curves); err != nil {
			return nil, err
		}
		m.SerialSource = SerialFromReference
	default:
		if m.Published, err = published.DecodeEquations(d.Reference); err != nil {
			return nil, fmt.Errorf("the model file's published reference: %w", err)
		}
		switch m.SerialSource {
		case SerialFromWorkforce, SerialFromUser:
		default:
			return nil, fmt.Errorf("the model file names an unknown source of its serial model (%q)", m.SerialSource)
		}
	}
	if err := m.Serial.Validate(); err != nil {
		return nil, fmt.Errorf("the model file's serial model: %w", err)
	}
	if !(d.MeanGap > 0) && !(m.Published != nil && len(d.Sample) == 0 && d.MeanGap == 0) {
		return nil, errors.New("the model file has no valid mean gap between exams")
	}
	for i, s := range d.Sample {
		if len(s.Time) != len(s.Z) {
			return nil, fmt.Errorf("the model file's reference sequence %d is damaged", i+1)
		}
	}
	return m, nil
}

// Summary is a one-line description for people.
func (m *Model) Summary() string {
	ref := m.Reference()
	s := "groups " + strings.Join(ref.Groups(), ", ")
	if m.Published != nil {
		s = "published reference"
		if info := m.Published.Info(); info.Name != "" {
			s += " " + strconv.Quote(info.Name)
		}
		s += "; groups " + strings.Join(ref.Groups(), ", ")
		if cv := ref.Covariates(); len(cv) > 0 {
			s += "; covariates " + strings.Join(cv, ", ")
		}
	}
	s += "; " + m.Serial.Finding() + " (" + SerialSourceText(m.SerialSource) + ")"
	if m.MeanGap > 0 {
		s += fmt.Sprintf("; mean gap %.2f years", m.MeanGap)
	}
	return s
}

// SerialSourceText says in words where a serial model comes from.
func SerialSourceText(source string) string {
	switch source {
	case SerialFromWorkforce:
		return "estimated from the screened workforce's own exams"
	case SerialFromUser:
		return "set by the user"
	}
	return "estimated from the reference cohort"
}
