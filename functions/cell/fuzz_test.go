package cell

import (
	"encoding/json"
	"math"
	"reflect"
	"strings"
	"testing"

	"veer/internal/numeric"
)

// FuzzValueJSON: the reference decoder never panics, accepts only valid
// JSON, and what it accepts survives a MarshalJSON round trip.
func FuzzValueJSON(f *testing.F) {
	for _, s := range []string{`1`, `"a"`, `null`, `true`, `{"error":"#N/A"}`, `[1,2]`, `[[1,"x"],[null,false]]`, `[[1],[2,3]]`, `[1,[2]]`, `{"error":"#N/A","message":"m"}`, `"\ud800"`, `1e400`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		var v Value
		if err := json.Unmarshal(data, &v); err != nil {
			return
		}
		if !json.Valid(data) {
			t.Fatalf("accepted invalid JSON %q", data)
		}
		b, err := json.Marshal(v)
		if err != nil {
			t.Fatal(err)
		}
		var back Value
		if err := json.Unmarshal(b, &back); err != nil {
			t.Fatalf("re-decoding %s: %v", b, err)
		}
		if !reflect.DeepEqual(back.Rows(), v.Rows()) || back.IsScalar() != v.IsScalar() {
			t.Fatalf("round trip of %q: %v became %v", data, v.Rows(), back.Rows())
		}
	})
}

// cellsFromBytes builds a column of cells of every kind from fuzz bytes.
func cellsFromBytes(data []byte) []Cell {
	var cells []Cell
	for i := 0; i+1 < len(data); i += 2 {
		k, x := data[i]%6, data[i+1]
		switch k {
		case 0:
			cells = append(cells, Cell{})
		case 1:
			cells = append(cells, NumberCell(float64(x)-100))
		case 2:
			cells = append(cells, TextCell(string(rune(x))))
		case 3:
			cells = append(cells, BoolCell(x%2 == 0))
		case 4:
			cells = append(cells, ErrorCell([]string{"#N/A", "#VALUE!", "#NUM!", "#SPILL!"}[x%4]))
		case 5:
			cells = append(cells, NumberCell(math.Float64frombits(uint64(x)*0x9E3779B97F4A7C15)))
		}
	}
	return cells
}

// FuzzCoercion: the column helpers never panic and keep their documented
// invariants under every policy.
func FuzzCoercion(f *testing.F) {
	f.Add([]byte{1, 5, 0, 0, 2, 'a', 3, 1, 4, 0})
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		cells := cellsFromBytes(data)
		fn := argFunc()
		a := NewArgs(fn, ColumnValue(cells))
		count := func(kinds ...Kind) int {
			n := 0
			for _, c := range cells {
				for _, k := range kinds {
					if c.Kind == k {
						n++
					}
				}
			}
			return n
		}
		for _, p := range []Policy{PolicyError, PolicyMissing, PolicySkip} {
			nums, err := a.Numbers(0, p)
			if err != nil {
				e := AsError(err)
				if e.Code == "" || !strings.Contains(e.Message, "'values'") {
					t.Fatalf("policy %d: error %v does not name the argument", p, err)
				}
				continue
			}
			switch p {
			case PolicyError:
				if len(nums) != len(cells) || count(KindNumber) != len(cells) {
					t.Fatalf("strict accepted non-numbers: %v", cells)
				}
			case PolicyMissing:
				if len(nums) != len(cells) || count(KindText, KindBool) != 0 {
					t.Fatalf("missing policy changed the length or accepted text: %v", cells)
				}
			case PolicySkip:
				if len(nums) != count(KindNumber) {
					t.Fatalf("skip kept %d of %d numbers", len(nums), count(KindNumber))
				}
			}
			if _, err := a.Texts(0, p); err != nil && AsError(err).Code == "" {
				t.Fatal("Texts error without code")
			}
		}
		// The same cells as a two-column options range never panic.
		if len(cells) >= 2 {
			rows := make([][]Cell, 0, len(cells)/2)
			for i := 0; i+1 < len(cells); i += 2 {
				rows = append(rows, []Cell{cells[i], cells[i+1]})
			}
			v, _ := RangeValue(rows)
			ParseOptions("VEER.F", []string{OptionSide, OptionLambda, OptionSerial, OptionGroup}, v, "'options'")
		}
		EncodeResult(nil, "", cells)
	})
}

// FuzzOptionsText: option text never panics; accepted names are allowed ones
// and every value has its declared type.
func FuzzOptionsText(f *testing.F) {
	for _, s := range []string{"side=up; lambda=0.2", "serial=on\nside=both", "x=1", "side", ";;=;", "lambda=1e400"} {
		f.Add(s)
	}
	allowed := []string{OptionSide, OptionLambda, OptionSerial, OptionGroup}
	f.Fuzz(func(t *testing.T, s string) {
		o, err := ParseOptions("VEER.F", allowed, ScalarValue(TextCell(s)), "'options'")
		if err != nil {
			if AsError(err).Code == "" {
				t.Fatal("error without code")
			}
			return
		}
		for _, n := range o.Names() {
			decl, ok := LookupOption(n)
			if !ok {
				t.Fatalf("accepted unknown option %q", n)
			}
			c := o.vals[n]
			switch decl.Type {
			case TypeNumber:
				if c.Kind != KindNumber || !numeric.Finite(c.Num) {
					t.Fatalf("option %s = %v", n, c)
				}
			case TypeBool:
				if c.Kind != KindBool {
					t.Fatalf("option %s = %v", n, c)
				}
			case TypeChoice, TypeText:
				if c.Kind != KindText {
					t.Fatalf("option %s = %v", n, c)
				}
			}
		}
	})
}
