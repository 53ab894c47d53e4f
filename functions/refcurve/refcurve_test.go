package refcurve

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"

	"veer/functions/transform"
)

// smallRows is a quick two-group cohort for the API tests.
func smallRows() []Row { return cohortRows(3, 120, 5, []string{"F", "M"}) }

func fitSmall(t testing.TB, opt Options) *Model {
	t.Helper()
	m, err := Fit(smallRows(), opt)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestFitOrderInvariant: any order of the same rows gives the same model,
// data hash and content hash; a changed value changes both hashes.
func TestFitOrderInvariant(t *testing.T) {
	for _, tr := range transform.Names {
		t.Run(string(tr), func(t *testing.T) {
			rows := smallRows()
			a, err := Fit(rows, Options{Transform: tr})
			if err != nil {
				t.Fatal(err)
			}
			shuffled := slices.Clone(rows)
			rng := rand.New(rand.NewPCG(8, 8))
			rng.Shuffle(len(shuffled), func(i, j int) { shuffled[i], shuffled[j] = shuffled[j], shuffled[i] })
			b, err := Fit(shuffled, Options{Transform: tr})
			if err != nil {
				t.Fatal(err)
			}
			if a.Hash != b.Hash || a.DataHash != b.DataHash {
				t.Fatalf("hashes differ after shuffling: %s/%s vs %s/%s", a.Hash, a.DataHash, b.Hash, b.DataHash)
			}
			ea, _ := a.Encode()
			eb, _ := b.Encode()
			if !bytes.Equal(ea, eb) {
				t.Fatal("encoded models differ after shuffling")
			}
			changed := slices.Clone(rows)
			changed[17].Value *= 1.0001
			c, err := Fit(changed, Options{Transform: tr})
			if err != nil {
				t.Fatal(err)
			}
			if c.DataHash == a.DataHash || c.Hash == a.Hash {
				t.Error("a changed value kept the hashes")
			}
			d, err := Fit(rows, Options{Transform: tr, Bandwidth: 4})
			if err != nil {
				t.Fatal(err)
			}
			if d.DataHash != a.DataHash || d.Hash == a.Hash {
				t.Error("other settings must keep the data hash and change the content hash")
			}
		})
	}
}

func TestFitErrors(t *testing.T) {
	base := smallRows()
	with := func(edit func([]Row) []Row) []Row { return edit(slices.Clone(base)) }
	for _, tc := range []struct {
		name string
		rows []Row
		opt  Options
		want []string
	}{
		{"empty", nil, Options{}, []string{"no rows"}},
		{"nan time", with(func(r []Row) []Row { r[4].Time = math.NaN(); return r }), Options{}, []string{"data row 5", "column time", "finite"}},
		{"inf value", with(func(r []Row) []Row { r[9].Value = math.Inf(1); return r }), Options{}, []string{"data row 10", "column value"}},
		{"no worker", with(func(r []Row) []Row { r[2].Worker = ""; return r }), Options{}, []string{"data row 3", "column worker", "empty"}},
		{"duplicate", with(func(r []Row) []Row {
			r = append(r, Row{Worker: r[6].Worker, Time: r[6].Time, Value: 99, Group: r[6].Group})
			return r
		}), Options{}, []string{"data rows 7 and " + itoa(len(base)+1), "same", "one exam per worker and age"}},
		{"duplicate across groups", with(func(r []Row) []Row {
			r = append(r, Row{Worker: r[6].Worker, Time: r[6].Time, Value: 99, Group: "other"})
			return r
		}), Options{}, []string{"data rows 7 and"}},
		{"log non-positive", with(func(r []Row) []Row { r[11].Value = 0; return r }), Options{Transform: "log"}, []string{"data row 12", "not positive", "log transform"}},
		{"boxcox non-positive", with(func(r []Row) []Row { r[0].Value = -2; return r }), Options{Transform: "boxcox"}, []string{"data row 1", "value -2 is not positive", "boxcox"}},
		{"too few workers", with(func(r []Row) []Row {
			return append(r, Row{Worker: "x1", Time: 30, Value: 100, Group: "tiny"}, Row{Worker: "x2", Time: 40, Value: 100, Group: "tiny"})
		}), Options{}, []string{`group "tiny" has 2 workers`, "at least 10"}},
		{"min workers option", base, Options{MinWorkers: 500}, []string{`group "F" has 120 workers`, "at least 500"}},
		{"one time", func() []Row {
			var r []Row
			for w := 0; w < 12; w++ {
				r = append(r, Row{Worker: itoa(w), Time: 40, Value: float64(w)})
			}
			return r
		}(), Options{}, []string{"all exams of the reference data are at age 40"}},
		{"tiny time range", func() []Row {
			var r []Row
			for w := 0; w < 12; w++ {
				r = append(r, Row{Worker: itoa(w), Time: 40 + 1e-9*float64(w), Value: float64(w)})
			}
			return r
		}(), Options{}, []string{"span only", "wider range"}},
		{"bad transform", base, Options{Transform: "sqrt"}, []string{`unknown transform "sqrt"`}},
		{"negative bandwidth", base, Options{Bandwidth: -1}, []string{"mean bandwidth must be from 0", "to 100 years"}},
		{"enormous bandwidth", base, Options{Bandwidth: 1e9}, []string{"mean bandwidth must be from 0", "to 100 years, not 1e+09"}},
		{"nan sd bandwidth", base, Options{SDBandwidth: math.NaN()}, []string{"sd bandwidth"}},
		{"grid points", base, Options{GridPoints: 5}, []string{"between 11 and 10001"}},
		{"min workers too small", base, Options{MinWorkers: 2}, []string{"at least 3"}},
		{"bandwidth too small for a gap", with(func(r []Row) []Row {
			return append(r, Row{Worker: "old", Time: 90, Value: 150, Group: "F"})
		}), Options{Bandwidth: 1}, []string{`group "F": mean curve`, "too small"}},
		{"constant values", func() []Row {
			var r []Row
			for w := 0; w < 12; w++ {
				r = append(r, Row{Worker: itoa(w), Time: float64(20 + w), Value: 5}, Row{Worker: itoa(w), Time: float64(30 + w), Value: 5})
			}
			return r
		}(), Options{Bandwidth: 5}, []string{"do not vary"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m, err := Fit(tc.rows, tc.opt)
			if err == nil {
				t.Fatalf("no error; model has groups %v", m.Groups())
			}
			for _, w := range tc.want {
				if w == "same" {
					continue
				}
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not contain %q", err, w)
				}
			}
		})
	}
	// Row errors carry the rows and column for callers that map them back
	// to spreadsheet lines.
	_, err := Fit(with(func(r []Row) []Row { r[4].Time = math.NaN(); return r }), Options{})
	var re *RowError
	if !errors.As(err, &re) || !slices.Equal(re.Rows, []int{5}) || re.Column != "time" {
		t.Errorf("got %#v", err)
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

func TestLookups(t *testing.T) {
	m := fitSmall(t, Options{Transform: "log"})
	if g := m.Groups(); !slices.Equal(g, []string{"F", "M"}) {
		t.Fatalf("groups %v", g)
	}
	lo, hi, err := m.Range("F")
	if err != nil || !(lo >= 18 && hi <= 65 && lo < hi) {
		t.Fatalf("range %g %g %v", lo, hi, err)
	}
	c := &m.Curves[0]
	// At a grid time, At returns the stored values exactly; midway it
	// returns the average of the neighbours (linear interpolation).
	mean, sd, err := m.At("F", c.Time[10], false)
	if err != nil || math.Abs(mean-c.Mean[10]) > 1e-12 || math.Abs(sd-c.SD[10]) > 1e-12 {
		t.Errorf("At grid time: %g %g %v", mean, sd, err)
	}
	mid := (c.Time[10] + c.Time[11]) / 2
	mean, sd, _ = m.At("F", mid, false)
	if math.Abs(mean-(c.Mean[10]+c.Mean[11])/2) > 1e-9 || math.Abs(sd-(c.SD[10]+c.SD[11])/2) > 1e-9 {
		t.Errorf("At midway: %g %g", mean, sd)
	}

	for _, tc := range []struct {
		name string
		err  error
		want []string
	}{
		{"outside", func() error { _, _, err := m.At("F", hi+1, false); return err }(), []string{"outside the reference range", num(lo) + "–" + num(hi), `group "F"`}},
		{"below", func() error { _, err := m.Z("M", 3, 100, false); return err }(), []string{"age 3 is outside"}},
		{"nan time", func() error { _, _, err := m.At("F", math.NaN(), true); return err }(), []string{"not a finite number"}},
		{"unknown group", func() error { _, _, err := m.At("X", 40, false); return err }(), []string{`unknown group "X"`, `"F", "M"`}},
		{"no group given", func() error { _, _, err := m.At("", 40, false); return err }(), []string{"say which group"}},
		{"centile 0", func() error { _, err := m.Centile("F", 40, 0, false); return err }(), []string{"between 0 and 100"}},
		{"centile 100", func() error { _, err := m.Centile("F", 40, 100, false); return err }(), []string{"between 0 and 100"}},
		{"z of non-positive", func() error { _, err := m.Z("F", 40, -5, false); return err }(), []string{"value -5 is not positive", "log"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for _, w := range tc.want {
				if tc.err == nil || !strings.Contains(tc.err.Error(), w) {
					t.Errorf("error %v does not contain %q", tc.err, w)
				}
			}
		})
	}

	// Extrapolation holds the end values.
	mean, sd, err = m.At("F", hi+10, true)
	if err != nil || mean != c.Mean[len(c.Mean)-1] || sd != c.SD[len(c.SD)-1] {
		t.Errorf("extrapolated above: %g %g %v", mean, sd, err)
	}
	mean, _, _ = m.At("F", lo-10, true)
	if mean != c.Mean[0] {
		t.Errorf("extrapolated below: %g", mean)
	}

	// Centiles on the user's scale: log transform, so the p-th centile is
	// exp(μ + Φ⁻¹(p)σ); and Z of a centile gives back Φ⁻¹(p).
	prev := 0.0
	for _, p := range []float64{0.5, 2.5, 10, 50, 90, 97.5, 99.5} {
		q, err := m.Centile("M", 41.3, p, false)
		if err != nil {
			t.Fatal(err)
		}
		mu, s, _ := m.At("M", 41.3, false)
		want := math.Exp(mu + distuv.UnitNormal.Quantile(p/100)*s)
		if math.Abs(q-want) > 1e-9*want || !(q > prev) {
			t.Errorf("centile %g = %g, want %g (increasing)", p, q, want)
		}
		prev = q
		z, err := m.Z("M", 41.3, q, false)
		if err != nil || math.Abs(z-distuv.UnitNormal.Quantile(p/100)) > 1e-9 {
			t.Errorf("Z(centile %g) = %g, want %g", p, z, distuv.UnitNormal.Quantile(p/100))
		}
	}
}

func TestNoGroupModel(t *testing.T) {
	rows := cohortRows(4, 60, 4, []string{""})
	m, err := Fit(rows, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if g := m.Groups(); !slices.Equal(g, []string{""}) {
		t.Fatalf("groups %q", g)
	}
	if _, _, err := m.At("", 40, false); err != nil {
		t.Error(err)
	}
	if _, _, err := m.At("F", 40, false); err == nil || !strings.Contains(err.Error(), "no groups") {
		t.Errorf("got %v", err)
	}
	_, _, err = m.At("", 90, false)
	if err == nil || !strings.Contains(err.Error(), "of the reference data") {
		t.Errorf("got %v", err)
	}
}

func TestBoxCoxModel(t *testing.T) {
	// Lognormal-ish marker (e.g. triglycerides): Box-Cox should pick a
	// lambda near 0 and centiles must be right-skewed on the user's scale.
	rng := rand.New(rand.NewPCG(6, 6))
	var rows []Row
	for w := 0; w < 400; w++ {
		t0 := 20 + 40*rng.Float64()
		for k := 0; k < 3; k++ {
			tk := t0 + 2*float64(k)
			rows = append(rows, Row{Worker: itoa(w), Time: tk, Value: math.Exp(0.2 + 0.01*tk + 0.4*rng.NormFloat64())})
		}
	}
	m, err := Fit(rows, Options{Transform: "boxcox"})
	if err != nil {
		t.Fatal(err)
	}
	if m.Transform != "boxcox" || math.Abs(m.Lambda) > 0.2 {
		t.Errorf("transform %s lambda %g", m.Transform, m.Lambda)
	}
	lo, _ := m.Centile("", 40, 2.5, false)
	med, _ := m.Centile("", 40, 50, false)
	hi, _ := m.Centile("", 40, 97.5, false)
	if !(hi-med > med-lo) {
		t.Errorf("centiles %g %g %g are not right-skewed", lo, med, hi)
	}
	// The true median at 40 is exp(0.6).
	if math.Abs(med/math.Exp(0.6)-1) > 0.05 {
		t.Errorf("median %g, true %g", med, math.Exp(0.6))
	}
}

// TestZManyMatchesZ: the bulk path must give exactly what Z gives, NaN
// and a report for the entries Z rejects.
func TestZManyMatchesZ(t *testing.T) {
	for _, tr := range transform.Names {
		t.Run(string(tr), func(t *testing.T) {
			m := fitSmall(t, Options{Transform: tr})
			rng := rand.New(rand.NewPCG(2, 3))
			n := 3000
			groups := make([]string, n)
			ts := make([]float64, n)
			ys := make([]float64, n)
			for i := range ts {
				groups[i] = []string{"F", "M", "F", "M", "X"}[rng.IntN(5)]
				ts[i] = 10 + 60*rng.Float64()
				ys[i] = 60 + 100*rng.Float64()
				if i%97 == 0 {
					ys[i] = -1
				}
			}
			for _, extra := range []bool{false, true} {
				out := make([]float64, n)
				err := m.ZMany(groups, ts, ys, extra, out)
				bad := 0
				for i := range out {
					z, zerr := m.Z(groups[i], ts[i], ys[i], extra)
					if zerr != nil {
						bad++
						if !math.IsNaN(out[i]) {
							t.Fatalf("entry %d: Z fails (%v) but ZMany gave %g", i, zerr, out[i])
						}
						continue
					}
					if math.Abs(out[i]-z) > 1e-12*math.Max(1, math.Abs(z)) {
						t.Fatalf("entry %d: ZMany %g, Z %g", i, out[i], z)
					}
				}
				var se *ScoreErrors
				if bad == 0 || !errors.As(err, &se) || se.Count != bad || se.Total != n || len(se.First) != maxReportedEntries {
					t.Fatalf("extrapolate=%v: %d bad entries, error %v", extra, bad, err)
				}
				if !strings.Contains(err.Error(), "entry ") {
					t.Errorf("error %q names no entry", err)
				}
			}
		})
	}
	// Large inputs are split over goroutines: same numbers and the same
	// report as one pass.
	m := fitSmall(t, Options{})
	big := 300_000
	rng := rand.New(rand.NewPCG(4, 4))
	gs, ts, ys := make([]string, big), make([]float64, big), make([]float64, big)
	for i := range ts {
		gs[i] = []string{"F", "M", "Z"}[rng.IntN(3)]
		ts[i], ys[i] = 15+50*rng.Float64(), 100+50*rng.Float64()
	}
	par, one := make([]float64, big), make([]float64, big)
	errPar := m.ZMany(gs, ts, ys, false, par)
	errOne := zBatch{m: m, groups: gs, t: ts, y: ys, out: one}.score(0, big)
	for i := range par {
		if par[i] != one[i] && !(math.IsNaN(par[i]) && math.IsNaN(one[i])) {
			t.Fatalf("entry %d: split %g, one pass %g", i, par[i], one[i])
		}
	}
	if errPar == nil || errOne == nil || errPar.Error() != errOne.Error() {
		t.Fatalf("split %v\none pass %v", errPar, errOne)
	}
	out := make([]float64, 2)
	if err := m.ZMany([]string{"F"}, []float64{30, 40}, []float64{120, 130}, false, out); err != nil || math.IsNaN(out[1]) {
		t.Errorf("single group for all: %v %v", out, err)
	}
	if err := m.ZMany([]string{"F", "M", "F"}, []float64{30, 40}, []float64{120, 130}, false, out); err == nil {
		t.Error("mismatched group count accepted")
	}
	if err := m.ZMany([]string{"F"}, []float64{30, 40}, []float64{120}, false, out); err == nil {
		t.Error("mismatched lengths accepted")
	}
}

func TestResiduals(t *testing.T) {
	rows := smallRows()
	m, err := Fit(rows, Options{})
	if err != nil {
		t.Fatal(err)
	}
	// A worker who also has exams in the other group gets one series per
	// group.
	rows = append(rows, Row{Worker: rows[0].Worker, Time: rows[0].Time + 0.25, Value: 130, Group: "M"})
	series, err := m.Residuals(rows)
	if err != nil {
		t.Fatal(err)
	}
	total := 0
	for i, s := range series {
		if i > 0 {
			p := series[i-1]
			if p.Worker > s.Worker || (p.Worker == s.Worker && p.Group >= s.Group) {
				t.Fatalf("series %d (%s/%s) after %s/%s", i, s.Worker, s.Group, p.Worker, p.Group)
			}
		}
		for k := range s.Time {
			if k > 0 && !(s.Time[k] > s.Time[k-1]) {
				t.Fatalf("%s: times not increasing", s.Worker)
			}
		}
		total += len(s.Z)
	}
	if total != len(rows) {
		t.Fatalf("%d residuals for %d rows", total, len(rows))
	}
	// Each z equals Z of its row.
	for _, r := range rows[:50] {
		want, _ := m.Z(r.Group, r.Time, r.Value, false)
		found := false
		for _, s := range series {
			if s.Worker == r.Worker && s.Group == r.Group {
				for k := range s.Time {
					if s.Time[k] == r.Time && s.Z[k] == want {
						found = true
					}
				}
			}
		}
		if !found {
			t.Fatalf("row %+v: z %g not found", r, want)
		}
	}
	bad := append(slices.Clone(rows[:10]), Row{Worker: "q", Time: 99, Value: 1, Group: "F"})
	if _, err := m.Residuals(bad); err == nil || !strings.Contains(err.Error(), "data row 11") || !strings.Contains(err.Error(), "outside") {
		t.Errorf("got %v", err)
	}
	dup := append(slices.Clone(rows[:10]), rows[3])
	if _, err := m.Residuals(dup); err == nil || !strings.Contains(err.Error(), "data row 11 repeats the exam") || !strings.Contains(err.Error(), "of data row 4") {
		t.Errorf("got %v", err)
	}
}

func TestEncodeDecode(t *testing.T) {
	m := fitSmall(t, Options{Transform: "boxcox", GridPoints: 101})
	doc, err := m.Encode()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(doc, []byte(`"format": "veer.refcurve"`)) || !bytes.Contains(doc, []byte(`"version": 1`)) {
		t.Fatalf("document head: %.200s", doc)
	}
	back, err := Decode(doc)
	if err != nil {
		t.Fatal(err)
	}
	if back.Hash != m.Hash || back.DataHash != m.DataHash || back.Lambda != m.Lambda {
		t.Fatal("decoded model differs")
	}
	again, _ := back.Encode()
	if !bytes.Equal(doc, again) {
		t.Fatal("re-encoding changed the document")
	}
	for _, tt := range []float64{18.5, 33.3, 47, 60.01} {
		for _, g := range m.Groups() {
			a, errA := m.Centile(g, tt, 97.5, true)
			b, errB := back.Centile(g, tt, 97.5, true)
			if a != b || (errA == nil) != (errB == nil) {
				t.Fatalf("centile differs after decoding: %g vs %g", a, b)
			}
		}
	}

	tamper := func(old, new string) []byte {
		i := bytes.Index(doc, []byte(old))
		if i < 0 {
			t.Fatalf("%q not in document", old)
		}
		return append(append(slices.Clone(doc[:i]), new...), doc[i+len(old):]...)
	}
	// Change the first mean value by 0.001.
	meanKey := `"mean": [` + "\n"
	i := bytes.Index(doc, []byte(meanKey)) + len(meanKey)
	j := i + bytes.IndexByte(doc[i:], ',')
	first := strings.TrimSpace(string(doc[i:j]))
	v, err := strconv.ParseFloat(first, 64)
	if err != nil {
		t.Fatalf("first mean %q: %v", first, err)
	}
	changed := append(append(slices.Clone(doc[:i]), strconv.FormatFloat(v+0.001, 'g', -1, 64)...), doc[j:]...)
	for _, tc := range []struct {
		name string
		doc  []byte
		want string
	}{
		{"tampered number", changed, "does not match its hash"},
		{"tampered hash", tamper(m.Hash, "sha256:00"), "does not match its hash"},
		{"no hash", tamper(`"hash": "`+m.Hash+`"`, `"hash": ""`), "no content hash"},
		{"other format", tamper(`"veer.refcurve"`, `"something.else"`), "not a veer reference model"},
		{"newer version", tamper(`"version": 1`, `"version": 2`), "newer than this program"},
		{"older version", tamper(`"version": 1`, `"version": 0`), "cannot read"},
		{"unknown field", tamper(`"rows":`, `"extra": 1, "rows":`), "expected layout"},
		{"not json", []byte("time,value\n1,2\n"), "not readable JSON"},
		{"truncated", doc[:len(doc)/2], "not readable JSON"},
		{"trailing", append(slices.Clone(doc), []byte(`{"a":1}`)...), "not readable JSON"},
		{"empty", nil, "not readable JSON"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Decode(tc.doc)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("got %v, want an error containing %q", err, tc.want)
			}
		})
	}
}

// FuzzDecode: Decode must never panic, and whatever it accepts must be
// usable: lookups work and re-encoding round-trips. Random bytes almost
// never carry a valid content hash, so each input is also re-hashed and
// decoded again, which sends arbitrary content through the consistency
// checks behind the hash.
func FuzzDecode(f *testing.F) {
	rows := cohortRows(5, 12, 3, []string{"A", "B"})
	m, err := Fit(rows, Options{GridPoints: 11, MinWorkers: 3, Bandwidth: 8, SDBandwidth: 12})
	if err != nil {
		f.Fatal(err)
	}
	doc, err := m.Encode()
	if err != nil {
		f.Fatal(err)
	}
	f.Add(doc)
	f.Add([]byte(`{"format":"veer.refcurve","version":1}`))
	f.Add([]byte(`{"format":"veer.refcurve","version":1,"hash":"x","curves":[{"group":"A","time":[1,2]}]}`))
	f.Add([]byte(`[]`))
	f.Add([]byte(``))
	use := func(t *testing.T, m *Model) {
		for _, g := range m.Groups() {
			lo, hi, err := m.Range(g)
			if err != nil {
				t.Fatal(err)
			}
			for _, tt := range []float64{lo, (lo + hi) / 2, hi, hi + 1} {
				if _, _, err := m.At(g, tt, true); err != nil {
					t.Fatal(err)
				}
				m.Centile(g, tt, 50, true)
				m.Z(g, tt, 1, true)
			}
			out := make([]float64, 2)
			m.ZMany([]string{g}, []float64{lo, hi}, []float64{1, 2}, false, out)
		}
		again, err := m.Encode()
		if err != nil {
			t.Fatal(err)
		}
		if _, err := Decode(again); err != nil {
			t.Fatalf("re-encoded model does not decode: %v", err)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		if m, err := Decode(data); err == nil {
			use(t, m)
		}
		var raw Model
		if json.Unmarshal(data, &raw) != nil {
			return
		}
		h, err := raw.contentHash()
		if err != nil {
			return
		}
		raw.Hash = h
		b, err := json.Marshal(&raw)
		if err != nil {
			return
		}
		if m, err := Decode(b); err == nil {
			use(t, m)
		}
	})
}

func TestProgress(t *testing.T) {
	var stages []string
	last := -1.0
	_, err := Fit(smallRows(), Options{Progress: func(stage string, done float64) {
		if done < last-1e-12 || done > 1 {
			t.Errorf("progress went from %g to %g at %q", last, done, stage)
		}
		last = done
		stages = append(stages, stage)
	}})
	if err != nil {
		t.Fatal(err)
	}
	if last != 1 || !slices.Contains(stages, `group "M": choosing the sd bandwidth`) {
		t.Errorf("last %g, stages %v", last, stages)
	}
}

func TestDiagnosticsAndWarnings(t *testing.T) {
	m := fitSmall(t, Options{})
	for _, c := range m.Curves {
		d := c.Diagnostics
		if d.Workers != 120 || d.Exams < 400 || d.TimeMin != c.TimeMin || d.TimeMax != c.TimeMax {
			t.Errorf("%s: counts %+v", c.Group, d)
		}
		if d.MeanBandwidthSource != "cross-validation" || len(c.MeanCV) == 0 || d.MeanCVScore <= 0 {
			t.Errorf("%s: mean bandwidth %+v", c.Group, d)
		}
		if d.Normality == nil || d.Normality.N != d.Exams {
			t.Errorf("%s: normality %+v", c.Group, d.Normality)
		}
	}
	// Skewed data without a transform: the normality check must say so.
	rng := rand.New(rand.NewPCG(12, 1))
	var rows []Row
	for w := 0; w < 300; w++ {
		for k := 0; k < 3; k++ {
			tk := 20 + 40*rng.Float64()
			rows = append(rows, Row{Worker: itoa(w), Time: tk, Value: math.Exp(1 + 0.8*rng.NormFloat64())})
		}
	}
	m2, err := Fit(rows, Options{})
	if err != nil {
		t.Fatal(err)
	}
	ws := strings.Join(m2.Curves[0].Diagnostics.Warnings, "\n")
	if !strings.Contains(ws, "depart from a normal distribution") || !strings.Contains(ws, "Box-Cox") {
		t.Errorf("warnings: %s", ws)
	}
}
