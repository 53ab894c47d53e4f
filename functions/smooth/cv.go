package smooth

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sync"
)

// CVData is data grouped by subject for leave-one-subject-out
// cross-validation: subject s owns rows Start[s] to Start[s+1]-1, so
// Start[0] = 0, Start is strictly increasing and its last entry is len(X).
// W holds row weights; nil means every weight is 1. Loss says how a
// prediction is scored; Floor is used by VarianceDeviance only.
type CVData struct {
	X, Y, W []float64
	Start   []int
	Loss    Loss
	Floor   float64
}

// Loss is the loss function of cross-validation.
type Loss int

const (
	// SquaredError scores a prediction m̂ of y by (y - m̂)².
	SquaredError Loss = iota
	// VarianceDeviance scores a prediction v̂ of a variance from a squared
	// residual y = r² by the Gaussian deviance log v + y/v, with
	// v = max(v̂, Floor) (Floor > 0). Its expectation is smallest at
	// v = E[r²], like squared error, but it grows only linearly in r², so
	// the heavy right tail of squared residuals does not swamp the choice
	// of bandwidth as it does under (r² - v̂)², which weighs r⁴.
	VarianceDeviance
)

// loss returns the loss of predicting y by pred.
func (d *CVData) loss(y, pred float64) float64 {
	if d.Loss == VarianceDeviance {
		v := math.Max(pred, d.Floor)
		return math.Log(v) + y/v
	}
	e := y - pred
	return e * e
}

// CVScore is the cross-validation result for one candidate bandwidth.
type CVScore struct {
	Bandwidth float64
	// Score is the weighted mean prediction loss
	// Σ w_i L(y_i, m̂_{-s(i)}(x_i)) / Σ w_i over the predicted rows, where
	// m̂_{-s} is the local linear fit without subject s and L the CVData's
	// Loss (squared error by default). Zero when no row could be
	// predicted.
	Score float64
	// Predicted and Excluded count the rows that could and could not be
	// predicted from the other subjects (too little kernel weight from
	// other subjects near the row's x; see CrossValidate).
	Predicted, Excluded int
	// Eligible reports whether the bandwidth may be chosen: at most
	// MaxExcludedShare of the rows were excluded and the full-data fit is
	// determined everywhere between the smallest and largest x.
	Eligible bool
}

// Tuning constants of CrossValidate.
const (
	// ExactLimit is the largest number of rows for which CrossValidate sums
	// the kernel over the raw points; above it, it uses the binned
	// algorithm.
	ExactLimit = 1000
	// BinsPerBandwidth is the number of grid steps per bandwidth in the
	// binned algorithm. Binning and interpolating the kernel sums each
	// perturb them by about (δ/h)²/8 of their size, ~1e-4 here.
	BinsPerBandwidth = 32
	// MaxExcludedShare is the share of rows that may be left unpredicted
	// before a bandwidth is ruled ineligible (rounded down: with fewer
	// than 1000 rows every row must be predicted).
	MaxExcludedShare = 0.001
	// maxCVGrid caps the finest binning grid.
	maxCVGrid = 1 << 16
	// cvMinWeight: a row is predicted only if the other subjects give it a
	// kernel weight S0 of at least this many average row weights.
	cvMinWeight = 0.01
	// cvMinSpread: ... and the kernel-weighted variance of (x_j - x_i)/h
	// over them is at least this (their spread at least 0.01 h).
	cvMinSpread = 1e-4
)

// CandidateBandwidths returns n bandwidths spaced evenly on the log scale
// from (hi-lo)/200 to hi-lo: from a tenth of a typical 2-year age band on
// a working-life range up to a nearly straight line (a Gaussian kernel with
// h equal to the range weights the far end by exp(-1/2)). n >= 2.
func CandidateBandwidths(lo, hi float64, n int) ([]float64, error) {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return nil, fmt.Errorf("the x range %g to %g is empty or not finite", lo, hi)
	}
	if n < 2 {
		return nil, fmt.Errorf("need at least 2 candidate bandwidths, got %d", n)
	}
	r := hi - lo
	a, b := math.Log(r/200), math.Log(r)
	hs := make([]float64, n)
	for i := range hs {
		hs[i] = math.Exp(a + (b-a)*float64(i)/float64(n-1))
	}
	return hs, nil
}

// BestBandwidth returns the eligible score with the smallest Score (the
// smaller bandwidth on an exact tie), or an error if none is eligible.
func BestBandwidth(scores []CVScore) (CVScore, error) {
	best := -1
	for i, s := range scores {
		if s.Eligible && (best < 0 || s.Score < scores[best].Score) {
			best = i
		}
	}
	if best < 0 {
		return CVScore{}, errors.New("no candidate bandwidth could predict the exams of each subject from the other subjects; the data are too sparse or too clustered in time")
	}
	return scores[best], nil
}

func (d CVData) check() error {
	n := len(d.X)
	if n == 0 {
		return errNoData
	}
	if len(d.Y) != n {
		return fmt.Errorf("x has %d values but y has %d", n, len(d.Y))
	}
	if d.W != nil && len(d.W) != n {
		return fmt.Errorf("x has %d values but the weights have %d", n, len(d.W))
	}
	switch d.Loss {
	case SquaredError:
	case VarianceDeviance:
		if !(d.Floor > 0) || math.IsInf(d.Floor, 0) {
			return fmt.Errorf("the variance deviance needs a positive floor, got %g", d.Floor)
		}
	default:
		return fmt.Errorf("unknown loss %d", d.Loss)
	}
	if len(d.Start) < 3 || d.Start[0] != 0 || d.Start[len(d.Start)-1] != n {
		return errors.New("subject starts must begin at 0, end at the number of rows and describe at least 2 subjects")
	}
	for s := 1; s < len(d.Start); s++ {
		if d.Start[s] <= d.Start[s-1] {
			return fmt.Errorf("subject %d has no rows (starts must increase strictly)", s-1)
		}
	}
	for i := 0; i < n; i++ {
		if math.IsNaN(d.X[i]) || math.IsInf(d.X[i], 0) {
			return fmt.Errorf("x[%d] is %g; expected a finite number", i, d.X[i])
		}
		if math.IsNaN(d.Y[i]) || math.IsInf(d.Y[i], 0) {
			return fmt.Errorf("y[%d] is %g; expected a finite number", i, d.Y[i])
		}
		if d.W != nil && (!(d.W[i] >= 0) || math.IsInf(d.W[i], 0)) {
			return fmt.Errorf("weight[%d] is %g; expected a finite number >= 0", i, d.W[i])
		}
		if d.Loss == VarianceDeviance && d.Y[i] < 0 {
			return fmt.Errorf("y[%d] is %g; the variance deviance needs squared residuals >= 0", i, d.Y[i])
		}
	}
	return nil
}

func (d CVData) weight(i int) float64 {
	if d.W == nil {
		return 1
	}
	return d.W[i]
}

// CrossValidate returns the leave-one-subject-out cross-validation score of
// local linear regression (Gaussian kernel) for every bandwidth in
// bandwidths (Rice & Silverman 1991):
//
//	CV(h) = Σ_i w_i L(y_i, m̂_{-s(i)}(x_i)) / Σ_i w_i
//
// where m̂_{-s} is the fit without subject s and L the loss of d.Loss
// (squared error (y - m̂)² by default). A row is predicted only if the
// other subjects give it kernel weight S0 ≥ 0.01 average row weights and a
// spread of at least 0.01 h; see CVScore for eligibility.
//
// With at most ExactLimit rows the kernel sums are taken over the raw
// points. Above it, the data are linearly binned once onto a grid of step
// δ ≤ min(h)/BinsPerBandwidth; for each bandwidth the bins are coarsened
// to a step near h/BinsPerBandwidth, the sums S0, S1, S2, T0, T1 are
// convolved at every grid node, interpolated linearly to each row's x, and
// the subject's own exact kernel contributions (a subject has only a few
// rows) are subtracted before forming the local linear prediction. The cost
// is O(rows + Σ_subjects rows²) per bandwidth instead of O(rows²).
// Bandwidths are evaluated in parallel on up to GOMAXPROCS goroutines; the
// result does not depend on their number. progress (may be nil) is called
// after each bandwidth, one call at a time, from those goroutines.
func CrossValidate(d CVData, bandwidths []float64, progress func(done, total int)) ([]CVScore, error) {
	if err := d.check(); err != nil {
		return nil, err
	}
	if len(bandwidths) == 0 {
		return nil, errors.New("no candidate bandwidths")
	}
	hmin := math.Inf(1)
	for _, h := range bandwidths {
		if err := checkBandwidth(h); err != nil {
			return nil, err
		}
		hmin = math.Min(hmin, h)
	}
	st, err := d.prepare(hmin)
	if err != nil {
		return nil, err
	}
	scores, _ := st.evalAll(bandwidths, 0, len(bandwidths), progress, false)
	return scores, nil
}

// cvState is the data of CrossValidate prepared for evaluating many
// bandwidths at least hmin.
type cvState struct {
	d          CVData
	xmin, xmax float64
	wbar       float64
	base       *Binned // nil: exact sums
	kern       kernelTable
}

func (d CVData) prepare(hmin float64) (*cvState, error) {
	xmin, xmax := d.X[0], d.X[0]
	var wsum float64
	for i, x := range d.X {
		xmin, xmax = math.Min(xmin, x), math.Max(xmax, x)
		wsum += d.weight(i)
	}
	if !(xmax > xmin) {
		return nil, fmt.Errorf("all x values equal %g; a curve needs a range of x", xmin)
	}
	if !(wsum > 0) {
		return nil, errors.New("all weights are zero")
	}
	st := &cvState{d: d, xmin: xmin, xmax: xmax, wbar: wsum / float64(len(d.X)), kern: newKernelTable()}
	if len(d.X) > ExactLimit {
		nf := int(math.Ceil((xmax-xmin)/(hmin/BinsPerBandwidth))) + 1
		nf = min(max(nf, 2), maxCVGrid)
		base, err := Bin(d.X, d.Y, d.W, Grid{Lo: xmin, Hi: xmax, N: nf})
		if err != nil {
			return nil, err
		}
		st.base = base
	}
	return st, nil
}

// eval scores bandwidth h; if per is not nil it receives each subject's
// summed weighted loss.
func (st *cvState) eval(h float64, per []float64) CVScore {
	if st.base == nil {
		return st.d.exactCV(&st.kern, h, st.xmin, st.xmax, st.wbar, per)
	}
	return st.d.binnedCV(st.base, &st.kern, h, st.xmax, st.wbar, per)
}

// evalAll evaluates the bandwidths in parallel. progress receives
// done0+k of total after k evaluations. With keep, it also returns each
// bandwidth's per-subject losses.
func (st *cvState) evalAll(bandwidths []float64, done0, total int, progress func(done, total int), keep bool) ([]CVScore, [][]float64) {
	scores := make([]CVScore, len(bandwidths))
	var per [][]float64
	if keep {
		per = make([][]float64, len(bandwidths))
		for k := range per {
			per[k] = make([]float64, len(st.d.Start)-1)
		}
	}
	workers := runtime.GOMAXPROCS(0)
	if workers > len(bandwidths) {
		workers = len(bandwidths)
	}
	next := make(chan int)
	var wg sync.WaitGroup
	var mu sync.Mutex
	done := done0
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := range next {
				var p []float64
				if keep {
					p = per[k]
				}
				scores[k] = st.eval(bandwidths[k], p)
				if progress != nil {
					mu.Lock()
					done++
					progress(done, total)
					mu.Unlock()
				}
			}
		}()
	}
	for k := range bandwidths {
		next <- k
	}
	close(next)
	wg.Wait()
	return scores, per
}

// kernelTable tabulates the Gaussian kernel exp(-v/2) against v = u² on
// [0, 16] for the kernel sums over raw points (the subjects' own sums in
// the binned algorithm, all sums in the exact one), where math.Exp would
// be most of the running time. Linear interpolation with
// step 1/2048 in v errs by at most (step²/8)·max|d²/dv² exp(-v/2)| ≈ 7e-9,
// far below the ~1e-4 error of binning itself.
type kernelTable struct {
	v     []float64
	scale float64
}

func newKernelTable() kernelTable {
	const perUnit = 2048
	n := Truncation*Truncation*perUnit + 2
	t := kernelTable{v: make([]float64, n), scale: perUnit}
	for i := range t.v {
		t.v[i] = math.Exp(-0.5 * float64(i) / perUnit)
	}
	return t
}

// at returns exp(-uu/2) for 0 <= uu <= 16.
func (t *kernelTable) at(uu float64) float64 {
	p := uu * t.scale
	i := int(p)
	f := p - float64(i)
	a := t.v[i]
	return a + f*(t.v[i+1]-a)
}

// finish fills Eligible and Score from the accumulated sums.
func finish(s CVScore, sse, sw float64, gridOK bool, n int) CVScore {
	if s.Predicted > 0 && sw > 0 {
		s.Score = sse / sw
	}
	s.Eligible = gridOK && s.Predicted > 0 && sw > 0 &&
		s.Excluded <= int(math.Floor(MaxExcludedShare*float64(n)))
	return s
}

// binnedCV is the binned algorithm of CrossValidate for one bandwidth.
func (d CVData) binnedCV(base *Binned, kern *kernelTable, h, xmax, wbar float64, per []float64) CVScore {
	m := int(math.Floor(h / (BinsPerBandwidth * base.Grid.Step())))
	if m < 1 {
		m = 1
	}
	b := base.Coarsen(m)
	sums := b.kernelSums(h)
	g := b.Grid
	step := g.Step()

	// The fit on all data must be determined across the whole x range.
	gridOK := true
	for j := range sums {
		if j > 0 && g.Lo+float64(j-1)*step >= xmax {
			break
		}
		s := &sums[j]
		if _, ok := localLinearFromSums(s.s0, s.s1, s.s2, s.t0, s.t1, minSpread); !ok {
			gridOK = false
			break
		}
	}

	invh := 1 / h
	invStep := 1 / step
	const cut = float64(Truncation * Truncation)
	minW := cvMinWeight * wbar
	maxRows := 0
	for s := 1; s < len(d.Start); s++ {
		maxRows = max(maxRows, d.Start[s]-d.Start[s-1])
	}
	own := make([]sums5, maxRows)
	last := len(sums) - 2
	X, Y := d.X, d.Y

	var sse, sw float64
	res := CVScore{Bandwidth: h}
	for s := 0; s+1 < len(d.Start); s++ {
		a, e := d.Start[s], d.Start[s+1]
		xs, ys := X[a:e], Y[a:e]
		o := own[:len(xs)]
		// The subject's own kernel sums at each of its rows, exact.
		for i := range o {
			wi := d.weight(a + i)
			o[i] = sums5{s0: wi, t0: wi * ys[i]}
		}
		for i := range o {
			xi, yi, wi := xs[i], ys[i], d.weight(a+i)
			oi := &o[i]
			for j := i + 1; j < len(o); j++ {
				u := (xs[j] - xi) * invh
				uu := u * u
				if uu > cut {
					continue
				}
				k := kern.at(uu)
				wj, yj := d.weight(a+j), ys[j]
				oj := &o[j]
				// j seen from i at +u, i seen from j at -u.
				kj, ki := k*wj, k*wi
				kju, kiu := kj*u, ki*u
				oi.s0 += kj
				oi.s1 += kju
				oi.s2 += kju * u
				oi.t0 += kj * yj
				oi.t1 += kju * yj
				oj.s0 += ki
				oj.s1 -= kiu
				oj.s2 += kiu * u
				oj.t0 += ki * yi
				oj.t1 -= kiu * yi
			}
		}
		var subjLoss float64
		for i := range o {
			pos := (xs[i] - g.Lo) * invStep
			k := int(pos)
			if k > last {
				k = last
			}
			r := pos - float64(k)
			p, q := &sums[k], &sums[k+1]
			oi := &o[i]
			s0 := p.s0 + r*(q.s0-p.s0) - oi.s0
			if !(s0 >= minW) {
				res.Excluded++
				continue
			}
			s1 := p.s1 + r*(q.s1-p.s1) - oi.s1
			s2 := p.s2 + r*(q.s2-p.s2) - oi.s2
			t0 := p.t0 + r*(q.t0-p.t0) - oi.t0
			t1 := p.t1 + r*(q.t1-p.t1) - oi.t1
			pred, ok := localLinearFromSums(s0, s1, s2, t0, t1, cvMinSpread)
			if !ok {
				res.Excluded++
				continue
			}
			w := d.weight(a + i)
			l := w * d.loss(ys[i], pred)
			subjLoss += l
			sse += l
			sw += w
			res.Predicted++
		}
		if per != nil {
			per[s] = subjLoss
		}
	}
	return finish(res, sse, sw, gridOK, len(d.X))
}

// exactCV is CrossValidate for one bandwidth with kernel sums over the raw
// points (O(n²); used for small data). The kernel comes from the same
// table as in binnedCV.
func (d CVData) exactCV(kern *kernelTable, h, xmin, xmax, wbar float64, per []float64) CVScore {
	n := len(d.X)
	subj := make([]int, n)
	for s := 0; s+1 < len(d.Start); s++ {
		for i := d.Start[s]; i < d.Start[s+1]; i++ {
			subj[i] = s
		}
	}
	invh := 1 / h
	const cut = float64(Truncation * Truncation)
	sumsAt := func(x float64, skip int) (s0, s1, s2, t0, t1 float64) {
		for j := 0; j < n; j++ {
			u := (d.X[j] - x) * invh
			uu := u * u
			if uu > cut || subj[j] == skip {
				continue
			}
			k := kern.at(uu) * d.weight(j)
			s0 += k
			s1 += k * u
			s2 += k * uu
			t0 += k * d.Y[j]
			t1 += k * d.Y[j] * u
		}
		return
	}
	gridOK := true
	g := Grid{Lo: xmin, Hi: xmax, N: 201}
	for j := 0; j < g.N && gridOK; j++ {
		s0, s1, s2, t0, t1 := sumsAt(g.Point(j), -1)
		_, gridOK = localLinearFromSums(s0, s1, s2, t0, t1, minSpread)
	}
	minW := cvMinWeight * wbar
	var sse, sw float64
	res := CVScore{Bandwidth: h}
	for i := 0; i < n; i++ {
		s0, s1, s2, t0, t1 := sumsAt(d.X[i], subj[i])
		if !(s0 >= minW) {
			res.Excluded++
			continue
		}
		pred, ok := localLinearFromSums(s0, s1, s2, t0, t1, cvMinSpread)
		if !ok {
			res.Excluded++
			continue
		}
		w := d.weight(i)
		l := w * d.loss(d.Y[i], pred)
		sse += l
		if per != nil {
			per[subj[i]] += l
		}
		sw += w
		res.Predicted++
	}
	return finish(res, sse, sw, gridOK, n)
}

// Bandwidth search settings of ChooseBandwidth.
const (
	// CoarseCandidates is the number of log-spaced bandwidths tried first,
	// from range/200 to range (see CandidateBandwidths): neighbours differ
	// by a factor 200^(1/8) ≈ 1.94.
	CoarseCandidates = 9
	// RefineLevels is the number of halvings (on the log scale) of that
	// step around the best bandwidth so far; the final resolution is a
	// factor 1.94^(1/8) ≈ 1.09.
	RefineLevels = 3
)

// Search sets how ChooseBandwidth picks among the scored bandwidths.
type Search struct {
	// OneStandardError, if set, picks the largest bandwidth whose score
	// exceeds the smallest by at most one standard error of that
	// difference (the one-standard-error rule of Breiman, Friedman, Olshen
	// & Stone 1984, "Classification and Regression Trees", sec. 3.4.3,
	// with a paired standard error): the smoothest curve the data cannot
	// tell apart from the best-scoring one. The standard error of
	// CV(h) - CV(h*) is taken over subjects, the independent units:
	//
	//	SE = √(S/(S-1) · Σ_s (D_s - D̄)²) / Σ_i w_i,  D_s = L_s(h) - L_s(h*),
	//
	// L_s the summed loss of subject s's rows and S the number of
	// subjects.
	OneStandardError bool
	// Progress (may be nil) counts evaluations out of
	// CoarseCandidates + 2·RefineLevels; calls never overlap.
	Progress func(done, total int)
}

// ChooseBandwidth selects the local linear bandwidth by leave-one-subject-
// out cross-validation (see CrossValidate): first CoarseCandidates
// bandwidths log-spaced from range/200 to range of x, then RefineLevels
// rounds that try the best bandwidth so far times and divided by
// ρ^(1/2), ρ^(1/4), ρ^(1/8) (ρ the coarse ratio), a bisection search on
// log h that assumes the CV score has one minimum near the best coarse
// candidate. It returns the chosen score (the smallest, or by the
// one-standard-error rule if asked) and every score, sorted by bandwidth.
func ChooseBandwidth(d CVData, opt Search) (CVScore, []CVScore, error) {
	if err := d.check(); err != nil {
		return CVScore{}, nil, err
	}
	xmin, xmax := d.X[0], d.X[0]
	for _, x := range d.X {
		xmin, xmax = math.Min(xmin, x), math.Max(xmax, x)
	}
	if !(xmax > xmin) {
		return CVScore{}, nil, fmt.Errorf("all x values equal %g; a curve needs a range of x", xmin)
	}
	coarse, err := CandidateBandwidths(xmin, xmax, CoarseCandidates)
	if err != nil {
		return CVScore{}, nil, err
	}
	hmin, hmax := coarse[0], coarse[len(coarse)-1]
	st, err := d.prepare(hmin)
	if err != nil {
		return CVScore{}, nil, err
	}
	total := CoarseCandidates + 2*RefineLevels
	keep := opt.OneStandardError
	scores, per := st.evalAll(coarse, 0, total, opt.Progress, keep)
	best, err := BestBandwidth(scores)
	if err != nil {
		return CVScore{}, scores, err
	}
	logStep := math.Log(coarse[1] / coarse[0])
	done := CoarseCandidates
	for level := 1; level <= RefineLevels; level++ {
		f := math.Exp(logStep / math.Exp2(float64(level)))
		var try []float64
		if h := best.Bandwidth / f; h >= hmin {
			try = append(try, h)
		}
		if h := best.Bandwidth * f; h <= hmax {
			try = append(try, h)
		}
		more, morePer := st.evalAll(try, done, total, opt.Progress, keep)
		done += len(try)
		scores = append(scores, more...)
		per = append(per, morePer...)
		if b, err := BestBandwidth(more); err == nil && b.Score < best.Score {
			best = b
		}
	}
	if opt.Progress != nil && done < total {
		opt.Progress(total, total) // at an end of the range fewer were needed
	}
	if keep {
		best = oneStandardError(scores, per, best)
	}
	slices.SortFunc(scores, func(a, b CVScore) int { return cmp.Compare(a.Bandwidth, b.Bandwidth) })
	return best, scores, nil
}

// oneStandardError applies the rule of Search.OneStandardError.
func oneStandardError(scores []CVScore, per [][]float64, best CVScore) CVScore {
	ib := slices.IndexFunc(scores, func(s CVScore) bool { return s.Bandwidth == best.Bandwidth })
	pick := best
	for k, s := range scores {
		if !s.Eligible || s.Bandwidth <= pick.Bandwidth {
			continue
		}
		// Paired differences per subject, on the scale of the scores.
		nsub := float64(len(per[k]))
		var mean float64
		for j := range per[k] {
			mean += per[k][j] - per[ib][j]
		}
		mean /= nsub
		var ss float64
		for j := range per[k] {
			e := per[k][j] - per[ib][j] - mean
			ss += e * e
		}
		// Σ_i w_i = Predicted rows x mean weight; the scores are means
		// over it, so scale the subject totals the same way.
		denom := float64(best.Predicted)
		if best.Score != 0 {
			var tot float64
			for j := range per[ib] {
				tot += per[ib][j]
			}
			denom = tot / best.Score
		}
		se := math.Sqrt(nsub/(nsub-1)*ss) / denom
		if s.Score-best.Score <= se {
			pick = s
		}
	}
	return pick
}
