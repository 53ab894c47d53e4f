package evaluation

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"veer/functions/chart"
)

// MaxRangeTargets bounds the number of targets in a range.
const MaxRangeTargets = 50

// ParseTargets reads a sweep of targets in years as a user writes it: a
// list "5,10,20,50,100", or a range "5-100" of 10 targets evenly spaced on
// a log scale (a chart's false-signal rate is about 1/target, so equal
// ratios are equal steps), "5-100/N" for N of them (2 to MaxRangeTargets);
// the inner targets of a range are rounded to two significant digits.
// Blank gives no targets. A mistake is a *chart.SettingError for the
// setting "targets".
func ParseTargets(s string) ([]float64, error) {
	s = strings.TrimSpace(s)
	if s == "" {
		return nil, nil
	}
	bad := func(want string) error {
		return &chart.SettingError{Setting: "targets", Value: s, Want: want}
	}
	const form = "a list of years such as 5,10,20,50,100, or a range such as 5-100 or 5-100/8"
	positive := func(p string) (float64, error) {
		v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
		if err != nil || !(v > 0) || math.IsInf(v, 0) {
			return 0, bad(form)
		}
		return v, nil
	}
	if from, rest, ok := strings.Cut(s, "-"); ok {
		to, count, hasN := strings.Cut(rest, "/")
		a, err := positive(from)
		if err != nil {
			return nil, err
		}
		b, err := positive(to)
		if err != nil {
			return nil, err
		}
		n := 10
		if hasN {
			if n, err = strconv.Atoi(strings.TrimSpace(count)); err != nil || n < 2 || n > MaxRangeTargets {
				return nil, bad(fmt.Sprintf("a range of 2 to %d targets", MaxRangeTargets))
			}
		}
		if !(b > a) {
			return nil, bad("a range from the shorter target to the longer")
		}
		var out []float64
		for k := range n {
			v := a * math.Pow(b/a, float64(k)/float64(n-1))
			switch k {
			case 0:
				v = a
			case n - 1:
				v = b
			default:
				v = roundSignificant(v, 2)
			}
			if !slices.Contains(out, v) {
				out = append(out, v)
			}
		}
		return out, nil
	}
	var out []float64
	for _, p := range strings.Split(s, ",") {
		v, err := positive(p)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, nil
}

func roundSignificant(v float64, digits int) float64 {
	p := math.Pow(10, float64(digits)-math.Ceil(math.Log10(v)))
	return math.Round(v*p) / p
}
