package catalog_test

import (
	"context"
	"fmt"

	"veer/functions/catalog"
	"veer/functions/cell"
)

// The catalogue lists veer's cell functions; the server dispatches calls to
// them and serves the listing at GET /v1/functions.
func ExampleNew() {
	c := catalog.New()
	for _, f := range c.Funcs() {
		fmt.Printf("%-14s %s\n", f.Name, f.Result)
	}
	// Output:
	// VEER.FIT       value
	// VEER.MODELS    table
	// VEER.INFO      table
	// VEER.REFMEAN   column
	// VEER.REFSD     column
	// VEER.CENTILE   column
	// VEER.ZSCORE    column
	// VEER.CHART     table
	// VEER.LIMIT     value
	// VEER.DELAY     value
	// VEER.RULE      column
	// VEER.RULECOLS  column
	// VEER.SAVERULES value
	// VEER.EVALUATE  table
}

// Calling a function outside the server: the limit of an upward CUSUM with
// allowance 0.5 whose healthy worker, seen once a year, is flagged on
// average once in 930.887 years is the textbook h = 5 (R package spc:
// xcusum.arl(k=0.5, h=5, sided="one") = 930.887).
func ExampleNew_limit() {
	c := catalog.New()
	f, _ := c.Lookup("VEER.LIMIT")
	args, err := cell.Bind(f, []cell.Value{
		cell.ScalarValue(cell.NumberCell(930.887)),
		cell.ScalarValue(cell.Cell{}), // no model
		cell.ScalarValue(cell.TextCell("allowance=0.5; side=up; gap=1")),
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	h, err := f.Call(context.Background(), &cell.MemoryEnv{}, args)
	fmt.Printf("%.2f %v\n", h, err)
	// Output: 5.00 <nil>
}

// Rules over any table: the header row names the variables.
func ExampleNew_ruleColumns() {
	c := catalog.New()
	f, _ := c.Lookup("VEER.RULECOLS")
	data, _ := cell.ValueOf([][]any{{"Systolic BP", "Age"}, {150, 52}, {128, 61}})
	args, _ := cell.Bind(f, []cell.Value{cell.ScalarValue(cell.TextCell("systolic_bp > 140.0 && age > 50.0")), data})
	v, err := f.Call(context.Background(), &cell.MemoryEnv{}, args)
	fmt.Println(v, err)
	// Output: [true false] <nil>
}
