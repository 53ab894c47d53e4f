package screening

import (
	"errors"
	"strconv"
	"strings"
)

// ErrNoExams is returned by Model.Screen for an empty sheet.
var ErrNoExams = errors.New("there are no exams to screen")

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
