package catalog_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"testing"

	"veer/functions/catalog"
	"veer/functions/cell"
	"veer/functions/refcurve"
	"veer/functions/screening"
)

// cat is the catalogue under test, shared like the server shares it.
var cat = catalog.New()

// blank is an omitted argument in the middle of a call, as spreadsheets
// send VEER.LIMIT(20,,"gap=1").
var blank = cell.ScalarValue(cell.Cell{})

// exams are columns of a synthetic exam sheet.
type exams struct {
	ids    []string
	ages   []float64
	vals   []float64
	groups []string
}

func (e exams) len() int { return len(e.ids) }

// rows returns the exams as reference rows for screening.Fit.
func (e exams) rows() []refcurve.Row {
	out := make([]refcurve.Row, e.len())
	for i := range out {
		out[i] = refcurve.Row{Worker: e.ids[i], Group: e.groups[i], Time: e.ages[i], Value: e.vals[i]}
	}
	return out
}

// screening returns the exams for Model.Screen.
func (e exams) screening() []screening.Exam {
	out := make([]screening.Exam, e.len())
	for i := range out {
		out[i] = screening.Exam{Worker: e.ids[i], Group: e.groups[i], Time: e.ages[i], Value: e.vals[i]}
	}
	return out
}

// shuffled returns the rows in a random (seeded) order.
func (e exams) shuffled(seed uint64) exams {
	r := rand.New(rand.NewPCG(seed, 99))
	p := r.Perm(e.len())
	var out exams
	for _, i := range p {
		out.ids = append(out.ids, e.ids[i])
		out.ages = append(out.ages, e.ages[i])
		out.vals = append(out.vals, e.vals[i])
		out.groups = append(out.groups, e.groups[i])
	}
	return out
}

// synth generates a healthy cohort: workers of two groups ("office",
// "plant") with 3 to 7 exams at irregular gaps between ages 25 and 65;
// systolic-pressure-like readings whose mean rises with age, with a
// persistent AR(1) worker component (phi per year 0.8) and measurement
// noise. drift adds drift mmHg per year from a worker's first exam to the
// workers whose index is a multiple of 5 (for screening tests).
func synth(seed uint64, workers int, level, drift float64) exams {
	r := rand.New(rand.NewPCG(seed, 20261202))
	var e exams
	for w := 0; w < workers; w++ {
		g := "office"
		if w%2 == 1 {
			g = "plant"
		}
		id := fmt.Sprintf("W%04d", w)
		age := 25 + 28*r.Float64()
		first := age
		s := r.NormFloat64()
		n := 3 + r.IntN(5)
		for k := 0; k < n; k++ {
			gap := 0.4 + 2.5*r.Float64()
			if k > 0 {
				age += gap
				rho := math.Pow(0.8, gap)
				s = rho*s + math.Sqrt(1-rho*rho)*r.NormFloat64()
			}
			v := level + 0.6*(age-40) + 9*(0.75*s+0.66*r.NormFloat64())
			if g == "plant" {
				v += 4
			}
			if drift != 0 && w%5 == 0 {
				v += drift * (age - first)
			}
			e.ids = append(e.ids, id)
			e.groups = append(e.groups, g)
			e.ages = append(e.ages, math.Round(age*100)/100)
			e.vals = append(e.vals, math.Round(v))
		}
	}
	return e
}

var (
	refOnce sync.Once
	refData exams
	refDoc  []byte
	refErr  error
)

// reference returns the synthetic reference cohort and its model document
// fitted directly by the engine (screening.Fit), computed once.
func reference(t testing.TB) (exams, []byte) {
	t.Helper()
	refOnce.Do(func() {
		refData = synth(1, 160, 120, 0)
		m, err := screening.Fit(context.Background(), refData.rows(), screening.FitOptions{Name: "sbp"})
		if err != nil {
			refErr = err
			return
		}
		refDoc, refErr = m.Encode()
	})
	if refErr != nil {
		t.Fatal(refErr)
	}
	return refData, refDoc
}

// newEnv returns an in-memory environment holding the reference model as
// "sbp@v1", and the decoded model for direct engine calls.
func newEnv(t testing.TB) (*cell.MemoryEnv, *screening.Model) {
	t.Helper()
	_, doc := reference(t)
	env := &cell.MemoryEnv{}
	if h, err := env.SaveModel("sbp", doc); err != nil || h != "sbp@v1" {
		t.Fatalf("SaveModel = %q, %v", h, err)
	}
	m, err := screening.Decode(doc)
	if err != nil {
		t.Fatal(err)
	}
	return env, m
}

// call runs a catalogue function the way the server does: arguments are
// converted from Go values (a cell.Value is passed as is, nil is an absent
// argument), bound and checked against the parameters, the function is
// called, and its result is encoded to JSON to prove it is a valid cell
// result. It returns the result and the spreadsheet error, if any, in the
// function's context as the dispatcher gives it (errors inside a spilled
// result are returned as the function made them).
func call(t testing.TB, env cell.Env, fn string, args ...any) (any, *cell.Error) {
	t.Helper()
	return callCtx(context.Background(), t, env, fn, args...)
}

func callCtx(ctx context.Context, t testing.TB, env cell.Env, fn string, args ...any) (any, *cell.Error) {
	t.Helper()
	f, ok := cat.Lookup(fn)
	if !ok {
		t.Fatalf("the catalogue has no %s", fn)
	}
	vals := make([]cell.Value, len(args))
	for i, a := range args {
		v, err := cell.ValueOf(a)
		if err != nil {
			t.Fatalf("%s argument %d: %v", fn, i+1, err)
		}
		vals[i] = v
	}
	bound, err := cell.Bind(f, vals)
	if err != nil {
		return nil, cell.AsError(err).In(f.Name)
	}
	res, err := f.Call(ctx, env, bound)
	if err != nil {
		return nil, cell.AsError(err).In(f.Name)
	}
	if _, e := cell.EncodeResult(nil, f.Name, res); e != nil {
		return nil, e
	}
	return res, nil
}

// mustCall is call that fails the test on a spreadsheet error.
func mustCall(t testing.TB, env cell.Env, fn string, args ...any) any {
	t.Helper()
	v, e := call(t, env, fn, args...)
	if e != nil {
		t.Fatalf("%s: %v", fn, e)
	}
	return v
}

// wantErr checks a spreadsheet error's code and that its message holds
// every given piece.
func wantErr(t testing.TB, e *cell.Error, code cell.Code, pieces ...string) {
	t.Helper()
	if e == nil {
		t.Fatalf("no error; want %s containing %q", code, pieces)
	}
	if e.Code != code {
		t.Errorf("error %v; want code %s", e, code)
	}
	for _, p := range pieces {
		if !strings.Contains(e.Message, p) {
			t.Errorf("error message %q does not contain %q", e.Message, p)
		}
	}
}

// column returns a spilled column result ([]any).
func column(t testing.TB, v any) []any {
	t.Helper()
	c, ok := v.([]any)
	if !ok {
		t.Fatalf("result %T; want a column ([]any)", v)
	}
	return c
}

// table returns a spilled table result ([][]any).
func table(t testing.TB, v any) [][]any {
	t.Helper()
	c, ok := v.([][]any)
	if !ok {
		t.Fatalf("result %T; want a table ([][]any)", v)
	}
	return c
}

// num returns a number result.
func num(t testing.TB, v any) float64 {
	t.Helper()
	f, ok := v.(float64)
	if !ok {
		t.Fatalf("result %v (%T); want a number", v, v)
	}
	return f
}

// cellErr returns an error inside a spilled result.
func cellErr(t testing.TB, v any) *cell.Error {
	t.Helper()
	e, ok := v.(*cell.Error)
	if !ok {
		t.Fatalf("cell %v (%T); want an error", v, v)
	}
	return e
}

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// anyCol converts a float column to []any cells.
func anyCol[T any](v []T) []any {
	out := make([]any, len(v))
	for i, x := range v {
		out[i] = x
	}
	return out
}

// inRange keeps the exams whose age lies inside their group's reference
// range of m.
func inRange(m *screening.Model, e exams) exams {
	var out exams
	for i := range e.ids {
		lo, hi, err := m.Curves.Range(e.groups[i])
		if err != nil || e.ages[i] < lo || e.ages[i] > hi {
			continue
		}
		out.ids = append(out.ids, e.ids[i])
		out.ages = append(out.ages, e.ages[i])
		out.vals = append(out.vals, e.vals[i])
		out.groups = append(out.groups, e.groups[i])
	}
	return out
}
