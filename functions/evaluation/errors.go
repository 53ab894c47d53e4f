package evaluation

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
)

// Sentinel errors, for errors.Is. Each failure of NewCohort wraps one of
// them in a typed error carrying the facts (row, column, worker, ages).
var (
	// ErrUnknownWorker: an outcome row names a worker with no exams.
	ErrUnknownWorker = errors.New("worker has no exams")
	// ErrDiagnosedBeforeFirstExam: an age at diagnosis before the worker's
	// first exam.
	ErrDiagnosedBeforeFirstExam = errors.New("diagnosed before the first exam")
	// ErrDiagnosisFlag: a diagnosis flag that is not yes or no.
	ErrDiagnosisFlag = errors.New("the diagnosis flag is not yes or no")
	// ErrDuplicateOutcome: two outcome rows for one worker.
	ErrDuplicateOutcome = errors.New("two outcome rows for one worker")
	// ErrMissingDiagnosisAge: a diagnosed worker without an age at diagnosis.
	ErrMissingDiagnosisAge = errors.New("diagnosed without an age at diagnosis")
	// ErrAgeWithoutDiagnosis: an age at diagnosis for a worker marked not
	// diagnosed.
	ErrAgeWithoutDiagnosis = errors.New("an age at diagnosis for a worker not diagnosed")
	// ErrBadAge: an age that is not a finite, non-negative number of years.
	ErrBadAge = errors.New("not an age in years")
	// ErrBlankWorker: a row with an empty worker id.
	ErrBlankWorker = errors.New("the worker id is empty")
	// ErrMissingOutcomes: workers in the exams with no outcome row.
	ErrMissingOutcomes = errors.New("workers without an outcome row")
	// ErrNoDiagnosed: no diagnosed worker has an exam before the diagnosis.
	ErrNoDiagnosed = errors.New("no diagnosed worker to evaluate")
	// ErrNoHealthy: no worker was never diagnosed.
	ErrNoHealthy = errors.New("no worker who was never diagnosed")
	// ErrTooLarge: more rows than MaxRows.
	ErrTooLarge = errors.New("too many rows")
	// ErrNoExams: the exam table is empty.
	ErrNoExams = errors.New("there are no exams")
)

// OutcomeError is a problem with one row of the outcomes table (two rows
// for a duplicate). Rows are data rows counted from 1, not counting a
// header; Column names the column at fault.
type OutcomeError struct {
	Row      int
	OtherRow int // the first row of the same worker, for ErrDuplicateOutcome
	Column   string
	Worker   string
	// Value is the cell's text, for ErrDiagnosisFlag.
	Value string
	// Age is the age at diagnosis and FirstExam the worker's first exam
	// age, for ErrDiagnosedBeforeFirstExam and ErrBadAge.
	Age, FirstExam float64
	// Err is one of the sentinel errors.
	Err error
}

func (e *OutcomeError) Unwrap() error { return e.Err }

func (e *OutcomeError) Error() string {
	var b strings.Builder
	if e.OtherRow > 0 {
		fmt.Fprintf(&b, "outcomes data rows %d and %d", e.OtherRow, e.Row)
	} else {
		fmt.Fprintf(&b, "outcomes data row %d", e.Row)
	}
	if e.Column != "" {
		fmt.Fprintf(&b, ", column %q", e.Column)
	}
	b.WriteString(": ")
	w := strconv.Quote(e.Worker)
	switch e.Err {
	case ErrUnknownWorker:
		fmt.Fprintf(&b, "worker %s has no exams in the exam table; check the id, or remove the row", w)
	case ErrDiagnosedBeforeFirstExam:
		fmt.Fprintf(&b, "worker %s was diagnosed at age %s, before their first exam at %s; check the age at diagnosis", w, years(e.Age), years(e.FirstExam))
	case ErrDiagnosisFlag:
		fmt.Fprintf(&b, "%s is not yes or no (yes/no, true/false and 1/0 are understood)", quoteCell(e.Value))
	case ErrDuplicateOutcome:
		fmt.Fprintf(&b, "worker %s has two outcome rows; keep one", w)
	case ErrMissingDiagnosisAge:
		fmt.Fprintf(&b, "worker %s is diagnosed but the age at diagnosis is blank", w)
	case ErrAgeWithoutDiagnosis:
		fmt.Fprintf(&b, "worker %s is not diagnosed but has an age at diagnosis; clear the age, or mark the worker diagnosed", w)
	case ErrBadAge:
		fmt.Fprintf(&b, "%s is not an age in years", years(e.Age))
	case ErrBlankWorker:
		b.WriteString("the worker id is empty")
	default:
		b.WriteString(e.Err.Error())
	}
	return b.String()
}

// quoteCell quotes a cell's text for a message, shortened if long.
func quoteCell(s string) string {
	if r := []rune(s); len(r) > 40 {
		s = string(r[:40]) + "…"
	}
	return strconv.Quote(s)
}

// years formats an age for a message.
func years(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// OutcomeErrors holds every problem found in the outcomes table, so that a
// user can fix them all at once: the first MaxReported in Errs, Total of
// them in all. errors.Is and errors.As see each of Errs.
type OutcomeErrors struct {
	Errs  []*OutcomeError
	Total int
}

// MaxReported is how many problems an error lists at most.
const MaxReported = 10

func (e *OutcomeErrors) Error() string {
	if len(e.Errs) == 1 && e.Total == 1 {
		return e.Errs[0].Error()
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%d problems in the outcomes table:", e.Total)
	for _, x := range e.Errs {
		b.WriteString("\n  ")
		b.WriteString(x.Error())
	}
	if e.Total > len(e.Errs) {
		fmt.Fprintf(&b, "\n  ... and %d more", e.Total-len(e.Errs))
	}
	return b.String()
}

func (e *OutcomeErrors) Unwrap() []error {
	out := make([]error, len(e.Errs))
	for i, x := range e.Errs {
		out[i] = x
	}
	return out
}

// ExamError is a problem with one exam row: rows are data rows counted
// from 1; Column is the worker or age column.
type ExamError struct {
	Row    int
	Column string
	Age    float64 // for ErrBadAge
	Err    error   // ErrBlankWorker or ErrBadAge
}

func (e *ExamError) Unwrap() error { return e.Err }

func (e *ExamError) Error() string {
	msg := "the worker id is empty"
	if e.Err == ErrBadAge {
		msg = years(e.Age) + " is not an age in years"
	}
	return fmt.Sprintf("exams data row %d, column %q: %s", e.Row, e.Column, msg)
}

// MissingOutcomesError reports workers of the exam table without an
// outcome row: Count of them, the first few (in exam-table order) in
// Workers.
type MissingOutcomesError struct {
	Workers []string
	Count   int
}

func (e *MissingOutcomesError) Unwrap() error { return ErrMissingOutcomes }

func (e *MissingOutcomesError) Error() string {
	q := make([]string, len(e.Workers))
	for i, w := range e.Workers {
		q[i] = strconv.Quote(w)
	}
	list := strings.Join(q, ", ")
	if e.Count > len(e.Workers) {
		list += ", ..."
	}
	who := "workers have"
	if e.Count == 1 {
		who = "worker has"
	}
	return fmt.Sprintf("%d %s exams but no row in the outcomes table (%s); add their outcomes, or choose to treat workers without a row as never diagnosed", e.Count, who, list)
}

// CohortError says the cohort cannot be evaluated as a whole: Err is
// ErrNoDiagnosed, ErrNoHealthy, ErrNoExams or ErrTooLarge.
type CohortError struct {
	Err error
	// Diagnosed counts diagnosed workers, AtFirstExam those among them
	// diagnosed at their first exam (no exam before the diagnosis).
	Diagnosed, AtFirstExam int
	// Rows and Max, for ErrTooLarge.
	Rows, Max int
	What      string // "exam" or "outcome", for ErrTooLarge
}

func (e *CohortError) Unwrap() error { return e.Err }

func (e *CohortError) Error() string {
	switch e.Err {
	case ErrNoDiagnosed:
		if e.Diagnosed > 0 {
			return fmt.Sprintf("no diagnosed worker has an exam before the diagnosis (all %d were diagnosed at their first exam), so detection cannot be measured", e.Diagnosed)
		}
		return "no worker in the outcomes table was diagnosed, so detection cannot be measured; the evaluation needs workers later diagnosed and workers never diagnosed"
	case ErrNoHealthy:
		return "every worker was diagnosed, so false signals cannot be measured; the evaluation needs workers never diagnosed too"
	case ErrNoExams:
		return "there are no exams to evaluate"
	case ErrTooLarge:
		return fmt.Sprintf("%d %s rows are more than the %d an evaluation takes; split the table", e.Rows, e.What, e.Max)
	}
	return e.Err.Error()
}
