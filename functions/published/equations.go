package published

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
)

// Format and Version identify an equations document (see doc.go for the
// layout).
const (
	Format  = "veer.equations"
	Version = 1
	// MaxDocumentBytes bounds an equations document.
	MaxDocumentBytes = 32 << 20
	// MaxCovariates bounds the covariates besides age.
	MaxCovariates = 8
	// maxTerms bounds the terms of one parameter.
	maxTerms = 64
)

type docFile struct {
	Format        string         `json:"format"`
	Version       int            `json:"version"`
	Name          string         `json:"name,omitempty"`
	Source        string         `json:"source,omitempty"`
	Marker        string         `json:"marker,omitempty"`
	Unit          string         `json:"unit,omitempty"`
	Form          string         `json:"form"`
	Interpolation string         `json:"interpolation,omitempty"`
	Covariates    []docCovariate `json:"covariates,omitempty"`
	Groups        []docGroup     `json:"groups"`
}

type docCovariate struct {
	Name string   `json:"name"`
	Unit string   `json:"unit,omitempty"`
	Min  *float64 `json:"min,omitempty"`
	Max  *float64 `json:"max,omitempty"`
}

type docGroup struct {
	Group  string        `json:"group"`
	AgeMin *float64      `json:"age_min,omitempty"`
	AgeMax *float64      `json:"age_max,omitempty"`
	L      *docPredictor `json:"L,omitempty"`
	M      *docPredictor `json:"M,omitempty"`
	S      *docPredictor `json:"S,omitempty"`
	Mean   *docPredictor `json:"mean,omitempty"`
	SD     *docPredictor `json:"sd,omitempty"`
	Lookup *docLookup    `json:"lookup,omitempty"`
}

type docPredictor struct {
	Link  string    `json:"link,omitempty"`
	Terms []docTerm `json:"terms,omitempty"`
}

type docTerm struct {
	Term string   `json:"term"`
	Coef *float64 `json:"coef"`
}

type docLookup struct {
	Columns []string     `json:"columns"`
	Rows    [][]*float64 `json:"rows"`
}

func (g *docGroup) predictors() map[string]*docPredictor {
	return map[string]*docPredictor{"L": g.L, "M": g.M, "S": g.S, "mean": g.Mean, "sd": g.SD}
}

// DecodeEquations reads an equations document (layout in the package
// comment). Every problem is an *InputError (several together in an
// *InputErrors) wrapping a sentinel and saying where it is: the line and
// column of a syntax error, otherwise the group, the parameter or lookup,
// the lookup row and the column.
func DecodeEquations(data []byte) (*Reference, error) {
	if len(data) > MaxDocumentBytes {
		return nil, &InputError{Err: ErrFormat, Reason: fmt.Sprintf("the file is %d bytes, more than the %d an equations file may have", len(data), MaxDocumentBytes)}
	}
	var head struct {
		Format  string `json:"format"`
		Version int    `json:"version"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return nil, jsonError(data, err)
	}
	if head.Format != Format {
		return nil, &InputError{Column: "format", Err: ErrFormat,
			Reason: fmt.Sprintf("this is not a veer equations file (format %q, expected %q)", head.Format, Format)}
	}
	if head.Version != Version {
		return nil, &InputError{Column: "version", Err: ErrFormat,
			Reason: fmt.Sprintf("the equations file has version %d; this program reads version %d", head.Version, Version)}
	}
	var d docFile
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&d); err != nil {
		return nil, jsonError(data, err)
	}
	return build(&d)
}

// jsonError turns a decoding error into an *InputError with the line and
// column of the problem where the decoder gives an offset.
func jsonError(data []byte, err error) error {
	var syn *json.SyntaxError
	var typ *json.UnmarshalTypeError
	e := &InputError{Err: ErrFormat}
	switch {
	case errors.As(err, &syn):
		// Offset counts the bytes read, the offending one included.
		e.Line, e.Col = lineCol(data, syn.Offset-1)
		e.Reason = "the file is not valid JSON: " + strings.TrimPrefix(syn.Error(), "json: ")
		if strings.Contains(syn.Error(), "after top-level value") {
			e.Reason = "the file has more after the equations document; it must hold one JSON object"
		}
	case errors.As(err, &typ):
		e.Line, e.Col = lineCol(data, typ.Offset)
		e.Column = typ.Field
		e.Reason = "expected " + kindName(typ.Type.Kind().String()) + ", found " + typ.Value
	case errors.Is(err, io.ErrUnexpectedEOF):
		e.Reason = "the file ends in the middle of the equations document"
	default:
		msg := strings.TrimPrefix(err.Error(), "json: ")
		if strings.HasPrefix(msg, "unknown field ") {
			msg = "the field " + strings.TrimPrefix(msg, "unknown field ") + " is not part of an equations file (check its spelling)"
		}
		e.Reason = msg
	}
	return e
}

func kindName(k string) string {
	switch k {
	case "float64", "int":
		return "a number"
	case "string":
		return "text"
	case "slice":
		return "a list"
	case "struct", "ptr":
		return "an object"
	}
	return k
}

// lineCol returns the 1-based line and column of byte offset off.
func lineCol(data []byte, off int64) (int, int) {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	if off < 0 {
		off = 0
	}
	line, col := 1, 1
	for _, c := range data[:off] {
		if c == '\n' {
			line, col = line+1, 1
		} else {
			col++
		}
	}
	return line, col
}

// build checks a decoded document and makes the Reference.
func build(d *docFile) (*Reference, error) {
	var bad problems
	fail := func(e *InputError) { bad.add(e) }
	form := Form(d.Form)
	switch form {
	case FormLMS, FormMeanSD:
	default:
		return nil, &InputError{Column: "form", Err: ErrFormat,
			Reason: fmt.Sprintf("form must be %q (L, M and S) or %q (mean and SD), not %q", FormLMS, FormMeanSD, d.Form)}
	}
	how, err := interpolation(d.Interpolation)
	if err != nil {
		return nil, &InputError{Column: "interpolation", Err: ErrFormat, Reason: err.Error()}
	}
	ref := &Reference{info: Info{Name: d.Name, Source: d.Source, Marker: d.Marker, Unit: d.Unit}, form: form, interp: how}
	// Covariates.
	if len(d.Covariates) > MaxCovariates {
		return nil, &InputError{Part: "covariates", Err: ErrFormat, Reason: fmt.Sprintf("%d covariates; at most %d are allowed", len(d.Covariates), MaxCovariates)}
	}
	vars := []string{"age"}
	for i, c := range d.Covariates {
		name := strings.ToLower(strings.TrimSpace(c.Name))
		where := &InputError{Part: "covariates", Row: i + 1, Column: "name", Err: ErrFormat}
		switch {
		case !validName(name):
			where.Reason = fmt.Sprintf("%q is not a usable covariate name (letters, digits and _, starting with a letter)", c.Name)
			fail(where)
			continue
		case name == "age":
			where.Reason = "age is always a variable; do not declare it as a covariate"
			fail(where)
			continue
		case slices.Contains(vars, name):
			where.Err, where.Reason = ErrDuplicate, fmt.Sprintf("the covariate %q is declared twice", name)
			fail(where)
			continue
		}
		cv := Covariate{Name: name, Unit: c.Unit, Min: math.NaN(), Max: math.NaN()}
		if c.Min != nil {
			cv.Min = *c.Min
		}
		if c.Max != nil {
			cv.Max = *c.Max
		}
		if c.Min != nil && c.Max != nil && !(cv.Min < cv.Max) {
			fail(&InputError{Part: "covariates", Row: i + 1, Column: "max", Err: ErrFormat,
				Reason: fmt.Sprintf("the range of %s is empty (min %s, max %s)", name, num(cv.Min), num(cv.Max))})
		}
		vars = append(vars, name)
		ref.covs = append(ref.covs, cv)
	}
	if err := bad.err(); err != nil {
		return nil, err
	}
	// Groups.
	if len(d.Groups) == 0 {
		return nil, &InputError{Column: "groups", Err: ErrMissing, Reason: "the file has no groups"}
	}
	if len(d.Groups) > MaxGroups {
		return nil, &InputError{Column: "groups", Err: ErrFormat, Reason: fmt.Sprintf("%d groups; at most %d are allowed", len(d.Groups), MaxGroups)}
	}
	ref.index = make(map[string]int, len(d.Groups))
	params := form.params()
	totalRows := 0
	for gi := range d.Groups {
		dg := &d.Groups[gi]
		name := dg.Group
		if _, dup := ref.index[name]; dup {
			fail(&InputError{Group: name, Column: "group", Err: ErrDuplicate, Reason: "the group appears twice"})
			continue
		}
		if name == "" && len(d.Groups) > 1 {
			fail(&InputError{Part: fmt.Sprintf("group %d", gi+1), Column: "group", Err: ErrMissing,
				Reason: "the group has no name, but the file has several groups"})
			continue
		}
		g := group{name: name, uses: make([]bool, len(ref.covs)), lnOf: make([]bool, len(vars))}
		before := len(bad.e.List) + bad.e.More
		// The lookup table.
		lookCol := map[string]int{}
		if dg.Lookup != nil {
			totalRows += len(dg.Lookup.Rows)
			if totalRows > MaxTableRows {
				return nil, &InputError{Group: name, Part: "lookup", Err: ErrFormat, Reason: fmt.Sprintf("the lookups have more than %d rows in all", MaxTableRows)}
			}
			lookupTable(dg, &g, params, lookCol, fail)
			if g.lookupAge == nil { // refused: its problems are reported
				clear(lookCol)
				g.lookupCols, g.lookupVals = nil, nil
			}
		}
		// The parameters.
		preds := dg.predictors()
		for _, k := range []string{"L", "M", "S", "mean", "sd"} {
			if preds[k] != nil && !slices.Contains(params, k) {
				fail(&InputError{Group: name, Part: k, Err: ErrFormat,
					Reason: fmt.Sprintf("a reference of form %q gives %s, not %s", form, strings.Join(params, ", "), k)})
			}
		}
		g.pred = make([]predictor, len(params))
		for pi, k := range params {
			dp := preds[k]
			col, hasCol := lookCol[k]
			if dp == nil && !hasCol {
				if dg.Lookup != nil && g.lookupAge == nil {
					continue // the lookup's own problems are reported
				}
				fail(&InputError{Group: name, Part: k, Err: ErrMissing,
					Reason: fmt.Sprintf("%s is missing: give it terms, a lookup column, or both", k)})
				continue
			}
			p := predictor{link: Identity, col: -1}
			if dp != nil {
				switch Link(dp.Link) {
				case "", Identity:
				case Log:
					p.link = Log
				default:
					fail(&InputError{Group: name, Part: k, Column: "link", Err: ErrFormat,
						Reason: fmt.Sprintf("link must be %q or %q, not %q", Identity, Log, dp.Link)})
				}
				if len(dp.Terms) > maxTerms {
					fail(&InputError{Group: name, Part: k, Column: "terms", Err: ErrFormat, Reason: fmt.Sprintf("more than %d terms", maxTerms)})
					continue
				}
				seen := map[string]int{}
				for ti, dt := range dp.Terms {
					t, err := parseTerm(dt.Term, vars)
					if err != nil {
						fail(&InputError{Group: name, Part: k + " term " + strconv.Itoa(ti+1), Column: "term", Err: ErrFormat, Reason: err.Error()})
						continue
					}
					if prev, dup := seen[t.text]; dup {
						fail(&InputError{Group: name, Part: k + " term " + strconv.Itoa(ti+1), Column: "term", Err: ErrDuplicate,
							Reason: fmt.Sprintf("the term %s is also term %d; give each term once", t.text, prev)})
						continue
					}
					seen[t.text] = ti + 1
					if dt.Coef == nil {
						fail(&InputError{Group: name, Part: k + " term " + strconv.Itoa(ti+1), Column: "coef", Err: ErrMissing,
							Reason: fmt.Sprintf("the term %s has no coefficient", t.text)})
						continue
					}
					for _, f := range t.factors {
						if f.v > 0 {
							g.uses[f.v-1] = true
						}
						if f.ln {
							g.lnOf[f.v] = true
						}
					}
					p.terms = append(p.terms, t)
					p.coef = append(p.coef, *dt.Coef)
				}
			}
			if hasCol {
				p.col = col
				// A column used as the parameter itself is checked row by row.
				if p.link == Identity && len(p.terms) == 0 && (k == "M" || k == "S" || k == "mean" || k == "sd") {
					for ri, v := range g.lookupVals[col] {
						if !(v > 0) {
							fail(&InputError{Group: name, Part: "lookup", Row: ri + 1, Column: k, Err: ErrNotPositive,
								Reason: fmt.Sprintf("%s must be positive, not %s", k, num(v))})
						}
					}
				}
			}
			g.pred[pi] = p
		}
		for _, v := range g.lookupVals {
			g.cols = append(g.cols, newColumn(g.lookupAge, v, how))
		}
		// The ages.
		ageRange(dg, &g, fail)
		if before != len(bad.e.List)+bad.e.More {
			continue
		}
		if g.lnOf[0] && !(g.ageMin > 0) {
			fail(&InputError{Group: name, Column: "age_min", Err: ErrFormat,
				Reason: fmt.Sprintf("the equations take ln(age), so ages must be positive, but the range starts at %s", num(g.ageMin))})
			continue
		}
		ref.index[name] = len(ref.groups)
		ref.groups = append(ref.groups, g)
	}
	if err := bad.err(); err != nil {
		return nil, err
	}
	for i := range ref.groups {
		if err := ref.selfCheck(&ref.groups[i]); err != nil {
			return nil, err
		}
	}
	return ref, nil
}

// lookupTable reads a group's lookup into g.
func lookupTable(dg *docGroup, g *group, params []string, lookCol map[string]int, fail func(*InputError)) {
	lk := dg.Lookup
	name := dg.Group
	ageCol := -1
	for ci, c := range lk.Columns {
		switch {
		case c == "age":
			if ageCol >= 0 {
				fail(&InputError{Group: name, Part: "lookup", Column: "columns", Err: ErrDuplicate, Reason: "the column age is named twice"})
				return
			}
			ageCol = ci
		case slices.Contains(params, c):
			if _, dup := lookCol[c]; dup {
				fail(&InputError{Group: name, Part: "lookup", Column: "columns", Err: ErrDuplicate, Reason: fmt.Sprintf("the column %s is named twice", c)})
				return
			}
			lookCol[c] = len(g.lookupCols)
			g.lookupCols = append(g.lookupCols, c)
		default:
			fail(&InputError{Group: name, Part: "lookup", Column: "columns", Err: ErrFormat,
				Reason: fmt.Sprintf("unknown column %q; a lookup has the column age and some of %s", c, strings.Join(params, ", "))})
			return
		}
	}
	if ageCol < 0 {
		fail(&InputError{Group: name, Part: "lookup", Column: "columns", Err: ErrMissing, Reason: "the lookup has no age column"})
		return
	}
	if len(lk.Rows) < 2 {
		fail(&InputError{Group: name, Part: "lookup", Column: "rows", Err: ErrTooFewAges, Reason: "a lookup needs at least two ages"})
		return
	}
	g.lookupVals = make([][]float64, len(g.lookupCols))
	ok := true
	for ri, row := range lk.Rows {
		if len(row) != len(lk.Columns) {
			fail(&InputError{Group: name, Part: "lookup", Row: ri + 1, Err: ErrFormat,
				Reason: fmt.Sprintf("the row has %d values for %d columns", len(row), len(lk.Columns))})
			ok = false
			continue
		}
		for ci, v := range row {
			if v == nil {
				fail(&InputError{Group: name, Part: "lookup", Row: ri + 1, Column: lk.Columns[ci], Err: ErrMissing, Reason: "the value is blank (null)"})
				ok = false
			}
		}
		if !ok {
			continue
		}
		age := *row[ageCol]
		if n := len(g.lookupAge); n > 0 {
			prev := g.lookupAge[n-1]
			if age == prev {
				fail(&InputError{Group: name, Part: "lookup", Rows: []int{ri, ri + 1}, Column: "age", Err: ErrDuplicate,
					Reason: fmt.Sprintf("two rows at age %s; keep one", num(age))})
				ok = false
				continue
			}
			if age < prev {
				fail(&InputError{Group: name, Part: "lookup", Rows: []int{ri, ri + 1}, Column: "age", Err: ErrUnsorted,
					Reason: fmt.Sprintf("age %s comes after age %s; ages must increase down the lookup", num(age), num(prev))})
				ok = false
				continue
			}
		}
		g.lookupAge = append(g.lookupAge, age)
		for ci, c := range lk.Columns {
			if ci == ageCol {
				continue
			}
			k := lookCol[c]
			g.lookupVals[k] = append(g.lookupVals[k], *row[ci])
		}
	}
	if !ok {
		g.lookupAge = nil
	}
}

// ageRange sets g's age range from the document and its lookup.
func ageRange(dg *docGroup, g *group, fail func(*InputError)) {
	name := dg.Group
	lo, hi := math.NaN(), math.NaN()
	if n := len(g.lookupAge); n > 0 {
		lo, hi = g.lookupAge[0], g.lookupAge[n-1]
	} else if dg.Lookup != nil {
		return // the lookup's own problems are reported
	}
	if dg.AgeMin != nil {
		if g.lookupAge != nil && *dg.AgeMin < lo {
			fail(&InputError{Group: name, Column: "age_min", Err: ErrOutOfRange,
				Reason: fmt.Sprintf("age_min %s is below the lookup's first age %s", num(*dg.AgeMin), num(lo))})
			return
		}
		lo = *dg.AgeMin
	}
	if dg.AgeMax != nil {
		if g.lookupAge != nil && *dg.AgeMax > hi {
			fail(&InputError{Group: name, Column: "age_max", Err: ErrOutOfRange,
				Reason: fmt.Sprintf("age_max %s is above the lookup's last age %s", num(*dg.AgeMax), num(hi))})
			return
		}
		hi = *dg.AgeMax
	}
	switch {
	case math.IsNaN(lo) || math.IsNaN(hi):
		fail(&InputError{Group: name, Column: "age_min", Err: ErrMissing,
			Reason: "without a lookup table, give the ages the equations are valid for in age_min and age_max"})
	case !(lo < hi):
		fail(&InputError{Group: name, Column: "age_max", Err: ErrFormat,
			Reason: fmt.Sprintf("the age range is empty (age_min %s, age_max %s)", num(lo), num(hi))})
	default:
		g.ageMin, g.ageMax = lo, hi
	}
}

// selfCheck evaluates a group over its ages (and, for covariates with a
// declared range, at its ends and middle) so that coefficients that give a
// non-positive M or S inside the valid range are found when the file is
// read, not when a worker is screened.
func (r *Reference) selfCheck(g *group) error {
	var used []int
	for k, u := range g.uses {
		if u {
			if math.IsNaN(r.covs[k].Min) || math.IsNaN(r.covs[k].Max) {
				return nil // no declared range to check over
			}
			used = append(used, k)
		}
	}
	if len(used) > 3 {
		return nil
	}
	var ages []float64
	stride := 1 + len(g.lookupAge)/1000 // at most about 1000 lookup ages
	for i := 0; i < len(g.lookupAge); i += stride {
		ages = append(ages, g.lookupAge[i])
	}
	const steps = 100
	for i := 0; i <= steps; i++ {
		ages = append(ages, g.ageMin+(g.ageMax-g.ageMin)*float64(i)/steps)
	}
	cov := make([]float64, len(r.covs))
	combos := 1
	for range used {
		combos *= 3
	}
	x := make([]float64, 0, 2*(1+len(r.covs)))
	for c := 0; c < combos; c++ {
		for k := range cov {
			cov[k] = math.NaN()
		}
		rest := c
		for _, k := range used {
			lo, hi := r.covs[k].Min, r.covs[k].Max
			cov[k] = []float64{lo, (lo + hi) / 2, hi}[rest%3]
			rest /= 3
		}
		for _, a := range ages {
			if a < g.ageMin || a > g.ageMax {
				continue
			}
			if _, err := r.at(g, a, cov, false, x); err != nil {
				var pe *ParamsError
				var ce *CovariateError
				switch {
				case errors.As(err, &pe):
					return &InputError{Group: g.name, Err: ErrInvalidParams, Reason: pe.Reason + " at age " + num(a) + covText(r, used, cov)}
				case errors.As(err, &ce):
					return &InputError{Group: g.name, Part: "covariates", Err: ErrFormat,
						Reason: "the equations take ln(" + ce.Name + ") but its declared range reaches " + num(ce.Value)}
				}
				return err
			}
		}
	}
	return nil
}

func covText(r *Reference, used []int, cov []float64) string {
	var b strings.Builder
	for _, k := range used {
		b.WriteString(", " + r.covs[k].Name + " " + num(cov[k]))
	}
	return b.String()
}

func validName(s string) bool {
	if s == "" || len(s) > 32 || !(s[0] >= 'a' && s[0] <= 'z') {
		return false
	}
	for _, c := range s {
		if !(c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || c == '_') {
			return false
		}
	}
	return s != "ln"
}

// Encode writes the reference as an equations document (an LMS table
// becomes groups with a lookup of age, L, M and S). DecodeEquations reads
// it back to the same reference; the bytes are the same for the same
// reference.
func (r *Reference) Encode() ([]byte, error) {
	d := docFile{Format: Format, Version: Version, Name: r.info.Name, Source: r.info.Source,
		Marker: r.info.Marker, Unit: r.info.Unit, Form: string(r.form), Interpolation: string(r.interp)}
	vars := []string{"age"}
	for _, c := range r.covs {
		dc := docCovariate{Name: c.Name, Unit: c.Unit}
		if !math.IsNaN(c.Min) {
			v := c.Min
			dc.Min = &v
		}
		if !math.IsNaN(c.Max) {
			v := c.Max
			dc.Max = &v
		}
		d.Covariates = append(d.Covariates, dc)
		vars = append(vars, c.Name)
	}
	for _, g := range r.groups {
		lo, hi := g.ageMin, g.ageMax
		dg := docGroup{Group: g.name, AgeMin: &lo, AgeMax: &hi}
		if g.lookupAge != nil {
			lk := &docLookup{Columns: append([]string{"age"}, g.lookupCols...)}
			for i, a := range g.lookupAge {
				row := []*float64{ptr(a)}
				for _, v := range g.lookupVals {
					row = append(row, ptr(v[i]))
				}
				lk.Rows = append(lk.Rows, row)
			}
			dg.Lookup = lk
		}
		set := map[string]**docPredictor{"L": &dg.L, "M": &dg.M, "S": &dg.S, "mean": &dg.Mean, "sd": &dg.SD}
		for pi, k := range r.form.params() {
			p := g.pred[pi]
			if p.link == Identity && len(p.terms) == 0 {
				continue // the lookup column alone
			}
			dp := &docPredictor{Link: string(p.link)}
			for ti, t := range p.terms {
				dp.Terms = append(dp.Terms, docTerm{Term: t.text, Coef: ptr(p.coef[ti])})
			}
			*set[k] = dp
		}
		d.Groups = append(d.Groups, dg)
	}
	for _, v := range d.Groups {
		for _, p := range v.predictors() {
			if p == nil {
				continue
			}
			for _, t := range p.Terms {
				if isNaNOrInf(*t.Coef) {
					return nil, errors.New("a coefficient is not a finite number")
				}
			}
		}
	}
	b, err := json.MarshalIndent(d, "", " ")
	if err != nil {
		return nil, fmt.Errorf("encoding the reference: %w", err)
	}
	return append(oneLineLeaves(b), '\n'), nil
}

func ptr(v float64) *float64 { return &v }

// WithInfo returns a copy of r described by info (the reference itself is
// shared; it never changes).
func (r *Reference) WithInfo(info Info) *Reference {
	c := *r
	c.info = info
	return &c
}
