package published

import (
	"errors"

	"math"
	"strings"
	"testing"
	"veer/functions/refcurve"
)

var nan = math.NaN()

// row is a table row of group g.
func row(g string, age, l, m, s float64) TableRow {
	return TableRow{Group: g, Age: age, L: l, M: m, S: s}
}

// smallTable is a two-group LMS table of a synthetic marker.
func smallTable(t *testing.T, how Interpolation) *Reference {
	t.Helper()
	ref, err := NewTable([]TableRow{
		row("f", 20, -0.5, 110, 0.10), row("f", 40, -0.3, 118, 0.11), row("f", 60, 0.1, 130, 0.12),
		row("m", 20, -0.6, 120, 0.09), row("m", 40, -0.4, 126, 0.10), row("m", 60, 0.0, 136, 0.11),
	}, how)
	if err != nil {
		t.Fatal(err)
	}
	return ref
}

func TestTableLookup(t *testing.T) {
	ref := smallTable(t, "")
	if ref.Interpolation() != Linear || ref.Form() != FormLMS {
		t.Fatalf("defaults: %s %s", ref.Interpolation(), ref.Form())
	}
	if g := ref.Groups(); len(g) != 2 || g[0] != "f" || g[1] != "m" {
		t.Fatalf("groups %v", g)
	}
	cases := []struct {
		group string
		age   float64
		want  LMS
	}{
		{"f", 20, LMS{-0.5, 110, 0.10}},
		{"f", 30, LMS{-0.4, 114, 0.105}}, // halfway between the rows at 20 and 40
		{"f", 55, LMS{0, 127, 0.1175}},   // three quarters from 40 to 60
		{"m", 60, LMS{0, 136, 0.11}},
	}
	for _, c := range cases {
		p, err := ref.At(c.group, c.age, nil, false)
		if err != nil || math.Abs(p.L-c.want.L) > 1e-12 || math.Abs(p.M-c.want.M) > 1e-12 || math.Abs(p.S-c.want.S) > 1e-12 {
			t.Errorf("%s at %g: %+v (%v), want %+v", c.group, c.age, p, err, c.want)
		}
	}
	// z of the median is 0; the 97th centile has z Φ⁻¹(0.97).
	z, err := ref.Z("f", 30, nil, 114, false)
	if err != nil || math.Abs(z) > 1e-12 {
		t.Errorf("z of the median: %g %v", z, err)
	}
	c97, _ := ref.Centile("m", 50, nil, 97, false)
	if z, _ := ref.Z("m", 50, nil, c97, false); math.Abs(z-1.8807936081512509) > 1e-10 { // scipy.stats.norm.ppf(0.97)
		t.Errorf("z of the 97th centile: %g", z)
	}
	// Outside the ages: an error naming the range, unless extrapolating,
	// which holds the end values (the rule of fitted curves).
	_, err = ref.At("f", 65, nil, false)
	var re *refcurve.RangeError
	if !errors.As(err, &re) || !errors.Is(err, ErrOutOfRange) || re.Min != 20 || re.Max != 60 || re.Time != 65 || re.Group != "f" {
		t.Fatalf("age 65: %v", err)
	}
	if !strings.Contains(err.Error(), "age 65 is outside the reference range 20–60 of group \"f\"") {
		t.Errorf("message: %v", err)
	}
	for _, c := range []struct{ age, end float64 }{{65, 60}, {12, 20}, {1e9, 60}} {
		p, err := ref.At("f", c.age, nil, true)
		q, _ := ref.At("f", c.end, nil, false)
		if err != nil || p != q {
			t.Errorf("extrapolated to %g: %+v %v, want the end value %+v", c.age, p, err, q)
		}
	}
	if _, err := ref.At("f", nan, nil, true); !errors.Is(err, ErrOutOfRange) {
		t.Errorf("NaN age: %v", err)
	}
	_, err = ref.At("x", 30, nil, false)
	var ue *UnknownGroupError
	if !errors.As(err, &ue) || !errors.Is(err, ErrUnknownGroup) || !strings.Contains(err.Error(), `"f", "m"`) {
		t.Errorf("unknown group: %v", err)
	}
	if lo, hi, err := ref.Range("m"); lo != 20 || hi != 60 || err != nil {
		t.Errorf("range %g %g %v", lo, hi, err)
	}
}

// TestInterpolationFixture checks both interpolants against SciPy
// (testdata/make_fixtures.py: PchipInterpolator for cubic, numpy.interp
// for linear) on an irregular table with a peak, a flat stretch and a
// steep fall.
func TestInterpolationFixture(t *testing.T) {
	_, rows := readCSV(t, "testdata/interp_scipy.csv")
	var ages, vals []float64
	for _, r := range rows {
		if r[0] == "knot" {
			ages = append(ages, atof(t, r[1]))
			vals = append(vals, atof(t, r[2]))
		}
	}
	refs := map[string]*Reference{}
	for _, how := range []Interpolation{Linear, Cubic} {
		var tr []TableRow
		for i := range ages {
			// The values serve as M; L and S constant.
			tr = append(tr, row("", ages[i], 1, vals[i], 0.1))
		}
		ref, err := NewTable(tr, how)
		if err != nil {
			t.Fatal(err)
		}
		refs[string(how)] = ref
	}
	n := 0
	for _, r := range rows {
		if r[0] == "knot" {
			continue
		}
		age, want := atof(t, r[1]), atof(t, r[2])
		p, err := refs[r[0]].At("", age, nil, false)
		if err != nil || math.Abs(p.M-want) > 1e-12 {
			t.Errorf("%s at %g: %.15g, SciPy %.15g (%v)", r[0], age, p.M, want, err)
		}
		n++
	}
	if n < 200 {
		t.Fatalf("only %d fixture values", n)
	}
	// Neither overshoots: between two rows the value stays between them.
	for _, ref := range refs {
		for a := 18.0; a <= 85; a += 0.05 {
			p, _ := ref.At("", a, nil, false)
			k := 0
			for k+1 < len(ages) && ages[k+1] < a {
				k++
			}
			lo, hi := math.Min(vals[k], vals[k+1]), math.Max(vals[k], vals[k+1])
			if p.M < lo-1e-12 || p.M > hi+1e-12 {
				t.Errorf("%s at %g: %g outside the neighbouring rows %g–%g", ref.Interpolation(), a, p.M, lo, hi)
			}
		}
	}
}

// TestInterpolationError measures what linear interpolation costs on a
// smooth curved reference tabulated every year and every 5 years: the
// largest change in z it causes for a reading at the 97.5th centile,
// against the exact curves. Linear is the default because at a yearly
// spacing the error is negligible (about 0.001 in z, for a curve bending
// more than adult lung function does); at 5-year spacing it is still
// small (0.03), and the cubic cuts it tenfold.
func TestInterpolationError(t *testing.T) {
	exact := func(a float64) LMS {
		return LMS{L: 0.8 - 0.01*a + 0.00005*a*a, M: 4.8 - 0.0009*(a-20)*(a-20) - 0.005*a, S: 0.09 + 0.000015*(a-20)*(a-20)}
	}
	maxErr := func(step float64, how Interpolation) float64 {
		var tr []TableRow
		for a := 20.0; a <= 80+1e-9; a += step {
			p := exact(a)
			tr = append(tr, row("", a, p.L, p.M, p.S))
		}
		ref, err := NewTable(tr, how)
		if err != nil {
			t.Fatal(err)
		}
		worst := 0.0
		for a := 20.0; a <= 80; a += 0.01 {
			y, _ := exact(a).Centile(97.5)
			z, err := ref.Z("", a, nil, y, false)
			if err != nil {
				t.Fatal(err)
			}
			worst = math.Max(worst, math.Abs(z-1.959963984540054)) // scipy.stats.norm.ppf(0.975)
		}
		return worst
	}
	lin1, lin5, cub5 := maxErr(1, Linear), maxErr(5, Linear), maxErr(5, Cubic)
	t.Logf("largest z error at the 97.5th centile: linear, yearly rows %.5f; linear, 5-yearly %.4f; cubic, 5-yearly %.4f", lin1, lin5, cub5)
	if lin1 > 0.002 || lin5 > 0.04 || cub5 > lin5/5 {
		t.Errorf("interpolation errors %g (linear, 1 y), %g (linear, 5 y), %g (cubic, 5 y)", lin1, lin5, cub5)
	}
}

// TestTableBadInput: every kind of bad table is refused with the row and
// column at fault and the right kind.
func TestTableBadInput(t *testing.T) {
	good := func() []TableRow {
		return []TableRow{row("f", 20, 1, 100, 0.1), row("f", 30, 1, 101, 0.1), row("m", 20, 1, 110, 0.1), row("m", 30, 1, 111, 0.1)}
	}
	cases := []struct {
		name   string
		edit   func([]TableRow) []TableRow
		kind   error
		rows   []int
		column string
		text   string
	}{
		{"L missing", func(r []TableRow) []TableRow { r[1].L = nan; return r }, ErrMissing, []int{2}, "L", "data row 2, column \"L\": the L cell is blank"},
		{"M missing", func(r []TableRow) []TableRow { r[2].M = nan; return r }, ErrMissing, []int{3}, "M", "column \"M\""},
		{"S missing", func(r []TableRow) []TableRow { r[3].S = nan; return r }, ErrMissing, []int{4}, "S", "column \"S\""},
		{"age missing", func(r []TableRow) []TableRow { r[0].Age = nan; return r }, ErrMissing, []int{1}, "age", "the age cell is blank"},
		{"S zero", func(r []TableRow) []TableRow { r[1].S = 0; return r }, ErrNotPositive, []int{2}, "S", "S (the coefficient of variation) must be positive, not 0"},
		{"S negative", func(r []TableRow) []TableRow { r[1].S = -0.1; return r }, ErrNotPositive, []int{2}, "S", "not -0.1"},
		{"M zero", func(r []TableRow) []TableRow { r[0].M = 0; return r }, ErrNotPositive, []int{1}, "M", "M (the median) must be positive"},
		{"M negative", func(r []TableRow) []TableRow { r[3].M = -3; return r }, ErrNotPositive, []int{4}, "M", ""},
		{"L infinite", func(r []TableRow) []TableRow { r[3].L = math.Inf(1); return r }, ErrNotFinite, []int{4}, "L", ""},
		{"duplicate", func(r []TableRow) []TableRow { r[3].Age = 20; return r }, ErrDuplicate, []int{3, 4}, "age", "data rows 3 and 4, column \"age\": two rows for group \"m\" at age 20"},
		{"duplicate apart", func(r []TableRow) []TableRow {
			return append(r, row("f", 40, 1, 1, 0.1), row("f", 30, 1, 1, 0.1))
		}, ErrDuplicate, []int{2, 6}, "age", "two rows for group \"f\" at age 30"},
		{"unsorted", func(r []TableRow) []TableRow { r[0].Age, r[1].Age = 30, 20; return r }, ErrUnsorted, []int{1, 2}, "age", "age 20 comes after age 30 of group \"f\""},
		{"one age", func(r []TableRow) []TableRow { return append(r, row("x", 20, 1, 1, 0.1)) }, ErrTooFewAges, []int{5}, "age", "group \"x\" has a single age"},
		{"blank group", func(r []TableRow) []TableRow { r[1].Group = ""; return r }, ErrMissing, []int{2}, "group", "the group is blank"},
		{"blank group marked", func(r []TableRow) []TableRow {
			return []TableRow{row("", 20, 1, 1, 0.1).BlankGroup(), row("", 30, 1, 1, 0.1)}
		}, ErrMissing, []int{1}, "group", "the group is blank"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ref, err := NewTable(c.edit(good()), Linear)
			if ref != nil || err == nil {
				t.Fatal("accepted")
			}
			if !errors.Is(err, c.kind) {
				t.Errorf("kind: %v", err)
			}
			var ie *InputError
			if !errors.As(err, &ie) {
				t.Fatalf("not an InputError: %T %v", err, err)
			}
			got := ie.Rows
			if len(got) == 0 {
				got = []int{ie.Row}
			}
			if len(got) != len(c.rows) || got[0] != c.rows[0] || got[len(got)-1] != c.rows[len(c.rows)-1] || ie.Column != c.column {
				t.Errorf("at rows %v column %q, want rows %v column %q: %v", got, ie.Column, c.rows, c.column, err)
			}
			if !strings.Contains(err.Error(), c.text) {
				t.Errorf("message %q lacks %q", err, c.text)
			}
		})
	}
	// Several problems are reported at once, with file lines when given.
	rows := good()
	for i := range rows {
		rows[i].Line = i + 2
	}
	rows[0].S, rows[2].M = -1, nan
	_, err := NewTable(rows, Linear)
	var all *InputErrors
	if !errors.As(err, &all) || len(all.List) != 2 || !errors.Is(err, ErrNotPositive) || !errors.Is(err, ErrMissing) {
		t.Fatalf("two problems: %v", err)
	}
	if !strings.Contains(err.Error(), `data row 1 (line 2), column "S"`) || !strings.Contains(err.Error(), `data row 3 (line 4), column "M"`) {
		t.Errorf("message: %v", err)
	}
	// Many problems: the first ten and a count.
	var many []TableRow
	for i := range 30 {
		many = append(many, row("", float64(i), 1, -1, 0.1))
	}
	_, err = NewTable(many, Linear)
	if !errors.As(err, &all) || len(all.List) != 10 || all.More != 20 || !strings.HasSuffix(err.Error(), "and 20 more") {
		t.Errorf("many problems: %v", err)
	}
	if _, err := NewTable(nil, Linear); !errors.Is(err, ErrMissing) {
		t.Errorf("empty table: %v", err)
	}
	if _, err := NewTable(good(), "spline"); !errors.Is(err, ErrFormat) || !strings.Contains(err.Error(), `"linear" or "cubic"`) {
		t.Errorf("bad interpolation: %v", err)
	}
}

// FuzzNewTable: any rows give a reference or an *InputError, never a
// panic, and a reference answers lookups inside its ranges.
func FuzzNewTable(f *testing.F) {
	f.Add("f", 20.0, 1.0, 100.0, 0.1, "f", 30.0, -1.0, 90.0, 0.2, true)
	f.Add("", 20.0, 0.0, 1.0, 0.1, "", 20.0, 0.0, 1.0, 0.1, false)
	f.Fuzz(func(t *testing.T, g1 string, a1, l1, m1, s1 float64, g2 string, a2, l2, m2, s2 float64, cubic bool) {
		how := Linear
		if cubic {
			how = Cubic
		}
		rows := []TableRow{row(g1, a1, l1, m1, s1), row(g2, a2, l2, m2, s2), row(g1, a1+1, l1, m1, s1), row(g2, a2+1, l2, m2, s2)}
		ref, err := NewTable(rows, how)
		if err != nil {
			mustBeInputError(t, err)
			return
		}
		for _, g := range ref.Groups() {
			lo, hi, _ := ref.Range(g)
			for _, a := range []float64{lo, (lo + hi) / 2, hi} {
				if p, err := ref.At(g, a, nil, false); err != nil || p.Validate() != nil {
					t.Fatalf("%s at %g: %+v %v", g, a, p, err)
				}
			}
		}
	})
}
