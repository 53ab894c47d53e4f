package web

import (
	"bytes"
	"encoding/json"
	"fmt"
	"strings"

	"veer/functions/cell"
	"veer/functions/screening"
	"veer/internal/symbols"
)

// Namespace is the prefix the host shows before every function name
// (=VEER.ZSCORE). The manifest declares it; the metadata names leave it out.
const Namespace = "VEER"

// FunctionID returns the host's id and display name (without the namespace)
// of a catalogue function: "VEER.ZSCORE" gives "ZSCORE". The host allows
// only letters, digits and periods in ids, so an underscore becomes a
// period; Metadata reports an error if two ids collide.
func FunctionID(name string) string {
	short := strings.TrimPrefix(name, Namespace+".")
	return strings.ReplaceAll(strings.ToUpper(short), "_", ".")
}

// The custom-functions metadata document, in the shape the host platform
// documents for hand-written metadata ("functions.json"): per function an
// id, a name, a description, a help URL, parameters with type,
// dimensionality and optional, the result dimensionality, and options
// (stream for functions whose cells update, cancelable for the others).
type (
	cfDocument struct {
		// AllowErrorForDataTypeAny lets error cells reach parameters of
		// type any, so the server sees them (and names the row).
		AllowErrorForDataTypeAny bool         `json:"allowErrorForDataTypeAny"`
		Functions                []cfFunction `json:"functions"`
	}
	cfFunction struct {
		ID          string     `json:"id"`
		Name        string     `json:"name"`
		Description string     `json:"description"`
		HelpURL     string     `json:"helpUrl,omitempty"`
		Result      cfResult   `json:"result"`
		Parameters  []cfParam  `json:"parameters"`
		Options     *cfOptions `json:"options,omitempty"`
	}
	cfParam struct {
		Name           string `json:"name"`
		Description    string `json:"description"`
		Type           string `json:"type"`
		Dimensionality string `json:"dimensionality"`
		Optional       bool   `json:"optional,omitempty"`
	}
	cfResult struct {
		Type           string `json:"type"`
		Dimensionality string `json:"dimensionality"`
	}
	// The platform does not allow stream and cancelable together; a
	// streaming invocation can be cancelled anyway.
	cfOptions struct {
		Stream     bool `json:"stream,omitempty"`
		Cancelable bool `json:"cancelable,omitempty"`
	}
)

// paramShape maps a catalogue parameter type to the host's type and
// dimensionality. Ranges and "any" (options: text or a two-column range)
// arrive as 2-D arrays; the runtime turns a 1x1 "any" back into its value.
func paramShape(t cell.Type) (typ, dim string) {
	switch t {
	case cell.TypeNumber:
		return "number", "scalar"
	case cell.TypeText:
		return "string", "scalar"
	case cell.TypeBool:
		return "boolean", "scalar"
	case cell.TypeRange, cell.TypeAny:
		return "any", "matrix"
	}
	return "any", "scalar"
}

// resultShape maps a catalogue result shape to the host's dimensionality.
func resultShape(s cell.Shape) string {
	if s == cell.ShapeValue {
		return "scalar"
	}
	return "matrix"
}

// Metadata returns the custom-functions metadata (functions.json) for the
// catalogue listing. helpBase, if not empty, is the URL of the help page
// (each function links to its anchor).
func Metadata(l cell.Listing, helpBase string) ([]byte, error) {
	doc := cfDocument{AllowErrorForDataTypeAny: true, Functions: []cfFunction{}}
	seen := map[string]string{}
	for _, f := range l.Functions {
		if !strings.HasPrefix(f.Name, Namespace+".") {
			return nil, fmt.Errorf("web: function %s is not in the %s namespace", f.Name, Namespace)
		}
		id := FunctionID(f.Name)
		if other, dup := seen[id]; dup {
			return nil, fmt.Errorf("web: functions %s and %s both get the host id %s", other, f.Name, id)
		}
		seen[id] = f.Name
		cf := cfFunction{
			ID: id, Name: id, Description: f.Summary,
			Result:     cfResult{Type: "any", Dimensionality: resultShape(f.Result)},
			Parameters: []cfParam{},
		}
		if helpBase != "" {
			cf.HelpURL = helpBase + "#" + f.Name
		}
		for _, p := range f.Params {
			typ, dim := paramShape(p.Type)
			cf.Parameters = append(cf.Parameters, cfParam{Name: p.Name, Description: p.Help, Type: typ, Dimensionality: dim, Optional: p.Optional})
		}
		if f.Streaming {
			cf.Options = &cfOptions{Stream: true}
		} else {
			cf.Options = &cfOptions{Cancelable: true}
		}
		doc.Functions = append(doc.Functions, cf)
	}
	return marshalIndent(doc)
}

// runtimeFunc is one entry of the runtime's function table (catalog.js):
// what veer.js needs to forward a call.
type runtimeFunc struct {
	ID        string         `json:"id"`
	Name      string         `json:"name"`
	Params    []runtimeParam `json:"params"`
	Result    cell.Shape     `json:"result"`
	Streaming bool           `json:"streaming"`
	Writes    bool           `json:"writes"`
	Slow      bool           `json:"slow"`
}

type runtimeParam struct {
	Name     string    `json:"name"`
	Type     cell.Type `json:"type"` // the catalogue's type: number, text, bool, range or any
	Optional bool      `json:"optional"`
}

// CatalogJS returns catalog.js, a JavaScript module whose default export is
// the function table veer.js imports to register every function with the
// host at load time (the host wants the registrations before it calls
// anything).
func CatalogJS(l cell.Listing) ([]byte, error) {
	type table struct {
		Namespace string               `json:"namespace"`
		Functions []runtimeFunc        `json:"functions"`
		Codes     map[cell.Code]string `json:"codes"`
		Caution   string               `json:"caution"` // screening.Caution, for the task pane's texts
		// Symbols is the one key of chart marks (symbols.Legend), which
		// the task pane draws with, as the report does.
		Symbols symbols.Key `json:"symbols"`
	}
	t := table{Namespace: Namespace, Functions: []runtimeFunc{}, Codes: l.Codes, Caution: screening.Caution, Symbols: symbols.Legend}
	for _, f := range l.Functions {
		rf := runtimeFunc{ID: FunctionID(f.Name), Name: f.Name, Result: f.Result, Streaming: f.Streaming, Writes: f.Writes, Slow: f.Slow, Params: []runtimeParam{}}
		for _, p := range f.Params {
			rf.Params = append(rf.Params, runtimeParam{Name: p.Name, Type: p.Type, Optional: p.Optional})
		}
		t.Functions = append(t.Functions, rf)
	}
	// encoding/json escapes <, > and & (and U+2028/9), so the JSON is safe
	// inside a script.
	b, err := json.Marshal(t)
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	buf.WriteString("// veer's function table, generated from its function catalogue by the veer\n// server; do not edit. veer.js registers these functions with the host.\nexport default ")
	buf.Write(b)
	buf.WriteString(";\n")
	return buf.Bytes(), nil
}

func marshalIndent(v any) ([]byte, error) {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}
