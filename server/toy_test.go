package server

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"sort"
	"sync/atomic"
	"time"

	"veer/functions/cell"
)

// toyState counts what the toy functions did, so tests can see sharing,
// caching and cancellation.
type toyState struct {
	slowStarts, slowDone, slowAborted atomic.Int64
	modelParses                       atomic.Int64
	fits                              atomic.Int64
}

// toyModel is the document VEER.T.FIT saves.
type toyModel struct {
	Mean float64 `json:"mean"`
	SD   float64 `json:"sd"`
	N    int     `json:"n"`
}

// toyCatalogue is a small catalogue that exercises every feature of the
// framework: single values, spills (column and table), errors, a panic, a
// slow computation with progress, a model-writing and a model-reading
// (streaming) function.
func toyCatalogue(st *toyState) *cell.Catalogue {
	return cell.NewCatalogue(
		cell.Func{
			Name: "VEER.T.ADD", Summary: "a + b", Result: cell.ShapeValue,
			Params: []cell.Param{{Name: "a", Type: cell.TypeNumber}, {Name: "b", Type: cell.TypeNumber, Optional: true}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				x, _ := a.Number(0)
				y, _ := a.OptNumber(1, 0)
				return x + y, nil
			},
		},
		cell.Func{
			Name: "VEER.T.MEAN", Summary: "mean of the numbers in a range; blank and text cells are skipped", Result: cell.ShapeValue,
			Params: []cell.Param{{Name: "values", Type: cell.TypeRange}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				xs, err := a.Numbers(0, cell.PolicySkip)
				if err != nil {
					return nil, err
				}
				if len(xs) == 0 {
					return nil, cell.Errorf(cell.CodeDiv0, "'values' holds no numbers")
				}
				s := 0.0
				for _, x := range xs {
					s += x
				}
				return s / float64(len(xs)), nil
			},
		},
		cell.Func{
			Name:    "VEER.T.CUSUM",
			Summary: "running upper or lower CUSUM of each worker's values ordered by time; one row per input row; blank values give #N/A",
			Result:  cell.ShapeColumn,
			Params: []cell.Param{
				{Name: "ids", Type: cell.TypeRange}, {Name: "times", Type: cell.TypeRange},
				{Name: "values", Type: cell.TypeRange}, {Name: "options", Type: cell.TypeAny, Optional: true},
			},
			Options: []string{cell.OptionSide, cell.OptionAllowance},
			Call:    toyCusum,
		},
		cell.Func{
			Name: "VEER.T.TABLE", Summary: "n rows of i and i squared under a header", Result: cell.ShapeTable,
			Params: []cell.Param{{Name: "n", Type: cell.TypeNumber}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				n, err := a.Int(0, 0, 1000)
				if err != nil {
					return nil, err
				}
				out := [][]any{{"i", "square"}}
				for i := 1; i <= n; i++ {
					out = append(out, []any{i, float64(i * i)})
				}
				return out, nil
			},
		},
		cell.Func{
			Name: "VEER.T.FAIL", Summary: "fails with the given code (\"go\" for a plain Go error)", Result: cell.ShapeValue,
			Params: []cell.Param{{Name: "code", Type: cell.TypeText}, {Name: "message", Type: cell.TypeText, Optional: true}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				code, _ := a.Text(0)
				msg, _ := a.OptText(1, "failed on purpose")
				if code == "go" {
					return nil, errors.New(msg)
				}
				return nil, cell.Errorf(cell.Code(code), "%s", msg)
			},
		},
		cell.Func{
			Name: "VEER.T.PANIC", Summary: "panics", Result: cell.ShapeValue,
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				var m map[string]int
				m["x"] = 1 // nil map write
				return nil, nil
			},
		},
		cell.Func{
			Name: "VEER.T.SLOW", Summary: "works for the given seconds, reporting progress", Result: cell.ShapeValue, Slow: true,
			Params: []cell.Param{{Name: "seconds", Type: cell.TypeNumber}, {Name: "tag", Type: cell.TypeAny, Optional: true}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				secs, _ := a.Number(0)
				st.slowStarts.Add(1)
				d := time.Duration(secs * float64(time.Second))
				start := time.Now()
				tick := time.NewTicker(5 * time.Millisecond)
				defer tick.Stop()
				for {
					el := time.Since(start)
					if el >= d {
						break
					}
					env.Progress(float64(el) / float64(d))
					select {
					case <-ctx.Done():
						st.slowAborted.Add(1)
						return nil, ctx.Err()
					case <-tick.C:
					}
				}
				st.slowDone.Add(1)
				return secs, nil
			},
		},
		cell.Func{
			Name: "VEER.T.SLOWNUM", Summary: "VEER.T.SLOW that words a stop as #NUM!, as a cell function may", Result: cell.ShapeValue, Slow: true,
			Params: []cell.Param{{Name: "seconds", Type: cell.TypeNumber}, {Name: "tag", Type: cell.TypeAny, Optional: true}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				secs, _ := a.Number(0)
				if err := toySpin(ctx, env, st, secs); err != nil {
					return nil, cell.OutOfRange.Errorf("the computation was cancelled")
				}
				return secs, nil
			},
		},
		cell.Func{
			Name: "VEER.T.SLOWONCE", Summary: "VEER.T.SLOWNUM shared through Env.Once by calls that differ only in caller", Result: cell.ShapeValue, Slow: true,
			Params: []cell.Param{{Name: "seconds", Type: cell.TypeNumber}, {Name: "tag", Type: cell.TypeText}, {Name: "caller", Type: cell.TypeNumber}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				secs, _ := a.Number(0)
				tag, _ := a.Text(1)
				return env.Once("toy.once:"+tag, func() (any, error) {
					if err := toySpin(ctx, env, st, secs); err != nil {
						return nil, cell.OutOfRange.Errorf("the computation was cancelled")
					}
					return secs, nil
				})
			},
		},
		cell.Func{
			Name: "VEER.T.FIT", Summary: "fits a toy model (mean and sd of values) and saves it", Result: cell.ShapeValue, Writes: true,
			Params: []cell.Param{{Name: "name", Type: cell.TypeText}, {Name: "values", Type: cell.TypeRange}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				st.fits.Add(1)
				name, _ := a.Text(0)
				xs, err := a.Numbers(1, cell.PolicyError)
				if err != nil {
					return nil, err
				}
				if len(xs) < 2 {
					return nil, cell.OutOfRange.Errorf("'values' needs at least 2 numbers; got %d", len(xs))
				}
				var m, ss float64
				for _, x := range xs {
					m += x
				}
				m /= float64(len(xs))
				for _, x := range xs {
					ss += (x - m) * (x - m)
				}
				doc, _ := json.Marshal(toyModel{Mean: m, SD: math.Sqrt(ss / float64(len(xs)-1)), N: len(xs)})
				return env.SaveModel(name, doc)
			},
		},
		cell.Func{
			Name: "VEER.T.READ", Summary: "x minus the mean of a toy model", Result: cell.ShapeValue, Streaming: true,
			Params: []cell.Param{{Name: "model", Type: cell.TypeText}, {Name: "x", Type: cell.TypeNumber}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				ref, _ := a.Text(0)
				x, _ := a.Number(1)
				m, err := env.Model(ref)
				if err != nil {
					return nil, err
				}
				v, err := env.Once("toy.model:"+m.Handle, func() (any, error) {
					st.modelParses.Add(1)
					var tm toyModel
					if err := json.Unmarshal(m.Doc, &tm); err != nil {
						return nil, cell.WrongArgument.Errorf("model %s is not a toy model", m.Handle)
					}
					return &tm, nil
				})
				if err != nil {
					return nil, err
				}
				return x - v.(*toyModel).Mean, nil
			},
		},
		cell.Func{
			Name: "VEER.T.ECHO", Summary: "returns its argument as received", Result: cell.ShapeTable,
			Params: []cell.Param{{Name: "v", Type: cell.TypeAny}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				return a.Value(0), nil
			},
		},
		cell.Func{
			Name: "VEER.T.SNEAK", Summary: "tries to save without being declared as writing", Result: cell.ShapeValue,
			Params: []cell.Param{{Name: "name", Type: cell.TypeText}},
			Call: func(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
				name, _ := a.Text(0)
				return env.SaveModel(name, []byte("{}"))
			},
		},
	)
}

// toyCusum: per worker (id), rows ordered by time, s_j = max(0, s_{j-1} +
// x_j - k) for side=up (min(0, s + x + k) for down). Output in input order.
func toyCusum(ctx context.Context, env cell.Env, a cell.Args) (any, error) {
	if err := a.SameRows(0, 1, 2); err != nil {
		return nil, err
	}
	ids, err := a.Texts(0, cell.PolicyError)
	if err != nil {
		return nil, err
	}
	times, err := a.Numbers(1, cell.PolicyError)
	if err != nil {
		return nil, err
	}
	xs, err := a.Numbers(2, cell.PolicyMissing)
	if err != nil {
		return nil, err
	}
	o, err := a.Options(3)
	if err != nil {
		return nil, err
	}
	k := o.Number(cell.OptionAllowance, 0.5)
	if k < 0 {
		return nil, cell.OutOfRange.Errorf("option \"allowance\" must be 0 or more; got %g", k)
	}
	down := o.Text(cell.OptionSide, "up") == "down"
	order := make([]int, len(ids))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(p, q int) bool {
		i, j := order[p], order[q]
		if ids[i] != ids[j] {
			return ids[i] < ids[j]
		}
		return times[i] < times[j]
	})
	out := make([]any, len(ids))
	s := 0.0
	for p, i := range order {
		if p > 0 && ids[order[p-1]] != ids[i] {
			s = 0
		}
		if math.IsNaN(xs[i]) {
			out[i] = cell.BlankInput.Errorf("row %d has no value", i+1)
			continue
		}
		if down {
			s = math.Min(0, s+xs[i]+k)
		} else {
			s = math.Max(0, s+xs[i]-k)
		}
		out[i] = s
	}
	return out, nil
}

// toySpin waits secs seconds, reporting progress, and returns ctx.Err()
// early when ctx ends.
func toySpin(ctx context.Context, env cell.Env, st *toyState, secs float64) error {
	st.slowStarts.Add(1)
	d := time.Duration(secs * float64(time.Second))
	start := time.Now()
	tick := time.NewTicker(5 * time.Millisecond)
	defer tick.Stop()
	for {
		el := time.Since(start)
		if el >= d {
			break
		}
		env.Progress(float64(el) / float64(d))
		select {
		case <-ctx.Done():
			st.slowAborted.Add(1)
			return ctx.Err()
		case <-tick.C:
		}
	}
	st.slowDone.Add(1)
	return nil
}
