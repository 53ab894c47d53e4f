package cell

import (
	"context"
	"encoding/json"
	"fmt"
	"regexp"
	"strings"

	"veer/internal/version"
)

// Shape is the shape of a function's result.
type Shape string

// Result shapes.
const (
	ShapeValue  Shape = "value"  // a single cell
	ShapeColumn Shape = "column" // one column that spills down, one row per input row
	ShapeTable  Shape = "table"  // rows and columns that spill
)

// Type is the type of a parameter or of an option's value: one set for
// both, as the listing and the add-ins read them. Parameters take number,
// text, bool, range or any; options take number, text, bool or choice.
type Type string

// Types. A parameter's type is checked before a function runs, so an
// entry's Call only sees arguments of the declared type; an option's value
// is checked and converted when the options are parsed.
const (
	TypeNumber Type = "number" // a single number (a 1x1 range is accepted); an option: a finite number
	TypeText   Type = "text"   // a single text; a number is accepted and formatted as text
	TypeBool   Type = "bool"   // a single TRUE/FALSE (also 1/0, "yes"/"no", "on"/"off")
	TypeRange  Type = "range"  // a range of cells (a single cell is a 1x1 range); parameters only
	TypeAny    Type = "any"    // anything, including error values (options use this); parameters only
	TypeChoice Type = "choice" // one of the option's Choices, case-insensitive; options only
)

// forParam reports whether t is a valid parameter type.
func (t Type) forParam() bool {
	switch t {
	case TypeNumber, TypeText, TypeBool, TypeRange, TypeAny:
		return true
	}
	return false
}

// Param describes one parameter of a cell function.
type Param struct {
	Name     string `json:"name"`
	Type     Type   `json:"type"`
	Optional bool   `json:"optional,omitempty"`
	Help     string `json:"help"`
}

// Func is one cell function: its name in the VEER namespace, documentation,
// parameters, result shape and the Go function that computes it.
//
// Call receives arguments already checked against Params (count and scalar
// types); it reads them with the Args helpers, does its work and returns a
// result (see EncodeResult for the Go types allowed) or an error (an *Error,
// or any error, which becomes #VALUE!). Call must be deterministic: the same
// arguments and the same model versions give the same result, because the
// server caches results and a recalculating spreadsheet must not see numbers
// change. Call must return when ctx is done.
type Func struct {
	// Name is the spreadsheet name, e.g. "VEER.SCORE": "VEER." followed by
	// upper-case letters, digits, '.' or '_'.
	Name string
	// Summary is one line for function pickers; Help the full text.
	Summary, Help string
	// Params in call order; optional ones come last.
	Params []Param
	// Options lists the shared option names (see Options) the function's
	// options argument accepts. Every name must be declared in this package.
	Options []string
	// Result is the result shape.
	Result Shape
	// Streaming: a subscribed call naming a model by bare name is answered
	// again when that model gets a new version.
	Streaming bool
	// Writes: the function saves models and needs the install token.
	Writes bool
	// Slow: the function may take seconds; it reports Progress and gets the
	// longer time limit.
	Slow bool
	// Call computes the result.
	Call func(ctx context.Context, env Env, args Args) (any, error)
}

var (
	funcNameRE  = regexp.MustCompile(`^VEER\.[A-Z][A-Z0-9_]*(\.[A-Z0-9_]+)*$`)
	paramNameRE = regexp.MustCompile(`^[a-z][a-z0-9_]*$`)
)

// validate checks a Func for programmer errors and fills derived fields.
func (f *Func) validate() error {
	if !funcNameRE.MatchString(f.Name) {
		return fmt.Errorf("cell: function name %q must look like VEER.NAME (upper case letters, digits, '.', '_')", f.Name)
	}
	if f.Call == nil {
		return fmt.Errorf("cell: %s has no Call", f.Name)
	}
	switch f.Result {
	case ShapeValue, ShapeColumn, ShapeTable:
	default:
		return fmt.Errorf("cell: %s has result shape %q; want value, column or table", f.Name, f.Result)
	}
	if f.Summary == "" {
		return fmt.Errorf("cell: %s has no Summary", f.Name)
	}
	seen := map[string]bool{}
	optional := false
	for i, p := range f.Params {
		if !paramNameRE.MatchString(p.Name) {
			return fmt.Errorf("cell: %s parameter %d name %q must be lower case letters, digits, '_'", f.Name, i+1, p.Name)
		}
		if seen[p.Name] {
			return fmt.Errorf("cell: %s has two parameters named %q", f.Name, p.Name)
		}
		seen[p.Name] = true
		if !p.Type.forParam() {
			return fmt.Errorf("cell: %s parameter %q has type %q; want number, text, bool, range or any", f.Name, p.Name, p.Type)
		}
		if p.Optional {
			optional = true
		} else if optional {
			return fmt.Errorf("cell: %s required parameter %q follows an optional one", f.Name, p.Name)
		}
	}
	seenOpt := map[string]bool{}
	for _, o := range f.Options {
		if _, ok := LookupOption(o); !ok || strings.ToLower(o) != o {
			return fmt.Errorf("cell: %s accepts option %q, which is not declared in package cell (declare shared options once there so they are spelled the same everywhere)", f.Name, o)
		}
		if seenOpt[o] {
			return fmt.Errorf("cell: %s lists option %q twice", f.Name, o)
		}
		seenOpt[o] = true
	}
	return nil
}

// Catalogue is the ordered set of cell functions, fixed when it is built:
// nothing is added or changed later, so it is safe for concurrent use
// without locking. Lookup is by case-insensitive name.
type Catalogue struct {
	funcs  []*Func
	byName map[string]*Func
}

// NewCatalogue returns a catalogue holding funcs in order. It panics on an
// invalid entry or a duplicate name (programmer errors: the catalogue is
// fixed at build time).
func NewCatalogue(funcs ...Func) *Catalogue {
	c := &Catalogue{byName: make(map[string]*Func, len(funcs))}
	for _, f := range funcs {
		if err := f.validate(); err != nil {
			panic(err)
		}
		if _, dup := c.byName[f.Name]; dup {
			panic(fmt.Sprintf("cell: function %s is listed twice", f.Name))
		}
		fp := &f
		fp.Params = append([]Param(nil), f.Params...)
		fp.Options = append([]string(nil), f.Options...)
		c.funcs = append(c.funcs, fp)
		c.byName[f.Name] = fp
	}
	return c
}

// Lookup finds a function by name, ignoring case. The returned Func must not
// be modified.
func (c *Catalogue) Lookup(name string) (*Func, bool) {
	f, ok := c.byName[strings.ToUpper(name)]
	return f, ok
}

// Funcs returns the functions in catalogue order.
func (c *Catalogue) Funcs() []*Func { return append([]*Func(nil), c.funcs...) }

// Len returns the number of functions.
func (c *Catalogue) Len() int { return len(c.funcs) }

// FuncInfo is the JSON description of one function in the listing.
type FuncInfo struct {
	Name      string       `json:"name"`
	Summary   string       `json:"summary"`
	Help      string       `json:"help,omitempty"`
	Params    []Param      `json:"params"`
	Options   []OptionInfo `json:"options,omitempty"`
	Result    Shape        `json:"result"`
	Streaming bool         `json:"streaming"`
	Writes    bool         `json:"writes"`
	Slow      bool         `json:"slow"`
}

// Listing is the JSON document served at GET /v1/functions.
type Listing struct {
	// Version is veer's version (internal/version.String).
	Version   string     `json:"version"`
	Functions []FuncInfo `json:"functions"`
	// Codes lists the error codes cells may show and what they mean.
	Codes map[Code]string `json:"codes"`
}

// Info returns the function's listing entry.
func (f *Func) Info() FuncInfo {
	fi := FuncInfo{
		Name: f.Name, Summary: f.Summary, Help: f.Help,
		Params: append([]Param{}, f.Params...), Result: f.Result,
		Streaming: f.Streaming, Writes: f.Writes, Slow: f.Slow,
	}
	for _, name := range f.Options {
		o, _ := LookupOption(name)
		fi.Options = append(fi.Options, o.info())
	}
	return fi
}

// Listing returns the catalogue's listing.
func (c *Catalogue) Listing() Listing {
	l := Listing{Version: version.String(), Functions: []FuncInfo{}, Codes: CodeMeanings()}
	for _, f := range c.Funcs() {
		l.Functions = append(l.Functions, f.Info())
	}
	return l
}

// MarshalJSON encodes the listing.
func (c *Catalogue) MarshalJSON() ([]byte, error) { return json.Marshal(c.Listing()) }

// ArgName names argument i (0-based) of f for messages: "'values'" or, past
// the declared parameters, "argument 7".
func (f *Func) ArgName(i int) string {
	if i >= 0 && i < len(f.Params) {
		return "'" + f.Params[i].Name + "'"
	}
	return fmt.Sprintf("argument %d", i+1)
}

// Arity returns the numbers of required and of all parameters.
func (f *Func) Arity() (required, total int) {
	for _, p := range f.Params {
		if !p.Optional {
			required++
		}
	}
	return required, len(f.Params)
}
