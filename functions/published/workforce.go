package published

import (
	"context"
	"errors"
	"fmt"
	"math"

	"veer/functions/chart"
	"veer/functions/monitor"
	"veer/functions/serial"
)

// Where a serial model came from.
const (
	// SerialFromWorkforce: estimated from the screened workforce's own
	// repeated exams, standardised against the published reference.
	SerialFromWorkforce = "workforce"
	// SerialFromUser: set by the user (from a publication, another site,
	// or judgement), with no standard errors.
	SerialFromUser = "user"
)

// FirstPass asks EstimateSerial to leave out the workers a first screening
// pass flags: Chart and Mode as the screening will use them, Target the
// average time to a false signal in years for that pass (a longer target
// than the screening's leaves out only clear drifts). Seed and Paths steer
// the Monte Carlo limit of the pass (monitor.Calibration).
type FirstPass struct {
	Chart  chart.Spec
	Mode   monitor.Mode
	Target float64
	Seed   uint64
	Paths  int
}

// DefaultFirstPassTarget is the target of DefaultFirstPass, in years: a
// healthy worker is flagged once in 50 years of exams, so the first pass
// leaves out clear drifts and few others (TestWorkforceLeaveOut).
const DefaultFirstPassTarget = 50

// DefaultFirstPass is the first pass the command line uses: the
// screening's own chart (its side matters: the drifts to leave out are
// those the screening looks for) and mode, DefaultFirstPassTarget, and a
// fixed seed.
func DefaultFirstPass(spec chart.Spec, mode monitor.Mode) FirstPass {
	return FirstPass{Chart: spec, Mode: mode, Target: DefaultFirstPassTarget, Seed: 20261215}
}

// SerialEstimate is a serial model estimated without a reference cohort.
type SerialEstimate struct {
	// Params holds phi, c, their standard errors and the pairs and workers
	// behind them (serial.Params).
	Params serial.Params
	// Source is SerialFromWorkforce.
	Source string
	// Workers is the number of workers given; Longitudinal of them have two
	// or more exams. LeftOut lists (0-based, in input order) the workers
	// the first pass flagged and the estimate left out.
	Workers, Longitudinal int
	LeftOut               []int
	// FirstPass is the estimate from all workers and FirstPassLimit the
	// limit of the first pass, when a first pass was run.
	FirstPass      *serial.Params
	FirstPassLimit float64
	// Location and Scale are the mean and SD of the workers' z (those
	// used): about 0 and 1 when the published reference describes this
	// workforce. The estimate is of the correlation of (z − Location) /
	// Scale, so that a workforce that sits as a whole above or below the
	// reference does not pass for correlation within workers.
	Location, Scale float64
	// MeanGap is the mean years between consecutive exams of a worker.
	MeanGap float64
}

// MinWorkforce is the least number of workers with two or more exams
// EstimateSerial accepts (serial.Estimate needs at least 5; fewer than 20
// would leave the standard errors so wide that the estimate says little).
const MinWorkforce = 20

// EstimateSerial estimates the serial model of package serial (yearly
// correlation phi, persistent share c) from a workforce's own repeated
// exams, each worker's z standardised against a published reference, when
// there is no healthy reference cohort to estimate it from.
//
// The workforce's z are first centred and scaled by their pooled mean and
// SD (reported as Location and Scale), then phi and c are estimated by
// serial.Estimate (pairwise likelihood with worker-level sandwich standard
// errors). Workers with a drift inflate the estimated correlation, as a
// drift is a persistent departure; with first set, a first pass screens
// every worker's centred z with the chart of first against the limit for
// first.Target under the all-worker estimate (limit by monitor.Limit,
// method normal, follow-up horizon, gaps from the workforce itself), and
// the estimate is made again without the workers it flags. In mode
// whiten, 10% of workers drifting made a limit for 20 years give a false
// signal every 14 years; after a first pass, every 20 (TestWorkforceLeaveOut).
// Leaving out healthy workers flagged by chance removes some of the
// highest persistent levels, so on a site without drifts the estimate of c
// leans low and false signals come a few percent less often than the
// target; a long first-pass target keeps that small.
//
// A cancelled ctx ends the work (the first pass's simulation and charting
// included) with ctx's error.
func EstimateSerial(ctx context.Context, series []serial.Series, first *FirstPass) (SerialEstimate, error) {
	est := SerialEstimate{Source: SerialFromWorkforce, Workers: len(series)}
	for i, s := range series {
		if len(s.Time) != len(s.Z) {
			return est, fmt.Errorf("worker %d has %d exam times for %d values", i+1, len(s.Time), len(s.Z))
		}
		if err := serial.CheckTimes(s.Time); err != nil {
			return est, fmt.Errorf("worker %d, %w", i+1, err)
		}
		for j, z := range s.Z {
			if isNaNOrInf(z) {
				return est, fmt.Errorf("worker %d, exam %d: the standardised value is not a number (%v)", i+1, j+1, z)
			}
		}
		if len(s.Z) >= 2 {
			est.Longitudinal++
		}
	}
	if est.Longitudinal < MinWorkforce {
		return est, fmt.Errorf("only %d workers have two or more exams; estimating the serial correlation from the workforce needs at least %d (or set it by hand): %w",
			est.Longitudinal, MinWorkforce, ErrTooFewWorkers)
	}
	keep := make([]bool, len(series))
	for i := range keep {
		keep[i] = true
	}
	p, loc, sc, err := estimateKept(ctx, series, keep)
	if err != nil {
		return est, err
	}
	est.MeanGap = meanGap(series, keep)
	if first != nil {
		fp := p
		est.FirstPass = &fp
		centred := make([]serial.Series, len(series))
		for i, s := range series {
			centred[i] = serial.Series{Time: s.Time, Z: standardise(s.Z, loc, sc)}
		}
		set := monitor.Settings{Chart: first.Chart, Mode: first.Mode, Serial: p}
		lr, err := monitor.Limit(monitor.Calibration{Settings: set, Method: monitor.Normal, Reference: centred,
			Horizon: monitor.HorizonFollowUp, Seed: first.Seed, Paths: first.Paths, Stop: func() bool { return ctx.Err() != nil }}, first.Target)
		if cerr := ctx.Err(); cerr != nil {
			return est, cerr
		}
		if err != nil {
			return est, fmt.Errorf("first pass: %w", err)
		}
		est.FirstPassLimit = lr.H
		var rows []monitor.Row
		for i, s := range centred {
			if i%256 == 255 && ctx.Err() != nil {
				return est, ctx.Err()
			}
			rows, err = monitor.Run(set, lr.H, s.Time, s.Z, rows[:0])
			if err != nil {
				return est, fmt.Errorf("first pass, worker %d: %w", i+1, err)
			}
			if _, flagged := monitor.FirstSignal(rows); flagged {
				keep[i] = false
				est.LeftOut = append(est.LeftOut, i)
			}
		}
		left := 0
		for i, s := range series {
			if keep[i] && len(s.Z) >= 2 {
				left++
			}
		}
		if left < MinWorkforce {
			return est, fmt.Errorf("the first pass flagged %d workers, leaving %d with two or more exams; at least %d are needed (use a longer first-pass target, or no first pass): %w",
				len(est.LeftOut), left, MinWorkforce, ErrTooFewWorkers)
		}
		if p, loc, sc, err = estimateKept(ctx, series, keep); err != nil {
			return est, err
		}
		est.MeanGap = meanGap(series, keep)
	}
	est.Params, est.Location, est.Scale = p, loc, sc
	return est, nil
}

// ErrTooFewWorkers: the workforce has too few workers with repeated exams
// to estimate the serial model.
var ErrTooFewWorkers = errors.New("too few workers with repeated exams")

// estimateKept centres and scales the kept workers' z and estimates the
// serial model from them.
func estimateKept(ctx context.Context, series []serial.Series, keep []bool) (serial.Params, float64, float64, error) {
	var n int
	var sum, sum2 float64
	for i, s := range series {
		if !keep[i] {
			continue
		}
		for _, z := range s.Z {
			n++
			sum += z
		}
	}
	loc := sum / float64(n)
	for i, s := range series {
		if !keep[i] {
			continue
		}
		for _, z := range s.Z {
			sum2 += (z - loc) * (z - loc)
		}
	}
	sc := math.Sqrt(sum2 / float64(n-1))
	if !(sc > 0) {
		return serial.Params{}, 0, 0, errors.New("every standardised reading is the same, so the serial correlation cannot be estimated")
	}
	kept := make([]serial.Series, 0, len(series))
	for i, s := range series {
		if keep[i] {
			kept = append(kept, serial.Series{Time: s.Time, Z: standardise(s.Z, loc, sc)})
		}
	}
	p, err := serial.Estimate(ctx, kept)
	if err != nil {
		return p, loc, sc, fmt.Errorf("serial correlation from the workforce: %w", err)
	}
	if isNaNOrInf(p.SEPhi) {
		p.SEPhi = 0
	}
	if isNaNOrInf(p.SEC) {
		p.SEC = 0
	}
	return p, loc, sc, nil
}

func standardise(z []float64, loc, sc float64) []float64 {
	out := make([]float64, len(z))
	for j, v := range z {
		out[j] = (v - loc) / sc
	}
	return out
}

func meanGap(series []serial.Series, keep []bool) float64 {
	var sum float64
	var n int
	for i, s := range series {
		if !keep[i] {
			continue
		}
		for j := 1; j < len(s.Time); j++ {
			sum += s.Time[j] - s.Time[j-1]
			n++
		}
	}
	return sum / float64(n)
}

// SetSerial checks a serial model set by the user: phi in [0, 1), c in
// [0, 1]. Standard errors are zero (not estimated).
func SetSerial(phi, c float64) (serial.Params, error) {
	p := serial.Params{Phi: phi, C: c}
	if err := p.Validate(); err != nil {
		return serial.Params{}, err
	}
	return p, nil
}
