package screening

import (
	"errors"
	"strconv"
	"strings"
)

// ErrNoExams is returned by Model.Screen for an empty sheet.
var ErrNoExams = errors.New("there are no exams to screen")

// Why Model.ScreenEach sets an exam aside before looking at the reference.
var (
	// ErrNoReading: the reading is blank (NaN). This is a missing exam for
	// the marker, not a fault of the sheet.
	ErrNoReading = errors.New("there is no reading (a missing exam for this marker)")
	// ErrNoAge: the age is blank or not a finite number.
	ErrNoAge = errors.New("the age is blank")
	// ErrNoWorker: the worker id is blank.
	ErrNoWorker = errors.New("the worker id is blank")
)

// WorkerError is a failure charting one worker's exams; Err says why.
type WorkerError struct {
	Worker string
	Err    error
}

func (e *WorkerError) Error() string {
	return "worker " + strconv.Quote(e.Worker) + ": " + e.Err.Error()
}

// Unwrap returns the failure.
func (e *WorkerError) Unwrap() error { return e.Err }

// ErrSeveralMarkers: a model of several markers was given where one marker
// is expected (a *SeveralMarkersError).
var ErrSeveralMarkers = errors.New("the model holds several markers")

// SeveralMarkersError is a model of several markers given where one marker
// is expected.
type SeveralMarkersError struct {
	Name    string
	Markers []string
}

func (e *SeveralMarkersError) Error() string {
	return "model " + strconv.Quote(e.Name) + " holds several markers (" + strings.Join(e.Markers, ", ") +
		"); screen it with one value column per marker, or fit a model of one marker"
}

// Is reports whether target is ErrSeveralMarkers.
func (e *SeveralMarkersError) Is(target error) bool { return target == ErrSeveralMarkers }

// ExamError is why exam Index (0-based, in the order given) could not be
// screened.
type ExamError struct {
	Index int
	Err   error
}

func (e ExamError) Error() string { return "exam " + strconv.Itoa(e.Index+1) + ": " + e.Err.Error() }

// Unwrap returns the reason.
func (e ExamError) Unwrap() error { return e.Err }

// MaxExamErrors is how many exams an ExamErrors keeps (it counts them all).
const MaxExamErrors = 1000

// ExamErrors lists the exams Model.Screen could not screen: Count of the
// Total given, the first MaxExamErrors in input order in First. errors.Is
// and errors.As look into First.
type ExamErrors struct {
	Count, Total int
	First        []ExamError
}

func (e *ExamErrors) add(i int, err error) {
	e.Count++
	if len(e.First) < MaxExamErrors {
		e.First = append(e.First, ExamError{Index: i, Err: err})
	}
}

func (e *ExamErrors) Error() string {
	var b strings.Builder
	if e.Count == 1 {
		b.WriteString("1 exam")
	} else {
		b.WriteString(strconv.Itoa(e.Count) + " exams")
	}
	b.WriteString(" of " + strconv.Itoa(e.Total) + " cannot be screened")
	for i, f := range e.First {
		if i == 5 {
			b.WriteString("; ...")
			break
		}
		b.WriteString("; " + f.Error())
	}
	return b.String()
}

// Unwrap returns the exams' failures kept in First.
func (e *ExamErrors) Unwrap() []error {
	out := make([]error, len(e.First))
	for i, f := range e.First {
		out[i] = f
	}
	return out
}
