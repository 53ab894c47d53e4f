package rules

import (
	"fmt"
	"testing"
)

func TestScratch(t *testing.T) {
	for _, s := range []string{"zz > 2", "z = 2", "z > 2 and exam > 1", "z > 2 &&", "(z > 2", "z > 'a'", "value - 2 > 1.0", "exam == 1.0",
		"true ? 'a' : 1", "z ? 1 : 2", "z >= 2,5", "z > 2 || exam", "\"abc", "z > 2\n && zs.exists(q, q > qq)", "Z > 2", "prevZ > 1.0", "chartlow > 1.0",
		"last(zs) > 1", "max(zs, 1)", "z.foo", "zs", "z", "'a'", "null", "if z > 2 then 1 else 0", "z > 2 AND exam > 1", "centile > 99.0 && times.count(t, t >= time - 5.0) >= 2",
		"1/0 > 0", "zs.count(1, true) > 1", "sqrt(z) > 1.0", "now() > 1", "z > 2 & exam > 1", "z > 2 ! exam", "mean(zs) > 1", "exists(zs, x, x > 2)"} {
		r, err := Compile(s, Bool)
		if err != nil {
			fmt.Printf("%q\n%v\n  SHORT: %s\n\n", s, err, err.(*CompileError).Short())
			continue
		}
		fmt.Printf("%q OK kind=%v fast=%v maxList=%d\n\n", s, r.Kind(), r.p.fast != nil, r.p.maxList)
	}
}
