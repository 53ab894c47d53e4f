package rules

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// Exam holds everything a rule may look at for one exam of one worker. The
// CEL name of each field is given in brackets; doc.go explains each for rule
// writers.
//
// Fields from Exam to the history lists depend on the worker's other exams;
// Link fills them from a whole sheet. Not-available numbers are NaN: a
// comparison with NaN is false, so `z - prev_z > 1.0` is simply false on a
// worker's first exam.
type Exam struct {
	Worker string  // [worker] worker identifier
	Group  string  // [group] reference group (sex, job group, ...); "" if none
	Time   float64 // [time] age at the exam, in years
	Value  float64 // [value] the reading, in its own units

	Mean       float64 // [mean] reference mean at this age and group
	SD         float64 // [sd] reference standard deviation at this age and group
	Z          float64 // [z] standardised reading (value - mean)/sd, on the model's scale
	Centile    float64 // [centile] the reading's centile in the reference, 0-100
	Innovation float64 // [innovation] the charted residual for this exam
	ChartUp    float64 // [chart_up] upward chart statistic; 0 when the chart watches only a fall
	ChartDown  float64 // [chart_down] downward chart statistic; 0 when the chart watches only a rise
	Chart      float64 // [chart] the statistic compared with the limit: the larger of ChartUp and ChartDown
	Limit      float64 // [limit] the chart's control limit
	Signal     bool    // [signal] the chart signals at this exam
	InRange    bool    // [in_range] the age lies inside the reference data's age range

	Exam                  int     // [exam] 1-based number of this exam for the worker, in time order
	Exams                 int     // [exams] number of exams of this worker in the data
	Gap                   float64 // [gap] years since the worker's previous exam; 0 on the first
	PrevZ                 float64 // [prev_z] z at the previous exam; NaN on the first
	PrevValue             float64 // [prev_value] value at the previous exam; NaN on the first
	YearsSinceFirstSignal float64 // [years_since_first_signal] time since the first exam with signal, up to this one; NaN if none yet

	// History of the worker up to and including this exam, oldest first.
	Zs      []float64 // [zs]
	Values  []float64 // [values]
	Times   []float64 // [times]
	Signals []bool    // [signals]
}

// Link fills the fields of exams that depend on the same worker's other
// exams: Exam, Exams, Gap, PrevZ, PrevValue, YearsSinceFirstSignal and the
// history lists Zs, Values, Times and Signals. Every other field must be set
// beforehand (from the reference model and the chart).
//
// exams may be in any order and mix workers; rows of a worker are put in
// time order (ties keep their input order) without moving them in the
// slice. The history lists of one worker share storage, so Link allocates
// four arrays in all rather than one per exam; treat them as read-only.
//
// A missing worker id or a missing/infinite age is an error naming the row
// (1-based position in exams).
func Link(exams []Exam) error {
	n := len(exams)
	for i := range exams {
		if exams[i].Worker == "" {
			return fmt.Errorf("row %d: the worker id is empty; every exam needs the id of its worker", i+1)
		}
		if t := exams[i].Time; math.IsNaN(t) || math.IsInf(t, 0) {
			return fmt.Errorf("row %d: the age (time) of worker %q is missing or not a number", i+1, exams[i].Worker)
		}
	}
	// order: rows sorted by worker, then time, then input position. The
	// worker's first appearance decides the worker order, which keeps the
	// result independent of string collation.
	first := make(map[string]int, 64)
	for i := range exams {
		if _, ok := first[exams[i].Worker]; !ok {
			first[exams[i].Worker] = i
		}
	}
	order := make([]int, n)
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		ea, eb := &exams[a], &exams[b]
		if c := cmp.Compare(first[ea.Worker], first[eb.Worker]); c != 0 {
			return c
		}
		return cmp.Compare(ea.Time, eb.Time)
	})
	zs := make([]float64, n)
	values := make([]float64, n)
	times := make([]float64, n)
	signals := make([]bool, n)
	for k := range order {
		e := &exams[order[k]]
		zs[k], values[k], times[k], signals[k] = e.Z, e.Value, e.Time, e.Signal
	}
	for start := 0; start < n; {
		end := start + 1
		for end < n && exams[order[end]].Worker == exams[order[start]].Worker {
			end++
		}
		firstSignal := math.NaN()
		for k := start; k < end; k++ {
			e := &exams[order[k]]
			j := k - start // 0-based position within the worker
			e.Exam = j + 1
			e.Exams = end - start
			if j == 0 {
				e.Gap, e.PrevZ, e.PrevValue = 0, math.NaN(), math.NaN()
			} else {
				e.Gap = times[k] - times[k-1]
				e.PrevZ, e.PrevValue = zs[k-1], values[k-1]
			}
			if e.Signal && math.IsNaN(firstSignal) {
				firstSignal = e.Time
			}
			e.YearsSinceFirstSignal = e.Time - firstSignal // NaN while none
			// three-index slices: appending to a history can never
			// overwrite the next exam's history.
			e.Zs = zs[start : k+1 : k+1]
			e.Values = values[start : k+1 : k+1]
			e.Times = times[start : k+1 : k+1]
			e.Signals = signals[start : k+1 : k+1]
		}
		start = end
	}
	return nil
}
