package report

import "html/template"

// page is the report's HTML: no scripts, no external resources, so the
// file can be mailed or archived alone.
var page = template.Must(template.New("report").Funcs(template.FuncMap{
	"pct": func(f float64) float64 { return 100 * f },
}).Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>tpcscan report: {{.Title}}</title>
<style>
body { font-family: "Liberation Sans", "Helvetica Neue", Arial, sans-serif; color: #1d2330; background: #fbfaf6; margin: 0; }
main { max-width: 1100px; margin: 0 auto; padding: 24px 32px 64px; }
h1 { font-size: 26px; margin: 8px 0 2px; }
h2 { font-size: 20px; margin: 40px 0 8px; border-bottom: 2px solid #1f3b73; padding-bottom: 4px; }
.sub { color: #555f52; margin: 0 0 20px; }
table.kv { border-collapse: collapse; margin: 12px 0; }
table.kv td { padding: 4px 16px 4px 0; border-bottom: 1px solid #e2e0d8; vertical-align: top; }
table.kv td:first-child { color: #555f52; }
table.num { border-collapse: collapse; margin: 12px 0; font-size: 14px; }
table.num th, table.num td { padding: 3px 10px; border-bottom: 1px solid #e2e0d8; text-align: right; white-space: nowrap; }
table.num th { border-bottom: 2px solid #1f3b73; }
table.num td:first-child, table.num th:first-child { text-align: left; }
.figs { display: flex; flex-wrap: wrap; gap: 12px; align-items: flex-start; }
.figs svg { background: #fff; border: 1px solid #e2e0d8; max-width: 100%; height: auto; }
dl { margin: 10px 0; }
dt { font-weight: bold; margin-top: 6px; }
dd { margin: 2px 0 0 0; max-width: 900px; line-height: 1.45; }
.caution { background: #f6ecd9; border-left: 4px solid #a84a1c; padding: 6px 10px; }
.note { color: #a84a1c; }
footer { margin-top: 48px; color: #555f52; font-size: 13px; }
</style>
</head>
<body>
<main>
<h1>Scan report: {{.Title}}</h1>
<p class="sub">Generated {{.Generated}} by tpcscan. All intervals at {{printf "%.0f" (pct .CL)}}% confidence unless stated.</p>
<table class="kv">
{{range .Stats}}<tr><td>{{.Key}}</td><td>{{.Value}}</td></tr>
{{end}}</table>
{{range .Notes}}<p class="note">{{.}}</p>
{{end}}
{{range .Figures}}
<section id="{{.ID}}">
<h2>{{.Title}}</h2>
<div class="figs">{{range .SVGs}}{{.}}{{end}}</div>
{{if .Table}}<table class="num">{{range $i, $row := .Table}}<tr>{{range $row}}{{if eq $i 0}}<th>{{.}}</th>{{else}}<td>{{.}}</td>{{end}}{{end}}</tr>
{{end}}</table>{{end}}
<dl>
<dt>Definition</dt><dd>{{.Definition}}</dd>
<dt>Method</dt><dd>{{.Method}}</dd>
{{if .Caution}}<dt>Caution</dt><dd class="caution">{{.Caution}}</dd>{{end}}
</dl>
</section>
{{end}}
<footer>
Agreement scales and thresholds are conventions, not tests. Kappa depends on prevalence.
Capture–recapture assumes independent finding. Every figure states its definition and the published method it uses.
</footer>
</main>
</body>
</html>
`))
