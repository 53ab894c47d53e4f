package cell_test

import (
	"context"
	"fmt"

	"veer/functions/cell"
)

// A catalogue entry: parameters are declared once; the server checks them
// before Call runs, and Call reads them with the Args helpers.
func Example() {
	mean := cell.Func{
		Name:    "VEER.EXAMPLE.MEAN",
		Summary: "Mean of the numbers in a range (blank and text cells skipped).",
		Params:  []cell.Param{{Name: "values", Type: cell.TypeRange, Help: "numbers"}},
		Result:  cell.ShapeValue,
		Call: func(ctx context.Context, env cell.Env, args cell.Args) (any, error) {
			xs, err := args.Numbers(0, cell.PolicySkip)
			if err != nil {
				return nil, err
			}
			if len(xs) == 0 {
				return nil, cell.Errorf(cell.CodeDiv0, "no numbers in 'values'")
			}
			s := 0.0
			for _, x := range xs {
				s += x
			}
			return s / float64(len(xs)), nil
		},
	}
	cat := cell.NewCatalogue(mean)

	f, _ := cat.Lookup("veer.example.mean")
	v, _ := cell.ValueOf([]any{1.0, "n/a", nil, 5.0})
	args, err := cell.Bind(f, []cell.Value{v})
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := f.Call(context.Background(), &cell.MemoryEnv{}, args)
	out, _ := cell.EncodeResult(nil, f.Name, res)
	fmt.Println(string(out), err)
	// Output: 3 <nil>
}

func ExampleParseOptions() {
	v, _ := cell.ValueOf("side=up; allowance=0.5")
	o, err := cell.ParseOptions("VEER.EXAMPLE", []string{cell.OptionSide, cell.OptionAllowance}, v, "'options'")
	fmt.Println(o.Text(cell.OptionSide, "both"), o.Number(cell.OptionAllowance, 0.5), err)

	v, _ = cell.ValueOf("sied=up")
	_, err = cell.ParseOptions("VEER.EXAMPLE", []string{cell.OptionSide, cell.OptionAllowance}, v, "'options'")
	fmt.Println(err)
	// Output:
	// up 0.5 <nil>
	// #VALUE!: argument 'options': unknown option "sied"; known options: side, allowance
}

// The dispatcher encodes a result in the context of the function called:
// the error of a failed call and the errors inside a spilled column both
// name it once.
func ExampleEncodeResult() {
	b, _ := cell.EncodeResult(nil, "VEER.EXAMPLE", []any{1.5, cell.BlankInput.Errorf("row 2: the age is blank"), "ok"})
	fmt.Println(string(b))
	_, e := cell.EncodeResult(nil, "VEER.EXAMPLE", cell.UnknownModel.Errorf("there is no model named \"bp\""))
	fmt.Println(e)
	// Output:
	// [[1.5],[{"error":"#N/A","message":"VEER.EXAMPLE: row 2: the age is blank"}],["ok"]]
	// #REF!: VEER.EXAMPLE: there is no model named "bp"
}

// Failures map to codes by the contract, whatever the wording.
func ExampleFailure() {
	e := cell.OutsideReference.Errorf("age %g is outside the reference range 25 to 65", 70.0)
	fmt.Println(e.Code, cell.BlankInput.Code(), cell.Busy.Code())
	fmt.Println(e.In("VEER.ZSCORE"))
	// Output:
	// #NUM! #N/A #BUSY!
	// #NUM!: VEER.ZSCORE: age 70 is outside the reference range 25 to 65
}

func ExampleArgs_Numbers() {
	f := &cell.Func{Name: "VEER.EXAMPLE.Z", Summary: "z", Result: cell.ShapeColumn,
		Params: []cell.Param{{Name: "values", Type: cell.TypeRange}}}
	v, _ := cell.ValueOf([]any{1.0, nil, "x"})
	_, err := cell.NewArgs(f, v).Numbers(0, cell.PolicyMissing)
	fmt.Println(err)
	// Output: #VALUE!: argument 'values', row 3: expected a number; got text "x" (blank cells are allowed and give #N/A for their row; text and TRUE/FALSE are not)
}
