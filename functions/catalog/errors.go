package catalog

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"

	"veer/functions/cell"
	"veer/functions/chart"
	"veer/functions/evaluation"
	"veer/functions/joint"
	"veer/functions/limit"
	"veer/functions/published"
	"veer/functions/refcurve"
	"veer/functions/screening"
	"veer/functions/transform"
)

// How a statistics error becomes a cell's error code.
//
// The statistics packages never import package cell: they return errors
// whose types carry the facts (refcurve.RangeError: group, age and range;
// refcurve.GroupError; refcurve.DuplicateError: worker, age and both rows;
// chart.SettingError; ...) and match sentinel kinds with errors.Is. The
// table below maps each kind to a failure of the error-code contract
// (cell.Failure), which gives the code. An error of no listed kind gets the
// failure the calling operation chooses (fallback): BadData for fitting and
// screening, OutOfRange for limits and delays. Messages are never read, so
// rewording one cannot change what a cell shows. A new kind of statistics
// error that needs its own code gets a sentinel in its package and a line
// here.
var failureKinds = []struct {
	kind    error
	failure cell.Failure
}{
	{context.Canceled, cell.Busy},
	{context.DeadlineExceeded, cell.Busy},
	{limit.ErrStopped, cell.Busy},
	{refcurve.ErrOutsideRange, cell.OutsideReference},
	{refcurve.ErrUnknownGroup, cell.UnknownGroup},
	{refcurve.ErrDuplicateExam, cell.BadData},
	{transform.ErrDomain, cell.OutOfDomain},
	{chart.ErrSetting, cell.OutOfRange},
	{limit.ErrTargetTooShort, cell.OutOfRange},
	{limit.ErrTargetTooLong, cell.OutOfRange},
	{limit.ErrTooMuchWork, cell.OutOfRange},
	{screening.ErrNoExams, cell.BadData},
	// Published references (an age or group outside them is refcurve's
	// kind, above).
	{published.ErrMissingCovariate, cell.BlankInput},
	{published.ErrReading, cell.OutOfDomain},
	{published.ErrCovariate, cell.OutOfDomain},
	{published.ErrNoCentile, cell.OutOfDomain},
	{published.ErrInvalidParams, cell.OutOfDomain},
	{screening.ErrSeveralMarkers, cell.WrongArgument},
	{joint.ErrSides, cell.WrongArgument},
	{joint.ErrDuplicateMarker, cell.WrongArgument},
	{joint.ErrNotPositiveDefinite, cell.BadData},
	{joint.ErrTooFewReadings, cell.BadData},
	// Evaluation on a labelled history: a blank worker id is a blank input,
	// a diagnosis flag or age that is not one is a wrong argument, every
	// other problem of the outcomes is data no evaluation can be made from.
	{evaluation.ErrBlankWorker, cell.BlankInput},
	{evaluation.ErrDiagnosisFlag, cell.WrongArgument},
	{evaluation.ErrBadAge, cell.WrongArgument},
	{evaluation.ErrTooLarge, cell.WrongArgument},
	{evaluation.ErrUnknownWorker, cell.BadData},
	{evaluation.ErrDiagnosedBeforeFirstExam, cell.BadData},
	{evaluation.ErrDuplicateOutcome, cell.BadData},
	{evaluation.ErrMissingDiagnosisAge, cell.BadData},
	{evaluation.ErrAgeWithoutDiagnosis, cell.BadData},
	{evaluation.ErrMissingOutcomes, cell.BadData},
	{evaluation.ErrNoDiagnosed, cell.BadData},
	{evaluation.ErrNoHealthy, cell.BadData},
	{evaluation.ErrNoExams, cell.BadData},
	{screening.ErrNoReading, cell.BlankInput},
	{screening.ErrNoAge, cell.BlankInput},
	{screening.ErrNoWorker, cell.BlankInput},
	{refcurve.ErrTooFewWorkers, cell.BadData},
}

// failureOf returns the contract failure of err's kind, or fallback.
func failureOf(err error, fallback cell.Failure) cell.Failure {
	for _, k := range failureKinds {
		if errors.Is(err, k.kind) {
			return k.failure
		}
	}
	return fallback
}

// cellError turns an error into a spreadsheet error: an *cell.Error is kept
// as it is; any other error gets the code of its kind (see failureKinds),
// or fallback's, with the error's own message. cellError(nil, _) is nil.
func cellError(err error, fallback cell.Failure) error {
	if err == nil {
		return nil
	}
	return asCellError(err, fallback)
}

func asCellError(err error, fallback cell.Failure) *cell.Error {
	var ce *cell.Error
	if errors.As(err, &ce) {
		return ce
	}
	return failureOf(err, fallback).Errorf("%v", err)
}

// rowError words the failure of one row's lookup against the model: row
// is the 1-based row for the message (0: a single cell), groupGiven says
// whether the groups argument was given (so an empty group is a blank
// cell). The code comes from the error's kind; an age outside the range is
// worded here with the option that allows it.
func rowError(err error, row int, groupGiven bool) *cell.Error {
	where := ""
	if row > 0 {
		where = fmt.Sprintf("row %d: ", row)
	}
	var (
		re *refcurve.RangeError
		ce *published.RangeError
		ge *refcurve.GroupError
	)
	switch {
	case errors.As(err, &ce):
		g := "the reference"
		if ce.Group != "" {
			g = fmt.Sprintf("group %q", ce.Group)
		}
		return cell.OutsideReference.Errorf(`%s%s %s is outside the range %s to %s the reference of %s covers; add "extrapolate=true" to the options to hold it at the nearest end`,
			where, ce.Name, cell.FormatNumber(ce.Value), cell.FormatNumber(ce.Min), cell.FormatNumber(ce.Max), g)
	case errors.As(err, &re):
		g := "the reference data"
		if re.Group != "" {
			g = fmt.Sprintf("group %q", re.Group)
		}
		if re.Reach > 0 {
			return cell.OutsideReference.Errorf(`%sage %s is %s years outside the reference range %s to %s of %s, farther than extrapolation reaches (%s years); give "reach=YEARS" to reach further, if the curves' end values still fit such ages`,
				where, cell.FormatNumber(re.Time), strconv.FormatFloat(re.Distance(), 'g', 3, 64), cell.FormatNumber(round2(re.Min)), cell.FormatNumber(round2(re.Max)), g, cell.FormatNumber(re.Reach))
		}
		return cell.OutsideReference.Errorf(`%sage %s is outside the reference range %s to %s of %s; add "extrapolate=true" to the options to answer ages up to %s years outside from the curves' end values`,
			where, cell.FormatNumber(re.Time), cell.FormatNumber(round2(re.Min)), cell.FormatNumber(round2(re.Max)), g, cell.FormatNumber(screening.DefaultExtrapolation))
	case errors.As(err, &ge) && ge.Group == "" && groupGiven:
		return cell.BlankInput.Errorf("%sthe group is blank; %v", where, err)
	case errors.As(err, &ge) && ge.Group == "":
		// A model with groups and no groups argument: the call lacks one.
		return cell.WrongArgument.Errorf("%s%v", where, err)
	}
	e := asCellError(err, cell.BadData)
	if where == "" {
		return e
	}
	return &cell.Error{Code: e.Code, Message: where + e.Message}
}

func round2(x float64) float64 { return math.Round(x*100) / 100 }
