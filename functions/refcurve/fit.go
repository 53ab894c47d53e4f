package refcurve

import (
	"errors"
	"fmt"
	"math"
	"unicode/utf8"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/smooth"
	"veer/functions/transform"
)

// binsPerBandwidth: the final curves are binned on a grid at least this
// fine relative to the bandwidth (a refinement of the model grid), so the
// binning error, of order (δ/h)², stays below 1% of the smoothing bias.
const binsPerBandwidth = 16

func (o Options) settings() (Settings, transform.Transform, error) {
	s := Settings{
		Transform:   o.Transform,
		Bandwidth:   o.Bandwidth,
		SDBandwidth: o.SDBandwidth,
		GridPoints:  o.GridPoints,
		MinWorkers:  o.MinWorkers,
	}
	tr, err := transform.New(o.Transform, 0)
	if err != nil {
		return s, tr, err
	}
	s.Transform = tr.Name
	for _, b := range []struct {
		v    float64
		name string
	}{{s.Bandwidth, "mean"}, {s.SDBandwidth, "sd"}} {
		if !(b.v >= 0 && b.v <= MaxBandwidth) {
			return s, tr, fmt.Errorf("the %s bandwidth must be from 0 (0: chosen by cross-validation) to %d years, not %g", b.name, MaxBandwidth, b.v)
		}
	}
	if s.GridPoints == 0 {
		s.GridPoints = DefaultGridPoints
	}
	if s.GridPoints < MinGridPoints || s.GridPoints > MaxGridPoints {
		return s, tr, fmt.Errorf("the number of grid points must be between %d and %d, got %d", MinGridPoints, MaxGridPoints, s.GridPoints)
	}
	if s.MinWorkers == 0 {
		s.MinWorkers = DefaultMinWorkers
	}
	if s.MinWorkers < LeastMinWorkers {
		return s, tr, fmt.Errorf("the minimum number of workers per group must be at least %d, got %d", LeastMinWorkers, s.MinWorkers)
	}
	return s, tr, nil
}

// Fit fits the reference model to rows: per group, the mean and sd curves
// on the transformed scale (see the package comment for the methods), the
// cross-validation scores, and diagnostics. Errors name the data row
// (1-based position in rows) or the group at fault: a missing worker id,
// NaN or infinite numbers, a repeated (worker, time) pair, non-positive
// values under the log or Box-Cox transform, a group with fewer than
// Options.MinWorkers workers or a single exam time, a bandwidth too small
// for gaps in the data.
//
// The result does not depend on the order of rows.
func Fit(rows []Row, opt Options) (*Model, error) {
	set, tr, err := opt.settings()
	if err != nil {
		return nil, err
	}
	if len(rows) == 0 {
		return nil, errors.New("the reference data have no rows")
	}
	progress := func(stage string, done float64) {
		if opt.Progress != nil {
			opt.Progress(stage, done)
		}
	}
	progress("checking data", 0)
	ix, err := indexRows(rows)
	if err != nil {
		return nil, err
	}
	for _, g := range ix.groups {
		if !utf8.ValidString(g) {
			return nil, fmt.Errorf("group name %q is not valid text (UTF-8)", g)
		}
	}
	var errs RowErrors
	vals := make([]float64, len(rows))
	for i := range rows {
		vals[i] = rows[i].Value
		if tr.NeedsPositive() && !(vals[i] > 0) {
			errs.add(&RowError{Rows: []int{i + 1}, Column: "value",
				Reason: fmt.Sprintf("value %s is not positive; the %s transform needs values > 0", num(vals[i]), tr.Name)})
		}
	}
	order, gstart := ix.byGroup()
	// Every group too small for a curve, before any is fitted.
	for r := 0; r+1 < len(gstart); r++ {
		blk := order[gstart[r]:gstart[r+1]]
		workers := 0
		for k, i := range blk {
			if k == 0 || ix.wid[i] != ix.wid[blk[k-1]] {
				workers++
			}
		}
		if workers < set.MinWorkers {
			errs.add(&GroupSizeError{Group: rows[blk[0]].Group, Workers: workers, Min: set.MinWorkers})
		}
	}
	if err := errs.err(); err != nil {
		return nil, err
	}
	if tr.Name == transform.BoxCox {
		progress("choosing the Box-Cox lambda", 0.01)
		// In canonical order, so the sums and the lambda do not depend on
		// the order of the rows.
		sorted := make([]float64, len(order))
		for k, i := range order {
			sorted[k] = vals[i]
		}
		lam, err := transform.BoxCoxLambda(sorted)
		if err != nil {
			return nil, fmt.Errorf("choosing the Box-Cox lambda: %w", err)
		}
		if tr, err = transform.New(transform.BoxCox, lam); err != nil {
			return nil, err
		}
	}
	if err := tr.ForwardAll(vals, vals); err != nil {
		return nil, err // values were checked above; unreachable in practice
	}
	m := &Model{
		Format:    Format,
		Version:   Version,
		Transform: tr.Name,
		Lambda:    tr.Lambda,
		Settings:  set,
		Rows:      len(rows),
		DataHash:  dataHash(rows, order, ix),
	}
	const prep = 0.05
	progress("checking data", prep)
	doneBefore := prep
	for r := 0; r+1 < len(gstart); r++ {
		blk := order[gstart[r]:gstart[r+1]]
		share := (1 - prep) * float64(len(blk)) / float64(len(rows))
		base := doneBefore
		c, err := fitGroup(rows, vals, blk, ix, set, func(stage string, f float64) {
			progress(stage, base+share*f)
		})
		if err != nil {
			return nil, err
		}
		m.Curves = append(m.Curves, *c)
		doneBefore += share
	}
	m.finish()
	if m.Hash, err = m.contentHash(); err != nil {
		return nil, err
	}
	progress("done", 1)
	return m, nil
}

// finish builds the lookup index of a fitted or decoded model.
func (m *Model) finish() {
	m.index = make(map[string]int, len(m.Curves))
	for i, c := range m.Curves {
		m.index[c.Group] = i
	}
	m.tr, _ = transform.New(m.Transform, m.Lambda)
}

// fitGroup fits one group from its rows blk (sorted by worker, then time).
func fitGroup(rows []Row, vals []float64, blk []int32, ix *rowIndex, set Settings, progress func(string, float64)) (*Curve, error) {
	group := rows[blk[0]].Group
	label := groupLabel(group)
	n := len(blk)
	d := smooth.CVData{X: make([]float64, n), Y: make([]float64, n)}
	lo, hi := math.Inf(1), math.Inf(-1)
	for k, i := range blk {
		d.X[k], d.Y[k] = rows[i].Time, vals[i]
		lo, hi = math.Min(lo, d.X[k]), math.Max(hi, d.X[k])
		if k == 0 || ix.wid[i] != ix.wid[blk[k-1]] {
			d.Start = append(d.Start, k)
		}
	}
	d.Start = append(d.Start, n)
	workers := len(d.Start) - 1
	if workers < set.MinWorkers {
		return nil, &GroupSizeError{Group: group, Workers: workers, Min: set.MinWorkers}
	}
	if !(hi > lo) {
		return nil, fmt.Errorf("all exams of %s are at age %s; a curve needs exams at different ages", label, num(lo))
	}
	if !wideEnough(lo, hi) {
		return nil, fmt.Errorf("the exams of %s span only %g years (%s to %s); a curve needs a wider range of times", label, hi-lo, num(lo), num(hi))
	}
	if ymin := floats.Min(d.Y); ymin == floats.Max(d.Y) {
		return nil, fmt.Errorf("all values of %s are equal (%s on the transformed scale); the values do not vary, so there is no spread to describe", label, num(ymin))
	}
	c := &Curve{Group: group, TimeMin: lo, TimeMax: hi, Time: make([]float64, set.GridPoints)}
	for k := range c.Time {
		c.Time[k] = lo + float64(k)*(hi-lo)/float64(set.GridPoints-1)
	}
	c.Time[set.GridPoints-1] = hi
	diag := &c.Diagnostics
	diag.Workers, diag.Exams, diag.TimeMin, diag.TimeMax = workers, n, lo, hi
	diag.Warnings = []string{}

	// Mean curve.
	meanH, meanCV, meanScore, err := bandwidth(d, set.Bandwidth, false, func(done, total int) {
		progress(label+": choosing the mean bandwidth", 0.45*float64(done)/float64(total))
	})
	if err != nil {
		return nil, fmt.Errorf("%s: choosing the mean bandwidth: %w", label, err)
	}
	c.MeanCV = meanCV
	diag.MeanBandwidth, diag.MeanCVScore = meanH, meanScore
	diag.MeanBandwidthSource = source(set.Bandwidth, false)
	c.Mean, err = curveOnGrid(d.X, d.Y, meanH, lo, hi, set.GridPoints)
	if err != nil {
		return nil, fmt.Errorf("%s: mean curve: %w", label, err)
	}
	progress(label+": mean curve", 0.46)

	// Variance curve from the squared residuals. SD is set to 1 for now so
	// interp can be used for the mean.
	c.SD = make([]float64, set.GridPoints)
	resid := make([]float64, n)
	sq := make([]float64, n)
	var msq float64
	for k := range resid {
		mu, _ := c.interp(d.X[k])
		resid[k] = d.Y[k] - mu
		sq[k] = resid[k] * resid[k]
		msq += sq[k]
	}
	msq /= float64(n)
	if !(msq > 0) {
		return nil, fmt.Errorf("%s: the values do not vary around the mean curve, so there is no spread to describe", label)
	}
	ds := smooth.CVData{X: d.X, Y: sq, Start: d.Start, Loss: smooth.VarianceDeviance, Floor: SDFloorShare * msq}
	sdH, sdCV, sdScore, err := bandwidth(ds, set.SDBandwidth, true, func(done, total int) {
		progress(label+": choosing the sd bandwidth", 0.46+0.45*float64(done)/float64(total))
	})
	if err != nil {
		return nil, fmt.Errorf("%s: choosing the sd bandwidth: %w", label, err)
	}
	c.SDCV = sdCV
	diag.SDBandwidth, diag.SDCVScore = sdH, sdScore
	diag.SDBandwidthSource = source(set.SDBandwidth, true)
	v, err := curveOnGrid(d.X, sq, sdH, lo, hi, set.GridPoints)
	if err != nil {
		return nil, fmt.Errorf("%s: sd curve: %w", label, err)
	}
	floor := SDFloorShare * msq
	for k, vk := range v {
		if vk < floor {
			vk = floor
			diag.FlooredPoints++
		}
		c.SD[k] = math.Sqrt(vk)
	}
	diag.SDFloor = math.Sqrt(floor)
	progress(label+": diagnostics", 0.92)

	// Diagnostics on the standardised residuals.
	z := resid                                // reuse
	z975 := distuv.UnitNormal.Quantile(0.975) // half-width of the central 95% band
	inside := 0
	for k := range z {
		_, sd := c.interp(d.X[k])
		z[k] = resid[k] / sd
		if math.Abs(z[k]) <= z975 {
			inside++
		}
	}
	diag.Coverage95 = float64(inside) / float64(n)
	if n >= MinNormalityN {
		if nt, err := DAgostinoPearson(z); err == nil {
			diag.Normality = &nt
		}
	}
	diag.Warnings = warnings(c, set)
	progress(label+": done", 1)
	return c, nil
}

// wideEnough reports whether [lo, hi] is wide enough to hold a grid: at
// least a millionth of the magnitude of its ends (and of 1 year).
func wideEnough(lo, hi float64) bool {
	return hi-lo >= 1e-6*math.Max(1, math.Max(math.Abs(lo), math.Abs(hi)))
}

func source(fixed float64, oneSE bool) string {
	switch {
	case fixed > 0:
		return "fixed"
	case oneSE:
		return "cross-validation, one-standard-error rule"
	}
	return "cross-validation"
}

// bandwidth returns the fixed bandwidth, or the one chosen by
// leave-one-worker-out cross-validation (with the one-standard-error rule
// if oneSE) with all scores and the chosen one's.
func bandwidth(d smooth.CVData, fixed float64, oneSE bool, progress func(done, total int)) (float64, []CVPoint, float64, error) {
	if fixed > 0 {
		return fixed, []CVPoint{}, 0, nil
	}
	best, all, err := smooth.ChooseBandwidth(d, smooth.Search{OneStandardError: oneSE, Progress: progress})
	if err != nil {
		return 0, nil, 0, err
	}
	pts := make([]CVPoint, len(all))
	for i, s := range all {
		pts[i] = CVPoint{Bandwidth: s.Bandwidth, Score: s.Score, Predicted: s.Predicted, Excluded: s.Excluded, Eligible: s.Eligible}
	}
	return best.Bandwidth, pts, best.Score, nil
}

// curveOnGrid is the local linear fit on n equally spaced times from lo
// to hi, binned on a refinement of that grid with step at most
// h/binsPerBandwidth.
func curveOnGrid(x, y []float64, h, lo, hi float64, n int) ([]float64, error) {
	step := (hi - lo) / float64(n-1)
	m := int(math.Ceil(binsPerBandwidth * step / h))
	if limit := (smooth.MaxGridPoints - 1) / (n - 1); m > limit {
		m = limit
	}
	m = max(m, 1)
	fine, err := smooth.LocalLinear(x, y, nil, h, smooth.Grid{Lo: lo, Hi: hi, N: (n-1)*m + 1})
	if err != nil {
		return nil, err
	}
	out := make([]float64, n)
	for k := range out {
		out[k] = fine[k*m]
	}
	return out, nil
}

// warnings lists what a reviewer should know about a group's fit.
func warnings(c *Curve, set Settings) []string {
	d := &c.Diagnostics
	w := []string{}
	edge := func(what string, pts []CVPoint, h float64, warnLargest bool) {
		if len(pts) == 0 {
			return
		}
		switch {
		case h == pts[0].Bandwidth:
			w = append(w, fmt.Sprintf("the %s bandwidth chosen by cross-validation (%s years) is the smallest tried; the curve may follow noise", what, num(h)))
		case h == pts[len(pts)-1].Bandwidth && warnLargest:
			w = append(w, fmt.Sprintf("the %s bandwidth chosen by cross-validation (%s years) is the largest tried; the curve is close to a straight line", what, num(h)))
		}
		for _, p := range pts {
			if p.Bandwidth == h && p.Excluded > 0 {
				w = append(w, fmt.Sprintf("%d exams could not be predicted from other workers when choosing the %s bandwidth (no other worker was examined near that age)", p.Excluded, what))
			}
		}
	}
	edge("mean", c.MeanCV, d.MeanBandwidth, true)
	// A straight sd curve is what the one-standard-error rule picks when
	// the data show no clear change of spread with age: no warning.
	edge("sd", c.SDCV, d.SDBandwidth, false)
	if d.FlooredPoints > 0 {
		w = append(w, fmt.Sprintf("the sd curve was raised to its floor %s at %d of %d grid times", num(d.SDFloor), d.FlooredPoints, len(c.Time)))
	}
	if d.Exams >= 100 && (d.Coverage95 < 0.93 || d.Coverage95 > 0.97) {
		w = append(w, fmt.Sprintf("%.1f%% of the reference exams lie inside the central 95%% band, not about 95%%", 100*d.Coverage95))
	}
	if nt := d.Normality; nt != nil && nt.PValue < 0.001 {
		hint := ""
		if set.Transform == transform.None {
			hint = "; a log or Box-Cox transform may help"
		}
		w = append(w, fmt.Sprintf("the standardised residuals depart from a normal distribution (skewness %.2f, excess kurtosis %.2f, p = %.2g); centiles far in the tails may be off%s",
			nt.Skewness, nt.ExcessKurtosis, nt.PValue, hint))
	}
	return w
}
