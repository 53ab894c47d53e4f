package published

import (
	"math"
	"runtime"
	"sync"
	"veer/functions/refcurve"
)

// Form is how a reference gives the distribution of a reading.
type Form string

const (
	// FormLMS gives L, M and S (see LMS).
	FormLMS Form = "lms"
	// FormMeanSD gives the mean and SD of a normal reading, as older
	// prediction equations do (a predicted value and a residual SD). It is
	// the LMS distribution with L = 1, M = mean, S = SD/mean, so the mean
	// must be positive.
	FormMeanSD Form = "mean-sd"
)

// params are the names of the parameters of a form, in storage order.
func (f Form) params() []string {
	if f == FormMeanSD {
		return []string{"mean", "sd"}
	}
	return []string{"L", "M", "S"}
}

// Link maps a linear predictor to its parameter.
type Link string

const (
	// Identity: the parameter is the linear predictor itself.
	Identity Link = "identity"
	// Log: the logarithm of the parameter is the linear predictor, so the
	// parameter is exp(predictor) and always positive.
	Log Link = "log"
)

// Covariate is a variable of the reference equations besides age (height,
// say), with the range the equations are valid for (NaN where the
// document sets no bound).
type Covariate struct {
	Name, Unit string
	Min, Max   float64
}

// predictor is one parameter of one group: link⁻¹(Σ coef·term + lookup(age)).
type predictor struct {
	link  Link
	terms []term
	coef  []float64
	col   int // index of its lookup column in group.cols, -1 for none
}

// eval evaluates the predictor at variables x with logarithms lx (where
// the group takes them) and the lookup segment of the age.
func (p *predictor) eval(g *group, x, lx []float64, s segment) float64 {
	eta := 0.0
	for i, t := range p.terms {
		eta += p.coef[i] * t.value(x, lx)
	}
	if p.col >= 0 {
		eta += g.cols[p.col].at(s)
	}
	if p.link == Log {
		return math.Exp(eta)
	}
	return eta
}

// group is the reference of one group.
type group struct {
	name           string
	ageMin, ageMax float64
	pred           []predictor // one per parameter of the form
	lookupAge      []float64   // ages of the lookup table, nil without one
	lookupCols     []string    // its value columns, in the document's order
	lookupVals     [][]float64 // per value column
	cols           []column    // lookupVals prepared for interpolation
	// uses[k] says whether covariate k (0-based, declared order) appears
	// in a term; lnOf[v] whether variable v (0 age, k+1 covariate k)
	// appears under a logarithm.
	uses []bool
	lnOf []bool
}

// Reference is a published reference: for each group, the distribution of
// a reading given age (and covariates such as height), as L, M and S. It
// is built from an LMS table (NewTable) or an equations document
// (DecodeEquations), and never changes afterwards, so it is safe for
// concurrent use.
type Reference struct {
	info   Info
	form   Form
	interp Interpolation
	covs   []Covariate
	groups []group
	index  map[string]int
}

// Info describes where a reference comes from, as its document says.
type Info struct {
	// Name and Source are free text (the publication, or "synthetic
	// example"); Marker and Unit name what it describes.
	Name, Source, Marker, Unit string
}

// Info returns the description of the reference.
func (r *Reference) Info() Info { return r.info }

// Form returns the reference's form.
func (r *Reference) Form() Form { return r.form }

// Interpolation returns how lookup tables are interpolated between ages.
func (r *Reference) Interpolation() Interpolation { return r.interp }

// Covariates returns the covariates besides age, in the order At and
// ZMany take their values.
func (r *Reference) Covariates() []Covariate { return append([]Covariate(nil), r.covs...) }

// Groups returns the group names in the reference's order ("" for a
// reference without groups).
func (r *Reference) Groups() []string {
	out := make([]string, len(r.groups))
	for i, g := range r.groups {
		out[i] = g.name
	}
	return out
}

// Range returns the ages group covers.
func (r *Reference) Range(group string) (lo, hi float64, err error) {
	g, err := r.group(group)
	if err != nil {
		return 0, 0, err
	}
	return g.ageMin, g.ageMax, nil
}

// Uses returns the names of the covariates group's equations need.
func (r *Reference) Uses(group string) ([]string, error) {
	g, err := r.group(group)
	if err != nil {
		return nil, err
	}
	var out []string
	for k, u := range g.uses {
		if u {
			out = append(out, r.covs[k].Name)
		}
	}
	return out, nil
}

func (r *Reference) group(name string) (*group, error) {
	if i, ok := r.index[name]; ok {
		return &r.groups[i], nil
	}
	return nil, &refcurve.GroupError{Group: name, Groups: r.Groups()}
}

// Within reports whether age and the covariates group's equations use
// lie inside the ranges the reference covers (blank covariates count as
// inside: At reports them). An unknown group is not within.
func (r *Reference) Within(group string, age float64, cov []float64) bool {
	g, err := r.group(group)
	if err != nil || !(age >= g.ageMin && age <= g.ageMax) {
		return false
	}
	for k, c := range r.covs {
		if !g.uses[k] || k >= len(cov) {
			continue
		}
		if v := cov[k]; v < c.Min || v > c.Max {
			return false
		}
	}
	return true
}

// At returns L, M and S of group at age, with cov holding the covariates'
// values in the order of Covariates (NaN or a short slice for a blank one;
// only those the group's equations use are read).
//
// Outside the group's ages, or outside a covariate's declared range, it is
// a *refcurve.RangeError (an age) or *RangeError (a covariate) unless
// extrapolate; then the age and each covariate are
// held at the nearest end of their range (constant extrapolation, the rule
// of fitted reference curves: the reference is not extended by a trend
// nobody measured). A blank covariate the group needs, or a non-positive
// one under a logarithm, is a *CovariateError; an equation whose M or S is
// not positive at this point is a *ParamsError.
func (r *Reference) At(group string, age float64, cov []float64, extrapolate bool) (LMS, error) {
	g, err := r.group(group)
	if err != nil {
		return LMS{}, err
	}
	var buf [2 * (1 + MaxCovariates)]float64
	return r.at(g, age, cov, extrapolate, buf[:0])
}

// at is At for group g; buf is scratch space for 2·(1+len(covariates))
// numbers.
func (r *Reference) at(g *group, age float64, cov []float64, extrapolate bool, buf []float64) (LMS, error) {
	x := buf[:0]
	if isNaNOrInf(age) {
		return LMS{}, &refcurve.RangeError{Group: g.name, Time: age, Min: g.ageMin, Max: g.ageMax}
	}
	if age < g.ageMin || age > g.ageMax {
		if !extrapolate {
			return LMS{}, &refcurve.RangeError{Group: g.name, Time: age, Min: g.ageMin, Max: g.ageMax}
		}
		age = math.Min(math.Max(age, g.ageMin), g.ageMax)
	}
	x = append(x[:0], age)
	for k, c := range r.covs {
		if !g.uses[k] {
			x = append(x, math.NaN())
			continue
		}
		v := math.NaN()
		if k < len(cov) {
			v = cov[k]
		}
		if math.IsNaN(v) {
			return LMS{}, &CovariateError{Group: g.name, Name: c.Name, Value: v, Missing: true}
		}
		if math.IsInf(v, 0) {
			return LMS{}, &CovariateError{Group: g.name, Name: c.Name, Value: v}
		}
		if v < c.Min || v > c.Max {
			if !extrapolate {
				return LMS{}, &RangeError{Group: g.name, Name: c.Name, Value: v, Min: c.Min, Max: c.Max}
			}
			if v < c.Min {
				v = c.Min
			} else {
				v = c.Max
			}
		}
		if g.lnOf[k+1] && !(v > 0) {
			return LMS{}, &CovariateError{Group: g.name, Name: c.Name, Value: v}
		}
		x = append(x, v)
	}
	lx := buf[len(x) : 2*len(x)]
	for v, ln := range g.lnOf {
		if ln {
			lx[v] = math.Log(x[v])
		}
	}
	var s segment
	if g.lookupAge != nil {
		s = locate(g.lookupAge, age)
	}
	var p LMS
	if r.form == FormMeanSD {
		mean, sd := g.pred[0].eval(g, x, lx, s), g.pred[1].eval(g, x, lx, s)
		if isNaNOrInf(mean) || isNaNOrInf(sd) || !(mean > 0) || !(sd > 0) {
			return LMS{}, &ParamsError{Group: g.name, Age: age, Params: LMS{L: 1, M: mean, S: sd},
				Err: ErrInvalidParams, Reason: "the equations give mean " + num(mean) + " and SD " + num(sd) +
					" here; both must be positive (check the coefficients)"}
		}
		return LMS{L: 1, M: mean, S: sd / mean}, nil
	}
	p = LMS{L: g.pred[0].eval(g, x, lx, s), M: g.pred[1].eval(g, x, lx, s), S: g.pred[2].eval(g, x, lx, s)}
	if err := p.Validate(); err != nil {
		return LMS{}, &ParamsError{Group: g.name, Age: age, Params: p, Err: ErrInvalidParams,
			Reason: "the reference gives L " + num(p.L) + ", M " + num(p.M) + ", S " + num(p.S) +
				" here; M and S must be positive (check the coefficients)"}
	}
	return p, nil
}

// Z returns the standard normal deviate of reading y of group at age
// with covariates cov (see At and LMS.Z).
func (r *Reference) Z(group string, age float64, cov []float64, y float64, extrapolate bool) (float64, error) {
	p, err := r.At(group, age, cov, extrapolate)
	if err != nil {
		return 0, err
	}
	return p.Z(y)
}

// Centile returns the c-th centile (0 < c < 100) of group at age with
// covariates cov (see At and LMS.Centile).
func (r *Reference) Centile(group string, age float64, cov []float64, c float64, extrapolate bool) (float64, error) {
	p, err := r.At(group, age, cov, extrapolate)
	if err != nil {
		return 0, err
	}
	v, err := p.Centile(c)
	if err != nil {
		return 0, &ParamsError{Group: group, Age: age, Params: p, Err: err, Reason: err.Error()}
	}
	return v, nil
}

// ZMany scores many readings at once into out: out[i] is the deviate of
// y[i] at age[i] in groups[i] (or groups[0] for all when len(groups) is
// 1), with covariate k of entry i in cov[k][i] (cov may be shorter than
// Covariates, or a column nil, when those covariates are not given; their
// values are then blank). Entries that cannot be scored get NaN and are
// reported together in a *ScoreErrors; the others are still computed.
// Large inputs are split over up to GOMAXPROCS goroutines; the result does
// not depend on how many.
func (r *Reference) ZMany(groups []string, age, y []float64, cov [][]float64, extrapolate bool, out []float64) error {
	n := len(age)
	if len(y) != n || len(out) != n {
		panic("published.ZMany: ages, readings and output must have the same length")
	}
	if len(groups) != n && len(groups) != 1 {
		panic("published.ZMany: give one group per entry or a single group")
	}
	for _, c := range cov {
		if c != nil && len(c) != n {
			panic("published.ZMany: a covariate column has the wrong length")
		}
	}
	const chunk = 1 << 15
	parts := min((n+chunk-1)/chunk, runtime.GOMAXPROCS(0))
	if parts <= 1 {
		if e := r.zRange(groups, age, y, cov, extrapolate, out, 0, n); e != nil {
			return e
		}
		return nil
	}
	found := make([]*ScoreErrors, parts)
	var wg sync.WaitGroup
	for p := range parts {
		wg.Add(1)
		go func() {
			defer wg.Done()
			found[p] = r.zRange(groups, age, y, cov, extrapolate, out, p*n/parts, (p+1)*n/parts)
		}()
	}
	wg.Wait()
	var errs *ScoreErrors
	for _, e := range found {
		if e == nil {
			continue
		}
		if errs == nil {
			errs = &ScoreErrors{Total: n}
		}
		errs.Count += e.Count
		for _, f := range e.First {
			if len(errs.First) < maxReportedEntries {
				errs.First = append(errs.First, f)
			}
		}
	}
	if errs != nil {
		return errs
	}
	return nil
}

func (r *Reference) zRange(groups []string, age, y []float64, cov [][]float64, extrapolate bool, out []float64, from, to int) *ScoreErrors {
	n := len(age)
	var errs *ScoreErrors
	fail := func(i int, err error) {
		out[i] = math.NaN()
		if errs == nil {
			errs = &ScoreErrors{Total: n}
		}
		errs.Count++
		if len(errs.First) < maxReportedEntries {
			errs.First = append(errs.First, EntryError{Index: i, Err: err})
		}
	}
	x := make([]float64, 0, 2*(1+len(r.covs)))
	c := make([]float64, len(r.covs))
	var (
		cur     *group
		curName string
	)
	for i := from; i < to; i++ {
		name := groups[0]
		if len(groups) == n {
			name = groups[i]
		}
		if cur == nil || name != curName {
			g, err := r.group(name)
			if err != nil {
				fail(i, err)
				continue
			}
			cur, curName = g, name
		}
		for k := range c {
			c[k] = math.NaN()
			if k < len(cov) && cov[k] != nil {
				c[k] = cov[k][i]
			}
		}
		p, err := r.at(cur, age[i], c, extrapolate, x)
		if err != nil {
			fail(i, err)
			continue
		}
		z, err := p.Z(y[i])
		if err != nil {
			fail(i, err)
			continue
		}
		out[i] = z
	}
	return errs
}
