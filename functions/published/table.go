package published

import (
	"math"
	"strconv"
	"strings"
)

// TableRow is one row of an LMS table: a group ("" when the table has no
// groups), an age and the L, M and S there. A blank cell is NaN. Line, if
// set, is the row's line in the user's file, for messages.
type TableRow struct {
	Group      string
	Age        float64
	L, M, S    float64
	Line       int
	blankGroup bool
}

// BlankGroup marks a row whose group cell is blank in a table that has a
// group column (a group of "" is then a missing value, not "no groups").
func (r TableRow) BlankGroup() TableRow { r.blankGroup = true; return r }

// Limits of tables and documents.
const (
	// MaxTableRows bounds an LMS table and the rows of all lookups of an
	// equations document.
	MaxTableRows = 1_000_000
	// MaxGroups bounds the groups of a reference.
	MaxGroups = 1000
	// maxProblems is how many problems one error lists.
	maxProblems = 10
)

// InputErrors lists the problems found in a reference given by the user
// (at most a few; More counts the rest), so all of them can be fixed in one
// go. errors.Is and errors.As see each listed *InputError.
type InputErrors struct {
	List []*InputError
	More int
}

func (e *InputErrors) Error() string {
	parts := make([]string, len(e.List))
	for i, p := range e.List {
		parts[i] = p.Error()
	}
	s := strings.Join(parts, "; ")
	if e.More > 0 {
		s += "; and " + strconv.Itoa(e.More) + " more"
	}
	return s
}

func (e *InputErrors) Unwrap() []error {
	out := make([]error, len(e.List))
	for i, p := range e.List {
		out[i] = p
	}
	return out
}

// problems collects InputErrors.
type problems struct{ e InputErrors }

func (p *problems) add(e *InputError) {
	if len(p.e.List) < maxProblems {
		p.e.List = append(p.e.List, e)
	} else {
		p.e.More++
	}
}

func (p *problems) err() error {
	switch {
	case len(p.e.List) == 0:
		return nil
	case len(p.e.List) == 1 && p.e.More == 0:
		return p.e.List[0]
	}
	e := p.e
	return &e
}

// NewTable builds a reference from an LMS table: rows of group, age, L,
// M, S, one per group and age, in any spacing. Within a group the ages
// must increase down the table (groups may be interleaved). Between ages
// L, M and S are interpolated as how says ("" is Linear); outside the
// group's first and last age see Reference.At.
//
// Every problem is reported with its data row (1-based; and file line when
// TableRow.Line is set) and column: L, M or S blank (ErrMissing), M or S
// not positive (ErrNotPositive), a number not finite (ErrNotFinite), the
// same group and age twice (ErrDuplicate, both rows), ages out of order
// (ErrUnsorted, both rows), a group with one age (ErrTooFewAges), some
// rows with a group and others without (ErrMissing, column group).
// Several problems come back together as *InputErrors.
func NewTable(rows []TableRow, how Interpolation) (*Reference, error) {
	how, err := interpolation(string(how))
	if err != nil {
		return nil, &InputError{Err: ErrFormat, Reason: err.Error()}
	}
	if len(rows) == 0 {
		return nil, &InputError{Err: ErrMissing, Reason: "the table has no rows"}
	}
	if len(rows) > MaxTableRows {
		return nil, &InputError{Err: ErrFormat, Reason: "the table has " + strconv.Itoa(len(rows)) + " rows, more than the " + strconv.Itoa(MaxTableRows) + " allowed"}
	}
	var bad problems
	at := func(i int, col string, sentinel error, reason string) {
		bad.add(&InputError{Row: i + 1, Line: rows[i].Line, Column: col, Err: sentinel, Reason: reason, inTable: true})
	}
	named, blank := 0, 0
	for _, r := range rows {
		if r.Group == "" {
			blank++
		} else {
			named++
		}
	}
	type acc struct {
		name    string
		rows    []int
		age     []float64
		l, m, s []float64
	}
	index := map[string]int{}
	var gs []*acc
	for i, r := range rows {
		ok := true
		if r.Group == "" && (named > 0 || r.blankGroup) {
			at(i, "group", ErrMissing, "the group is blank, but other rows name their group")
			ok = false
		}
		for _, c := range []struct {
			name string
			v    float64
			pos  bool
		}{{"age", r.Age, false}, {"L", r.L, false}, {"M", r.M, true}, {"S", r.S, true}} {
			switch {
			case math.IsNaN(c.v):
				at(i, c.name, ErrMissing, "the "+c.name+" cell is blank; every row needs age, L, M and S")
				ok = false
			case math.IsInf(c.v, 0):
				at(i, c.name, ErrNotFinite, c.name+" is not a finite number")
				ok = false
			case c.pos && !(c.v > 0):
				what := "M (the median)"
				if c.name == "S" {
					what = "S (the coefficient of variation)"
				}
				at(i, c.name, ErrNotPositive, what+" must be positive, not "+num(c.v))
				ok = false
			}
		}
		if !ok {
			continue
		}
		k, seen := index[r.Group]
		if !seen {
			if len(gs) == MaxGroups {
				at(i, "group", ErrFormat, "more than "+strconv.Itoa(MaxGroups)+" groups")
				return nil, bad.err()
			}
			k = len(gs)
			index[r.Group] = k
			gs = append(gs, &acc{name: r.Group})
		}
		g := gs[k]
		if n := len(g.age); n > 0 {
			prev := g.age[n-1]
			switch {
			case r.Age == prev:
				bad.add(&InputError{Rows: []int{g.rows[n-1] + 1, i + 1}, Lines: lines(rows, g.rows[n-1], i), Column: "age", Err: ErrDuplicate, inTable: true,
					Reason: "two rows for " + groupLabel(r.Group) + " at age " + num(r.Age) + "; keep one"})
				continue
			case r.Age < prev:
				// A duplicate of an earlier age is the clearer message.
				dup := -1
				for j, a := range g.age {
					if a == r.Age {
						dup = j
					}
				}
				if dup >= 0 {
					bad.add(&InputError{Rows: []int{g.rows[dup] + 1, i + 1}, Lines: lines(rows, g.rows[dup], i), Column: "age", Err: ErrDuplicate, inTable: true,
						Reason: "two rows for " + groupLabel(r.Group) + " at age " + num(r.Age) + "; keep one"})
				} else {
					bad.add(&InputError{Rows: []int{g.rows[n-1] + 1, i + 1}, Lines: lines(rows, g.rows[n-1], i), Column: "age", Err: ErrUnsorted, inTable: true,
						Reason: "age " + num(r.Age) + " comes after age " + num(prev) + " of " + groupLabel(r.Group) +
							"; sort the table so ages increase within each group"})
				}
				continue
			}
		}
		g.rows = append(g.rows, i)
		g.age = append(g.age, r.Age)
		g.l = append(g.l, r.L)
		g.m = append(g.m, r.M)
		g.s = append(g.s, r.S)
	}
	for _, g := range gs {
		// A group left with one age because other rows were refused is
		// not a separate problem.
		if len(g.age) == 1 && len(bad.e.List) == 0 {
			bad.add(&InputError{Row: g.rows[0] + 1, Line: rows[g.rows[0]].Line, Column: "age", Err: ErrTooFewAges, inTable: true,
				Reason: groupLabel(g.name) + " has a single age; a table needs at least two ages per group"})
		}
	}
	if err := bad.err(); err != nil {
		return nil, err
	}
	ref := &Reference{form: FormLMS, interp: how, index: make(map[string]int, len(gs))}
	for _, a := range gs {
		g := group{name: a.name, ageMin: a.age[0], ageMax: a.age[len(a.age)-1], lookupAge: a.age,
			lookupCols: []string{"L", "M", "S"}, lookupVals: [][]float64{a.l, a.m, a.s}, lnOf: []bool{false}}
		for i, v := range g.lookupVals {
			g.cols = append(g.cols, newColumn(a.age, v, how))
			g.pred = append(g.pred, predictor{link: Identity, col: i})
		}
		ref.index[a.name] = len(ref.groups)
		ref.groups = append(ref.groups, g)
	}
	return ref, nil
}

// lines returns the file lines of rows a and b, or nil when not known.
func lines(rows []TableRow, a, b int) []int {
	if rows[a].Line == 0 || rows[b].Line == 0 {
		return nil
	}
	return []int{rows[a].Line, rows[b].Line}
}
