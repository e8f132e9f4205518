package widgets

import (
	"errors"
	"fmt"
	"image/color"
	"math"
	"slices"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Bounds of the matched-pairs chart, whatever n is.
const (
	maxPairSets      = 200 // matched sets drawn (evenly spaced by score)
	maxPairLines     = 4   // lines per set (a set with ties may hold more matches)
	maxUnmatchedDots = 150 // unmatched units drawn per arm
)

// pairsData is the matched-pairs chart: a sample of the matched sets as
// segments between the treated row (y = 1) and the control row (y = 0) on
// the logit score, and a sample of the unmatched units with the caliper
// window they found empty on the other row.
type pairsData struct {
	Segments           [][4]float64 // x1, y1, x0, y0
	Treated, Control   [][2]float64 // points of the drawn sets
	UnTreated, UnCtrl  []float64    // logits of the unmatched drawn
	NUnTreated, NUnCtl int          // unmatched in all
	Windows            [][3]float64 // unmatched: lo, hi, y of the other row
	Sets, SetsShown    int
	Caliper            float64 // width on the logit (NaN: none)
	XMin, XMax         float64
	Estimand           string
}

// evenly picks at most k of n indices, evenly spaced (all when n ≤ k).
func evenly(n, k int) []int {
	if n <= k {
		out := make([]int, n)
		for i := range out {
			out[i] = i
		}
		return out
	}
	out := make([]int, k)
	for i := range out {
		out[i] = int(float64(i) * float64(n-1) / float64(k-1))
	}
	return out
}

func logitOf(e float64) float64 { return math.Log(e / (1 - e)) }

func pairsOf(m *causal.Matching) (pairsData, error) {
	if err := m.Err(); err != nil {
		return pairsData{}, err
	}
	sc := m.Scores
	d := sc.Design
	p := pairsData{Sets: len(m.Sets), Caliper: math.NaN(), Estimand: m.Options.Estimand.String(),
		XMin: math.Inf(1), XMax: math.Inf(-1)}
	if finite(m.CaliperWidth) {
		p.Caliper = m.CaliperWidth
	}
	y := func(i int) float64 { return d.T[i] }
	extend := func(x float64) {
		if finite(x) {
			p.XMin, p.XMax = math.Min(p.XMin, x), math.Max(p.XMax, x)
		}
	}
	// Sets in order of their unit's score, then evenly spaced.
	order := make([]int, len(m.Sets))
	for k := range order {
		order[k] = k
	}
	slices.SortStableFunc(order, func(a, b int) int {
		return cmpFloat(sc.E[m.Sets[a].Unit], sc.E[m.Sets[b].Unit])
	})
	for _, k := range evenly(len(order), maxPairSets) {
		s := m.Sets[order[k]]
		x1 := logitOf(sc.E[s.Unit])
		extend(x1)
		pt := [2]float64{round(x1, 5), y(s.Unit)}
		if d.T[s.Unit] == 1 {
			p.Treated = append(p.Treated, pt)
		} else {
			p.Control = append(p.Control, pt)
		}
		for q, j := range s.Matches {
			if q == maxPairLines {
				break
			}
			x0 := logitOf(sc.E[j])
			extend(x0)
			p.Segments = append(p.Segments, [4]float64{round(x1, 5), y(s.Unit), round(x0, 5), y(j)})
			mp := [2]float64{round(x0, 5), y(j)}
			if d.T[j] == 1 {
				p.Treated = append(p.Treated, mp)
			} else {
				p.Control = append(p.Control, mp)
			}
		}
		p.SetsShown++
	}
	for _, treated := range []bool{true, false} {
		mask := m.UnmatchedMask(treated)
		var ls []float64
		for i, u := range mask {
			if u {
				ls = append(ls, logitOf(sc.E[i]))
			}
		}
		slices.Sort(ls)
		var shown []float64
		for _, k := range evenly(len(ls), maxUnmatchedDots) {
			x := ls[k]
			if !finite(x) {
				// A score of exactly 0 or 1: drawn at the edge.
				x = math.Copysign(1e300, x)
			}
			shown = append(shown, x)
		}
		other := 0.0
		if !treated {
			other = 1
		}
		for _, x := range shown {
			extend(x)
			if finite(p.Caliper) && math.Abs(x) < 1e300 {
				p.Windows = append(p.Windows, [3]float64{round(x-p.Caliper, 5), round(x+p.Caliper, 5), other})
				extend(x - p.Caliper)
				extend(x + p.Caliper)
			}
		}
		if treated {
			p.UnTreated, p.NUnTreated = shown, len(ls)
		} else {
			p.UnCtrl, p.NUnCtl = shown, len(ls)
		}
	}
	if !finite(p.XMin) {
		return pairsData{}, errors.New("matching has no finite scores to draw")
	}
	pad := math.Max(0.05, 0.03*(p.XMax-p.XMin))
	p.XMin, p.XMax = round(p.XMin-pad, 4), round(p.XMax+pad, 4)
	clamp := func(xs []float64) {
		for i, x := range xs {
			xs[i] = round(math.Max(p.XMin, math.Min(p.XMax, x)), 5)
		}
	}
	clamp(p.UnTreated)
	clamp(p.UnCtrl)
	return p, nil
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// MatchedPairs draws matched sets on the logit of the score: treated units
// on the upper row, controls on the lower one, a line from each unit to
// each of its matches (at most 200 sets, evenly spaced by score, and 4
// lines per set), the unmatched units in red and, with a caliper, the window
// of ± the caliper around each unmatched unit on the other arm's row: no
// unit of the other arm lies in it.
func MatchedPairs(m *causal.Matching) (Chart, error) {
	p, err := pairsOf(m)
	if err != nil {
		return Chart{}, err
	}
	title := "Matched sets on the logit score (" + p.Estimand + ")"
	const height = 300
	sc := charts.NewScatter()
	sc.SetGlobalOptions(commonOptions(title, "item", true)...)
	y := yValueAxis("", -1, 2, 40)
	y.SplitLine = &opts.SplitLine{Show: opts.Bool(false)}
	sc.SetGlobalOptions(charts.WithXAxisOpts(valueAxis("logit of the propensity score", p.XMin, p.XMax)),
		charts.WithYAxisOpts(y), gridOpts(72, 32, 54, 56))
	pts := func(xy [][2]float64) []opts.ScatterData {
		out := make([]opts.ScatterData, len(xy))
		for i, v := range xy {
			out[i] = opts.ScatterData{Value: []float64{v[0], v[1]}}
		}
		return out
	}
	row := func(xs []float64, yv float64) [][2]float64 {
		out := make([][2]float64, len(xs))
		for i, x := range xs {
			out[i] = [2]float64{x, yv}
		}
		return out
	}
	var seg []opts.LineData
	for _, s := range p.Segments {
		if len(seg) > 0 {
			seg = append(seg, opts.LineData{Value: "-"})
		}
		seg = append(seg, opts.LineData{Value: []float64{s[0], s[1]}}, opts.LineData{Value: []float64{s[2], s[3]}})
	}
	ln := charts.NewLine()
	ln.AddSeries(fmt.Sprintf("matched sets (%s of %s shown)", formatCount(p.SetsShown), formatCount(p.Sets)), seg,
		charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false), ConnectNulls: opts.Bool(false)}),
		charts.WithLineStyleOpts(opts.LineStyle{Color: colorBefore, Width: 1, Opacity: opts.Float(0.7)}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorBefore}))
	if len(p.Windows) > 0 {
		var win []opts.LineData
		for _, w := range p.Windows {
			if len(win) > 0 {
				win = append(win, opts.LineData{Value: "-"})
			}
			win = append(win, opts.LineData{Value: []float64{w[0], w[2]}}, opts.LineData{Value: []float64{w[1], w[2]}})
		}
		ln.AddSeries(fmt.Sprintf("caliper window (± %s) of the unmatched: empty", formatNumber(p.Caliper)), win,
			charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false), ConnectNulls: opts.Bool(false)}),
			charts.WithLineStyleOpts(opts.LineStyle{Color: ColorBad, Width: 4, Opacity: opts.Float(0.35)}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorBad}))
	}
	sc.AddSeries("treated", pts(p.Treated), charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 7}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorTreated, Opacity: opts.Float(0.8)}))
	sc.AddSeries("control", pts(p.Control), charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 7}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorControl, Opacity: opts.Float(0.8)}))
	if p.NUnTreated > 0 {
		sc.AddSeries(fmt.Sprintf("unmatched treated (%s)", formatCount(p.NUnTreated)), pts(row(p.UnTreated, 1)),
			charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 10, Symbol: "diamond"}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorBad}))
	}
	if p.NUnCtl > 0 {
		sc.AddSeries(fmt.Sprintf("unmatched controls (%s)", formatCount(p.NUnCtl)), pts(row(p.UnCtrl, 0)),
			charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 10, Symbol: "diamond"}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorBad}))
	}
	sc.Overlap(ln)
	option, err := optionJSON(sc, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"caliper": nullable([]float64{p.Caliper})[0]}, `
chart.setOption({
  yAxis: [{interval: 1, axisLabel: {formatter: function (v) { return v === 1 ? "treated" : (v === 0 ? "control" : ""); }}}],
  tooltip: {formatter: function (p) {
    if (!p || !p.value || p.value === "-") return "";
    var x = p.value[0], s = esc(p.seriesName) + "<br>logit " + num(x, 3) + " (score " + num(1 / (1 + Math.exp(-x)), 3) + ")";
    if (DATA.caliper !== null) s += "<br><span style=\"color:#64748b\">caliper \u00b1" + num(DATA.caliper, 3) + " on the logit</span>";
    return s;
  }}
});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticPairs(p, ph) })
}

// staticPairs draws the matched-pairs chart.
func staticPairs(p pairsData, height int) ([]byte, error) {
	pl := newPlot("logit of the propensity score", "")
	addGrid(pl, true, false)
	for _, s := range p.Segments {
		l, err := line(plotter.XYs{{X: s[0], Y: s[1]}, {X: s[2], Y: s[3]}}, withAlpha(beforeRGB, 170), thinLine)
		if err != nil {
			return nil, err
		}
		pl.Add(l)
	}
	for _, w := range p.Windows {
		l, err := line(plotter.XYs{{X: w[0], Y: w[2]}, {X: w[1], Y: w[2]}}, withAlpha(badRGB, 90), vg.Points(4))
		if err != nil {
			return nil, err
		}
		pl.Add(l)
	}
	dots := func(xy [][2]float64, c color.NRGBA, shape draw.GlyphDrawer, r vg.Length, name string) error {
		if len(xy) == 0 {
			return nil
		}
		pts := make(plotter.XYs, len(xy))
		for i, v := range xy {
			pts[i] = plotter.XY{X: v[0], Y: v[1]}
		}
		s, err := plotter.NewScatter(pts)
		if err != nil {
			return err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: c, Radius: r, Shape: shape}
		pl.Add(s)
		pl.Legend.Add(name, s)
		return nil
	}
	row := func(xs []float64, yv float64) [][2]float64 {
		out := make([][2]float64, len(xs))
		for i, x := range xs {
			out[i] = [2]float64{x, yv}
		}
		return out
	}
	for _, e := range []error{
		dots(p.Treated, treatedRGB, draw.CircleGlyph{}, vg.Points(2.5), "treated"),
		dots(p.Control, controlRGB, draw.CircleGlyph{}, vg.Points(2.5), "control"),
		dots(append(row(p.UnTreated, 1), row(p.UnCtrl, 0)...), badRGB, draw.PyramidGlyph{}, vg.Points(3.5), "unmatched"),
	} {
		if e != nil {
			return nil, e
		}
	}
	pl.X.Min, pl.X.Max = p.XMin, p.XMax
	pl.Y.Min, pl.Y.Max = -0.5, 1.5
	pl.Y.Tick.Marker = plot.ConstantTicks{{Value: 0, Label: "control"}, {Value: 1, Label: "treated"}}
	return renderPNG(pl, height)
}

// strataData is the counts per stratum by arm.
type strataData struct {
	Labels           []string
	Ranges           []string
	Treated, Control []int
	Empty            []string // the empty arm of each stratum ("" none)
}

func strataOf(s *causal.Strata) (strataData, error) {
	if err := s.Err(); err != nil {
		return strataData{}, err
	}
	var d strataData
	for j, r := range s.Strata {
		d.Labels = append(d.Labels, itoa(j+1))
		d.Ranges = append(d.Ranges, formatScore(r.Lo)+"–"+formatScore(r.Hi))
		d.Treated = append(d.Treated, r.Treated)
		d.Control = append(d.Control, r.Control)
		d.Empty = append(d.Empty, r.EmptyArm())
	}
	return d, nil
}

// StrataCounts shows the units of each arm in each score stratum; a stratum
// with an empty arm is marked in red (a positivity violation for the
// estimands that need that arm there).
func StrataCounts(s *causal.Strata) (Chart, error) {
	d, err := strataOf(s)
	if err != nil {
		return Chart{}, err
	}
	const title = "Units per score stratum"
	const height = 320
	bar := charts.NewBar()
	bar.SetGlobalOptions(commonOptions(title, "axis", true)...)
	bar.SetGlobalOptions(
		charts.WithXAxisOpts(opts.XAxis{Type: "category", Data: d.Labels, Name: "stratum (by score, lowest first)", NameLocation: "middle", NameGap: 30,
			AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted, Interval: "0"}}),
		charts.WithYAxisOpts(yValueAxis("units", 0, nil, 56)),
		gridOpts(80, 32, 44, 56))
	bar.SetXAxis(d.Labels)
	bars := func(v []int, arm string) []opts.BarData {
		out := make([]opts.BarData, len(v))
		for i, x := range v {
			out[i] = opts.BarData{Value: x}
			if d.Empty[i] != "" && d.Empty[i] != arm {
				out[i].ItemStyle = &opts.ItemStyle{BorderColor: ColorBad, BorderWidth: 2}
			}
		}
		return out
	}
	bar.AddSeries("treated", bars(d.Treated, "treated"), charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorTreated}))
	bar.AddSeries("control", bars(d.Control, "control"), charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorControl}))
	option, err := optionJSON(bar, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"ranges": d.Ranges, "empty": d.Empty}, `
chart.setOption({tooltip: {formatter: function (ps) {
  if (!ps || !ps.length) return "";
  var i = ps[0].dataIndex;
  var s = "stratum " + (i + 1) + ": scores " + esc(DATA.ranges[i]);
  for (var k = 0; k < ps.length; k++) s += "<br>" + ps[k].marker + esc(ps[k].seriesName) + ": " + count(ps[k].value) + " units";
  if (DATA.empty[i]) s += "<br><b style=\"color:#b91c1c\">no " + (DATA.empty[i] === "both" ? "units" : esc(DATA.empty[i]) + " units") + " here</b>";
  return s;
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticStrata(d, ph) })
}

// staticStrata draws the strata counts as paired bars.
func staticStrata(d strataData, height int) ([]byte, error) {
	p := newPlot("stratum (by score, lowest first)", "units")
	addGrid(p, false, true)
	var tr, cr, bad []plotter.XYs
	top := 1.0
	for i := range d.Labels {
		x := float64(i)
		tr = append(tr, rect(x-0.38, x, 0, float64(d.Treated[i])))
		cr = append(cr, rect(x, x+0.38, 0, float64(d.Control[i])))
		top = math.Max(top, float64(max(d.Treated[i], d.Control[i])))
		if d.Empty[i] != "" {
			bad = append(bad, rect(x-0.45, x+0.45, 0, 0))
		}
	}
	for i := range bad {
		bad[i][2].Y, bad[i][3].Y = top*1.04, top*1.04
	}
	for _, g := range []struct {
		rs    []plotter.XYs
		fill  color.Color
		edge  color.Color
		label string
	}{{bad, noSuppRGB, badRGB, "stratum with an empty arm"}, {tr, treatedRGB, nil, "treated"}, {cr, controlRGB, nil, "control"}} {
		if len(g.rs) == 0 {
			continue
		}
		pg, err := filledRects(g.rs, g.fill, g.edge)
		if err != nil {
			return nil, err
		}
		p.Add(pg)
		p.Legend.Add(g.label, pg)
	}
	p.X.Min, p.X.Max = -0.6, float64(len(d.Labels))-0.4
	p.Y.Min, p.Y.Max = 0, top*1.08
	p.X.Tick.Marker = nominalTicks(d.Labels)
	return renderPNG(p, height)
}

// matchingTable shows, per arm the estimand describes, the units to match,
// matched and unmatched, and how the other arm's units were used.
func matchingTable(m *causal.Matching) table {
	o := m.Options
	how := fmt.Sprintf("%d:1 %s replacement", o.K, map[bool]string{true: "without", false: "with"}[o.WithoutReplacement])
	if o.Caliper > 0 {
		how += fmt.Sprintf(", caliper %s SD of the logit (%s)", formatNumber(o.Caliper), formatNumber(m.CaliperWidth))
	} else {
		how += ", no caliper"
	}
	if len(o.Exact) > 0 {
		how += ", exact on " + strings.Join(o.Exact, ", ")
	}
	t := table{Caption: "Matching for the " + o.Estimand.String() + ": " + how,
		Head: []tableCell{headText("arm"), headNum("to match"), headNum("matched"), headNum("unmatched"), headNum("share unmatched"),
			headNum("used as matches"), headNum("effective sample size")}}
	arm := func(name string, tg, mt, un, used int, ess float64) tableRow {
		share := 0.0
		if tg > 0 {
			share = float64(un) / float64(tg)
		}
		c := numCell(formatPercent(share))
		if share > 0.05 {
			c.Tone = toneBad
		} else if un > 0 {
			c.Tone = toneWarn
		}
		return tableRow{Flagged: un > 0, Cells: []tableCell{textCell(name), numCell(formatCount(tg)), numCell(formatCount(mt)),
			numCell(formatCount(un)), c, numCell(formatCount(used)), numCell(formatFixed(ess, 1))}}
	}
	t.Rows = []tableRow{
		arm("treated", m.TargetTreated, m.MatchedTreated, m.UnmatchedTreated, m.UsedTreated, m.ESSTreated),
		arm("control", m.TargetControl, m.MatchedControl, m.UnmatchedControl, m.UsedControl, m.ESSControl),
	}
	var notes []string
	for _, r := range m.Reasons {
		notes = append(notes, fmt.Sprintf("%s %s unmatched: %s", formatCount(r.Units), r.Arm, reasonText(r.Code)))
	}
	if m.MaxReuse > 1 {
		notes = append(notes, fmt.Sprintf("One unit served as a match %s times.", formatCount(m.MaxReuse)))
	}
	if m.Order != "" {
		notes = append(notes, capitalize(m.Order)+"; the matches depend on this order.")
	}
	t.Note = strings.Join(notes, " ")
	return t
}

func reasonText(code string) string {
	switch code {
	case "score_0_or_1":
		return "a score of exactly 0 or 1 (separation)."
	case "no_match_in_exact_cell":
		return "no unit of the other arm agrees on the exact-match covariates."
	case "beyond_caliper":
		return "no unit of the other arm within the caliper."
	case "other_arm_used_up":
		return "the units within reach were already used (without replacement)."
	}
	return code + "."
}

func matchingParts(m *causal.Matching) []string {
	parts := []string{chartPart(MatchedPairs(m)),
		notePart("Lines join each unit to its matches (a sample of the sets, evenly spread over the score). Red: units left unmatched; with a caliper, the faint red bar is the window of ± the caliper on the other arm's row, where no unit was found."),
		matchingTable(m).HTML()}
	if len(m.ProfileTreated) > 0 {
		parts = append(parts, profileRowsTable(m.ProfileTreated, "Who the unmatched treated units are: unmatched versus matched treated, largest differences first", "mean unmatched", "mean matched").HTML())
	}
	if len(m.ProfileControl) > 0 {
		parts = append(parts, profileRowsTable(m.ProfileControl, "Who the unmatched controls are: unmatched versus matched controls, largest differences first", "mean unmatched", "mean matched").HTML())
	}
	if b := m.Balance(); b.Err() == nil {
		parts = append(parts, chartPart(BalanceDots(b)), balanceTable(b).HTML())
	}
	if m.Scores.Design.Y != nil {
		e := m.Effect()
		parts = append(parts, estimatesTable([]*causal.Effect{e}, "Matching estimate: "+e.Population).HTML(), flagsHTML(append(estimateErrors([]*causal.Effect{e}), e.Flags...), e.Notes))
	}
	return append(parts, cautionsHTML())
}

func matchingHeadline(m *causal.Matching) string {
	o := m.Options
	tg, un := m.TargetTreated+m.TargetControl, m.UnmatchedTreated+m.UnmatchedControl
	head := fmt.Sprintf("Matching for the %s matched %s of %s units", o.Estimand, formatCount(tg-un), formatCount(tg))
	if un == 0 {
		head += ": every unit found a comparable unit of the other arm"
	} else {
		var parts []string
		for _, f := range m.Findings() {
			parts = append(parts, fmt.Sprintf("%s %s (%s)", formatCount(f.Units), armWord(f.Arm), formatPercent(f.Share)))
		}
		head += "; " + strings.Join(parts, " and ") + " found none"
		if o.Caliper > 0 {
			head += " within the caliper"
		}
		head += ": they lack support, and the estimate describes the matched units only"
	}
	if b := m.Balance(); b.Err() == nil {
		head += fmt.Sprintf("; largest |SMD| after matching %s", formatFixed(b.MaxAbsSMD(), 3))
	}
	return head + "."
}

func armWord(arm string) string {
	if arm == "treated" {
		return "treated units"
	}
	return "controls"
}

// strataTable lists the strata with counts, effects and empty arms.
func strataTable(s *causal.Strata) table {
	t := table{Caption: fmt.Sprintf("%d strata at the quantiles of the score (a unit on a cut point is in the upper stratum)", len(s.Strata)),
		Head: []tableCell{headText("stratum"), headText("scores"), headNum("treated"), headNum("control"), headNum("effect"), headNum("SE"), headText("positivity")}}
	for j, r := range s.Strata {
		pos := flagCell("both arms", toneGood)
		switch r.EmptyArm() {
		case "treated":
			pos = flagCell("no treated units", toneBad)
		case "control":
			pos = flagCell("no controls", toneBad)
		case "both":
			pos = flagCell("no units (tied cuts)", toneMuted)
		}
		t.Rows = append(t.Rows, tableRow{Flagged: r.EmptyArm() != "", Cells: []tableCell{numCell(itoa(j + 1)),
			textCell(formatScore(r.Lo) + " – " + formatScore(r.Hi)), numCell(formatCount(r.Treated)), numCell(formatCount(r.Control)),
			numCell(formatNumber(r.Effect)), numCell(formatNumber(math.Sqrt(r.Variance))), pos}})
	}
	return t
}

func strataParts(s *causal.Strata) []string {
	parts := []string{chartPart(StrataCounts(s)), strataTable(s).HTML()}
	if s.Scores.Design.Y != nil {
		var es []*causal.Effect
		for _, t := range []causal.Estimand{causal.ATE, causal.ATT, causal.ATC} {
			es = append(es, s.Effect(t))
		}
		parts = append(parts, estimatesTable(es, "Subclassification estimates (stratum-weighted differences in means)").HTML())
		var flags []causal.Flag
		for _, e := range es {
			for _, f := range e.Flags {
				if f.Code != "unsupported_estimand" {
					flags = append(flags, causal.Flag{Code: f.Code, Message: e.Estimand.String() + ": " + f.Message})
				}
			}
		}
		parts = append(parts, flagsHTML(append(estimateErrors(es), flags...), es[0].Notes))
	}
	return append(parts, cautionsHTML())
}

func strataHeadline(s *causal.Strata) string {
	var bad []string
	for _, t := range []causal.Estimand{causal.ATE, causal.ATT, causal.ATC} {
		if v := s.Violations(t); len(v) > 0 {
			bad = append(bad, t.String())
		}
	}
	if len(bad) == 0 {
		return fmt.Sprintf("Every one of the %d score strata holds both arms: subclassification supports the ATE, ATT and ATC on these scores.", len(s.Strata))
	}
	empty := 0
	for _, r := range s.Strata {
		if a := r.EmptyArm(); a == "treated" || a == "control" {
			empty++
		}
	}
	return fmt.Sprintf("%d of %d score strata lack an arm: positivity is violated there for the %s, whose estimates cover the other strata only.", empty, len(s.Strata), strings.Join(bad, ", "))
}
