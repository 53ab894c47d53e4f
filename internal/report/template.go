package report

import "html/template"

// pageCSS styles the report on screen and on A4 paper. Colours print
// (print-color-adjust), each marker starts on a new page, and figures,
// panels and table rows are kept whole across page breaks.
const pageCSS = `
@page { size: A4; margin: 14mm 12mm 16mm 12mm; }
* { box-sizing: border-box; }
html { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
body { font-family: "DejaVu Sans", "Helvetica Neue", Helvetica, Arial, sans-serif; font-size: 10pt; line-height: 1.4;
  color: #111; background: #fff; max-width: 186mm; margin: 0 auto; padding: 6mm 0; }
h1 { font-size: 18pt; margin: 0 0 2mm 0; }
h2 { font-size: 14pt; margin: 0 0 3mm 0; padding-bottom: 1mm; border-bottom: 2px solid #0072B2; }
h3 { font-size: 11.5pt; margin: 6mm 0 2mm 0; break-after: avoid; page-break-after: avoid; }
p { margin: 0 0 2mm 0; }
.meta { color: #444; margin-bottom: 4mm; }
.caution { border: 2.5px solid #D55E00; background: #fff3ea; padding: 3mm 4mm; margin: 4mm 0; font-weight: 600;
  break-inside: avoid; page-break-inside: avoid; }
.caution strong { color: #9a3a00; text-transform: uppercase; letter-spacing: 0.03em; }
nav ol { margin: 1mm 0 0 0; }
section.marker { break-before: page; page-break-before: always; }
figure { margin: 2mm 0 4mm 0; break-inside: avoid; page-break-inside: avoid; }
figcaption { font-size: 8.8pt; color: #333; margin-top: 1mm; }
svg.chart, svg.legend { display: block; width: 100%; height: auto; }
table { border-collapse: collapse; width: 100%; font-size: 8.8pt; margin: 1mm 0 3mm 0; }
th, td { border: 1px solid #bbb; padding: 1mm 1.6mm; text-align: left; vertical-align: top; }
th { background: #eef3f8; }
thead { display: table-header-group; }
tr { break-inside: avoid; page-break-inside: avoid; }
table.kv th { width: 48%; font-weight: normal; background: #f5f7fa; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
tr.flagged td { background: #fff3ea; }
.diag { display: flex; gap: 4mm; flex-wrap: wrap; }
.diag > div { flex: 1 1 85mm; break-inside: avoid; page-break-inside: avoid; }
.warn { color: #8a3b00; }
.panel { border: 1px solid #ccc; padding: 2mm; margin: 0 0 3mm 0; break-inside: avoid; page-break-inside: avoid; }
.panel h4 { margin: 0 0 1mm 0; font-size: 10pt; }
.panel .pair { display: flex; gap: 2mm; }
.panel .pair > svg { flex: 1 1 50%; width: 50%; height: auto; display: block; }
.panel p { font-size: 8.8pt; color: #333; margin: 1mm 0 0 0; }
code { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: 8.8pt; background: #f3f3f3; padding: 0 1mm; }
footer { margin-top: 8mm; }
.pair { display: flex; gap: 2mm; }
.pair > svg.tradeoff { flex: 1 1 50%; width: 50%; height: auto; display: block; }
table.evaluation tr.other td { background: #f7f7f7; }
p.note { font-size: 8.8pt; color: #333; }
@media print {
  body { padding: 0; max-width: none; }
  a { color: inherit; text-decoration: none; }
}
`

var pageTemplate = template.Must(template.New("report").Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>` + pageCSS + `</style>
</head>
<body>
<header>
<h1>{{.Title}}</h1>
<p class="meta">Generated {{.Generated}}{{if .Source}} · exams from {{.Source}}{{end}} · made with veer{{if .Version}} {{.Version}}{{end}}</p>
<div class="caution" role="note" id="caution"><strong>Screening aid — not a diagnosis.</strong> {{.Caution}}</div>
</header>
<nav aria-label="Contents">
<h3>Contents</h3>
<ol>
{{range .Sections}}<li><a href="#{{.ID}}">{{.Heading}}</a>: {{.FlaggedCount}} of {{.WorkerCount}} workers flagged</li>
{{end}}</ol>
</nav>
<h3>How to read this report</h3>
<p>For each marker, the report shows the reference curves of healthy workers by age and group, how well the reference model fits,
the control limit and what it means, one panel per flagged worker and a table of flagged workers.
A worker is flagged when the chart statistic of the worker's whole history of exams passes the limit (a chart signal), or when an alert
rule of severity high fires; every count of flagged workers in this report, on the terminal and in the workbook's summary sheet counts
exactly these. Rules of other severities are listed where they fired but do not flag.
The chart compares each reading with healthy workers of the same age and group, so it can notice a drift long before a single
reading crosses a fixed cut-off, and it can also flag healthy workers by chance at the agreed rate.</p>
{{range .Sections}}
<section class="marker" id="{{.ID}}">
<h2>{{.Heading}}</h2>
<h3>Summary</h3>
<table class="kv"><tbody>
{{range .Stats}}<tr><th scope="row">{{.Label}}</th><td>{{.Value}}</td></tr>
{{end}}</tbody></table>
<h3>The chart and its limit</h3>
<p>{{.ChartText}}</p>
{{range .LimitText}}<p>{{.}}</p>
{{end}}<table class="kv"><tbody>
{{range .LimitRows}}<tr><th scope="row">{{.Label}}</th><td>{{.Value}}</td></tr>
{{end}}</tbody></table>
{{if .RuleRows}}<h3>Alert rules</h3>
<table><thead><tr><th>rule</th><th>severity</th><th>expression</th></tr></thead><tbody>
{{range .RuleRows}}<tr><td>{{.Name}}</td><td>{{.Severity}}</td><td><code>{{.Expr}}</code></td></tr>
{{end}}</tbody></table>{{end}}
<h3>Reference curves</h3>
{{range .RefFigures}}<figure>{{.SVG}}<figcaption>{{.Caption}}</figcaption></figure>
{{end}}
{{if .Assumptions}}<h3>Assumptions to review</h3>
<ul class="warn">
{{range .Assumptions}}<li>{{.}}</li>
{{end}}</ul>{{end}}
<h3>Model diagnostics</h3>
<div class="diag">
{{range .Diag}}<div><table class="kv"><thead><tr><th colspan="2">group {{.Group}}</th></tr></thead><tbody>
{{range .Rows}}<tr><th scope="row">{{.Label}}</th><td>{{.Value}}</td></tr>
{{end}}</tbody></table></div>
{{end}}</div>
<table class="kv"><thead><tr><th colspan="2">whole model</th></tr></thead><tbody>
{{range .ModelDiag}}<tr><th scope="row">{{.Label}}</th><td>{{.Value}}</td></tr>
{{end}}</tbody></table>
{{if .Warnings}}<p><strong>Notes for the reviewer:</strong></p><ul class="warn">
{{range .Warnings}}<li>{{.}}</li>
{{end}}</ul>{{end}}
<h3>Flagged workers</h3>
<p>{{.PanelNote}} Left: the worker's readings against the reference band of the worker's group{{if .Expected}}, with the reading the serial
model expected from the worker's own earlier exams (the chart adds up how far each reading lies from that expectation, so a reading near
the median can move the chart up after low ones){{end}}. Right: the chart statistic against the limit.
{{$.Signal}}</p>
{{if .Panels}}<figure class="key">{{.Legend}}</figure>{{end}}
{{range .Panels}}<div class="panel" id="{{.Anchor}}">
<h4>{{.N}}. Worker {{.Worker}}</h4>
<div class="pair">{{.Readings}}{{.Statistic}}</div>
<p>{{.Caption}}</p>
</div>
{{end}}
<h3>Summary table</h3>
{{if .Summary}}<table class="summary"><thead><tr><th>worker</th><th>group</th><th class="num">exams</th><th class="num">first exam (age)</th>
<th class="num">last exam (age)</th><th class="num">first chart signal (age)</th><th class="num">chart ÷ limit at the latest exam</th><th>rules fired</th><th class="num">panel</th></tr></thead><tbody>
{{range .Summary}}<tr{{if .Flagged}} class="flagged"{{end}}><td>{{.Worker}}</td><td>{{.Group}}</td><td class="num">{{.Exams}}</td>
<td class="num">{{.FirstExam}}</td><td class="num">{{.LastExam}}</td><td class="num">{{.FirstSignal}}</td><td class="num">{{.Ratio}}</td><td>{{.Rules}}</td>
<td class="num">{{if .Anchor}}<a href="#{{.Anchor}}">{{.Panel}}</a>{{else}}{{.Panel}}{{end}}</td></tr>
{{end}}</tbody></table>{{else}}<p>No worker to list.</p>{{end}}
{{if .SummaryNote}}<p>{{.SummaryNote}}</p>{{end}}
{{with .Evaluation}}<h3 id="{{.ID}}">Evaluation on later diagnoses</h3>
{{range .Intro}}<p>{{.}}</p>
{{end}}<figure>{{.Figure.SVG}}<figcaption>{{.Figure.Caption}}</figcaption></figure>
<table class="evaluation"><thead><tr><th>method</th><th class="num">target (years)</th><th class="num">limit</th>
<th class="num">diagnosed workers flagged before the diagnosis</th><th class="num">95% interval</th><th class="num">median lead, all diagnosed</th>
<th class="num">median lead, flagged</th><th class="num">false signals per 100 worker-years</th><th class="num">95% interval</th>
<th class="num">never-diagnosed workers flagged</th></tr></thead><tbody>
{{range .Rows}}<tr{{if not .Chart}} class="other"{{end}}><td>{{.Method}}</td><td class="num">{{.Target}}</td><td class="num">{{.Limit}}</td>
<td class="num">{{.Flagged}}</td><td class="num">{{.Interval}}</td><td class="num">{{.MedianLead}}</td><td class="num">{{.MedianFlagged}}</td>
<td class="num">{{.False}}</td><td class="num">{{.FalseInterval}}</td><td class="num">{{.Healthy}}</td></tr>
{{end}}</tbody></table>
{{range .Notes}}<p class="note">{{.}}</p>
{{end}}<div class="caution" role="note"><strong>Screening aid — not a diagnosis.</strong> {{.Caution}} These figures describe how a screening aid would have prompted reviews on past records; they are not a measure of diagnostic accuracy.</div>
{{end}}</section>
{{end}}
<footer>
<div class="caution" role="note"><strong>Screening aid — not a diagnosis.</strong> {{.Caution}}</div>
</footer>
</body>
</html>
`))
