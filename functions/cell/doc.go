// Package cell is the one source of truth for veer's spreadsheet cell
// functions: the catalogue of functions (name, parameters, help, result
// shape, Go function), the coercion of spreadsheet cell values into Go
// values, the shared option names, and the spreadsheet error kinds.
//
// A cell call flows: add-in → server → Catalogue.Lookup → Bind (argument
// count and scalar types) → Func.Call, which reads its arguments with the
// Args helpers (Number, Text, Numbers with a Policy for blank and text
// cells, Options, ...) and returns a result or an *Error → EncodeResult →
// cell.
//
// Cell values arrive as spreadsheets send them, in JSON: numbers, text,
// booleans, null for blank, {"error": "#N/A"} for error values, and ranges as
// arrays of rows of cells (a flat array is one column). Adding a function
// touches one place: a Func literal registered in the catalogue; the server's
// dispatch, its GET /v1/functions listing and the add-ins' metadata all come
// from it.
//
// veer is a screening aid: a signal computed by a cell function prompts
// review by a licensed clinician under local occupational-health rules; it is
// not a diagnosis. Help texts of signalling functions say so.
package cell
