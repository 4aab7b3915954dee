package report

// pageTemplate is the whole page: inline CSS (screen and print), no script,
// no external resource. html/template escapes every text; only the SVG
// plots are inserted as markup.
const pageTemplate = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'; img-src data:">
<meta name="generator" content="fadeloop report">
<title>{{.Title}} — {{.KindLabel}}</title>
<style>
:root { --ink: #1b1f24; --muted: #57606a; --rule: #d0d7de; --band: #f6f8fa;
        --ok: #1a7f37; --ok-bg: #eaf6ec; --warn: #9a6700; --warn-bg: #fff8e1; --bad: #b3261e; --bad-bg: #fdecea; }
* { box-sizing: border-box; }
body { margin: 0 auto; max-width: 1180px; padding: 24px 28px 48px; color: var(--ink);
       font: 15px/1.45 "Liberation Sans", "DejaVu Sans", Arial, Helvetica, sans-serif; background: #fff; }
header { border-bottom: 2px solid var(--ink); margin-bottom: 18px; padding-bottom: 8px; }
header .kind { color: var(--muted); font-size: 13px; text-transform: uppercase; letter-spacing: .06em; }
h1 { font-size: 26px; margin: 2px 0 4px; }
header .meta { color: var(--muted); font-size: 13px; }
h2 { font-size: 19px; margin: 30px 0 10px; padding-bottom: 4px; border-bottom: 1px solid var(--rule); }
.verdict { border-left: 6px solid var(--ok); background: var(--ok-bg); padding: 12px 16px; margin: 0 0 16px; }
.verdict.warn { border-color: var(--warn); background: var(--warn-bg); }
.verdict.bad { border-color: var(--bad); background: var(--bad-bg); }
.verdict .headline { font-size: 19px; font-weight: bold; margin: 0 0 6px; }
.verdict p { margin: 3px 0; }
.caution { border: 1px solid var(--warn); background: var(--warn-bg); padding: 10px 14px; font-size: 14px; margin: 0 0 8px; }
.tablewrap { overflow-x: auto; margin: 6px 0 16px; }
table { border-collapse: collapse; font-size: 13px; }
caption { caption-side: top; text-align: left; color: var(--muted); padding: 0 0 4px; font-size: 13px; }
th, td { padding: 3px 9px; border-bottom: 1px solid var(--rule); vertical-align: top; }
th { text-align: left; background: var(--band); font-weight: bold; }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; }
th.path { white-space: nowrap; font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; font-size: 12.5px; }
tr.mark td { background: var(--ok-bg); font-weight: bold; }
.notes p { margin: 4px 0; font-size: 14px; }
figure { margin: 10px 0 22px; page-break-inside: avoid; break-inside: avoid; }
figcaption { color: var(--muted); font-size: 13px; margin-top: 2px; }
svg.plot { display: block; width: 100%; height: auto; max-width: 1050px; border: 1px solid var(--rule); }
table.kv td:first-child { font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; white-space: nowrap; }
table.kv td { font-size: 12.5px; }
table.kv td:last-child { overflow-wrap: anywhere; }
pre { background: var(--band); border: 1px solid var(--rule); padding: 10px 12px; font-size: 12px; line-height: 1.35;
      white-space: pre-wrap; word-break: break-word; font-family: "DejaVu Sans Mono", "Liberation Mono", monospace; }
.cols { display: flex; gap: 24px; flex-wrap: wrap; align-items: flex-start; }
.cols > div { flex: 1 1 420px; min-width: 0; }
footer { margin-top: 32px; color: var(--muted); font-size: 12px; border-top: 1px solid var(--rule); padding-top: 8px; }
@media print {
  @page { size: A4 landscape; margin: 12mm; }
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  table { font-size: 8.5pt; }
  .tablewrap { overflow: visible; }
  tr, .verdict, .caution { break-inside: avoid; page-break-inside: avoid; }
  svg.plot { max-width: 100%; max-height: 150mm; border: none; }
  figure { margin: 4mm 0; }
  pre { font-size: 8pt; }
  .verdict, .caution, tr.mark td, th { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
</style>
</head>
<body>
<header>
<div class="kind">fadeloop · {{.KindLabel}}</div>
<h1>{{.Title}}</h1>
<div class="meta">{{if .Created}}written {{.Created}}{{end}}{{if and .Created .Source}} · {{end}}{{if .Source}}from {{.Source}}{{end}}</div>
</header>

<section id="verdict" class="verdict {{.Verdict.Class}}">
<p class="headline">{{.Verdict.Headline}}</p>
{{range .Verdict.Lines}}<p>{{.}}</p>
{{end}}</section>

<p class="caution"><strong>Caution.</strong> {{.Caution}}</p>
{{range .Sections}}
<section id="{{.ID}}">
<h2>{{.Heading}}</h2>
{{if .Intro}}<div class="notes">{{range .Intro}}<p>{{.}}</p>{{end}}</div>
{{end}}{{range .Tables}}<div class="tablewrap"><table>
<caption>{{.Caption}}</caption>
<thead><tr>{{$t := .}}{{$num := .Num}}{{range $i, $h := .Head}}<th{{with $t.HeadClass $i}} class="{{.}}"{{end}}>{{$h}}</th>{{end}}</tr></thead>
<tbody>
{{$mark := .Mark}}{{range $r, $row := .Rows}}<tr{{if index $mark $r}} class="mark"{{end}}>{{range $i, $c := $row}}<td{{if index $num $i}} class="n"{{end}}>{{$c}}</td>{{end}}</tr>
{{end}}</tbody>
</table></div>
{{end}}{{if .Notes}}<div class="notes">{{range .Notes}}<p>{{.}}</p>{{end}}</div>
{{end}}{{range .Figures}}<figure>
{{.SVG}}
<figcaption>{{.Caption}}</figcaption>
</figure>
{{end}}</section>
{{end}}
<section id="reproduce">
<h2>Reproduce</h2>
<div class="tablewrap"><table class="kv">
<caption>The same scenario, seed and engine version give the same figures bit for bit, whatever the core count.</caption>
<tbody>
{{range .Repro}}<tr><th>{{index . 0}}</th><td>{{index . 1}}</td></tr>
{{end}}</tbody>
</table></div>
</section>

<section id="scenario">
<h2>Scenario</h2>
<p class="notes">{{.Scenario.Note}}</p>
{{if .Scenario.Rows}}<div class="cols">
<div class="tablewrap"><table class="kv">
<caption>Field by field.</caption>
<thead><tr><th>field</th><th>value</th></tr></thead>
<tbody>
{{range .Scenario.Rows}}<tr><td>{{index . 0}}</td><td>{{index . 1}}</td></tr>
{{end}}</tbody>
</table></div>
<div>
<p class="notes">As JSON (the protojson form of fadeloop.v1.Scenario, usable as a scenario file):</p>
<pre>{{.Scenario.JSON}}</pre>
</div>
</div>{{end}}
</section>

<footer>Written by fadeloop.</footer>
</body>
</html>
`
