package transform

import (
	"errors"
	"fmt"
	"math"
	"strconv"
)

// Name names a transform, as a user writes it ("none", "log", "boxcox").
type Name string

// Names of the transforms.
const (
	None   Name = "none"
	Log    Name = "log"
	BoxCox Name = "boxcox"
)

// Names lists the transforms in the order users see them.
var Names = []Name{None, Log, BoxCox}

// LambdaLimit bounds the Box-Cox lambda: |λ| <= LambdaLimit. Powers beyond
// ±5 are never a sensible model for a medical marker; a likelihood pushing
// there means the values are nearly constant or extremely skewed.
const LambdaLimit = 5

// Transform is one of the transforms; Lambda is used by BoxCox only.
type Transform struct {
	Name   Name
	Lambda float64
}

// New returns the transform called name ("none", "log" or "boxcox"; "" means
// "none") with the given Box-Cox lambda (ignored, and stored as 0, for the
// other two).
func New(name Name, lambda float64) (Transform, error) {
	switch name {
	case "", None:
		return Transform{Name: None}, nil
	case Log:
		return Transform{Name: Log}, nil
	case BoxCox:
		if math.IsNaN(lambda) || math.Abs(lambda) > LambdaLimit {
			return Transform{}, fmt.Errorf("Box-Cox lambda must be a number between -%d and %d, got %g", LambdaLimit, LambdaLimit, lambda)
		}
		return Transform{Name: BoxCox, Lambda: lambda}, nil
	}
	return Transform{}, fmt.Errorf("unknown transform %q; use none, log or boxcox", name)
}

// NeedsPositive reports whether the transform accepts only values > 0.
func (t Transform) NeedsPositive() bool { return t.Name == Log || t.Name == BoxCox }

// String describes the transform, e.g. "boxcox(lambda=0.25)".
func (t Transform) String() string {
	if t.Name == BoxCox {
		return "boxcox(lambda=" + strconv.FormatFloat(t.Lambda, 'g', 6, 64) + ")"
	}
	return string(t.Name)
}

// ErrDomain is the kind of failure of a value outside what a transform can
// map: a *ValueError (forward) or an *InverseError (back), for errors.Is.
var ErrDomain = errors.New("a value the transform cannot map")

// ValueError reports a value a transform cannot take. Index is the
// 0-based position in the slice given to ForwardAll (-1 for Forward).
type ValueError struct {
	Index     int
	Value     float64
	Transform Name
}

func (e *ValueError) Error() string {
	where := ""
	if e.Index >= 0 {
		where = " at position " + strconv.Itoa(e.Index+1)
	}
	if math.IsNaN(e.Value) || math.IsInf(e.Value, 0) {
		return fmt.Sprintf("value%s is %g; expected a finite number", where, e.Value)
	}
	return fmt.Sprintf("value %g%s is not positive; the %s transform needs values > 0", e.Value, where, e.Transform)
}

// Is reports whether target is ErrDomain.
func (e *ValueError) Is(target error) bool { return target == ErrDomain }

// InverseError reports a value Z on the transformed scale that no value on
// the original scale maps to (Box-Cox with 1 + λz <= 0), or whose value
// would overflow.
type InverseError struct {
	Z         float64
	Transform Transform
	Overflow  bool
}

func (e *InverseError) Error() string {
	switch {
	case math.IsNaN(e.Z) || math.IsInf(e.Z, 0):
		return fmt.Sprintf("cannot map %g back from the %s scale", e.Z, e.Transform)
	case e.Overflow:
		return fmt.Sprintf("%g on the %s scale is too large to map back", e.Z, e.Transform)
	}
	return fmt.Sprintf("%g on the %s scale has no value on the original scale (needs 1 + lambda·z > 0)", e.Z, e.Transform)
}

// Is reports whether target is ErrDomain.
func (e *InverseError) Is(target error) bool { return target == ErrDomain }

// Forward maps y to the transformed scale. Log and Box-Cox fail on y <= 0;
// every transform fails on NaN or ±Inf.
func (t Transform) Forward(y float64) (float64, error) {
	if math.IsNaN(y) || math.IsInf(y, 0) {
		return 0, &ValueError{Index: -1, Value: y, Transform: t.Name}
	}
	switch t.Name {
	case None, "":
		return y, nil
	case Log:
		if !(y > 0) {
			return 0, &ValueError{Index: -1, Value: y, Transform: t.Name}
		}
		return math.Log(y), nil
	case BoxCox:
		if !(y > 0) {
			return 0, &ValueError{Index: -1, Value: y, Transform: t.Name}
		}
		return boxCox(math.Log(y), t.Lambda), nil
	}
	panic("transform: unknown transform " + strconv.Quote(string(t.Name)))
}

// boxCox returns the Box-Cox transform of y = exp(ly). expm1 keeps full
// precision for λ near 0, where (y^λ - 1)/λ → log y.
func boxCox(ly, lambda float64) float64 {
	if lambda == 0 {
		return ly
	}
	return math.Expm1(lambda*ly) / lambda
}

// ForwardAll transforms y into out (which may be y itself; len(out) must
// equal len(y)). A bad value gives a *ValueError with its index.
func (t Transform) ForwardAll(y, out []float64) error {
	if len(out) != len(y) {
		panic("transform: ForwardAll needs len(out) == len(y)")
	}
	for i, v := range y {
		z, err := t.Forward(v)
		if err != nil {
			var ve *ValueError
			if errors.As(err, &ve) {
				ve.Index = i
			}
			return err
		}
		out[i] = z
	}
	return nil
}

// Inverse maps z from the transformed scale back to the user's scale. It
// fails where no value maps to z: for Box-Cox when 1 + λz <= 0, and when
// the result would overflow.
func (t Transform) Inverse(z float64) (float64, error) {
	if math.IsNaN(z) || math.IsInf(z, 0) {
		return 0, &InverseError{Z: z, Transform: t}
	}
	var y float64
	switch t.Name {
	case None, "":
		return z, nil
	case Log:
		y = math.Exp(z)
	case BoxCox:
		if t.Lambda == 0 {
			y = math.Exp(z)
			break
		}
		a := t.Lambda * z
		if !(a > -1) {
			return 0, &InverseError{Z: z, Transform: t}
		}
		y = math.Exp(math.Log1p(a) / t.Lambda)
	default:
		panic("transform: unknown transform " + strconv.Quote(string(t.Name)))
	}
	if math.IsInf(y, 0) {
		return 0, &InverseError{Z: z, Transform: t, Overflow: true}
	}
	return y, nil
}
