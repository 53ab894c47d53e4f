package rules

import (
	"fmt"
	"testing"
	"time"
)

func TestScratch2(t *testing.T) {
	ex := syntheticExams(t, 3, 1000, 1)
	r, err := Compile(`zs.all(a, zs.all(b, zs.all(c, a + b + c > -100.0)))`, Bool)
	fmt.Println(err, r.p.fast != nil)
	t0 := time.Now()
	_, err = r.Eval(&ex[999])
	fmt.Println(time.Since(t0), err)
	out := make([]Value, len(ex))
	t0 = time.Now()
	err = EvalAll(r, ex, out)
	fmt.Println(time.Since(t0), err)
	c := NewCache(10, Limits{MaxCost: 1 << 62, MaxTime: 20 * time.Millisecond})
	r, err = c.Compile(`zs.all(a, zs.all(b, zs.all(c, a + b + c > -100.0)))`, Bool)
	t0 = time.Now()
	err = EvalAll(r, ex, out)
	fmt.Println(time.Since(t0), err)
	t0 = time.Now()
	_, err = r.Eval(&ex[999])
	fmt.Println(time.Since(t0), err)
	r, _ = Compile(`values[exam - 2] > 0.0`, Bool)
	err = EvalAll(r, ex, out)
	fmt.Println(err)
	r, _ = Compile(`1 / (exam - 1) > 0`, Bool)
	_, err = r.Eval(&ex[0])
	fmt.Println(err)
}
