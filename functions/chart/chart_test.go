package chart

import (
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"
)

// TestRunMatchesFixture compares Run with the recursions computed
// independently by numpy in testdata/make_fixtures.py.
func TestRunMatchesFixture(t *testing.T) {
	b, err := os.ReadFile("testdata/fixtures.json")
	if err != nil {
		t.Fatal(err)
	}
	var f struct {
		Source  string
		U, Gaps []float64
		Cases   []struct {
			Kind, Side             string
			K, Lambda, Unit, H, Hs float64
			Restart                bool
			Points                 [][4]any
		}
	}
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	signals := 0
	for _, c := range f.Cases {
		spec := Spec{Kind: Kind(c.Kind), Side: Side(c.Side), Allowance: c.K, Lambda: c.Lambda, Unit: c.Unit, HeadStart: c.Hs, Restart: c.Restart}
		if err := spec.Validate(); err != nil {
			t.Fatal(err)
		}
		got := Run(spec, c.H, f.Gaps, f.U, nil)
		for j, p := range c.Points {
			want := Point{Up: p[0].(float64), Down: p[1].(float64), Stat: p[2].(float64), Signal: p[3].(bool)}
			g := got[j]
			if math.Abs(g.Up-want.Up) > 1e-12 || math.Abs(g.Down-want.Down) > 1e-12 || math.Abs(g.Stat-want.Stat) > 1e-12 || g.Signal != want.Signal {
				t.Fatalf("%+v exam %d: got %+v, want %+v (%s)", spec, j+1, g, want, f.Source)
			}
			if g.Signal {
				signals++
			}
		}
	}
	if signals == 0 {
		t.Error("fixture has no signals; it would not test signalling")
	}
}

func TestValidate(t *testing.T) {
	tests := []struct {
		name string
		spec Spec
		want string // the setting at fault, "" for valid
	}{
		{"default", DefaultSpec(), ""},
		{"k = 0", Spec{Kind: CUSUM, Side: Both}, ""},
		{"ewma lambda 1", Spec{Kind: EWMA, Side: Up, Lambda: 1}, ""},
		{"negative allowance", Spec{Kind: CUSUM, Side: Up, Allowance: -0.1}, "allowance"},
		{"NaN allowance", Spec{Kind: CUSUM, Side: Up, Allowance: math.NaN()}, "allowance"},
		{"lambda 0", Spec{Kind: EWMA, Side: Up}, "lambda"},
		{"lambda negative", Spec{Kind: EWMA, Side: Up, Lambda: -0.2}, "lambda"},
		{"lambda above 1", Spec{Kind: EWMA, Side: Up, Lambda: 1.01}, "lambda"},
		{"unknown kind", Spec{Kind: "shewhart", Side: Up}, "chart"},
		{"empty kind", Spec{Side: Up}, "chart"},
		{"unknown side", Spec{Kind: CUSUM, Side: "upper"}, "side"},
		{"negative unit", Spec{Kind: EWMA, Side: Up, Lambda: 0.1, Unit: -1}, "unit"},
		{"head start 1", Spec{Kind: CUSUM, Side: Up, HeadStart: 1}, "headstart"},
		{"head start negative", Spec{Kind: CUSUM, Side: Up, HeadStart: -0.5}, "headstart"},
		{"two-sided EWMA head start", Spec{Kind: EWMA, Side: Both, Lambda: 0.1, HeadStart: 0.5}, "headstart"},
	}
	for _, tc := range tests {
		err := tc.spec.Validate()
		var se *SettingError
		if tc.want == "" && err != nil || tc.want != "" && (!errors.As(err, &se) || se.Setting != tc.want || !errors.Is(err, ErrSetting)) {
			t.Errorf("%s: error %#v, want a setting error about %q", tc.name, err, tc.want)
		}
		if se != nil && !strings.HasPrefix(err.Error(), se.Setting+" must be ") {
			t.Errorf("%s: message %q", tc.name, err)
		}
	}
	for _, h := range []float64{0, -1, math.NaN(), math.Inf(1)} {
		if err := ValidateLimit(h); !errors.Is(err, ErrSetting) {
			t.Errorf("limit %v: %v", h, err)
		}
	}
}

func TestOneExamAndPanics(t *testing.T) {
	for _, s := range []Spec{DefaultSpec(), {Kind: EWMA, Side: Both, Lambda: 0.2}} {
		p := Run(s, 3, []float64{0}, []float64{1.5}, nil)
		if len(p) != 1 || !(p[0].Stat > 0) || p[0].Signal {
			t.Errorf("%s one exam: %+v", s.Kind, p)
		}
	}
	for name, f := range map[string]func(){
		"invalid spec":    func() { Run(Spec{}, 3, []float64{0}, []float64{1}, nil) },
		"length mismatch": func() { Run(DefaultSpec(), 3, []float64{0}, []float64{1, 2}, nil) },
		"bad limit":       func() { Run(DefaultSpec(), -3, []float64{0}, []float64{1}, nil) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", name)
				}
			}()
			f()
		}()
	}
}

// The gap-aware weight composes: two gaps decay the old value as much as
// one gap of their total length.
func TestWeightComposes(t *testing.T) {
	s := Spec{Kind: EWMA, Side: Both, Lambda: 0.15, Unit: 1}
	for _, d := range [][2]float64{{0.5, 0.5}, {0.3, 2.2}, {1, 1}} {
		a := (1 - s.Weight(d[0])) * (1 - s.Weight(d[1]))
		if b := 1 - s.Weight(d[0]+d[1]); math.Abs(a-b) > 1e-15 {
			t.Errorf("gaps %v: %v vs %v", d, a, b)
		}
	}
	if w := s.Weight(1); math.Abs(w-0.15) > 1e-15 {
		t.Errorf("weight at one unit %v, want lambda", w)
	}
}

// TestTrackerCritical: for random streams and limits, the first exam with
// critical limit g_n > h is the first signal of Run with limit h, for every
// chart kind, side and head start.
func TestTrackerCritical(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	specs := []Spec{
		{Kind: CUSUM, Side: Up, Allowance: 0.5},
		{Kind: CUSUM, Side: Both, Allowance: 0.25, HeadStart: 0.5},
		{Kind: CUSUM, Side: Down, Allowance: 1, HeadStart: 0.9},
		{Kind: EWMA, Side: Both, Lambda: 0.2},
		{Kind: EWMA, Side: Up, Lambda: 0.1, HeadStart: 0.5},
		{Kind: EWMA, Side: Down, Lambda: 0.4, Unit: 2, HeadStart: 0.3},
	}
	for _, s := range specs {
		tr, err := NewTracker(s)
		if err != nil {
			t.Fatal(err)
		}
		for range 300 {
			n := 1 + rng.IntN(60)
			u, gaps := make([]float64, n), make([]float64, n)
			for j := range u {
				u[j] = rng.NormFloat64() + 0.3
				gaps[j] = 0.2 + 3*rng.Float64()
			}
			h := 0.2 + 5*rng.Float64()
			tr.Reset()
			want := -1
			for j := range u {
				if tr.Next(gaps[j], u[j]) > h {
					want = j
					break
				}
			}
			got := -1
			for j, p := range Run(s, h, gaps, u, nil) {
				if p.Signal {
					got = j
					break
				}
			}
			if got != want {
				t.Fatalf("%+v h=%v: Run signals first at %d, Tracker at %d", s, h, got, want)
			}
		}
	}
	if _, err := NewTracker(Spec{}); err == nil {
		t.Error("invalid spec accepted")
	}
}

func BenchmarkRun(b *testing.B) {
	rng := rand.New(rand.NewPCG(1, 1))
	u, gaps := make([]float64, 1000), make([]float64, 1000)
	for j := range u {
		u[j], gaps[j] = rng.NormFloat64(), 1+rng.Float64()
	}
	out := make([]Point, 0, 1000)
	for _, s := range []Spec{DefaultSpec(), {Kind: EWMA, Side: Both, Lambda: 0.1}} {
		b.Run(string(s.Kind), func(b *testing.B) {
			for b.Loop() {
				out = Run(s, 4, gaps, u, out[:0])
			}
		})
	}
}
