package transform

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"
)

type boxcoxFixture struct {
	Source string `json:"source"`
	Cases  []struct {
		Name      string    `json:"name"`
		Data      []float64 `json:"data"`
		LambdaMLE float64   `json:"lambda_mle"`
		LLF       []struct {
			Lambda float64 `json:"lambda"`
			Value  float64 `json:"value"`
		} `json:"llf"`
	} `json:"cases"`
}

// TestBoxCoxMatchesScipy checks BoxCoxLambda against
// scipy.stats.boxcox_normmax(x, method='mle') and BoxCoxLogLik against
// scipy.stats.boxcox_llf on the samples in testdata/boxcox_fixture.json
// (made by testdata/make_boxcox_fixture.py; the file names the scipy
// version).
//
// Tolerances: the log-likelihoods are the same closed form, computed in a
// different but equally stable way, so they agree to 1e-10 relative.
// Lambda: both programs maximise the same function with Brent's method, to
// a relative tolerance of ~1.5e-8 (scipy's brent default xtol 1.48e-8 and
// ours); near its peak the likelihood is flat, so the location is only
// defined to about sqrt(machine epsilon) times the curvature scale. An
// absolute 1e-6 allows for both and still catches any difference in the
// likelihood (a wrong Jacobian term moves lambda by 0.1 or more).
func TestBoxCoxMatchesScipy(t *testing.T) {
	raw, err := os.ReadFile("testdata/boxcox_fixture.json")
	if err != nil {
		t.Fatal(err)
	}
	var fx boxcoxFixture
	if err := json.Unmarshal(raw, &fx); err != nil {
		t.Fatal(err)
	}
	if len(fx.Cases) == 0 || fx.Source == "" {
		t.Fatal("empty fixture")
	}
	for _, c := range fx.Cases {
		t.Run(c.Name, func(t *testing.T) {
			lam, err := BoxCoxLambda(c.Data)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("lambda %.12f, scipy %.12f, difference %.2g", lam, c.LambdaMLE, lam-c.LambdaMLE)
			if math.Abs(lam-c.LambdaMLE) > 1e-6 {
				t.Errorf("lambda %g, scipy %g", lam, c.LambdaMLE)
			}
			for _, l := range c.LLF {
				got, err := BoxCoxLogLik(c.Data, l.Lambda)
				if err != nil {
					t.Fatal(err)
				}
				if math.Abs(got-l.Value) > 1e-10*math.Abs(l.Value) {
					t.Errorf("llf(%g) = %.15g, scipy %.15g", l.Lambda, got, l.Value)
				}
			}
		})
	}
}

func TestForwardInverse(t *testing.T) {
	// Not too close to 0 or infinity: for |λ| = 2 the transform flattens
	// against ±1/λ there and the round trip loses digits by construction.
	ys := []float64{0.05, 0.5, 1, 2.5, 37, 1234.5}
	for _, tc := range []struct {
		name   Name
		lambda float64
	}{
		{None, 0}, {Log, 0}, {BoxCox, -2}, {BoxCox, -0.2}, {BoxCox, 0}, {BoxCox, 1e-12}, {BoxCox, 0.5}, {BoxCox, 1}, {BoxCox, 2},
	} {
		tr, err := New(tc.name, tc.lambda)
		if err != nil {
			t.Fatal(err)
		}
		for _, y := range ys {
			z, err := tr.Forward(y)
			if err != nil {
				t.Fatalf("%v: Forward(%g): %v", tr, y, err)
			}
			back, err := tr.Inverse(z)
			if err != nil {
				t.Fatalf("%v: Inverse(%g): %v", tr, z, err)
			}
			if math.Abs(back-y) > 1e-9*y {
				t.Errorf("%v: %g -> %g -> %g", tr, y, z, back)
			}
		}
	}
}

// TestBoxCoxDefinition checks Forward against the formula evaluated
// directly, including the λ → 0 limit log y.
func TestBoxCoxDefinition(t *testing.T) {
	for _, tc := range []struct{ y, lambda, want float64 }{
		{4, 0.5, (math.Sqrt(4) - 1) / 0.5},
		{10, 2, (100 - 1) / 2.0},
		{8, -1, (1.0/8 - 1) / -1},
		{3, 0, math.Log(3)},
		{3, 1e-9, math.Log(3)},
		{5, 1, 4},
	} {
		tr, _ := New(BoxCox, tc.lambda)
		got, err := tr.Forward(tc.y)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-tc.want) > 1e-8*math.Max(1, math.Abs(tc.want)) {
			t.Errorf("boxcox(%g, λ=%g) = %.15g, want %.15g", tc.y, tc.lambda, got, tc.want)
		}
	}
}

func TestErrors(t *testing.T) {
	logT, _ := New(Log, 0)
	bc, _ := New(BoxCox, 0.5)
	bcNeg, _ := New(BoxCox, -0.5)
	none, _ := New(None, 0)
	for _, tc := range []struct {
		name string
		err  error
		want string
	}{
		{"unknown", func() error { _, err := New("sqrt", 0); return err }(), `unknown transform "sqrt"`},
		{"lambda range", func() error { _, err := New(BoxCox, 7); return err }(), "between -5 and 5"},
		{"lambda nan", func() error { _, err := New(BoxCox, math.NaN()); return err }(), "between"},
		{"log zero", func() error { _, err := logT.Forward(0); return err }(), "value 0 is not positive; the log transform"},
		{"boxcox negative", func() error { _, err := bc.Forward(-3); return err }(), "value -3 is not positive; the boxcox transform"},
		{"nan", func() error { _, err := none.Forward(math.NaN()); return err }(), "finite"},
		{"all index", bc.ForwardAll([]float64{1, 2, -1}, make([]float64, 3)), "at position 3"},
		{"inverse domain", func() error { _, err := bc.Inverse(-2.5); return err }(), "no value on the original scale"},
		{"inverse domain negative lambda", func() error { _, err := bcNeg.Inverse(2); return err }(), "no value"},
		{"inverse overflow", func() error { _, err := logT.Inverse(800); return err }(), "too large"},
		{"lambda few", func() error { _, err := BoxCoxLambda([]float64{1, 2}); return err }(), "at least 3"},
		{"lambda constant", func() error { _, err := BoxCoxLambda([]float64{2, 2, 2, 2}); return err }(), "not all equal"},
		{"lambda negative value", func() error { _, err := BoxCoxLambda([]float64{2, 3, 0, 4}); return err }(), "value 0 at position 3"},
		{"llf nan lambda", func() error { _, err := BoxCoxLogLik([]float64{2, 3, 4}, math.NaN()); return err }(), "finite"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if tc.err == nil || !strings.Contains(tc.err.Error(), tc.want) {
				t.Fatalf("got %v, want an error containing %q", tc.err, tc.want)
			}
		})
	}
	var ve *ValueError
	if err := bc.ForwardAll([]float64{1, -2}, make([]float64, 2)); !errors.As(err, &ve) || ve.Index != 1 || ve.Value != -2 {
		t.Errorf("ForwardAll error %#v", err)
	}
}

// TestBoxCoxLambdaAtLimit: values piled against an upper bound (a long
// left tail) push the likelihood to ever larger powers; that must be an
// error, not a silent λ = 5.
func TestBoxCoxLambdaAtLimit(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	y := make([]float64, 400)
	for i := range y {
		y[i] = 100 - math.Exp(2*rng.NormFloat64())
		if y[i] <= 0 {
			y[i] = 1
		}
	}
	_, err := BoxCoxLambda(y)
	if err == nil || !strings.Contains(err.Error(), "too skewed") {
		t.Fatalf("got %v", err)
	}
}

// TestBoxCoxLambdaRecovers: a sample that is exactly normal after a known
// power transform must give back about that power.
func TestBoxCoxLambdaRecovers(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for _, lam := range []float64{-1, 0, 0.5, 2} {
		tr, _ := New(BoxCox, lam)
		y := make([]float64, 20000)
		for i := range y {
			for {
				z := 2 + 0.6*rng.NormFloat64()
				if lam < 0 {
					z = -0.5 + 0.3*rng.NormFloat64()
				}
				// Draws with 1 + λz <= 0 have no value: redraw (rare).
				if v, err := tr.Inverse(z); err == nil {
					y[i] = v
					break
				}
			}
		}
		got, err := BoxCoxLambda(y)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-lam) > 0.15 {
			t.Errorf("true lambda %g, estimated %g", lam, got)
		}
	}
}

func ExampleBoxCoxLambda() {
	// Right-skewed positive values, such as triglycerides in mmol/L.
	y := []float64{0.6, 0.8, 0.9, 1.0, 1.1, 1.2, 1.3, 1.5, 1.7, 2.0, 2.4, 3.1, 4.5}
	lam, err := BoxCoxLambda(y)
	if err != nil {
		fmt.Println(err)
		return
	}
	tr, _ := New(BoxCox, lam)
	z, _ := tr.Forward(2.0)
	back, _ := tr.Inverse(z)
	fmt.Printf("lambda %.2f; 2.0 -> %.3f -> %.1f\n", lam, z, back)
	// Output: lambda -0.38; 2.0 -> 0.608 -> 2.0
}
