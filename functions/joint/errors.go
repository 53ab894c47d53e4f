package joint

import (
	"errors"
	"fmt"
)

// Sentinel errors, for errors.Is; the typed errors below carry the facts.
var (
	// ErrNotPositiveDefinite: the markers' correlation matrix is not
	// positive definite (two markers carry the same information).
	ErrNotPositiveDefinite = errors.New("correlation matrix not positive definite")
	// ErrTooFewReadings: a marker, or a pair of markers measured at the
	// same exams, has too few reference readings.
	ErrTooFewReadings = errors.New("too few reference readings")
	// ErrDuplicateMarker: the same marker is listed twice.
	ErrDuplicateMarker = errors.New("marker listed twice")
	// ErrSides: the number of sides does not match the number of markers.
	ErrSides = errors.New("one side per marker")
)

// SidesError is a list of sides whose length is not the number of markers.
type SidesError struct{ Got, Want int }

func (e *SidesError) Error() string {
	return fmt.Sprintf("%d markers need %d sides, one direction per marker in the same order (up, down or both), got %d", e.Want, e.Want, e.Got)
}

// Is reports ErrSides.
func (e *SidesError) Is(target error) bool { return target == ErrSides }

// DuplicateError is a marker named twice.
type DuplicateError struct{ Marker string }

func (e *DuplicateError) Error() string {
	return fmt.Sprintf("marker %q is listed twice; list each marker once", e.Marker)
}

// Is reports ErrDuplicateMarker.
func (e *DuplicateError) Is(target error) bool { return target == ErrDuplicateMarker }

// MarkerError is a problem with one marker's data; Err says what.
type MarkerError struct {
	Marker string
	Err    error
}

func (e *MarkerError) Error() string { return fmt.Sprintf("marker %q: %v", e.Marker, e.Err) }

// Unwrap returns the underlying problem.
func (e *MarkerError) Unwrap() error { return e.Err }

// PairError is a pair of markers measured together at too few reference
// exams (or workers) for their correlation to be estimated.
type PairError struct {
	A, B             string
	Exams, Workers   int
	MinExams, MinWks int
}

func (e *PairError) Error() string {
	if e.Exams == 0 {
		return fmt.Sprintf("markers %q and %q were never measured at the same exam in the reference, so their correlation cannot be estimated; the reference needs exams with both", e.A, e.B)
	}
	return fmt.Sprintf("markers %q and %q were measured together at only %d reference exams of %d workers; at least %d exams of %d workers are needed to estimate their correlation", e.A, e.B, e.Exams, e.Workers, e.MinExams, e.MinWks)
}

// Is reports ErrTooFewReadings.
func (e *PairError) Is(target error) bool { return target == ErrTooFewReadings }

// ReadingsError is a marker with too few reference readings.
type ReadingsError struct {
	Marker   string
	Readings int
	Min      int
}

func (e *ReadingsError) Error() string {
	return fmt.Sprintf("marker %q has only %d reference readings; at least %d are needed", e.Marker, e.Readings, e.Min)
}

// Is reports ErrTooFewReadings.
func (e *ReadingsError) Is(target error) bool { return target == ErrTooFewReadings }

// CorrelationError is a correlation matrix that is not positive definite.
// Marker is the marker at which the Cholesky factorisation failed and
// Partner the earlier marker most correlated with it (R their correlation);
// Partner is empty when the problem is not one pair.
type CorrelationError struct {
	What            string // "standardised readings" or "innovations"
	Marker, Partner string
	R               float64
}

func (e *CorrelationError) Error() string {
	what := e.What
	if what == "" {
		what = "readings"
	}
	if e.Partner != "" && (e.R > 0.999 || e.R < -0.999) {
		return fmt.Sprintf("markers %q and %q are perfectly correlated in the reference (correlation of the %s %.4f): they carry the same information, so they cannot be charted together; drop one of them", e.Partner, e.Marker, what, e.R)
	}
	if e.Partner != "" {
		return fmt.Sprintf("the correlations of the %s are not consistent at marker %q (most correlated with %q, %.4f): the correlation matrix is not positive definite; drop %q or give more exams where all markers are measured", what, e.Marker, e.Partner, e.R, e.Marker)
	}
	return fmt.Sprintf("the correlations of the %s are not consistent at marker %q: the correlation matrix is not positive definite; drop %q or give more exams where all markers are measured", what, e.Marker, e.Marker)
}

// Is reports ErrNotPositiveDefinite.
func (e *CorrelationError) Is(target error) bool { return target == ErrNotPositiveDefinite }
