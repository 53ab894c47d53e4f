package refcurve

import (
	"strconv"

	"veer/functions/transform"
)

// Row is one exam of a reference worker: worker id, time in years (usually
// age), marker value and an optional group ("" when the data have no
// groups).
type Row struct {
	Worker      string
	Time, Value float64
	Group       string
}

// Options control Fit. The zero value asks for no transform,
// cross-validated bandwidths, DefaultGridPoints and DefaultMinWorkers.
type Options struct {
	// Transform is transform.None (or ""), transform.Log or
	// transform.BoxCox.
	Transform transform.Name
	// Bandwidth of the mean curve in years; 0 chooses it by
	// leave-one-worker-out cross-validation.
	Bandwidth float64
	// SDBandwidth of the variance curve in years; 0 chooses it the same
	// way, on the squared residuals.
	SDBandwidth float64
	// GridPoints is the number of grid times per curve (0: 401).
	GridPoints int
	// MinWorkers is the fewest workers a group may have (0: 10).
	MinWorkers int
	// Progress, if set, is called with a description of the current stage
	// and the share of the whole fit done so far (0 to 1). Calls never
	// overlap, but some come from Fit's worker goroutines.
	Progress func(stage string, done float64)
}

// Defaults and limits of Options.
const (
	DefaultGridPoints = 401
	MinGridPoints     = 11
	MaxGridPoints     = 10001
	// DefaultMinWorkers: with fewer than 10 workers leave-one-worker-out
	// cross-validation has too few folds to choose a bandwidth, and the
	// sd curve would rest on a handful of people.
	DefaultMinWorkers = 10
	// LeastMinWorkers is the smallest MinWorkers accepted.
	LeastMinWorkers = 3
	// MaxBandwidth is the widest bandwidth accepted (years): wider than
	// any working life, so the local line is already a straight line over
	// all ages; far wider ones lose it in rounding.
	MaxBandwidth = 100
	// SDFloorShare: the variance curve is floored at this share of the
	// group's mean squared residual, i.e. the sd at 10% of the pooled sd.
	SDFloorShare = 0.01
	// Format and Version identify the JSON document written by Encode.
	Format  = "veer.refcurve"
	Version = 1
)

// Settings are the options a model was fitted with, after defaults.
type Settings struct {
	Transform   transform.Name `json:"transform"`
	Bandwidth   float64        `json:"bandwidth"`
	SDBandwidth float64        `json:"sd_bandwidth"`
	GridPoints  int            `json:"grid_points"`
	MinWorkers  int            `json:"min_workers"`
}

// CVPoint is the cross-validation result of one candidate bandwidth: the
// mean squared prediction error of a worker's exams from the other
// workers (on the transformed scale; for the sd curve, of the squared
// residuals), and how many exams could and could not be predicted.
type CVPoint struct {
	Bandwidth float64 `json:"bandwidth"`
	Score     float64 `json:"score"`
	Predicted int     `json:"predicted"`
	Excluded  int     `json:"excluded"`
	Eligible  bool    `json:"eligible"`
}

// Normality is a D'Agostino-Pearson K² test of the standardised residuals
// (see DAgostinoPearson).
type Normality struct {
	Test           string  `json:"test"`
	N              int     `json:"n"`
	Skewness       float64 `json:"skewness"`
	ExcessKurtosis float64 `json:"excess_kurtosis"`
	ZSkewness      float64 `json:"z_skewness"`
	ZKurtosis      float64 `json:"z_kurtosis"`
	Statistic      float64 `json:"statistic"`
	PValue         float64 `json:"p_value"`
}

// Diagnostics describe a group's fit for a reviewer.
type Diagnostics struct {
	Workers int     `json:"workers"`
	Exams   int     `json:"exams"`
	TimeMin float64 `json:"time_min"`
	TimeMax float64 `json:"time_max"`
	// MeanBandwidth and SDBandwidth in years; the sources are
	// "cross-validation" or "fixed".
	MeanBandwidth       float64 `json:"mean_bandwidth"`
	MeanBandwidthSource string  `json:"mean_bandwidth_source"`
	SDBandwidth         float64 `json:"sd_bandwidth"`
	SDBandwidthSource   string  `json:"sd_bandwidth_source"`
	// MeanCVScore and SDCVScore are the cross-validation scores of the
	// chosen bandwidths (0 when fixed).
	MeanCVScore float64 `json:"mean_cv_score"`
	SDCVScore   float64 `json:"sd_cv_score"`
	// Coverage95 is the share of the group's reference exams inside the
	// central 95% band μ ± Φ⁻¹(0.975)σ (about 0.95 if the model fits).
	Coverage95 float64 `json:"coverage95"`
	// Normality tests the standardised residuals; nil with fewer than 8
	// exams.
	Normality *Normality `json:"normality,omitempty"`
	// SDFloor is the smallest sd the curve may take; FlooredPoints counts
	// grid times where the floor was applied.
	SDFloor       float64 `json:"sd_floor"`
	FlooredPoints int     `json:"floored_points"`
	// Warnings are plain-language notes for the reviewer.
	Warnings []string `json:"warnings"`
}

// Curve is the reference of one group on the transformed scale: Mean[k] and
// SD[k] at Time[k], equally spaced from TimeMin to TimeMax (the valid
// range: the group's first and last exam).
type Curve struct {
	Group       string      `json:"group"`
	TimeMin     float64     `json:"time_min"`
	TimeMax     float64     `json:"time_max"`
	Time        []float64   `json:"time"`
	Mean        []float64   `json:"mean"`
	SD          []float64   `json:"sd"`
	MeanCV      []CVPoint   `json:"mean_cv"`
	SDCV        []CVPoint   `json:"sd_cv"`
	Diagnostics Diagnostics `json:"diagnostics"`
}

// Model is a fitted reference model. Its fields are exported for reading
// and serialisation; change them only through Fit or Decode.
type Model struct {
	Format    string         `json:"format"`
	Version   int            `json:"version"`
	Transform transform.Name `json:"transform"`
	Lambda    float64        `json:"lambda"`
	Settings  Settings       `json:"settings"`
	// Rows is the number of exams fitted; DataHash the SHA-256 of the
	// input rows in canonical order ("sha256:" + hex).
	Rows     int     `json:"rows"`
	DataHash string  `json:"data_hash"`
	Curves   []Curve `json:"curves"`
	// Hash is the SHA-256 of the document without this field; see Encode.
	Hash string `json:"hash"`

	index map[string]int
	tr    transform.Transform
}

// Groups returns the group names, sorted ("" for a model without groups).
func (m *Model) Groups() []string {
	g := make([]string, len(m.Curves))
	for i := range m.Curves {
		g[i] = m.Curves[i].Group
	}
	return g
}

// Range returns the valid time range of group.
func (m *Model) Range(group string) (lo, hi float64, err error) {
	c, err := m.curve(group)
	if err != nil {
		return 0, 0, err
	}
	return c.TimeMin, c.TimeMax, nil
}

// curve returns the curve of group, or an error listing the known groups.
func (m *Model) curve(group string) (*Curve, error) {
	if m.index != nil {
		if i, ok := m.index[group]; ok {
			return &m.Curves[i], nil
		}
	} else {
		for i := range m.Curves {
			if m.Curves[i].Group == group {
				return &m.Curves[i], nil
			}
		}
	}
	return nil, m.unknownGroup(group)
}

func (m *Model) unknownGroup(group string) error {
	names := make([]string, len(m.Curves))
	for i, c := range m.Curves {
		names[i] = c.Group
	}
	return &GroupError{Group: group, Groups: names}
}

func groupLabel(g string) string {
	if g == "" {
		return "the reference data"
	}
	return "group " + strconv.Quote(g)
}

// num formats a number for messages: up to 6 significant digits.
func num(v float64) string { return strconv.FormatFloat(v, 'g', 6, 64) }
