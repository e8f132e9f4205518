package widgets

import (
	"fmt"
	"html/template"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
)

var reportHead = template.Must(template.New("head").Parse(`<section class="cp-report-head">
<p><b>{{.Outcome}}</b> by <b>{{.Treatment}}</b>{{if .TreatedLevel}} (treated = {{.TreatedLevel}}){{end}}, adjusting for {{.Covariates}}.
{{.Used}} rows used of {{.Rows}}{{if .Dropped}} ({{.Dropped}} incomplete rows dropped){{end}}: {{.Treated}} treated, {{.Control}} control.
Target estimand: <b>{{.Estimand}}</b>{{if .Trim}}; trimming: {{.Trim}}{{end}}{{if .Boot}}; bootstrap: {{.Boot}}{{end}}.</p>
</section>`))

var reportCautions = template.Must(template.New("cautions").Parse(`<section class="cp-cautions"><h2>Cautions</h2><ul>{{range .}}<li>{{.}}</li>{{end}}</ul></section>`))

// ReportPage is the self-contained HTML page of a report: its header, the
// verdict, then the views of every part (propensity model, support by arm,
// positivity cells, balance, trimming, estimates, matching and strata,
// bootstrap) and the
// cautions. echartsJS is the ECharts bundle to inline (nil: the charts show
// their static pictures and a note says how to get interactive ones). Every
// string from the data is escaped.
func ReportPage(r *causal.Report, echartsJS []byte) string {
	if r == nil {
		return Page("counterpart report", []string{ErrorPanel(fmt.Errorf("no report"))}, echartsJS)
	}
	var head strings.Builder
	roles := r.Roles
	boot := ""
	if r.Bootstrap != nil {
		boot = fmt.Sprintf("%d replicates, seed %d", r.Options.Bootstrap, r.Options.Seed)
		if st, _ := r.Bootstrap.Status(); st != causal.BootstrapOK {
			boot += " (" + st + ")"
		}
	}
	trim := ""
	if r.Trimming != nil {
		trim = r.Trimming.Rule
	}
	err := reportHead.Execute(&head, map[string]any{
		"Outcome": roles.Outcome, "Treatment": roles.Treatment, "TreatedLevel": roles.TreatedLevel,
		"Covariates": strings.Join(roles.Covariates, ", "), "Used": r.Data.RowsUsed, "Rows": r.Data.Rows,
		"Dropped": r.Data.RowsDropped, "Treated": r.Data.Treated, "Control": r.Data.Control,
		"Estimand": r.Options.Estimand.String(), "Trim": trim, "Boot": boot,
	})
	if err != nil {
		head.Reset()
		head.WriteString(ErrorPanel(err))
	}
	body := []string{head.String(), HTML(r.Verdict), HTML(r.Propensity), HTML(r.Support)}
	if r.Cells != nil && r.Cells.Err() != nil {
		body = append(body, PartFailedPanel("Positivity cells", ErrorMessage(r.Cells.Err())+" (the verdict does not judge them)"))
	} else if r.Cells != nil {
		body = append(body, HTML(r.Cells))
	}
	body = append(body, HTML(r.Balance))
	if r.Trimmed != nil {
		body = append(body, HTML(r.Trimmed))
	}
	body = append(body, HTML(&causal.Estimates{Estimand: r.Options.Estimand, Items: r.Estimates}))
	if r.Matching != nil {
		body = append(body, optionalPart("Matching", r.Matching))
	}
	if r.Strata != nil {
		body = append(body, optionalPart("Subclassification", r.Strata))
	}
	if st, why := r.Bootstrap.Status(); r.Bootstrap != nil && st == causal.BootstrapFailed {
		body = append(body, PartFailedPanel("Bootstrap", why))
	} else if r.Bootstrap != nil {
		body = append(body, HTML(r.Bootstrap))
	}
	var c strings.Builder
	if err := reportCautions.Execute(&c, r.Cautions); err == nil {
		body = append(body, c.String())
	}
	if echartsJS == nil {
		body = append([]string{`<p class="cp-note">Interactive charts need the ECharts library: run <code>counterpart setup</code> once, then write the report again. The pictures below are static.</p>`}, body...)
	}
	title := "counterpart report: " + roles.Outcome + " by " + roles.Treatment
	return Page(title, body, echartsJS)
}

// optionalPart is the view of a part of a report that may fail without
// taking the report with it: a failed part is shown with PartFailedPanel.
func optionalPart(title string, x any) string {
	if err := resultErr(x); err != nil {
		return PartFailedPanel(title, ErrorMessage(err))
	}
	return HTML(x)
}
