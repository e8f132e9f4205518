package widgets

import (
	"fmt"
	"html/template"
	"math"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
)

// Viewer is a result ready to show: HTML for a notebook or a page, String
// for a terminal.
type Viewer interface {
	HTML() string
	String() string
}

// View returns the notebook view of a causal result: a one-sentence
// headline saying what a practitioner should conclude, the result's charts
// (interactive, with static pictures for readers without scripts) and its
// tables. A result whose Err() is not nil is shown as an error panel naming
// what to fix. Supported: *causal.Scores, *causal.Support, *causal.Cells,
// *causal.Erosion, *causal.BalanceSheet, *causal.Verdict, *causal.Weights,
// *causal.Effect, *causal.Estimates, *causal.Trimmed, *causal.Bootstrap,
// *causal.Sweep, *causal.ExtrapolationAudit, *causal.ExtrapolationCurve,
// *causal.Matching, *causal.Strata, and errors; any
// other value with HTML and String methods is passed through, and anything
// else is shown as escaped text.
//
// The HTML is built when HTML() is called. String() is the headline followed
// by the result's own terminal text.
func View(x any) Viewer { return resultView{x: x} }

// HTML is View(x).HTML().
func HTML(x any) string { return View(x).HTML() }

// Headline is the one-sentence conclusion View puts on top of a result, or
// "" for a value it has no headline for. A result with an error gets the
// error's message.
func Headline(x any) (h string) {
	defer func() {
		if r := recover(); r != nil {
			h = ""
		}
	}()
	return headline(x)
}

type resultView struct{ x any }

// errer is implemented by every causal result.
type errer interface{ Err() error }

func (v resultView) String() (out string) {
	defer func() {
		if r := recover(); r != nil {
			out = ErrorText(fmt.Errorf("showing a %T failed: %v", v.x, r))
		}
	}()
	if err := resultErr(v.x); err != nil {
		return ErrorText(err)
	}
	body := ""
	switch x := v.x.(type) {
	case fmt.Stringer:
		body = x.String()
	case nil:
		body = "<nil>"
	default:
		body = fmt.Sprint(x)
	}
	if h := headline(v.x); h != "" {
		return h + "\n\n" + body
	}
	return body
}

func (v resultView) HTML() (out string) {
	defer func() {
		if r := recover(); r != nil {
			out = ErrorPanel(fmt.Errorf("showing a %T failed: %v", v.x, r))
		}
	}()
	if err := resultErr(v.x); err != nil {
		return ErrorPanel(err)
	}
	switch x := v.x.(type) {
	case *causal.Scores:
		return compose("scores", headline(x), scoresParts(x))
	case *causal.Support:
		return compose("support", headline(x), supportParts(x))
	case *causal.Cells:
		return compose("cells", headline(x), cellsParts(x))
	case *causal.Erosion:
		return compose("erosion", headline(x), erosionParts(x))
	case *causal.BalanceSheet:
		return compose("balance", headline(x), balanceParts(x))
	case *causal.Verdict:
		return compose("verdict", "", []string{verdictPanel(x)})
	case *causal.Weights:
		return compose("weights", headline(x), weightsParts(x))
	case *causal.Effect:
		return compose("effect", headline(x), effectParts(x))
	case *causal.Estimates:
		return compose("estimates", headline(x), estimatesParts(x))
	case *causal.Trimmed:
		return compose("trimmed", headline(x), trimmedParts(x))
	case *causal.Bootstrap:
		return compose("bootstrap", headline(x), bootstrapParts(x))
	case *causal.Sweep:
		return compose("sweep", headline(x), sweepParts(x))
	case *causal.ExtrapolationAudit:
		return compose("extrapolation", headline(x), extrapolationParts(x))
	case *causal.ExtrapolationCurve:
		return compose("extrapolation-curve", headline(x), curveParts(x))
	case *causal.Matching:
		return compose("matching", headline(x), matchingParts(x))
	case *causal.Strata:
		return compose("strata", headline(x), strataParts(x))
	case Viewer:
		return x.HTML()
	case interface{ HTML() string }:
		return x.HTML()
	case nil:
		return `<pre class="cp-text">&lt;nil&gt;</pre>`
	case fmt.Stringer:
		return `<pre class="cp-text">` + template.HTMLEscapeString(x.String()) + `</pre>`
	default:
		return `<pre class="cp-text">` + template.HTMLEscapeString(fmt.Sprint(x)) + `</pre>`
	}
}

// resultErr returns the error to show instead of x, if any.
func resultErr(x any) error {
	switch v := x.(type) {
	case nil:
		return nil
	case error:
		return v
	case errer:
		return v.Err()
	}
	return nil
}

var viewTemplate = template.Must(template.New("view").Parse(
	`<div class="cp-view" data-cp-view="{{.Kind}}">` +
		`{{if .Headline}}<p class="cp-headline" style="font-size:0.95rem;font-weight:550;margin:0.3em 0 0.6em 0;color:` + ColorInk + `;` +
		`font-family:system-ui,-apple-system,'Segoe UI',Roboto,Arial,sans-serif;">{{.Headline}}</p>{{end}}` +
		`{{range .Parts}}{{.}}{{end}}</div>`))

// compose joins a headline and HTML parts made in this package.
func compose(kind, head string, parts []string) string {
	ps := make([]template.HTML, 0, len(parts))
	for _, p := range parts {
		if p != "" {
			ps = append(ps, template.HTML(p))
		}
	}
	var b strings.Builder
	if err := viewTemplate.Execute(&b, struct {
		Kind, Headline string
		Parts          []template.HTML
	}{kind, head, ps}); err != nil {
		return ErrorPanel(err)
	}
	return b.String()
}

// capitalize upper-cases the first letter of a sentence.
func capitalize(s string) string {
	for i, r := range s {
		return strings.ToUpper(string(r)) + s[i+len(string(r)):]
	}
	return s
}

// chartPart embeds a chart, or says why it could not be drawn.
func chartPart(c Chart, err error) string {
	if err != nil {
		return ErrorPanel(fmt.Errorf("chart not drawn: %w", err))
	}
	return c.HTML()
}

// notePart is a muted caption.
func notePart(s string) string {
	if s == "" {
		return ""
	}
	return `<p class="cp-note">` + template.HTMLEscapeString(s) + `</p>`
}

func scoresParts(s *causal.Scores) []string {
	return []string{
		separationHTML(s),
		chartPart(CalibrationPlot(s)),
		notePart("Each point is a tenth of the units, grouped by fitted score. Points near the diagonal: the scores match how often units are treated; a systematic bend suggests the model's form misses part of how treatment depends on the covariates."),
		calibrationTable(s).HTML(),
		termsTable(s).HTML(),
	}
}

func supportParts(s *causal.Support) []string {
	parts := []string{
		chartPart(SupportHistogram(s)),
		chartPart(ScoreDensity(s)),
		notePart("Shaded: the common-support band, from the larger of the arms' lowest scores to the smaller of their highest scores."),
		supportTable(s).HTML(),
	}
	if len(s.Profile) > 0 {
		parts = append(parts, profileTable(s).HTML())
	}
	return parts
}

func cellsParts(c *causal.Cells) []string {
	var parts []string
	if len(c.Columns) == 2 {
		ch, err := CellsHeatmap(c)
		if err == nil {
			parts = append(parts, ch.HTML(), notePart(fmt.Sprintf(
				"Colour: share of the cell's units that are treated (amber all control, teal all treated). Red border: an arm is empty, a positivity violation. Dashed border: an arm has fewer than %d units. Blank: no units.", c.Options.Thin)))
		} else {
			parts = append(parts, notePart("No heatmap: "+err.Error()+"."))
		}
	}
	return append(parts, cellsTable(c).HTML())
}

func erosionParts(e *causal.Erosion) []string {
	return []string{
		chartPart(ErosionCurve(e)),
		notePart(fmt.Sprintf("Each step cuts the units into cells by the covariates so far (continuous ones into %d quantile bins) and counts the units whose cell holds both arms.", e.Options.Bins)),
		erosionTable(e).HTML(),
	}
}

func balanceParts(b *causal.BalanceSheet) []string {
	d, err := balanceOf(b)
	note := ""
	if err == nil && d.Shown < d.Total {
		note = fmt.Sprintf("The chart shows the %d terms with the largest |SMD| of %s; the table lists all.", d.Shown, formatCount(d.Total))
	}
	return []string{chartPart(BalanceDots(b)), notePart(note), balanceTable(b).HTML()}
}

// headline dispatches to the headline of each result type.
func headline(x any) string {
	if err := resultErr(x); err != nil {
		return ErrorMessage(err)
	}
	return capitalize(typeHeadline(x))
}

func typeHeadline(x any) string {
	switch v := x.(type) {
	case *causal.Scores:
		return scoresHeadline(v)
	case *causal.Support:
		return supportHeadline(v)
	case *causal.Cells:
		return cellsHeadline(v)
	case *causal.Erosion:
		return erosionHeadline(v)
	case *causal.BalanceSheet:
		return balanceHeadline(v)
	case *causal.Verdict:
		return verdictHeadline(v)
	case *causal.Weights:
		return weightsHeadline(v)
	case *causal.Effect:
		return effectHeadline(v)
	case *causal.Estimates:
		return estimatesHeadline(v)
	case *causal.Trimmed:
		return trimmedHeadline(v)
	case *causal.Bootstrap:
		return bootstrapHeadline(v)
	case *causal.Sweep:
		return sweepHeadline(v)
	case *causal.ExtrapolationAudit:
		return extrapolationHeadline(v)
	case *causal.ExtrapolationCurve:
		return curveHeadline(v)
	case *causal.Matching:
		return matchingHeadline(v)
	case *causal.Strata:
		return strataHeadline(v)
	}
	return ""
}

func sweepParts(s *causal.Sweep) []string {
	return []string{
		chartPart(TrimmingSweep(s)),
		notePart("Move the slider to see, for each α, the units kept and the largest |SMD| after weighting; the marker follows on the curve. Each α is a different population: a flat curve says the estimate does not hinge on the units at the edges of the score range."),
		sweepTable(s).HTML(),
		cautionsHTML(),
	}
}

// curveCovariate picks the numeric covariate to draw for an audit: the
// non-binary term on which most predictions leave the fitting arm's range,
// else the first non-binary term.
func curveCovariate(a *causal.ExtrapolationAudit) string {
	best, most := "", -1
	for _, m := range a.Models {
		for _, r := range m.Terms {
			if r.Binary || strings.Contains(r.Term, "=") {
				continue
			}
			if n := r.Below + r.Above; n > most {
				best, most = r.Term, n
			}
		}
	}
	return best
}

func extrapolationParts(a *causal.ExtrapolationAudit) []string {
	var parts []string
	if cov := curveCovariate(a); cov != "" {
		c := a.Curve(cov)
		if c.Err() == nil {
			parts = append(parts, chartPart(ExtrapolationPlot(c)), notePart(heldNote(c)))
		}
	}
	parts = append(parts, extrapolationTable(a).HTML(), notePart("Unsupported: outside the fitting arm's range on a term, or "+causal.LeverageRule+"."))
	if tr := termRangesTable(a); len(tr.Rows) > 0 {
		parts = append(parts, tr.HTML())
	}
	var effects []*causal.Effect
	var labels []string
	for k, e := range []*causal.Effect{a.Full, a.Restricted} {
		if e != nil {
			effects = append(effects, e)
			labels = append(labels, []string{"regression adjustment, all target units",
				fmt.Sprintf("regression adjustment, the %s supported units", formatCount(a.SupportedN))}[k])
		}
	}
	if len(effects) > 0 {
		t := estimatesTable(effects, "Regression adjustment over all target units, and over those whose predictions are supported")
		for i := range t.Rows {
			t.Rows[i].Cells[0].Text = labels[i]
		}
		parts = append(parts, t.HTML(), flagsHTML(estimateErrors(effects), nil))
	}
	return append(parts, cautionsHTML())
}

func curveParts(c *causal.ExtrapolationCurve) []string {
	return []string{chartPart(ExtrapolationPlot(c)), notePart(heldNote(c))}
}

// heldNote says what the other terms are held at along the curve.
func heldNote(c *causal.ExtrapolationCurve) string {
	var held []string
	for i, h := range c.Held {
		if i == 8 {
			held = append(held, fmt.Sprintf("and %d more", len(c.Held)-8))
			break
		}
		held = append(held, h.Term+" = "+formatNumber(h.Value))
	}
	s := fmt.Sprintf("Points: %s of %s treated and %s of %s control units (an even subsample when there are more).",
		formatCount(len(c.Treated)), formatCount(c.TreatedTotal), formatCount(len(c.Control)), formatCount(c.ControlTotal))
	if len(held) > 0 {
		s += " The lines hold the other terms at " + strings.Join(held, ", ") + " (numeric terms at their mean, category levels at the reference)."
	}
	return s
}

func sweepHeadline(s *causal.Sweep) string {
	first, last := -1, -1
	for i, r := range s.Rows {
		if finite(r.Value) {
			if first < 0 {
				first = i
			}
			last = i
		}
	}
	if first < 0 {
		return "No threshold of the sweep gives an estimate: see the table for why."
	}
	a, b := s.Rows[first], s.Rows[last]
	head := fmt.Sprintf("As α rises from %s to %s the %s estimate moves from %s to %s while the units kept fall from %s to %s",
		formatFixed(a.Alpha, 2), formatFixed(b.Alpha, 2), s.Estimand, formatNumber(a.Value), formatNumber(b.Value),
		formatCount(a.KeptTreated+a.KeptControl), formatCount(b.KeptTreated+b.KeptControl))
	if s.Optimal > 0 {
		head += fmt.Sprintf("; the optimal α of Crump et al. (2009) is %s", formatFixed(s.Optimal, 3))
	} else {
		head += "; the rule of Crump et al. (2009) advises no trimming"
	}
	return head + "."
}

func extrapolationHeadline(a *causal.ExtrapolationAudit) string {
	var parts []string
	for _, m := range a.Models {
		if m.Predictions == 0 {
			continue
		}
		what := "Y(1)"
		if m.Model == "f0" {
			what = "Y(0)"
		}
		parts = append(parts, fmt.Sprintf("%s of its %s predictions of %s (%s) leave the %s units' data", formatCount(m.Unsupported),
			formatCount(m.Predictions), what, formatPercent(m.Share), m.Arm))
	}
	if len(parts) == 0 {
		return "Regression adjustment makes no counterfactual prediction for the " + a.Estimand.String() + "."
	}
	head := "Regression adjustment of the " + a.Estimand.String() + ": " + strings.Join(parts, "; ")
	unsup := a.TargetN - a.SupportedN
	if unsup == 0 {
		return head + ": no prediction rests on extrapolation."
	}
	head += fmt.Sprintf(". For %s of %s target units the estimate rests on extrapolation", formatCount(unsup), formatCount(a.TargetN))
	if a.Full != nil && a.Full.Err() == nil && a.Restricted != nil && a.Restricted.Err() == nil {
		head += fmt.Sprintf("; over the supported units alone it is %s instead of %s (a different population)", formatNumber(a.Restricted.Value), formatNumber(a.Full.Value))
	}
	return head + "."
}

func curveHeadline(c *causal.ExtrapolationCurve) string {
	ivs := func(v []causal.Interval) string {
		one := func(iv causal.Interval) string { return "[" + formatNumber(iv.Lo) + ", " + formatNumber(iv.Hi) + "]" }
		if len(v) > 2 {
			widest := v[0]
			for _, iv := range v {
				if iv.Hi-iv.Lo > widest.Hi-widest.Lo {
					widest = iv
				}
			}
			return fmt.Sprintf("%d stretches (the widest %s)", len(v), one(widest))
		}
		var s []string
		for _, iv := range v {
			s = append(s, one(iv))
		}
		return strings.Join(s, " and ")
	}
	switch {
	case len(c.Unsupported1) == 0 && len(c.Unsupported0) == 0:
		return "Both arms have units across the range of " + c.Covariate + ": neither outcome model extrapolates along it."
	case len(c.Unsupported0) == 0:
		return "Along " + c.Covariate + " there are no treated units on " + ivs(c.Unsupported1) + ": there f1 (fitted on the treated) is extrapolation."
	case len(c.Unsupported1) == 0:
		return "Along " + c.Covariate + " there are no controls on " + ivs(c.Unsupported0) + ": there f0 (fitted on the controls) is extrapolation."
	}
	return "Along " + c.Covariate + " there are no treated units on " + ivs(c.Unsupported1) + " and no controls on " + ivs(c.Unsupported0) +
		": there the fitted lines are extrapolation."
}

func effectParts(e *causal.Effect) []string {
	t := estimatesTable([]*causal.Effect{e}, "Estimate: "+e.Population)
	return []string{t.HTML(), flagsHTML(e.Flags, e.Notes), cautionsHTML()}
}

func estimatesParts(es *causal.Estimates) []string {
	pop := ""
	var notes []string
	var flags []causal.Flag
	for _, e := range es.Items {
		if e.Err() == nil {
			if pop == "" {
				pop = e.Population
				flags = e.Flags
			}
		}
	}
	for _, e := range es.Items {
		if e.Err() == nil && e.Estimator == causal.DifferenceInMeans {
			notes = append(notes, "Difference in means is the unadjusted contrast: the gap between it and the adjusted estimates shows how much the covariates matter.")
		}
	}
	caption := "Estimates of the " + es.Estimand.String()
	if pop != "" {
		caption += ": " + pop
	}
	return []string{
		chartPart(EstimatesChart(es)),
		estimatesTable(es.Items, caption).HTML(),
		flagsHTML(append(estimateErrors(es.Items), flags...), notes),
		cautionsHTML(),
	}
}

func trimmedParts(t *causal.Trimmed) []string {
	parts := []string{chartPart(TrimmedHistogram(t)), trimmedTable(t).HTML()}
	if len(t.Profile) > 0 {
		parts = append(parts, trimmedProfileTable(t).HTML())
	}
	return append(parts, notePart(t.Population))
}

func bootstrapParts(b *causal.Bootstrap) []string {
	return []string{chartPart(BootstrapHistogram(b)), bootstrapTable(b).HTML(), cautionsHTML()}
}

// effectSentence is "<estimator> estimates the ATE at v (95% interval a to b)".
func effectSentence(e *causal.Effect) string {
	s := fmt.Sprintf("%s estimates the %s at %s", estimatorName(e.Estimator), e.Estimand, formatNumber(e.Value))
	if finite(e.CI95.Lo) {
		s += " (95% interval " + intervalText(e.CI95) + ")"
	} else {
		s += " (no standard error: see the flags)"
	}
	return s
}

// intervalReading says whether a 95% interval includes 0.
func intervalReading(iv causal.Interval) string {
	switch {
	case !finite(iv.Lo) || !finite(iv.Hi):
		return ""
	case iv.Lo > 0 || iv.Hi < 0:
		return "; the interval excludes no effect"
	}
	return "; the interval includes no effect"
}

func effectHeadline(e *causal.Effect) string {
	head := effectSentence(e) + intervalReading(e.CI95)
	if !e.Supported {
		return head + ". But the data do not support the " + e.Estimand.String() + " (see the reasons below): the number is an extrapolation."
	}
	if e.HasFlag("trimmed_population") {
		return head + ", for the trimmed population only."
	}
	return head + "."
}

// primaryEffect picks the estimate to name first: the doubly robust AIPW,
// then overlap weights, normalised IPW, regression adjustment and IPW; the
// unadjusted difference in means only when nothing else succeeded.
func primaryEffect(es *causal.Estimates) *causal.Effect {
	for _, want := range []causal.Estimator{causal.AIPW, causal.OverlapWeighted, causal.IPWNormalized,
		causal.RegressionAdjustment, causal.IPW, causal.DifferenceInMeans} {
		if e := es.Get(want); e != nil && e.Err() == nil && finite(e.Value) {
			return e
		}
	}
	return nil
}

func estimatesHeadline(es *causal.Estimates) string {
	p := primaryEffect(es)
	if p == nil {
		return "No estimator produced an estimate of the " + es.Estimand.String() + ": see the table for why."
	}
	head := effectSentence(p) + intervalReading(p.CI95)
	if p.Estimator == causal.DifferenceInMeans {
		head = "Only the unadjusted contrast could be computed: " + head
	}
	lo, hi, n := math.Inf(1), math.Inf(-1), 0
	for _, e := range es.Items {
		if e.Err() == nil && finite(e.Value) && e.Estimator != causal.DifferenceInMeans {
			lo, hi = math.Min(lo, e.Value), math.Max(hi, e.Value)
			n++
		}
	}
	if n > 1 {
		head += fmt.Sprintf("; the %d adjusted estimators range from %s to %s", n, formatNumber(lo), formatNumber(hi))
	}
	if !p.Supported {
		head += ". But the data do not support the " + es.Estimand.String() + " (see the reasons below): these numbers are extrapolations"
	} else if p.HasFlag("trimmed_population") {
		head += ", for the trimmed population only"
	}
	return head + "."
}

func trimmedHeadline(t *causal.Trimmed) string {
	if t.DroppedTreated+t.DroppedControl == 0 {
		return "Trimming drops no unit: the population is unchanged."
	}
	kept := t.KeptTreated + t.KeptControl
	total := kept + t.DroppedTreated + t.DroppedControl
	return fmt.Sprintf("Trimming keeps %s of %s units, those with scores in [%s, %s], and drops %s treated and %s controls: effects now describe the kept units, not the original population.",
		formatCount(kept), formatCount(total), formatScore(t.Keep.Lo), formatScore(t.Keep.Hi),
		formatCount(t.DroppedTreated), formatCount(t.DroppedControl))
}

func bootstrapHeadline(b *causal.Bootstrap) string {
	head := fmt.Sprintf("Bootstrap of %s, %s (%s replicates, seed %d): SE %s, 95%% percentile interval %s",
		estimatorName(b.Estimator), b.Estimand, formatCount(len(b.Replicates)), b.Seed, formatNumber(b.SE), intervalText(b.Percentile))
	if b.Failed > 0 {
		head += fmt.Sprintf("; %s replicates failed and are left out", formatCount(b.Failed))
	}
	if b.Partial {
		head += "; the run was cancelled, so this is partial"
	}
	return head + "."
}

func weightsParts(w *causal.Weights) []string {
	parts := []string{weightsTable(w).HTML()}
	if b := w.Balance(); b.Err() == nil {
		parts = append(parts, chartPart(BalanceDots(b)), balanceTable(b).HTML())
	} else {
		parts = append(parts, ErrorPanel(fmt.Errorf("balance after the weights: %w", b.Err())))
	}
	return parts
}

// weightsHeadline flags an arm whose effective sample size is below half its
// units: a few units then carry much of the weight (common practice, no
// source).
func weightsHeadline(w *causal.Weights) string {
	label := w.Label
	if label == "" {
		label = "The weights"
	}
	essShare := func(ess float64, n int) float64 {
		if n == 0 {
			return 0
		}
		return ess / float64(n)
	}
	st, sc := essShare(w.ESSTreated, w.Treated), essShare(w.ESSControl, w.Control)
	head := fmt.Sprintf("%s: effective sample size %s of %s treated (%s) and %s of %s controls (%s)",
		label, formatCount(int(math.Round(w.ESSTreated))), formatCount(w.Treated), formatPercent(st),
		formatCount(int(math.Round(w.ESSControl))), formatCount(w.Control), formatPercent(sc))
	if math.Min(st, sc) < 0.5 {
		arm, top := "treated", w.MaxTreated
		if sc < st {
			arm, top = "control", w.MaxControl
		}
		return head + fmt.Sprintf(". In the %s arm a few units carry much of the weight (largest %s): expect wide intervals, and consider overlap weights (ATO) or truncation.", arm, formatNumber(top))
	}
	return head + ": no arm leans on a handful of units."
}

// scoresHeadline reads the AUC with the bands below 0.6 (the covariates
// barely predict treatment), 0.6–0.8 (moderately) and above 0.8 (strongly:
// expect thin overlap) — common practice, no source.
func scoresHeadline(s *causal.Scores) string {
	if len(s.Separation) > 0 {
		var where []string
		units := 0
		for _, f := range s.Separation {
			where = append(where, f.Term)
			units += f.Units
		}
		if len(where) > 3 {
			where = append(where[:3], fmt.Sprintf("%d more", len(s.Separation)-3))
		}
		return fmt.Sprintf("Positivity is violated: treatment is deterministic for %s (%s units in one arm only). No finite coefficient exists there; restrict the population before estimating an effect.",
			strings.Join(where, ", "), formatCount(units))
	}
	if !s.Converged {
		return fmt.Sprintf("The propensity model did not converge in %d iterations: treat these scores with caution (try fewer covariates, merged levels, or a ridge penalty).", s.Iterations)
	}
	strength := "barely predict treatment, so the arms look alike on them and overlap is likely good"
	switch {
	case s.AUC >= 0.8:
		strength = "strongly predict treatment, so expect thin overlap: check support before estimating"
	case s.AUC >= 0.6:
		strength = "moderately predict treatment"
	}
	return fmt.Sprintf("The propensity model converged in %d iterations; AUC %s: the covariates %s.", s.Iterations, formatFixed(s.AUC, 2), strength)
}

func supportHeadline(s *causal.Support) string {
	if s.Band.Lo > s.Band.Hi {
		return "The arms' score ranges do not overlap: there is no common support, so no like-for-like comparison exists on these covariates."
	}
	out := s.OutsideTreated + s.OutsideControl
	band := "[" + formatScore(s.Band.Lo) + ", " + formatScore(s.Band.Hi) + "]"
	if out == 0 {
		return "Every unit lies inside the common-support band " + band + ": by this measure the arms overlap fully."
	}
	share := s.ShareOutside()
	what := "few enough that overlap looks adequate by this measure"
	if share > 0.05 {
		what = "estimates for them would rest on extrapolation; consider overlap weights (ATO) or trimming"
	}
	return fmt.Sprintf("%s of units (%s treated, %s control) lie outside the common-support band %s: %s.",
		formatPercent(share), formatCount(s.OutsideTreated), formatCount(s.OutsideControl), band, what)
}

func cellsHeadline(c *causal.Cells) string {
	on := strings.Join(c.Columns, " × ")
	chance := c.Violating - c.Structural
	switch {
	case c.Structural > 0:
		return fmt.Sprintf("Positivity is violated on %s: %s of %s cells lack an arm where random assignment would not leave one empty, holding %s units (%s); no comparison exists for them (%s cells with an empty arm in all: %s treated without controls, %s controls without treated units).",
			on, formatCount(c.Structural), formatCount(len(c.Rows)), formatCount(c.UnitsStructural), formatPercent(float64(c.UnitsStructural)/float64(max(1, c.N))),
			formatCount(c.Violating), formatCount(c.TreatedViolating), formatCount(c.ControlViolating))
	case chance > 0:
		return fmt.Sprintf("No violation on %s: %s of %s cells lack an arm, holding %s units, but they are small enough for random assignment to leave an arm empty (chance screen, %s per cell); %s cells are thin (an arm with fewer than %d units).",
			on, formatCount(chance), formatCount(len(c.Rows)), formatCount(c.UnitsViolating), formatNumber(c.ChanceThreshold), formatCount(c.ThinCells), c.Options.Thin)
	case c.ThinCells > 0:
		return fmt.Sprintf("Every cell of %s holds both arms, but %s of %s cells are thin (an arm with fewer than %d units): estimates there rest on very few units.",
			on, formatCount(c.ThinCells), formatCount(len(c.Rows)), c.Options.Thin)
	}
	return fmt.Sprintf("Every cell of %s holds both arms with at least %d units each: positivity holds on this cut.", on, c.Options.Thin)
}

func erosionHeadline(e *causal.Erosion) string {
	if len(e.Steps) == 0 {
		return ""
	}
	last := e.Steps[len(e.Steps)-1]
	worst, drop, prev := "", 0.0, 1.0
	for _, s := range e.Steps {
		if d := prev - s.ShareBoth; d > drop {
			worst, drop = s.Added, d
		}
		prev = s.ShareBoth
	}
	head := fmt.Sprintf("Adjusting for all %d covariates leaves %s of units in cells with both arms (treated with controls %s, controls with treated %s)",
		len(e.Steps), formatPercent(last.ShareBoth), formatPercent(last.TreatedCovered), formatPercent(last.ControlCovered))
	if drop > 0 {
		head += fmt.Sprintf("; the largest loss comes with %s (%s points)", worst, formatFixed(100*drop, 1))
	}
	return head + "."
}

func balanceHeadline(b *causal.BalanceSheet) string {
	if len(b.Rows) == 0 {
		return "No covariate terms to balance."
	}
	count := func(after bool) (n int, worst string, top float64) {
		for _, r := range b.Rows {
			v := r.SMD
			if after {
				v = r.SMDWeighted
			}
			if math.IsNaN(v) {
				continue
			}
			if math.Abs(v) > causal.SMDThreshold {
				n++
			}
			if math.Abs(v) > top || worst == "" {
				worst, top = r.Term, math.Abs(v)
			}
		}
		return
	}
	nb, wb, tb := count(false)
	m := len(b.Rows)
	if !b.Weighted {
		if nb == 0 {
			return fmt.Sprintf("Before any weighting every one of the %d terms has |SMD| ≤ 0.1 (largest %s, %s): the arms are balanced on these covariates by this rule (Austin 2009).", m, wb, formatFixed(tb, 3))
		}
		return fmt.Sprintf("Before weighting %d of %d terms have |SMD| > 0.1 (largest %s, %s): the arms differ on these covariates, so an unadjusted comparison would be confounded by them.", nb, m, wb, formatFixed(tb, 3))
	}
	label := b.Label
	if label == "" {
		label = "weighting"
	}
	na, wa, ta := count(true)
	if na == 0 {
		return fmt.Sprintf("After %s every term has |SMD| ≤ 0.1 (largest %s, %s; before: %d of %d above 0.1): balance is adequate by this rule (Austin 2009).", label, wa, formatFixed(ta, 3), nb, m)
	}
	return fmt.Sprintf("After %s %d of %d terms still have |SMD| > 0.1 (largest %s, %s; before: %d): the weights do not balance these covariates; revisit the propensity model or the estimand.", label, na, m, wa, formatFixed(ta, 3), nb)
}

func verdictHeadline(v *causal.Verdict) string {
	if v.Err() != nil {
		return "No verdict: " + v.Err().Error()
	}
	sup := strings.Join(v.Supported, ", ")
	if sup == "" {
		sup = "none"
	}
	target := v.Target
	ts := strings.ReplaceAll(string(v.StatusOf(estimandOf(target))), "_", " ")
	switch v.Status {
	case causal.Adequate:
		return "Overlap is adequate on these covariates: every estimand is supported (" + sup + ")."
	case causal.Violated:
		return fmt.Sprintf("Positivity is violated: some units have no counterpart in the other arm (%d finding%s below). The %s is %s; the data support %s.", len(v.Reasons), plural(len(v.Reasons)), target, ts, sup)
	}
	return fmt.Sprintf("Overlap is limited (%d finding%s below). The %s is %s; the data support %s.", len(v.Reasons), plural(len(v.Reasons)), target, ts, sup)
}

func estimandOf(s string) causal.Estimand {
	e, _ := causal.ParseEstimand(s)
	return e
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}
