package rules

import (
	"fmt"
	"reflect"
	"strings"

	"github.com/google/cel-go/common/types"
	"github.com/google/cel-go/common/types/ref"
	"github.com/google/cel-go/common/types/traits"
)

// The history lists (zs, values, times, signals) are bound as views over the
// caller's Go slices. cel-go's own NewDynamicList would work too, but it
// reads every element through reflection; these typed views keep a rule
// such as `last(zs, 4).filter(v, v > 2.0).size() >= 3` free of reflection
// and of copying, which matters when a rule runs over 100,000 exams.
// Rarely used operations (list concatenation, equality, conversion) are
// delegated to cel-go's reflective list.

// floatList is a CEL list(double) view over a []float64. Lists are used
// by pointer: an activation keeps its lists inside itself and hands out
// pointers, so binding a history allocates nothing.
type floatList struct{ v []float64 }

// boolList is a CEL list(bool) view over a []bool.
type boolList struct{ v []bool }

var (
	_ traits.Lister   = (*floatList)(nil)
	_ traits.Foldable = (*floatList)(nil)
	_ traits.Lister   = (*boolList)(nil)
	_ traits.Foldable = (*boolList)(nil)
)

func (l *floatList) dyn() traits.Lister {
	return types.NewDynamicList(types.DefaultTypeAdapter, l.v)
}

func (l *floatList) ConvertToNative(t reflect.Type) (any, error) { return l.dyn().ConvertToNative(t) }
func (l *floatList) ConvertToType(t ref.Type) ref.Val            { return l.dyn().ConvertToType(t) }
func (l *floatList) Equal(o ref.Val) ref.Val                     { return l.dyn().Equal(o) }
func (l *floatList) Type() ref.Type                              { return types.ListType }
func (l *floatList) Value() any                                  { return l.v }
func (l *floatList) Add(o ref.Val) ref.Val                       { return l.dyn().Add(o) }
func (l *floatList) Size() ref.Val                               { return types.Int(len(l.v)) }
func (l *floatList) IsZeroValue() bool                           { return len(l.v) == 0 }
func (l *floatList) String() string                              { return formatFloats(l.v) }

func (l *floatList) Contains(elem ref.Val) ref.Val {
	for _, v := range l.v {
		if types.Equal(types.Double(v), elem) == types.True {
			return types.True
		}
	}
	return types.False
}

func (l *floatList) Get(index ref.Val) ref.Val {
	i, err := listIndex(index, len(l.v))
	if err != nil {
		return err
	}
	return types.Double(l.v[i])
}

func (l *floatList) Fold(f traits.Folder) {
	for i, v := range l.v {
		if !f.FoldEntry(i, types.Double(v)) {
			return
		}
	}
}

func (l *floatList) Iterator() traits.Iterator { return &floatIter{l: l.v} }

func (l *boolList) dyn() traits.Lister {
	return types.NewDynamicList(types.DefaultTypeAdapter, l.v)
}

func (l *boolList) ConvertToNative(t reflect.Type) (any, error) { return l.dyn().ConvertToNative(t) }
func (l *boolList) ConvertToType(t ref.Type) ref.Val            { return l.dyn().ConvertToType(t) }
func (l *boolList) Equal(o ref.Val) ref.Val                     { return l.dyn().Equal(o) }
func (l *boolList) Type() ref.Type                              { return types.ListType }
func (l *boolList) Value() any                                  { return l.v }
func (l *boolList) Add(o ref.Val) ref.Val                       { return l.dyn().Add(o) }
func (l *boolList) Size() ref.Val                               { return types.Int(len(l.v)) }
func (l *boolList) IsZeroValue() bool                           { return len(l.v) == 0 }
func (l *boolList) String() string                              { return fmt.Sprint(l.v) }

func (l *boolList) Contains(elem ref.Val) ref.Val {
	for _, v := range l.v {
		if types.Equal(types.Bool(v), elem) == types.True {
			return types.True
		}
	}
	return types.False
}

func (l *boolList) Get(index ref.Val) ref.Val {
	i, err := listIndex(index, len(l.v))
	if err != nil {
		return err
	}
	return types.Bool(l.v[i])
}

func (l *boolList) Fold(f traits.Folder) {
	for i, v := range l.v {
		if !f.FoldEntry(i, types.Bool(v)) {
			return
		}
	}
}

func (l *boolList) Iterator() traits.Iterator { return &boolIter{l: l.v} }

// listIndex checks a CEL index against a list length, with the message
// cel-go's interpreter gives for a position a list does not have, so that
// error translation treats both alike.
func listIndex(index ref.Val, n int) (int, ref.Val) {
	i, err := types.IndexOrError(index)
	if err != nil {
		return 0, types.ValOrErr(index, "%v", err)
	}
	if i < 0 || i >= n {
		return 0, types.NewErr("index out of bounds: %d", i)
	}
	return i, nil
}

func formatFloats(l []float64) string {
	var sb strings.Builder
	sb.WriteByte('[')
	for i, v := range l {
		if i > 0 {
			sb.WriteString(", ")
		}
		fmt.Fprint(&sb, v)
	}
	sb.WriteByte(']')
	return sb.String()
}

// iterBase supplies the ref.Val methods every iterator needs; CEL never
// converts or compares iterators.
type iterBase struct{}

func (iterBase) ConvertToNative(reflect.Type) (any, error) {
	return nil, fmt.Errorf("type conversion on iterators not supported")
}
func (iterBase) ConvertToType(ref.Type) ref.Val { return types.NewErr("no such overload") }
func (iterBase) Equal(ref.Val) ref.Val          { return types.NewErr("no such overload") }
func (iterBase) Type() ref.Type                 { return types.IteratorType }
func (iterBase) Value() any                     { return nil }

type floatIter struct {
	iterBase
	l []float64
	i int
}

func (it *floatIter) HasNext() ref.Val { return types.Bool(it.i < len(it.l)) }
func (it *floatIter) Next() ref.Val {
	if it.i >= len(it.l) {
		return nil
	}
	v := types.Double(it.l[it.i])
	it.i++
	return v
}

type boolIter struct {
	iterBase
	l []bool
	i int
}

func (it *boolIter) HasNext() ref.Val { return types.Bool(it.i < len(it.l)) }
func (it *boolIter) Next() ref.Val {
	if it.i >= len(it.l) {
		return nil
	}
	v := types.Bool(it.l[it.i])
	it.i++
	return v
}
