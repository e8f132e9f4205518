package widgets

// Tables of the notebook views, written through html/template so that every
// string from the data (column names, levels, messages) is escaped, with
// numbers formatted for reading: thousands separators, a few significant
// digits, percentages with one decimal.

import (
	"fmt"
	"html/template"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"golang.org/x/text/language"
	"golang.org/x/text/message"
)

var printer = message.NewPrinter(language.English)

// formatCount writes an integer with thousands separators: 1,234,567.
func formatCount(n int) string { return printer.Sprintf("%d", n) }

// formatNumber writes x with four significant digits and thousands
// separators (12,345.7 is written 12,346; 0.012345 as 0.01235); very large or
// very small magnitudes in scientific form; NaN as a dash.
func formatNumber(x float64) string {
	switch {
	case math.IsNaN(x):
		return "—"
	case math.IsInf(x, 1):
		return "∞"
	case math.IsInf(x, -1):
		return "-∞"
	case x == 0:
		return "0"
	}
	a := math.Abs(x)
	if a >= 1e12 || a < 1e-4 {
		return strconv.FormatFloat(x, 'e', 2, 64)
	}
	dec := 3 - int(math.Floor(math.Log10(a)))
	dec = max(0, min(6, dec))
	return printer.Sprintf("%.*f", dec, x)
}

// formatFixed writes x with d decimals and separators; NaN as a dash.
func formatFixed(x float64, d int) string {
	if !finite(x) {
		return formatNumber(x)
	}
	return printer.Sprintf("%.*f", d, x)
}

// formatSigned writes x with d decimals and an explicit sign.
func formatSigned(x float64, d int) string {
	if !finite(x) {
		return formatNumber(x)
	}
	if s := printer.Sprintf("%.*f", d, x); !strings.HasPrefix(s, "-") {
		return "+" + s
	} else {
		return s
	}
}

// formatPercent writes a share as a percentage with one decimal, saying
// "<0.1%" rather than "0.0%" for a share that is small but not zero.
func formatPercent(share float64) string {
	switch {
	case !finite(share):
		return "—"
	case share == 0:
		return "0%"
	case share > 0 && share < 0.0005:
		return "<0.1%"
	case share < 1 && share > 0.9995:
		return ">99.9%"
	}
	return printer.Sprintf("%.1f%%", 100*share)
}

// formatScore writes a propensity score with three decimals, saying
// "<0.001" and ">0.999" for scores at the edges.
func formatScore(x float64) string {
	switch {
	case !finite(x):
		return "—"
	case x > 0 && x < 0.0005:
		return "<0.001"
	case x < 1 && x > 0.9995:
		return ">0.999"
	}
	return strconv.FormatFloat(x, 'f', 3, 64)
}

// tone colours a table cell: "" plain, "bad", "warn", "good", "muted".
type tone string

const (
	tonePlain tone = ""
	toneBad   tone = "bad"
	toneWarn  tone = "warn"
	toneGood  tone = "good"
	toneMuted tone = "muted"
)

type tableCell struct {
	Text string
	Num  bool
	Tone tone
	Hint string // title attribute
}

type tableRow struct {
	Flagged bool
	Cells   []tableCell
}

type table struct {
	Caption string
	Head    []tableCell
	Rows    []tableRow
	Note    string
}

// Style is the cell's inline style, built from fixed strings only: numbers
// do not wrap, and a tone sets the colour.
func (c tableCell) Style() template.CSS {
	var s string
	switch c.Tone {
	case toneBad:
		s = "color:" + ColorBad + ";font-weight:600;"
	case toneWarn:
		s = "color:" + ColorWarn + ";font-weight:600;"
	case toneGood:
		s = "color:" + ColorGood + ";"
	case toneMuted:
		s = "color:" + ColorMuted + ";"
	}
	if c.Num {
		s += "white-space:nowrap;"
	}
	return template.CSS(s)
}

func numCell(s string) tableCell          { return tableCell{Text: s, Num: true} }
func textCell(s string) tableCell         { return tableCell{Text: s} }
func headNum(s string) tableCell          { return tableCell{Text: s, Num: true} }
func headText(s string) tableCell         { return tableCell{Text: s} }
func flagCell(s string, t tone) tableCell { return tableCell{Text: s, Tone: t} }

var tableTemplate = template.Must(template.New("table").Parse(
	`<table class="cp-table">` +
		`{{if .Caption}}<caption>{{.Caption}}</caption>{{end}}` +
		`<thead><tr>{{range .Head}}<th{{if .Num}} class="cp-num"{{end}}{{if .Hint}} title="{{.Hint}}"{{end}}>{{.Text}}</th>{{end}}</tr></thead>` +
		`<tbody>{{range .Rows}}<tr{{if .Flagged}} class="cp-flagged"{{end}}>` +
		`{{range .Cells}}<td{{if .Num}} class="cp-num"{{end}}{{if .Hint}} title="{{.Hint}}"{{end}}{{with .Style}} style="{{.}}"{{end}}>{{.Text}}</td>{{end}}</tr>{{end}}</tbody>` +
		`</table>{{if .Note}}<p class="cp-note">{{.Note}}</p>{{end}}`))

// HTML renders the table; a template failure is shown as an error panel.
func (t table) HTML() string {
	var b strings.Builder
	if err := tableTemplate.Execute(&b, t); err != nil {
		return ErrorPanel(fmt.Errorf("table %q: %w", t.Caption, err))
	}
	return b.String()
}

// maxTableRows bounds long tables (all cells, many category levels): the
// payload of a view stays bounded whatever the data.
const maxTableRows = 60

// moreRows is the note under a table cut at maxTableRows.
func moreRows(shown, total int, what string) string {
	if total <= shown {
		return ""
	}
	return fmt.Sprintf("Showing %s of %s %s; the JSON form (json.Marshal of the result) has them all.", formatCount(shown), formatCount(total), what)
}

// termsTable lists the propensity model's coefficients.
func termsTable(s *causal.Scores) table {
	t := table{
		Caption: "Propensity model terms (logistic regression)",
		Head:    []tableCell{headText("term"), headNum("coefficient"), headNum("SE"), headNum("z"), headText("note")},
	}
	if s.Ridge > 0 {
		t.Caption = fmt.Sprintf("Propensity model terms (logistic regression, ridge λ = %s)", formatNumber(s.Ridge))
	}
	for i, term := range s.Terms {
		if i == maxTableRows {
			break
		}
		if term.Diverging {
			t.Rows = append(t.Rows, tableRow{Flagged: true, Cells: []tableCell{textCell(term.Name),
				flagCell("diverging", toneBad), numCell("—"), numCell("—"),
				flagCell("separation: no finite estimate exists", toneBad)}})
			continue
		}
		t.Rows = append(t.Rows, tableRow{Cells: []tableCell{textCell(term.Name),
			numCell(formatNumber(term.Coef)), numCell(formatNumber(term.SE)), numCell(formatFixed(term.Z, 2)), textCell("")}})
	}
	t.Note = moreRows(min(len(s.Terms), maxTableRows), len(s.Terms), "terms")
	return t
}

// supportTable summarises the scores of each arm.
func supportTable(s *causal.Support) table {
	band := "none: the arms' score ranges do not overlap"
	if s.Band.Lo <= s.Band.Hi {
		band = "[" + formatScore(s.Band.Lo) + ", " + formatScore(s.Band.Hi) + "]"
	}
	t := table{
		Caption: "Scores by arm; common-support band " + band,
		Head: []tableCell{headText("arm"), headNum("units"), headNum("lowest score"), headNum("highest score"),
			headNum("outside the band"), headNum("share outside")},
	}
	var ext *causal.ExtremeShares
	for i := range s.Extremes {
		if math.Abs(s.Extremes[i].Threshold-0.1) < 1e-9 {
			ext = &s.Extremes[i]
		}
	}
	if ext != nil {
		t.Head = append(t.Head, headNum("scores < 0.1"), headNum("scores > 0.9"))
	}
	arm := func(name string, n, out int, r causal.Interval, below, above float64) tableRow {
		share := 0.0
		if n > 0 {
			share = float64(out) / float64(n)
		}
		row := tableRow{Flagged: share > 0.05, Cells: []tableCell{textCell(name), numCell(formatCount(n)),
			numCell(formatScore(r.Lo)), numCell(formatScore(r.Hi)), numCell(formatCount(out)), numCell(formatPercent(share))}}
		if ext != nil {
			row.Cells = append(row.Cells, numCell(formatPercent(below)), numCell(formatPercent(above)))
		}
		return row
	}
	var tb, ta, cb, ca float64
	if ext != nil {
		tb, ta, cb, ca = ext.TreatedBelow, ext.TreatedAbove, ext.ControlBelow, ext.ControlAbove
	}
	t.Rows = []tableRow{
		arm("treated", s.Treated, s.OutsideTreated, s.TreatedRange, tb, ta),
		arm("control", s.Control, s.OutsideControl, s.ControlRange, cb, ca),
	}
	return t
}

// profileTable shows how the units outside the band differ from the rest.
func profileTable(s *causal.Support) table {
	return profileRowsTable(s.Profile, "Who lies outside the band: units outside versus inside, largest differences first", "mean outside", "mean inside")
}

// profileRowsTable lists profile rows, largest |SMD| first (at most 10);
// outside and inside head the columns of ProfileRow.MeanOutside and
// MeanInside.
func profileRowsTable(profile []causal.ProfileRow, caption, outside, inside string) table {
	rows := append([]causal.ProfileRow(nil), profile...)
	sort.SliceStable(rows, func(i, j int) bool { return absOrZero(rows[i].SMD) > absOrZero(rows[j].SMD) })
	t := table{
		Caption: caption,
		Head:    []tableCell{headText("term"), headNum(outside), headNum(inside), headNum("SMD")},
	}
	const shown = 10
	for i, r := range rows {
		if i == shown {
			break
		}
		tn := tonePlain
		if math.Abs(r.SMD) > smdReference {
			tn = toneWarn
		}
		t.Rows = append(t.Rows, tableRow{Cells: []tableCell{textCell(r.Term), numCell(formatNumber(r.MeanOutside)),
			numCell(formatNumber(r.MeanInside)), {Text: formatSigned(r.SMD, 2), Num: true, Tone: tn}}})
	}
	t.Note = moreRows(min(len(rows), shown), len(rows), "terms")
	return t
}

func absOrZero(v float64) float64 {
	if math.IsNaN(v) {
		return 0
	}
	return math.Abs(v)
}

// cellsTable lists positivity cells, violating cells first, then thin ones.
func cellsTable(c *causal.Cells) table {
	t := table{Caption: "Positivity cells of " + strings.Join(c.Columns, " × ") + " (violations first)"}
	for _, col := range c.Columns {
		t.Head = append(t.Head, headText(col))
	}
	t.Head = append(t.Head, headNum("treated"), headNum("control"), headNum("share treated"), headText("status"))
	rows := append([]causal.Cell(nil), c.Rows...)
	rank := func(x causal.Cell) int {
		switch {
		case x.Empty:
			return 2
		case x.Thin:
			return 1
		}
		return 0
	}
	sort.SliceStable(rows, func(i, j int) bool { return rank(rows[i]) > rank(rows[j]) })
	for i, r := range rows {
		if i == maxTableRows {
			break
		}
		var cells []tableCell
		for _, l := range r.Labels {
			cells = append(cells, textCell(l))
		}
		n := r.Treated + r.Control
		share := math.NaN()
		if n > 0 {
			share = float64(r.Treated) / float64(n)
		}
		status := flagCell("both arms", toneGood)
		switch {
		case r.Empty && r.Treated == 0:
			status = flagCell("violation: no treated units", toneBad)
		case r.Empty:
			status = flagCell("violation: no controls", toneBad)
		case r.Thin:
			status = flagCell(fmt.Sprintf("thin: an arm has fewer than %d", c.Options.Thin), toneWarn)
		}
		cells = append(cells, numCell(formatCount(r.Treated)), numCell(formatCount(r.Control)), numCell(formatPercent(share)), status)
		t.Rows = append(t.Rows, tableRow{Flagged: r.Empty, Cells: cells})
	}
	t.Note = moreRows(min(len(rows), maxTableRows), len(rows), "cells")
	if len(c.Cuts) > 0 {
		var quant []string
		for _, cut := range c.Cuts {
			if cut.Kind == "quantiles" {
				quant = append(quant, cut.Column)
			}
		}
		if len(quant) > 0 {
			note := fmt.Sprintf("%s cut into %d quantile bins.", strings.Join(quant, ", "), c.Options.Bins)
			t.Note = strings.TrimSpace(note + " " + t.Note)
		}
	}
	return t
}

// erosionTable lists the erosion steps.
func erosionTable(e *causal.Erosion) table {
	t := table{
		Caption: "Overlap as covariates are added",
		Head: []tableCell{headNum("step"), headText("covariate added"), headNum("cells"), headNum("cells with an empty arm"),
			headNum("units in cells with both arms"), headNum("treated with controls"), headNum("controls with treated")},
	}
	if e.Greedy {
		t.Caption += " (greedy order: at each step the covariate that keeps most overlap)"
	}
	for k, s := range e.Steps {
		if k == maxTableRows {
			break
		}
		t.Rows = append(t.Rows, tableRow{Cells: []tableCell{numCell(strconv.Itoa(k + 1)), textCell(s.Added),
			numCell(formatCount(s.Cells)), numCell(formatCount(s.Violating)), numCell(formatPercent(s.ShareBoth)),
			numCell(formatPercent(s.TreatedCovered)), numCell(formatPercent(s.ControlCovered))}})
	}
	t.Note = moreRows(min(len(e.Steps), maxTableRows), len(e.Steps), "steps")
	return t
}

// balanceTable lists balance per term with flags.
func balanceTable(b *causal.BalanceSheet) table {
	t := table{Caption: "Covariate balance (flags: |SMD| > 0.1, Austin 2009; variance ratio outside [0.5, 2], Rubin 2001)"}
	t.Head = []tableCell{headText("term"), headNum("SMD"), headNum("variance ratio"), headNum("KS")}
	label := b.Label
	if label == "" {
		label = "weighting"
	}
	if b.Weighted {
		t.Head = append(t.Head, tableCell{Text: "SMD after", Num: true, Hint: "after " + label},
			tableCell{Text: "variance ratio after", Num: true, Hint: "after " + label},
			tableCell{Text: "KS after", Num: true, Hint: "after " + label})
	}
	t.Head = append(t.Head, headText("flag"))
	ratio := func(v float64) tableCell {
		c := numCell(formatFixed(v, 2))
		if finite(v) && (v < causal.VarianceRatioLow || v > causal.VarianceRatioHigh) {
			c.Tone = toneWarn
		}
		if math.IsNaN(v) {
			c = numCell("—")
			c.Hint = "not informative for a 0/1 term"
		}
		return c
	}
	smd := func(v float64) tableCell {
		c := numCell(formatSigned(v, 3))
		if finite(v) && math.Abs(v) > causal.SMDThreshold {
			c.Tone = toneBad
		}
		if math.IsInf(v, 0) {
			c.Tone = toneBad
			c.Hint = "one arm has no spread and the means differ"
		}
		return c
	}
	for i, r := range b.Rows {
		if i == maxTableRows {
			break
		}
		cells := []tableCell{textCell(r.Term), smd(r.SMD), ratio(r.VarianceRatio), numCell(formatFixed(r.KS, 3))}
		if b.Weighted {
			// Flags refer to the weighted values; the unweighted ones are context.
			for k := 1; k <= 3; k++ {
				cells[k].Tone = toneMuted
			}
			cells = append(cells, smd(r.SMDWeighted), ratio(r.VarianceRatioWeighted), numCell(formatFixed(r.KSWeighted, 3)))
		}
		var flags []string
		if r.Imbalanced() {
			flags = append(flags, "|SMD| > 0.1")
		}
		if r.VarianceOff() {
			flags = append(flags, "variance ratio")
		}
		flag := flagCell("ok", toneGood)
		if len(flags) > 0 {
			flag = flagCell(strings.Join(flags, ", "), toneBad)
		}
		cells = append(cells, flag)
		t.Rows = append(t.Rows, tableRow{Flagged: len(flags) > 0, Cells: cells})
	}
	t.Note = moreRows(min(len(b.Rows), maxTableRows), len(b.Rows), "terms")
	if b.Weighted {
		t.Note = strings.TrimSpace("Flags refer to the values after " + label + ". " + t.Note)
	}
	return t
}

// separationList names where treatment is deterministic.
var separationTemplate = template.Must(template.New("separation").Parse(
	`<div class="cp-error" role="note"><div class="cp-error-title">Separation: positivity violated</div>` +
		`<ul style="margin:0.2em 0 0 1.1em;padding:0">{{range .}}<li>{{.}}</li>{{end}}</ul>` +
		`<div class="cp-hint">Treatment is deterministic there: no comparison exists for those units. ` +
		`Restrict the population (drop or merge those levels, trim, or use overlap weights) rather than trusting the coefficients.</div></div>`))

func separationHTML(s *causal.Scores) string {
	if len(s.Separation) == 0 {
		return ""
	}
	msgs := make([]string, 0, len(s.Separation))
	for _, f := range s.Separation {
		msgs = append(msgs, f.Message)
	}
	var b strings.Builder
	if err := separationTemplate.Execute(&b, msgs); err != nil {
		return ErrorPanel(err)
	}
	return b.String()
}

// cautions are said with every verdict and estimate.
var cautions = []string{
	"These diagnostics cannot verify unconfoundedness: no check of the observed data rules out an unmeasured confounder.",
	"Estimates depend on the covariates measured; adjusting for a different set can change both the overlap and the estimate.",
	"Clinical, legal or policy decisions defer to local rules and licensed practice.",
}

var cautionsTemplate = template.Must(template.New("cautions").Parse(
	`<ul class="cp-note" style="margin:0.4em 0 0 1.1em;padding:0">{{range .}}<li>{{.}}</li>{{end}}</ul>`))

func cautionsHTML() string {
	var b strings.Builder
	if err := cautionsTemplate.Execute(&b, cautions); err != nil {
		return ErrorPanel(err)
	}
	return b.String()
}

// estimandsAll are the estimands a verdict can support, in display order.
var estimandsAll = []string{"ATE", "ATT", "ATC", "ATO"}

type verdictView struct {
	Status      string
	StatusClass string
	Border      string
	Headline    string
	Estimands   []verdictEstimandRow
	Reasons     []string
	Notes       []string
	Supported   []string
	Unsupported []string
	Remedies    []verdictRemedyRow
	Trim        string
	Cautions    template.HTML
}

// verdictEstimandRow is one estimand's line of the panel, from the
// verdict's EstimandVerdict.
type verdictEstimandRow struct {
	Estimand, Status, Colour, Findings, ESS, Largest, Inflation string
}

// verdictRemedyRow is one remedy: the recommended one first.
type verdictRemedyRow struct {
	Label, Text, Who string
}

var verdictTemplate = template.Must(template.New("verdict").Parse(
	`<div class="cp-verdict" style="border-left:5px solid {{.Border}};background:` + ColorPanel + `;padding:0.7em 1em;margin:0.5em 0;border-radius:0 4px 4px 0;` +
		`font-family:system-ui,-apple-system,'Segoe UI',Roboto,Arial,sans-serif;color:` + ColorInk + `;font-size:0.9rem;">` +
		`<div style="font-weight:650;font-size:1rem;margin-bottom:0.3em;">Positivity verdict <span class="cp-badge {{.StatusClass}}">{{.Status}}</span></div>` +
		`<p style="margin:0.2em 0 0.5em 0;">{{.Headline}}</p>` +
		`<table style="border-collapse:collapse;margin:0.2em 0 0.5em 0;font-size:0.85rem;"><thead><tr>` +
		`<th style="text-align:left;padding:0.1em 0.6em 0.1em 0;">estimand</th><th style="text-align:left;padding:0.1em 0.6em;">status</th><th style="text-align:left;padding:0.1em 0.6em;">findings</th>` +
		`<th style="text-align:right;padding:0.1em 0.6em;" title="Kish (1965) effective sample size, treated / control">ESS</th>` +
		`<th style="text-align:right;padding:0.1em 0.6em;">largest weight</th>` +
		`<th style="text-align:right;padding:0.1em 0.6em;" title="variance against a randomised design of the same size">variance ×</th></tr></thead><tbody>` +
		`{{range .Estimands}}<tr><td style="padding:0.1em 0.6em 0.1em 0;font-weight:600;">{{.Estimand}}</td>` +
		`<td style="padding:0.1em 0.6em;"><span class="cp-badge" style="background:{{.Colour}};">{{.Status}}</span></td>` +
		`<td style="padding:0.1em 0.6em;color:` + ColorMuted + `;">{{.Findings}}</td><td class="cp-num" style="padding:0.1em 0.6em;">{{.ESS}}</td>` +
		`<td class="cp-num" style="padding:0.1em 0.6em;">{{.Largest}}</td><td class="cp-num" style="padding:0.1em 0.6em;">{{.Inflation}}</td></tr>{{end}}</tbody></table>` +
		`{{if .Reasons}}<div style="font-weight:600;">Why</div><ul style="margin:0.1em 0 0.5em 1.1em;padding:0;">{{range .Reasons}}<li>{{.}}</li>{{end}}</ul>{{end}}` +
		`{{if .Notes}}<div style="font-weight:600;">Notes</div><ul style="margin:0.1em 0 0.5em 1.1em;padding:0;color:` + ColorMuted + `;">{{range .Notes}}<li>{{.}}</li>{{end}}</ul>{{end}}` +
		`<div style="margin:0.2em 0;"><span style="font-weight:600;">Estimands the data support:</span> ` +
		`{{range .Supported}}<span class="cp-badge" style="background:` + ColorGood + `;margin-right:0.3em;">{{.}}</span>{{end}}` +
		`{{if .Unsupported}} <span style="color:` + ColorMuted + `;">not supported: {{range $i, $e := .Unsupported}}{{if $i}}, {{end}}{{$e}}{{end}}</span>{{end}}</div>` +
		`{{range .Remedies}}<div style="margin:0.3em 0;"><span style="font-weight:600;">{{.Label}}:</span> {{.Text}}` +
		`{{if .Who}}<div style="margin:0.1em 0 0 1.1em;color:` + ColorMuted + `;">who: {{.Who}}</div>{{end}}</div>{{end}}` +
		`{{if .Trim}}<div style="margin:0.3em 0;color:` + ColorMuted + `;">{{.Trim}}</div>{{end}}` +
		`{{.Cautions}}</div>`))

// verdictPanel renders a verdict from its data: status, the estimands'
// statuses with their findings and precision figures, the findings' texts
// (reasons and notes), the remedies with who they concern, what trimming
// would drop, and the cautions. Nothing is judged here.
func verdictPanel(v *causal.Verdict) string {
	if err := v.Err(); err != nil {
		return ErrorPanel(err)
	}
	vv := verdictView{Status: string(v.Status), Headline: verdictHeadline(v), Reasons: v.Reasons, Notes: v.Notes, Supported: v.Supported,
		Cautions: template.HTML(cautionsHTML())}
	switch v.Status {
	case causal.Adequate:
		vv.StatusClass, vv.Border = "cp-adequate", ColorGood
	case causal.Violated:
		vv.StatusClass, vv.Border = "cp-violated", ColorBad
	default:
		vv.StatusClass, vv.Border = "cp-limited", ColorWarn
	}
	for _, e := range estimandsAll {
		ev := v.Estimands[e]
		if ev == nil {
			continue
		}
		colour := map[causal.EstimandStatus]string{causal.Supported: ColorGood, causal.SupportedWithCaution: ColorWarn, causal.NotSupported: ColorBad}[ev.Status]
		var codes []string
		for _, c := range ev.Findings {
			if c != causal.FindingPrecision {
				codes = append(codes, string(c))
			}
		}
		vv.Estimands = append(vv.Estimands, verdictEstimandRow{Estimand: e, Status: strings.ReplaceAll(string(ev.Status), "_", " "), Colour: colour,
			Findings: strings.Join(codes, ", "), ESS: formatFixed(float64(ev.ESSTreated), 1) + " / " + formatFixed(float64(ev.ESSControl), 1),
			Largest: formatPercent(float64(ev.LargestWeightShare)), Inflation: formatFixed(float64(ev.VarianceInflation), 2)})
		if ev.Status == causal.NotSupported {
			vv.Unsupported = append(vv.Unsupported, e)
		}
	}
	for k, r := range v.Remedies {
		label := "Remedy"
		if k > 0 {
			label = "Alternative"
		}
		vv.Remedies = append(vv.Remedies, verdictRemedyRow{Label: label, Text: r.Text, Who: r.WhoText})
	}
	if v.TrimThreshold > 0 {
		vv.Trim = fmt.Sprintf("Trimming to scores in [%s, %s] would drop %s treated and %s control units (the estimand then becomes the trimmed population).",
			formatFixed(v.TrimThreshold, 2), formatFixed(1-v.TrimThreshold, 2), formatCount(v.TrimTreated), formatCount(v.TrimControl))
	}
	var b strings.Builder
	if err := verdictTemplate.Execute(&b, vv); err != nil {
		return ErrorPanel(err)
	}
	return b.String()
}

// weightsTable summarises weights per arm.
func weightsTable(w *causal.Weights) table {
	label := w.Label
	if label == "" {
		label = "weights"
	}
	t := table{
		Caption: "Weights per arm: " + label,
		Head: []tableCell{headText("arm"), headNum("units"), headNum("sum of weights"), headNum("largest weight"),
			tableCell{Text: "effective sample size", Num: true, Hint: "Kish (1965): (Σw)² / Σw²"}, headNum("ESS / units")},
	}
	arm := func(name string, n int, sum, top, ess float64) tableRow {
		share := 0.0
		if n > 0 {
			share = ess / float64(n)
		}
		c := numCell(formatPercent(share))
		if share < 0.5 {
			c.Tone = toneWarn
		}
		return tableRow{Cells: []tableCell{textCell(name), numCell(formatCount(n)), numCell(formatNumber(sum)), numCell(formatNumber(top)),
			numCell(formatCount(int(math.Round(ess)))), c}}
	}
	t.Rows = []tableRow{
		arm("treated", w.Treated, w.SumTreated, w.MaxTreated, w.ESSTreated),
		arm("control", w.Control, w.SumControl, w.MaxControl, w.ESSControl),
	}
	var notes []string
	if w.Zero > 0 {
		notes = append(notes, fmt.Sprintf("%s units have weight 0 and drop out.", formatCount(w.Zero)))
	}
	if tr := w.Truncation; tr != nil {
		notes = append(notes, fmt.Sprintf("%s: %s weights moved (treated to [%s, %s], control to [%s, %s]).",
			capitalize(tr.Description()), formatCount(tr.Changed),
			formatNumber(tr.Treated.Lo), formatNumber(tr.Treated.Hi), formatNumber(tr.Control.Lo), formatNumber(tr.Control.Hi)))
	}
	t.Note = strings.Join(notes, " ")
	return t
}

// intervalText writes a 95% interval, or a dash when there is none.
func intervalText(iv causal.Interval) string {
	if !finite(iv.Lo) || !finite(iv.Hi) {
		return "—"
	}
	return formatNumber(iv.Lo) + " to " + formatNumber(iv.Hi)
}

// estimatesTable lists effects, one row per estimator; the reasons an
// estimator failed are listed under the table (see estimateErrors).
func estimatesTable(items []*causal.Effect, caption string) table {
	t := table{
		Caption: caption,
		Head: []tableCell{headText("estimator"), headText("estimand"), headNum("estimate"), headNum("SE"), headNum("95% interval"),
			headText("SE method"), headNum("units"), headText("status")},
	}
	for _, e := range items {
		if err := e.Err(); err != nil {
			t.Rows = append(t.Rows, tableRow{Flagged: true, Cells: []tableCell{textCell(estimatorName(e.Estimator)), textCell(e.Estimand.String()),
				numCell("—"), numCell("—"), numCell("—"), textCell(""), numCell(""), flagCell("not estimated (see below)", toneBad)}})
			continue
		}
		status := flagCell("supported", toneGood)
		if !e.Supported {
			status = flagCell("not supported by the data", toneBad)
			status.Hint = e.Unsupported
		} else if e.HasFlag("trimmed_population") {
			status = flagCell("trimmed population", toneWarn)
		}
		units := numCell(formatCount(e.N))
		units.Hint = formatCount(e.NTreated) + " treated, " + formatCount(e.NControl) + " control"
		t.Rows = append(t.Rows, tableRow{Flagged: !e.Supported, Cells: []tableCell{textCell(estimatorName(e.Estimator)), textCell(e.Estimand.String()),
			numCell(formatNumber(e.Value)), numCell(formatNumber(e.SE)), numCell(intervalText(e.CI95)), textCell(e.SEMethod), units, status}})
	}
	return t
}

// estimateErrors are the flags saying why estimators failed.
func estimateErrors(items []*causal.Effect) []causal.Flag {
	var out []causal.Flag
	for _, e := range items {
		if err := e.Err(); err != nil {
			out = append(out, causal.Flag{Code: "not_estimated", Message: estimatorName(e.Estimator) + " not estimated: " + ErrorMessage(err)})
		}
	}
	return out
}

type flagView struct {
	Bad  bool
	Text string
}

var flagsTemplate = template.Must(template.New("flags").Parse(
	`{{if .Flags}}<ul style="margin:0.3em 0 0.5em 1.1em;padding:0;font-size:0.88rem;">{{range .Flags}}` +
		`<li{{if .Bad}} style="color:` + ColorBad + `"{{else}} style="color:` + ColorWarn + `"{{end}}>{{.Text}}</li>{{end}}</ul>{{end}}` +
		`{{if .Notes}}<ul class="cp-note" style="margin:0.2em 0 0.5em 1.1em;padding:0;">{{range .Notes}}<li>{{.}}</li>{{end}}</ul>{{end}}`))

// flagsHTML lists an effect's flags (unsupported first, in red) and notes.
func flagsHTML(flags []causal.Flag, notes []string) string {
	var fv []flagView
	for _, f := range flags {
		fv = append(fv, flagView{Bad: f.Code == "unsupported_estimand" || f.Code == "not_estimated", Text: f.Message})
	}
	var b strings.Builder
	if err := flagsTemplate.Execute(&b, struct {
		Flags []flagView
		Notes []string
	}{fv, notes}); err != nil {
		return ErrorPanel(err)
	}
	return b.String()
}

// trimmedTable shows what trimming kept and dropped per arm.
func trimmedTable(t *causal.Trimmed) table {
	keep := "[" + formatScore(t.Keep.Lo) + ", " + formatScore(t.Keep.Hi) + "]"
	tb := table{
		Caption: "Kept and dropped units (" + t.Rule.String() + "): scores kept " + keep,
		Head:    []tableCell{headText("arm"), headNum("kept"), headNum("dropped"), headNum("share dropped")},
	}
	arm := func(name string, kept, dropped int) tableRow {
		share := 0.0
		if kept+dropped > 0 {
			share = float64(dropped) / float64(kept+dropped)
		}
		c := numCell(formatPercent(share))
		if share > 0.1 {
			c.Tone = toneWarn
		}
		return tableRow{Cells: []tableCell{textCell(name), numCell(formatCount(kept)), numCell(formatCount(dropped)), c}}
	}
	tb.Rows = []tableRow{arm("treated", t.KeptTreated, t.DroppedTreated), arm("control", t.KeptControl, t.DroppedControl)}
	if len(t.DroppedTerms) > 0 {
		tb.Note = "Constant among the kept units and left out of the refitted model: " + strings.Join(t.DroppedTerms, ", ") + "."
	}
	return tb
}

// trimmedProfileTable compares dropped with kept units.
func trimmedProfileTable(t *causal.Trimmed) table {
	return profileRowsTable(t.Profile, "Who was dropped: dropped versus kept units, largest differences first", "mean dropped", "mean kept")
}

// bootstrapTable summarises a bootstrap run.
func bootstrapTable(b *causal.Bootstrap) table {
	tb := table{
		Caption: "Bootstrap of " + estimatorName(b.Estimator) + ", " + b.Estimand.String() + " (Efron & Tibshirani 1993)",
		Head: []tableCell{headNum("estimate"), headNum("bootstrap SE"), headNum("bias"), headNum("95% percentile interval"),
			headNum("95% normal interval"), headNum("replicates"), headNum("failed"), headNum("seed")},
	}
	failed := numCell(formatCount(b.Failed))
	if b.Failed > 0 {
		failed.Tone = toneWarn
		failed.Hint = b.FailReason
	}
	tb.Rows = []tableRow{{Cells: []tableCell{numCell(formatNumber(b.Estimate)), numCell(formatNumber(b.SE)), numCell(formatNumber(b.Bias)),
		numCell(intervalText(b.Percentile)), numCell(intervalText(b.Normal)),
		numCell(formatCount(len(b.Replicates)) + " of " + formatCount(b.Requested)), failed, numCell(strconv.FormatUint(b.Seed, 10))}}}
	var notes []string
	if b.Partial {
		notes = append(notes, "Partial: the run was cancelled; the summaries use the replicates done.")
	}
	if b.Failed > 0 && b.FailReason != "" {
		notes = append(notes, "First failure: "+b.FailReason+".")
	}
	notes = append(notes, b.Notes...)
	tb.Note = strings.Join(notes, " ")
	return tb
}

// sweepTable lists a trimming sweep, one row per α.
func sweepTable(s *causal.Sweep) table {
	t := table{
		Caption: "Trimming sweep: " + estimatorName(s.Estimator) + ", " + s.Estimand.String() + " (each α is a different population)",
		Head: []tableCell{headNum("α"), headNum("treated kept"), headNum("controls kept"), headNum("estimate"), headNum("SE"),
			headNum("95% interval"), tableCell{Text: "largest |SMD|", Num: true, Hint: "after " + s.Estimand.String() + " weighting of the kept units"},
			headNum("ESS treated"), headNum("ESS control"), headText("status")},
	}
	opt := optimalIndex(s)
	for i, r := range s.Rows {
		if i == maxTableRows {
			break
		}
		status := flagCell("", tonePlain)
		switch {
		case r.Err != "" && !finite(r.Value):
			status = flagCell("not estimated: "+r.Err, toneBad)
		case !r.Supported:
			status = flagCell("not supported by the data", toneBad)
		}
		alpha := numCell(formatFixed(r.Alpha, 3))
		if i == opt {
			alpha.Text += " (≈ optimal)"
			alpha.Hint = "the grid α nearest the optimal α of Crump et al. (2009)"
		}
		smd := numCell(smdText(r.MaxAbsSMD))
		if finite(r.MaxAbsSMD) && r.MaxAbsSMD > smdReference {
			smd.Tone = toneWarn
		}
		ess := func(v float64) tableCell {
			if !finite(v) {
				return numCell("—")
			}
			return numCell(formatCount(int(math.Round(v))))
		}
		t.Rows = append(t.Rows, tableRow{Flagged: i == opt, Cells: []tableCell{alpha,
			numCell(formatCount(r.KeptTreated)), numCell(formatCount(r.KeptControl)), numCell(formatNumber(r.Value)),
			numCell(formatNumber(r.SE)), numCell(intervalText(r.CI95)), smd, ess(r.ESSTreated), ess(r.ESSControl), status}})
	}
	t.Note = moreRows(min(len(s.Rows), maxTableRows), len(s.Rows), "thresholds")
	if s.Optimal > 0 {
		t.Note = strings.TrimSpace("Optimal α for these scores (Crump, Hotz, Imbens & Mitnik 2009): " + formatFixed(s.Optimal, 3) + ". " + t.Note)
	} else {
		t.Note = strings.TrimSpace("The rule of Crump, Hotz, Imbens & Mitnik (2009) advises no trimming for these scores. " + t.Note)
	}
	return t
}

// extrapolationTable summarises the audit of each outcome model.
func extrapolationTable(a *causal.ExtrapolationAudit) table {
	t := table{
		Caption: "Counterfactual predictions of regression adjustment (" + a.Estimand.String() + ")",
		Head: []tableCell{headText("model"), headText("fitted on"), headNum("units fitted"), headNum("predictions"),
			headNum("outside the arm's ranges"), headNum("leverage above the arm's maximum"), headNum("unsupported"), headNum("share")},
	}
	for _, m := range a.Models {
		share := numCell(formatPercent(m.Share))
		if m.Share > 0.05 {
			share.Tone = toneBad
		}
		if m.Predictions == 0 {
			share = numCell("—")
		}
		t.Rows = append(t.Rows, tableRow{Flagged: m.Unsupported > 0, Cells: []tableCell{textCell(m.Model), textCell(m.Arm + " units"),
			numCell(formatCount(m.FitN)), numCell(formatCount(m.Predictions)), numCell(formatCount(m.OutsideRange)),
			numCell(formatCount(m.HighLeverage)), numCell(formatCount(m.Unsupported)), share}})
	}
	return t
}

// termRangesTable lists the design terms on which predictions leave the
// fitting arm's range.
func termRangesTable(a *causal.ExtrapolationAudit) table {
	t := table{
		Caption: "Where predictions leave the fitting arm's range",
		Head:    []tableCell{headText("model"), headText("term"), headNum("arm's range"), headNum("predictions below"), headNum("predictions above")},
	}
	for _, m := range a.Models {
		for _, r := range m.Terms {
			if r.Below+r.Above == 0 || len(t.Rows) == maxTableRows {
				continue
			}
			rng := "[" + formatNumber(r.Lo) + ", " + formatNumber(r.Hi) + "]"
			if r.Binary && r.Lo == r.Hi {
				rng = "always " + formatNumber(r.Lo)
			}
			t.Rows = append(t.Rows, tableRow{Cells: []tableCell{textCell(m.Model), textCell(r.Term), numCell(rng),
				numCell(formatCount(r.Below)), numCell(formatCount(r.Above))}})
		}
	}
	return t
}
