package screening

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"

	"veer/functions/published"
	"veer/functions/refcurve"
	"veer/functions/serial"
)

// WorkforceSerial records how a serial model was estimated from the
// screened workforce (see published.EstimateSerial), for the reviewer.
type WorkforceSerial struct {
	// Workers in the exams given; Longitudinal of them with two or more
	// exams; LeftOut flagged by the first pass and left out of the estimate.
	Workers      int `json:"workers"`
	Longitudinal int `json:"longitudinal"`
	LeftOut      int `json:"left_out"`
	// FirstPassTarget (years) and FirstPassLimit of the first pass; 0 when
	// there was none.
	FirstPassTarget float64 `json:"first_pass_target,omitempty"`
	FirstPassLimit  float64 `json:"first_pass_limit,omitempty"`
	// Location and Scale are the mean and SD of the workers' z against the
	// published reference (about 0 and 1 when it describes them).
	Location float64 `json:"location"`
	Scale    float64 `json:"scale"`
}

// PublishedOptions control FitPublished.
type PublishedOptions struct {
	// Name is the model's name.
	Name string
	// Serial, if not nil, is the serial model set by the user; otherwise it
	// is estimated from the exams given.
	Serial *serial.Params
	// FirstPass, if not nil, leaves out of the estimate the workers a first
	// screening pass flags (published.FirstPass; DefaultFirstPass).
	FirstPass *published.FirstPass
	// Extrapolate lets exams outside the reference's ages (or covariate
	// ranges) be scored at its nearest end; otherwise they are an error.
	Extrapolate bool
	// SampleWorkers caps the workers' sequences kept for bootstrap limits
	// and the follow-up horizon (0: DefaultSampleWorkers).
	SampleWorkers int
}

// FitPublished builds a screening model on a published reference, for a
// site with no healthy reference cohort of its own. The exams are the
// screened workforce's (with their covariates): their z against the
// reference give the serial model (estimated, unless set by the user), the
// gaps between exams and the sequences kept for bootstrap limits and the
// follow-up horizon. With no exams the serial model must be set by the
// user, and limits then need a planned gap between exams.
//
// A cancelled ctx ends the serial estimate with ctx's error.
func FitPublished(ctx context.Context, ref *published.Reference, exams []Exam, opt PublishedOptions) (*Model, error) {
	if strings.TrimSpace(opt.Name) == "" {
		return nil, errors.New("the model needs a name")
	}
	if ref == nil {
		return nil, errors.New("the model needs a published reference")
	}
	m := &Model{Name: opt.Name, Published: ref}
	if opt.Serial != nil {
		if err := opt.Serial.Validate(); err != nil {
			return nil, err
		}
		m.Serial = serial.Params{Phi: opt.Serial.Phi, C: opt.Serial.C}
		m.SerialSource = SerialFromUser
	}
	if len(exams) == 0 {
		if opt.Serial == nil {
			return nil, errors.New("without a reference cohort the serial correlation is estimated from the workforce's exams; give them, or set the serial model by hand")
		}
		return m, m.rehash()
	}
	z, err := m.scoreAll(exams, opt.Extrapolate)
	if err != nil {
		return nil, err
	}
	workers := groupByWorker(exams, func(int) bool { return true })
	if err := checkDuplicates(exams, workers); err != nil {
		return nil, err
	}
	series := make([]serial.Series, len(workers))
	for k, idx := range workers {
		s := serial.Series{Time: make([]float64, len(idx)), Z: make([]float64, len(idx))}
		for j, i := range idx {
			s.Time[j], s.Z[j] = exams[i].Time, z[i]
		}
		series[k] = s
	}
	keep := make([]bool, len(series))
	for i := range keep {
		keep[i] = true
	}
	if opt.Serial == nil {
		est, err := published.EstimateSerial(ctx, series, opt.FirstPass)
		if err != nil {
			return nil, err
		}
		m.Serial, m.SerialSource = est.Params, SerialFromWorkforce
		m.Workforce = &WorkforceSerial{Workers: est.Workers, Longitudinal: est.Longitudinal, LeftOut: len(est.LeftOut),
			FirstPassLimit: est.FirstPassLimit, Location: est.Location, Scale: est.Scale}
		if opt.FirstPass != nil {
			m.Workforce.FirstPassTarget = opt.FirstPass.Target
		}
		for _, i := range est.LeftOut {
			keep[i] = false
		}
	}
	var kept []serial.Series
	var res []workerSeries
	var gapSum float64
	var gapN int
	for k, s := range series {
		if !keep[k] {
			continue
		}
		kept = append(kept, s)
		e := exams[workers[k][0]]
		res = append(res, workerSeries{worker: e.Worker, group: e.Group, time: s.Time, z: s.Z})
		for j := 1; j < len(s.Time); j++ {
			gapSum += s.Time[j] - s.Time[j-1]
			gapN++
		}
	}
	if gapN == 0 {
		return nil, errors.New("no worker has two or more exams, so the time between exams cannot be known; set the serial model by hand and give the planned gap when computing limits")
	}
	m.MeanGap = gapSum / float64(gapN)
	if m.SerialDiagnostics, err = serial.Diagnose(m.Serial, kept); err != nil {
		return nil, fmt.Errorf("serial correlation: %v", err)
	}
	m.Sample = sampleOf(res, opt.SampleWorkers)
	return m, m.rehash()
}

// workerSeries is one worker's z in time order.
type workerSeries struct {
	worker, group string
	time, z       []float64
}

// scoreAll standardises every exam against the model's reference; rows
// that cannot be scored are an error naming them (1-based).
func (m *Model) scoreAll(exams []Exam, extrapolate bool) ([]float64, error) {
	ref := m.Reference()
	n := len(exams)
	groups := make([]string, n)
	times := make([]float64, n)
	values := make([]float64, n)
	for i, e := range exams {
		groups[i], times[i], values[i] = e.Group, e.Time, e.Value
	}
	z := make([]float64, n)
	if err := ref.ZMany(groups, times, values, covColumns(exams, len(ref.Covariates())), extrapolate, z); err != nil {
		return nil, err
	}
	return z, nil
}

// covColumns turns the exams' covariates into one column per covariate
// (NaN where an exam has none); nil when the reference has none.
func covColumns(exams []Exam, k int) [][]float64 {
	if k == 0 {
		return nil
	}
	cols := make([][]float64, k)
	for c := range cols {
		cols[c] = make([]float64, len(exams))
		for i, e := range exams {
			if c < len(e.Covariates) {
				cols[c][i] = e.Covariates[c]
			} else {
				cols[c][i] = math.NaN()
			}
		}
	}
	return cols
}

// checkDuplicates refuses two exams of one worker at the same age.
func checkDuplicates(exams []Exam, workers [][]int) error {
	for _, idx := range workers {
		for j := 1; j < len(idx); j++ {
			a, b := idx[j-1], idx[j]
			if exams[a].Time == exams[b].Time {
				return &refcurve.DuplicateError{Worker: exams[a].Worker, Time: exams[a].Time, Rows: [2]int{min(a, b) + 1, max(a, b) + 1}}
			}
		}
	}
	return nil
}
