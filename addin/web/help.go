package web

import (
	"bytes"
	"html/template"
	"sort"

	"veer/functions/cell"
	"veer/functions/screening"
)

// Help returns help.html: every catalogue function with its parameters,
// options, result shape and help text, and the error codes. Each function's
// section has the function name as its id, so functions.json links to it.
func Help(l cell.Listing) ([]byte, error) {
	type code struct{ Code, Meaning string }
	var codes []code
	for c, m := range l.Codes {
		codes = append(codes, code{string(c), m})
	}
	sort.Slice(codes, func(i, j int) bool { return codes[i].Code < codes[j].Code })
	var buf bytes.Buffer
	err := helpTmpl.Execute(&buf, struct {
		Functions []cell.FuncInfo
		Codes     []code
		Caution   string
	}{l.Functions, codes, screening.Caution})
	return buf.Bytes(), err
}

var helpTmpl = template.Must(template.New("help").Funcs(template.FuncMap{
	"shape": func(s cell.Shape) string {
		switch s {
		case cell.ShapeValue:
			return "one value"
		case cell.ShapeColumn:
			return "a value, or a column that spills down (one row per input row)"
		}
		return "a table that spills"
	},
}).Parse(`<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>veer cell functions</title>
<link rel="stylesheet" href="taskpane.css">
</head>
<body class="help">
<main>
<h1>veer cell functions</h1>
<p class="caution">veer is a screening aid. {{.Caution}}</p>
<p>Models are named by bare name (<code>sbp</code>: its latest version; cells update when it is refitted) or by handle (<code>sbp@v2</code>: that exact version). Options are text like <code>target=20; side=up</code> or a two-column range of names and values.</p>
<nav aria-label="Functions"><ul>{{range .Functions}}<li><a href="#{{.Name}}">{{.Name}}</a></li>{{end}}</ul></nav>
{{range .Functions}}
<section id="{{.Name}}">
<h2>{{.Name}}({{range $i, $p := .Params}}{{if $i}}, {{end}}{{if $p.Optional}}[{{$p.Name}}]{{else}}{{$p.Name}}{{end}}{{end}})</h2>
<p><strong>{{.Summary}}</strong></p>
{{if .Help}}<p>{{.Help}}</p>{{end}}
<dl>
{{range .Params}}<dt><code>{{.Name}}</code>{{if .Optional}} (optional){{end}}</dt><dd>{{.Help}}</dd>
{{end}}</dl>
<p>Result: {{shape .Result}}.{{if .Streaming}} The cell updates when a model it names by bare name gets a new version.{{end}}{{if .Writes}} Saves a model: needs the install token (run <code>veer token</code> and paste it into the pane's settings).{{end}}</p>
{{if .Options}}<details><summary>Options</summary><dl>
{{range .Options}}<dt><code>{{.Name}}</code>{{if .Choices}} ({{range $i, $c := .Choices}}{{if $i}}, {{end}}{{$c}}{{end}}){{end}}</dt><dd>{{.Help}}</dd>
{{end}}</dl></details>{{end}}
</section>
{{end}}
<section id="errors">
<h2>Error values</h2>
<p>The cell shows the error kind; for #VALUE! and #N/A its note carries the server's message. Spreadsheets cannot show #REF! or #NAME? from an add-in, so those arrive as #N/A with the original code at the start of the message. The pane lists recent messages of every kind.</p>
<dl>
{{range .Codes}}<dt><code>{{.Code}}</code></dt><dd>{{.Meaning}}</dd>
{{end}}</dl>
</section>
</main>
</body>
</html>
`))
