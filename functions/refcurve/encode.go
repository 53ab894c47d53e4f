package refcurve

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"

	"veer/functions/transform"
	"veer/internal/numeric"
)

// MaxModelBytes bounds the size of a model document Decode accepts.
const MaxModelBytes = 64 << 20

// contentHash is "sha256:" + the hex SHA-256 of the model's compact JSON
// encoding with Hash empty. encoding/json writes struct fields in a fixed
// order and floats in their shortest round-trip form, so decoding and
// re-encoding reproduces the same bytes.
func (m *Model) contentHash() (string, error) {
	c := *m
	c.Hash = ""
	b, err := json.Marshal(&c)
	if err != nil {
		return "", fmt.Errorf("encoding the model: %w", err)
	}
	sum := sha256.Sum256(b)
	return "sha256:" + hex.EncodeToString(sum[:]), nil
}

// Encode returns the model as an indented JSON document ("format":
// "veer.refcurve", "version": 1) whose "hash" field is the content hash
// (it also sets m.Hash). Same data and settings give the same document.
func (m *Model) Encode() ([]byte, error) {
	h, err := m.contentHash()
	if err != nil {
		return nil, err
	}
	m.Hash = h
	b, err := json.MarshalIndent(m, "", " ")
	if err != nil {
		return nil, fmt.Errorf("encoding the model: %w", err)
	}
	return append(b, '\n'), nil
}

// Decode reads a document written by Encode. It checks, in order, that it
// is JSON, that its format is "veer.refcurve" and its version one this
// program reads, that no unknown field is present, that the content hash
// matches (a changed or damaged file is refused) and that the curves are
// consistent (grid lengths, equal spacing, finite values, positive sd).
func Decode(data []byte) (*Model, error) {
	if len(data) > MaxModelBytes {
		return nil, fmt.Errorf("the model file is %d bytes, more than the %d a reference model can need", len(data), MaxModelBytes)
	}
	var head struct {
		Format  string `json:"format"`
		Version int    `json:"version"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return nil, fmt.Errorf("the model file is not readable JSON: %v", err)
	}
	if head.Format != Format {
		return nil, fmt.Errorf("this is not a veer reference model (format %q, expected %q)", head.Format, Format)
	}
	if head.Version > Version {
		return nil, fmt.Errorf("the model file has format version %d, newer than this program reads (%d); update veer", head.Version, Version)
	}
	if head.Version != Version {
		return nil, fmt.Errorf("the model file has format version %d, which this program cannot read (it reads version %d)", head.Version, Version)
	}
	var m Model
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&m); err != nil {
		return nil, fmt.Errorf("the model file does not have the expected layout: %v", err)
	}
	if m.Hash == "" {
		return nil, errors.New("the model file has no content hash")
	}
	want, err := m.contentHash()
	if err != nil {
		return nil, err
	}
	if m.Hash != want {
		return nil, errors.New("the model file's content does not match its hash: it was changed after it was written, or is damaged; refit the model or restore the file")
	}
	if err := m.validate(); err != nil {
		return nil, fmt.Errorf("the model file is inconsistent: %v", err)
	}
	m.finish()
	return &m, nil
}

// validate checks what the lookups rely on.
func (m *Model) validate() error {
	tr, err := transform.New(m.Transform, m.Lambda)
	if err != nil || tr.Name != m.Transform || tr.Lambda != m.Lambda {
		return fmt.Errorf("transform %q with lambda %g is not valid", m.Transform, m.Lambda)
	}
	s := m.Settings
	if s.GridPoints < MinGridPoints || s.GridPoints > MaxGridPoints || s.MinWorkers < LeastMinWorkers ||
		!(s.Bandwidth >= 0) || !(s.SDBandwidth >= 0) {
		return errors.New("the settings are out of range")
	}
	if m.Rows < 1 || len(m.Curves) == 0 {
		return errors.New("the model has no curves")
	}
	for i := range m.Curves {
		c := &m.Curves[i]
		if i > 0 && !(c.Group > m.Curves[i-1].Group) {
			return errors.New("groups are not in order or repeat")
		}
		n := s.GridPoints
		if len(c.Time) != n || len(c.Mean) != n || len(c.SD) != n {
			return fmt.Errorf("%s: curves must have %d grid times", groupLabel(c.Group), n)
		}
		if !numeric.Finite(c.TimeMin) || !numeric.Finite(c.TimeMax) || !(c.TimeMin < c.TimeMax) || !wideEnough(c.TimeMin, c.TimeMax) {
			return fmt.Errorf("%s: the age range is not valid", groupLabel(c.Group))
		}
		r := c.TimeMax - c.TimeMin
		if c.Time[0] != c.TimeMin || c.Time[n-1] != c.TimeMax {
			return fmt.Errorf("%s: the grid does not span the age range", groupLabel(c.Group))
		}
		for k := 0; k < n; k++ {
			want := c.TimeMin + float64(k)*r/float64(n-1)
			if math.Abs(c.Time[k]-want) > 1e-9*r || !numeric.Finite(c.Mean[k]) || !numeric.Finite(c.SD[k]) || !(c.SD[k] > 0) {
				return fmt.Errorf("%s: grid point %d is not valid", groupLabel(c.Group), k+1)
			}
		}
	}
	return nil
}
