package published

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// A term of an equation is "1" (the intercept) or a product of factors
// joined by "*", each factor a variable or its natural logarithm, with an
// optional whole power from -4 to 4:
//
//	1   age   height   age^2   ln(age)   ln(height)   ln(age)^2   age*height   height^-1
//
// Variables are "age" and the covariates the document declares. Spaces
// are ignored and names are not case-sensitive.

// Limits on terms.
const (
	maxFactors  = 4
	maxPower    = 4
	maxTermText = 64
)

// factor is one variable of a term: x, ln(x), raised to pow.
type factor struct {
	v   int // 0 is age, k > 0 the k-th declared covariate
	ln  bool
	pow int
}

type term struct {
	text    string // canonical form, e.g. "ln(height)*age^2"
	factors []factor
}

// parseTerm reads one term; vars are the variable names, age first.
func parseTerm(s string, vars []string) (term, error) {
	raw := s
	if len(s) > maxTermText {
		return term{}, fmt.Errorf("the term %q is too long (at most %d characters)", raw[:maxTermText]+"…", maxTermText)
	}
	s = strings.ToLower(strings.Join(strings.Fields(s), ""))
	if s == "1" {
		return term{text: "1"}, nil
	}
	if s == "" {
		return term{}, fmt.Errorf("a term is empty; write 1 for the intercept")
	}
	parts := strings.Split(s, "*")
	if len(parts) > maxFactors {
		return term{}, fmt.Errorf("the term %q has more than %d factors", raw, maxFactors)
	}
	var t term
	for _, p := range parts {
		f, err := parseFactor(p, vars)
		if err != nil {
			return term{}, fmt.Errorf("the term %q cannot be read: %v", raw, err)
		}
		t.factors = append(t.factors, f)
	}
	// Canonical order, so "age*height" and "height*age" are the same term;
	// repeated factors multiply.
	sort.Slice(t.factors, func(a, b int) bool {
		fa, fb := t.factors[a], t.factors[b]
		if fa.v != fb.v {
			return fa.v < fb.v
		}
		return !fa.ln && fb.ln
	})
	merged := t.factors[:0]
	for _, f := range t.factors {
		if n := len(merged); n > 0 && merged[n-1].v == f.v && merged[n-1].ln == f.ln {
			merged[n-1].pow += f.pow
			continue
		}
		merged = append(merged, f)
	}
	t.factors = merged[:0]
	for _, f := range merged {
		if f.pow != 0 {
			t.factors = append(t.factors, f)
		}
	}
	if len(t.factors) == 0 {
		return term{}, fmt.Errorf("the term %q is a constant; write 1 for the intercept", raw)
	}
	names := make([]string, len(t.factors))
	for i, f := range t.factors {
		if f.pow > maxPower || f.pow < -maxPower {
			return term{}, fmt.Errorf("the term %q has a power beyond %d", raw, maxPower)
		}
		n := vars[f.v]
		if f.ln {
			n = "ln(" + n + ")"
		}
		if f.pow != 1 {
			n += "^" + strconv.Itoa(f.pow)
		}
		names[i] = n
	}
	t.text = strings.Join(names, "*")
	return t, nil
}

func parseFactor(p string, vars []string) (factor, error) {
	f := factor{pow: 1}
	base := p
	if i := strings.LastIndexByte(p, '^'); i >= 0 {
		n, err := strconv.Atoi(p[i+1:])
		if err != nil || n == 0 || n > maxPower || n < -maxPower {
			return f, fmt.Errorf("%q: a power must be a whole number from -%d to %d other than 0", p, maxPower, maxPower)
		}
		f.pow, base = n, p[:i]
	}
	if strings.HasPrefix(base, "ln(") && strings.HasSuffix(base, ")") {
		f.ln, base = true, base[3:len(base)-1]
	}
	for i, v := range vars {
		if base == v {
			f.v = i
			return f, nil
		}
	}
	if base == "" {
		return f, fmt.Errorf("a factor is empty")
	}
	if strings.ContainsAny(base, "()^+-/ ") {
		return f, fmt.Errorf("%q is not a variable, ln(variable) or a power of one", p)
	}
	return f, fmt.Errorf("unknown variable %q; the variables are %s", base, strings.Join(vars, ", "))
}

// value evaluates the term at x (x[0] age, then covariates), with lx
// holding the logarithms of the variables the term takes them of (the
// caller checks those are positive).
func (t term) value(x, lx []float64) float64 {
	v := 1.0
	for _, f := range t.factors {
		b := x[f.v]
		if f.ln {
			b = lx[f.v]
		}
		switch f.pow {
		case 1:
			v *= b
		case 2:
			v *= b * b
		default:
			v *= math.Pow(b, float64(f.pow))
		}
	}
	return v
}
