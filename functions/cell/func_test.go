package cell

import (
	"context"
	"encoding/json"
	"strings"
	"testing"
)

func nop(context.Context, Env, Args) (any, error) { return nil, nil }

func validFunc() Func {
	return Func{
		Name: "VEER.TEST.F", Summary: "test", Result: ShapeValue, Call: nop,
		Params: []Param{
			{Name: "x", Type: TypeNumber, Help: "a number"},
			{Name: "options", Type: TypeAny, Optional: true, Help: "options"},
		},
		Options: []string{OptionSide, OptionAllowance},
	}
}

func TestNewCataloguePanics(t *testing.T) {
	tests := []struct {
		name   string
		modify func(*Func)
		part   string
	}{
		{"lower-case name", func(f *Func) { f.Name = "veer.test" }, "must look like"},
		{"other namespace", func(f *Func) { f.Name = "FOO.BAR" }, "must look like"},
		{"no call", func(f *Func) { f.Call = nil }, "no Call"},
		{"bad shape", func(f *Func) { f.Result = "matrix" }, "result shape"},
		{"no summary", func(f *Func) { f.Summary = "" }, "no Summary"},
		{"bad param name", func(f *Func) { f.Params[0].Name = "X Y" }, "parameter 1 name"},
		{"dup param", func(f *Func) { f.Params[1].Name = "x" }, "two parameters"},
		{"bad type", func(f *Func) { f.Params[0].Type = "date" }, "has type"},
		{"required after optional", func(f *Func) { f.Params[0].Optional = true; f.Params[1].Optional = false }, "follows an optional"},
		{"undeclared option", func(f *Func) { f.Options = []string{"alowance"} }, "not declared"},
		{"upper-case option", func(f *Func) { f.Options = []string{"Side"} }, "not declared"},
		{"dup option", func(f *Func) { f.Options = []string{"side", "side"} }, "twice"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			f := validFunc()
			f.Params = append([]Param(nil), f.Params...)
			tt.modify(&f)
			defer func() {
				r := recover()
				if r == nil {
					t.Fatal("NewCatalogue did not panic")
				}
				if !strings.Contains(toString(r), tt.part) {
					t.Errorf("panic %q does not mention %q", r, tt.part)
				}
			}()
			NewCatalogue(f)
		})
	}
	t.Run("duplicate name", func(t *testing.T) {
		defer func() {
			if r := recover(); r == nil || !strings.Contains(toString(r), "twice") {
				t.Fatalf("panic = %v", r)
			}
		}()
		NewCatalogue(validFunc(), validFunc())
	})
}

func toString(r any) string {
	if e, ok := r.(error); ok {
		return e.Error()
	}
	s, _ := r.(string)
	return s
}

func TestCatalogueLookupAndListing(t *testing.T) {
	f2 := validFunc()
	f2.Name = "VEER.TEST.G"
	f2.Writes = true
	c := NewCatalogue(validFunc(), f2)
	for _, name := range []string{"VEER.TEST.F", "veer.test.f", "Veer.Test.F"} {
		if f, ok := c.Lookup(name); !ok || f.Name != "VEER.TEST.F" {
			t.Errorf("Lookup(%q) = %v, %v", name, f, ok)
		}
	}
	if _, ok := c.Lookup("VEER.TEST.H"); ok {
		t.Error("Lookup of an unknown name succeeded")
	}
	if got := c.Funcs(); len(got) != 2 || got[0].Name != "VEER.TEST.F" || got[1].Name != "VEER.TEST.G" {
		t.Errorf("Funcs order wrong: %v", got)
	}
	b, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	var l struct {
		Functions []struct {
			Name    string
			Params  []Param
			Options []OptionInfo
			Writes  bool
			Result  string
		}
		Codes map[string]string
	}
	if err := json.Unmarshal(b, &l); err != nil {
		t.Fatal(err)
	}
	if len(l.Functions) != 2 || l.Functions[1].Name != "VEER.TEST.G" || !l.Functions[1].Writes {
		t.Fatalf("listing = %s", b)
	}
	if p := l.Functions[0].Params; len(p) != 2 || p[0].Name != "x" || p[0].Type != TypeNumber || !p[1].Optional {
		t.Errorf("params = %+v", p)
	}
	if o := l.Functions[0].Options; len(o) != 2 || o[0].Name != "side" || strings.Join(o[0].Choices, ",") != "up,down,both" {
		t.Errorf("options = %+v", o)
	}
	if l.Functions[0].Result != "value" || l.Codes[string(CodeNA)] == "" {
		t.Errorf("listing = %s", b)
	}
}

func TestSharedOptionsAreValid(t *testing.T) {
	seen := map[string]bool{}
	for _, o := range SharedOptions() {
		if seen[o.Name] || o.Name != strings.ToLower(o.Name) || o.Help == "" {
			t.Errorf("option %+v: duplicate, not lower case or no help", o)
		}
		seen[o.Name] = true
		switch o.Type {
		case TypeChoice:
			if len(o.Choices) < 2 {
				t.Errorf("choice option %s has %d choices", o.Name, len(o.Choices))
			}
		case TypeNumber, TypeText, TypeBool:
		default:
			t.Errorf("option %s has type %q", o.Name, o.Type)
		}
	}
	for _, name := range []string{OptionAllowance, OptionSide, OptionChart, OptionLambda, OptionSerial, OptionTarget, OptionMethod} {
		if !seen[name] {
			t.Errorf("shared option %q is not declared", name)
		}
	}
}

func TestSplitHandle(t *testing.T) {
	tests := []struct {
		in   string
		name string
		ver  int
		ok   bool
	}{
		{"bp", "bp", 0, true},
		{"bp@v3", "bp", 3, true},
		{"BP@V12", "BP", 12, true},
		{"bp@3", "bp", 0, false},
		{"bp@v0", "bp", 0, false},
		{"bp@v", "bp", 0, false},
		{"bp@vx", "bp", 0, false},
		{"bp@v99999999999", "bp", 0, false},
	}
	for _, tt := range tests {
		name, ver, ok := SplitHandle(tt.in)
		if name != tt.name || ver != tt.ver || ok != tt.ok {
			t.Errorf("SplitHandle(%q) = %q, %d, %v; want %q, %d, %v", tt.in, name, ver, ok, tt.name, tt.ver, tt.ok)
		}
	}
}

func TestMemoryEnv(t *testing.T) {
	var env MemoryEnv
	h1, _ := env.SaveModel("BP", []byte("a"))
	h1again, _ := env.SaveModel("bp", []byte("a"))
	h2, _ := env.SaveModel("bp", []byte("b"))
	if h1 != "BP@v1" || h1again != h1 || h2 != "BP@v2" {
		t.Fatalf("handles %s %s %s", h1, h1again, h2)
	}
	m, err := env.Model("bp")
	if err != nil || string(m.Doc) != "b" || m.Version != 2 {
		t.Fatalf("latest = %+v, %v", m, err)
	}
	m, err = env.Model("bp@v1")
	if err != nil || string(m.Doc) != "a" {
		t.Fatalf("v1 = %+v, %v", m, err)
	}
	for _, ref := range []string{"bp@v3", "nope", "bp@x"} {
		if _, err := env.Model(ref); AsError(err).Code != CodeRef {
			t.Errorf("Model(%q) error = %v; want #REF!", ref, err)
		}
	}
	if strings.Join(env.Read, ",") != "bp,nope" {
		t.Errorf("Read = %v; want the bare names bp, nope", env.Read)
	}
}
