package widgets

import (
	"html/template"
	"strings"
)

// The palette shared by charts and tables. Treated units are drawn in deep
// teal and control units in warm amber; text is slate.
const (
	ColorTreated = "#0f766e" // deep teal
	ColorControl = "#d97706" // warm amber
	ColorInk     = "#1e293b" // slate: body text
	ColorMuted   = "#64748b" // slate: captions, axis labels
	ColorRule    = "#e2e8f0" // hairlines, grid
	ColorPanel   = "#f8fafc" // panel background
	ColorGood    = "#15803d" // adequate
	ColorWarn    = "#b45309" // limited
	ColorBad     = "#b91c1c" // violated, errors
)

// styleCSS holds our own rules. Every class starts with "cp-" so the rules
// never restyle the notebook around the output.
const styleCSS = `
.cp-figure{margin:0.6em 0 1em 0;color:` + ColorInk + `;font-family:system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,sans-serif;}
.cp-figure-title{font-weight:600;font-size:0.95em;margin:0 0 0.3em 0;}
.cp-chart{position:relative;box-sizing:border-box;}
.cp-chart-note{font-size:0.8em;color:` + ColorWarn + `;margin-top:0.3em;}
.cp-fallback-missing{font-size:0.85em;color:` + ColorMuted + `;padding:1em;border:1px dashed ` + ColorRule + `;}
.cp-text{font-family:ui-monospace,SFMono-Regular,Menlo,Consolas,monospace;font-size:0.85em;color:` + ColorInk + `;background:` + ColorPanel + `;border:1px solid ` + ColorRule + `;border-radius:4px;padding:0.6em 0.8em;white-space:pre-wrap;overflow-x:auto;margin:0.4em 0;}
.cp-table{border-collapse:collapse;font-size:0.85em;color:` + ColorInk + `;margin:0.4em 0 0.8em 0;font-family:system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;}
.cp-table caption{caption-side:top;text-align:left;font-weight:600;padding:0 0 0.4em 0;}
.cp-table th{text-align:left;font-weight:600;border-bottom:2px solid ` + ColorInk + `;padding:0.3em 0.7em;}
.cp-table td{border-bottom:1px solid ` + ColorRule + `;padding:0.25em 0.7em;}
.cp-table td.cp-num,.cp-table th.cp-num{text-align:right;font-variant-numeric:tabular-nums;}
.cp-table tr.cp-flagged td{background:#fff7ed;}
.cp-treated{color:` + ColorTreated + `;}
.cp-control{color:` + ColorControl + `;}
.cp-swatch{display:inline-block;width:0.8em;height:0.8em;border-radius:2px;vertical-align:-0.1em;margin-right:0.3em;}
.cp-swatch.cp-treated{background:` + ColorTreated + `;}
.cp-swatch.cp-control{background:` + ColorControl + `;}
.cp-badge{display:inline-block;border-radius:999px;padding:0.05em 0.6em;font-size:0.8em;font-weight:600;color:#fff;}
.cp-adequate{background:` + ColorGood + `;}
.cp-limited{background:` + ColorWarn + `;}
.cp-violated{background:` + ColorBad + `;}
.cp-caption,.cp-note{font-size:0.8em;color:` + ColorMuted + `;margin:0.2em 0 0.6em 0;}
.cp-error{border-left:4px solid ` + ColorBad + `;background:#fef2f2;color:` + ColorInk + `;padding:0.6em 0.9em;margin:0.5em 0;border-radius:0 4px 4px 0;font-family:system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;}
.cp-error-title{font-weight:700;color:` + ColorBad + `;margin-bottom:0.2em;}
.cp-error-msg{white-space:pre-wrap;font-family:ui-monospace,SFMono-Regular,Menlo,Consolas,monospace;font-size:0.85em;}
.cp-hint{font-size:0.85em;color:` + ColorMuted + `;margin-top:0.4em;}
.cp-progress{font-family:system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;font-size:0.85em;color:` + ColorInk + `;margin:0.3em 0;}
.cp-progress-track{display:inline-block;vertical-align:middle;width:16em;height:0.7em;background:` + ColorRule + `;border-radius:999px;overflow:hidden;margin:0 0.6em;}
.cp-progress-fill{display:block;height:100%;background:` + ColorTreated + `;}
.cp-progress-count{font-variant-numeric:tabular-nums;color:` + ColorMuted + `;}
body.cp-page{max-width:960px;margin:1.5em auto;padding:0 1em;color:` + ColorInk + `;font-family:system-ui,-apple-system,"Segoe UI",Roboto,Arial,sans-serif;line-height:1.45;}
body.cp-page h1{font-size:1.4em;font-weight:650;border-bottom:1px solid ` + ColorRule + `;padding-bottom:0.3em;}
`

// Style returns our stylesheet as a <style> element. HTML fragments made in
// this package (tables, charts, error panels) use its cp-* classes; kernel.Show
// and Page put it in front of them, and a view that may be shown on its own
// can include it too (repeating it is harmless).
func Style() string {
	return "<style>" + styleCSS + "</style>"
}

var pageTemplate = template.Must(template.New("page").Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
{{.Style}}
{{.Library}}
</head>
<body class="cp-page">
{{if .Title}}<h1>{{.Title}}</h1>{{end}}
<main>
{{range .Body}}<section>{{.}}</section>
{{end}}</main>
</body>
</html>
`))

// Page returns one self-contained HTML document: our stylesheet, the ECharts
// library inlined (when echartsJS is not empty; charts keep their static
// pictures otherwise) and the given fragments in order. It refers to no
// external URL. The title is escaped; body fragments are trusted HTML as
// produced by the HTML methods of this module.
func Page(title string, body []string, echartsJS []byte) string {
	parts := make([]template.HTML, len(body))
	for i, b := range body {
		parts[i] = template.HTML(b)
	}
	var buf strings.Builder
	err := pageTemplate.Execute(&buf, struct {
		Title   string
		Style   template.HTML
		Library template.HTML
		Body    []template.HTML
	}{title, template.HTML(Style()), template.HTML(LibraryScript(echartsJS)), parts})
	if err != nil {
		// The template is fixed and its inputs are strings; reaching this
		// means a bug here, which the page then says plainly.
		return "<!DOCTYPE html><html><head><meta charset=\"utf-8\"></head><body>" + ErrorPanel(err) + "</body></html>"
	}
	return buf.String()
}
