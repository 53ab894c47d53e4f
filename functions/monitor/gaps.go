package monitor

import (
	"errors"
	"fmt"
	"math"

	"veer/functions/chart"
)

// GapPool returns the gaps between exams that Monte Carlo limits resample,
// and their mean: nil and gap when gap > 0 (every gap is gap years, from
// MinGap to MaxGap);
// otherwise gaps, each checked, or, when gaps is empty, the within-worker
// gaps that within returns (e.g. those of the reference workers).
func GapPool(gap float64, gaps []float64, within func() []float64) ([]float64, float64, error) {
	if gap != 0 && !(gap >= MinGap && gap <= MaxGap) {
		return nil, 0, &chart.SettingError{Setting: "gap", Value: gap, Want: fmt.Sprintf("from a day (%.4f years) to %d years", MinGap, MaxGap)}
	}
	if gap > 0 {
		return nil, gap, nil
	}
	for i, g := range gaps {
		if !(g > 0) || math.IsInf(g, 0) {
			return nil, 0, fmt.Errorf("gap %d is %v; gaps between exams must be positive numbers of years", i+1, g)
		}
	}
	pool := gaps
	if len(pool) == 0 {
		pool = within()
	}
	if len(pool) == 0 {
		return nil, 0, errors.New("no gap between exams is known: give the planned gap in years, or reference workers with at least two exams")
	}
	var s float64
	for _, g := range pool {
		s += g
	}
	return pool, s / float64(len(pool)), nil
}
