package calc_test

import (
	"fmt"
	"strings"

	"veer/addin/calc"
	"veer/functions/cell"
)

// The catalogue's functions become UNO methods: VEER.X is the method x,
// ranges are sequence<sequence<any>>, optional parameters any. The add-in's
// own VEER.ERRORS comes last.
func ExampleFunctions() {
	l := cell.Listing{Functions: []cell.FuncInfo{{
		Name: "VEER.ZSCORE", Summary: "Standardised score.", Result: cell.ShapeColumn,
		Params: []cell.Param{
			{Name: "model", Type: cell.TypeText},
			{Name: "ages", Type: cell.TypeRange},
			{Name: "groups", Type: cell.TypeRange, Optional: true},
		},
	}}}
	fs, err := calc.Functions(l)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, f := range fs {
		var ps []string
		for _, p := range f.Params {
			ps = append(ps, p.IDL+" "+p.IDLName)
		}
		fmt.Printf("%s: %s %s(%s)\n", f.Name, f.ReturnIDL(), f.Method, strings.Join(ps, ", "))
	}
	// Output:
	// VEER.ZSCORE: sequence< sequence< any > > zscore(string model, sequence< sequence< any > > ages, any groups)
	// VEER.ERRORS: sequence< sequence< any > > errors(any after)
}

// Sources gives the generated files of the extension without any outside
// tool; Build also compiles the IDL and zips the .oxt.
func ExampleSources() {
	l := cell.Listing{Functions: []cell.FuncInfo{{Name: "VEER.LIMIT", Summary: "Control limit.", Result: cell.ShapeValue,
		Params: []cell.Param{{Name: "target", Type: cell.TypeNumber, Help: "years"}}}}}
	src, err := calc.Sources(l, calc.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, line := range strings.Split(string(src["idl/org/veer/calc/XFunctions.idl"]), "\n") {
		if strings.Contains(line, "limit(") {
			fmt.Println(strings.TrimSpace(line))
		}
	}
	fmt.Println(strings.Contains(string(src["CalcAddIns.xcu"]), "<value xml:lang=\"en\">VEER.LIMIT</value>"))
	// Output:
	// any limit([in] double target);
	// true
}
