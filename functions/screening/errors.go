package screening

import (
	"errors"
	"strconv"
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
