package evaluation

import (
	"context"
	"math"
	"strings"
)

// Exam is one exam of the labelled history: the worker and the age at the
// exam, in years.
type Exam struct {
	Worker string
	Age    float64
}

// Outcome is one row of the outcomes table: whether the worker was
// diagnosed with the condition screened for and, if so, at what age.
type Outcome struct {
	// Row is the data row in the outcomes table, counted from 1 without a
	// header, for messages; 0 means the outcome's position in the slice + 1.
	Row    int
	Worker string
	// Diagnosed is the cell's text: yes or no (see ParseDiagnosed).
	Diagnosed string
	// Age is the age at diagnosis in years; NaN for a blank cell, as it
	// must be for a worker never diagnosed.
	Age float64
}

// Columns are the names of the table columns, used in messages.
type Columns struct {
	// Worker and Time are the exam table's worker id and age columns; the
	// outcomes table's worker column has the same name as the exams'.
	Worker, Time string
	// Diagnosed and DiagnosedAge are the outcomes table's columns.
	Diagnosed, DiagnosedAge string
}

// DefaultColumns are the column names used when Options leaves them blank.
func DefaultColumns() Columns {
	return Columns{Worker: "worker", Time: "age", Diagnosed: "diagnosed", DiagnosedAge: "diagnosed_age"}
}

// Options steer NewCohort.
type Options struct {
	Columns Columns
	// MissingAsHealthy treats workers of the exam table with no outcome
	// row as never diagnosed; without it they are an error
	// (*MissingOutcomesError).
	MissingAsHealthy bool
}

// MaxRows is the most exam rows, and the most outcome rows, a cohort takes.
const MaxRows = 50_000_000

// missingListed is how many workers without an outcome row an error names.
const missingListed = 5

// ParseDiagnosed reads a diagnosis flag: yes, y, true or 1 for diagnosed and
// no, n, false or 0 for never diagnosed, in any case and with surrounding
// spaces ignored. ok is false for anything else, blank included.
func ParseDiagnosed(s string) (diagnosed, ok bool) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "yes", "y", "true", "1":
		return true, true
	case "no", "n", "false", "0":
		return false, true
	}
	return false, false
}

// worker is one worker of a cohort.
type worker struct {
	id        string
	diagnosed bool
	// dxAge is the age at diagnosis (+Inf when never diagnosed).
	dxAge float64
	// first and last are the ages of the first and last screening exams
	// (exams before the diagnosis); n counts them.
	first, last float64
	n           int
}

// Cohort is a labelled history checked and ready to evaluate many
// methods' flags against: the exams, each worker's outcome, and which
// exams are screening exams (before the diagnosis). It is immutable and
// safe for concurrent use.
type Cohort struct {
	workers []worker
	// row[i] is exam i's worker, or -1 when the exam is at or after the
	// worker's diagnosis (left out).
	row []int32
	age []float64
	sum Summary
}

// Summary counts what a cohort holds.
type Summary struct {
	// Workers in the exam table; Diagnosed of them with at least one exam
	// before the diagnosis (the denominator of detection); AtFirstExam
	// diagnosed at their first exam, so with no exam before it, and left
	// out of every figure; Healthy never diagnosed, MissingAsHealthy of
	// them because they had no outcome row and Options.MissingAsHealthy
	// was set.
	Workers, Diagnosed, AtFirstExam, Healthy, MissingAsHealthy int
	// Exams in the table; AfterDiagnosis of them at or after the worker's
	// diagnosis, left out (follow-up of a known condition is not
	// screening), belonging to WorkersAfterDiagnosis workers.
	Exams, AfterDiagnosis, WorkersAfterDiagnosis int
	// HealthyFollowUp is the healthy workers' years from first to last
	// exam, summed.
	HealthyFollowUp float64
}

// checkEvery is how many loop turns pass between checks for cancellation.
const checkEvery = 1 << 16

// NewCohort checks the exams and outcomes and prepares them. Problems in
// the outcomes table are all reported together (*OutcomeErrors: outcome
// ids not in the exams, ages at diagnosis before the first exam, flags
// that are not yes/no, duplicate rows, blank or impossible ages); then
// workers without an outcome row (*MissingOutcomesError) unless
// o.MissingAsHealthy; then a cohort with no diagnosed or no healthy worker
// (*CohortError). A blank worker id or an impossible age in the exams is an
// *ExamError. It returns ctx.Err() when ctx is cancelled.
func NewCohort(ctx context.Context, exams []Exam, outcomes []Outcome, o Options) (*Cohort, error) {
	cols := o.Columns
	def := DefaultColumns()
	for _, p := range []struct {
		dst *string
		def string
	}{
		{&cols.Worker, def.Worker}, {&cols.Time, def.Time}, {&cols.Diagnosed, def.Diagnosed}, {&cols.DiagnosedAge, def.DiagnosedAge},
	} {
		if *p.dst == "" {
			*p.dst = p.def
		}
	}
	switch {
	case len(exams) == 0:
		return nil, &CohortError{Err: ErrNoExams}
	case len(exams) > MaxRows:
		return nil, &CohortError{Err: ErrTooLarge, Rows: len(exams), Max: MaxRows, What: "exam"}
	case len(outcomes) > MaxRows:
		return nil, &CohortError{Err: ErrTooLarge, Rows: len(outcomes), Max: MaxRows, What: "outcome"}
	}
	c := &Cohort{row: make([]int32, len(exams)), age: make([]float64, len(exams))}
	index := make(map[string]int32, len(exams)/4+1)
	for i, e := range exams {
		if i%checkEvery == 0 {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
		}
		if e.Worker == "" {
			return nil, &ExamError{Row: i + 1, Column: cols.Worker, Err: ErrBlankWorker}
		}
		if !validAge(e.Age) {
			return nil, &ExamError{Row: i + 1, Column: cols.Time, Age: e.Age, Err: ErrBadAge}
		}
		k, ok := index[e.Worker]
		if !ok {
			k = int32(len(c.workers))
			index[e.Worker] = k
			c.workers = append(c.workers, worker{id: e.Worker, dxAge: math.Inf(1), first: e.Age, last: e.Age})
		}
		w := &c.workers[k]
		w.first, w.last = math.Min(w.first, e.Age), math.Max(w.last, e.Age)
		c.row[i], c.age[i] = k, e.Age
	}

	// The outcomes, every problem collected.
	probs := &OutcomeErrors{}
	add := func(e *OutcomeError) {
		probs.Total++
		if len(probs.Errs) < MaxReported {
			probs.Errs = append(probs.Errs, e)
		}
	}
	seen := make(map[string]int, len(outcomes)) // worker -> row
	for i, r := range outcomes {
		if i%checkEvery == 0 {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
		}
		row := r.Row
		if row <= 0 {
			row = i + 1
		}
		id := r.Worker
		if strings.TrimSpace(id) == "" {
			add(&OutcomeError{Row: row, Column: cols.Worker, Err: ErrBlankWorker})
			continue
		}
		if prev, dup := seen[id]; dup {
			add(&OutcomeError{Row: row, OtherRow: prev, Column: cols.Worker, Worker: id, Err: ErrDuplicateOutcome})
			continue
		}
		seen[id] = row
		k, known := index[id]
		if !known {
			add(&OutcomeError{Row: row, Column: cols.Worker, Worker: id, Err: ErrUnknownWorker})
			continue
		}
		dx, ok := ParseDiagnosed(r.Diagnosed)
		if !ok {
			add(&OutcomeError{Row: row, Column: cols.Diagnosed, Worker: id, Value: r.Diagnosed, Err: ErrDiagnosisFlag})
			continue
		}
		blank := math.IsNaN(r.Age)
		switch {
		case !dx && !blank:
			add(&OutcomeError{Row: row, Column: cols.DiagnosedAge, Worker: id, Age: r.Age, Err: ErrAgeWithoutDiagnosis})
		case !dx:
		case blank:
			add(&OutcomeError{Row: row, Column: cols.DiagnosedAge, Worker: id, Err: ErrMissingDiagnosisAge})
		case !validAge(r.Age):
			add(&OutcomeError{Row: row, Column: cols.DiagnosedAge, Worker: id, Age: r.Age, Err: ErrBadAge})
		case r.Age < c.workers[k].first:
			add(&OutcomeError{Row: row, Column: cols.DiagnosedAge, Worker: id, Age: r.Age, FirstExam: c.workers[k].first, Err: ErrDiagnosedBeforeFirstExam})
		default:
			c.workers[k].diagnosed, c.workers[k].dxAge = true, r.Age
		}
	}
	if probs.Total > 0 {
		return nil, probs
	}
	if len(seen) < len(c.workers) {
		miss := &MissingOutcomesError{}
		for _, w := range c.workers {
			if _, ok := seen[w.id]; !ok {
				miss.Count++
				if len(miss.Workers) < missingListed {
					miss.Workers = append(miss.Workers, w.id)
				}
			}
		}
		if !o.MissingAsHealthy {
			return nil, miss
		}
		c.sum.MissingAsHealthy = miss.Count
	}

	// Screening exams: those before the diagnosis.
	for k := range c.workers {
		w := &c.workers[k]
		w.first, w.last = math.Inf(1), math.Inf(-1)
	}
	after := make([]bool, len(c.workers))
	for i, k := range c.row {
		w := &c.workers[k]
		a := c.age[i]
		if a >= w.dxAge {
			c.row[i] = -1
			c.sum.AfterDiagnosis++
			after[k] = true
			continue
		}
		w.n++
		w.first, w.last = math.Min(w.first, a), math.Max(w.last, a)
	}
	s := &c.sum
	s.Workers, s.Exams = len(c.workers), len(exams)
	for k, w := range c.workers {
		if after[k] {
			s.WorkersAfterDiagnosis++
		}
		switch {
		case !w.diagnosed:
			s.Healthy++
			s.HealthyFollowUp += w.last - w.first
		case w.n == 0:
			s.AtFirstExam++
		default:
			s.Diagnosed++
		}
	}
	if s.Diagnosed == 0 {
		return nil, &CohortError{Err: ErrNoDiagnosed, Diagnosed: s.AtFirstExam, AtFirstExam: s.AtFirstExam}
	}
	if s.Healthy == 0 {
		return nil, &CohortError{Err: ErrNoHealthy, Diagnosed: s.Diagnosed + s.AtFirstExam, AtFirstExam: s.AtFirstExam}
	}
	return c, nil
}

func validAge(a float64) bool { return a >= 0 && !math.IsInf(a, 0) }

// Summary returns the cohort's counts.
func (c *Cohort) Summary() Summary { return c.sum }

// Len is the number of exams the cohort was made from: Evaluate takes one
// flag per exam.
func (c *Cohort) Len() int { return len(c.row) }

// Screening reports whether exam i (0-based, in the order given to
// NewCohort) is a screening exam, before the worker's diagnosis. Exams
// that are not may be left out of the screening whose flags Evaluate
// takes: their flags are ignored.
func (c *Cohort) Screening(i int) bool { return c.row[i] >= 0 }
