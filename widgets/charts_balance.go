package widgets

import (
	"errors"
	"math"
	"sort"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// maxBalanceTerms bounds the dot chart: the terms with the largest |SMD|
// are drawn, the table lists them all.
const maxBalanceTerms = 40

// balanceData holds |SMD| before and after weighting per term, sorted by
// the larger of the two, largest first. Signed values are kept for tooltips.
type balanceData struct {
	Terms            []string
	Before, After    []float64 // |SMD|; NaN when not available; capped at XMax
	SignedB, SignedA []float64 // signed SMD (NaN/Inf become NaN)
	Weighted         bool
	Label            string
	XMax             float64
	Shown, Total     int
}

func balanceOf(b *causal.BalanceSheet) (balanceData, error) {
	if err := b.Err(); err != nil {
		return balanceData{}, err
	}
	if len(b.Rows) == 0 {
		return balanceData{}, errors.New("balance sheet has no terms: add covariates with Adjust")
	}
	rows := append([]causal.BalanceRow(nil), b.Rows...)
	key := func(r causal.BalanceRow) float64 {
		v := math.Abs(r.SMD)
		if b.Weighted && !math.IsNaN(r.SMDWeighted) {
			v = math.Max(v, math.Abs(r.SMDWeighted))
		}
		if math.IsNaN(v) {
			return -1
		}
		return v
	}
	sort.SliceStable(rows, func(i, j int) bool { return key(rows[i]) > key(rows[j]) })
	d := balanceData{Weighted: b.Weighted, Label: b.Label, Total: len(rows)}
	if d.Label == "" {
		d.Label = "weighting"
	}
	if len(rows) > maxBalanceTerms {
		rows = rows[:maxBalanceTerms]
	}
	d.Shown = len(rows)
	top := 0.0
	for _, r := range rows {
		for _, v := range []float64{r.SMD, r.SMDWeighted} {
			if finite(v) {
				top = math.Max(top, math.Abs(v))
			}
		}
	}
	// Axis end: a multiple of a nice step above the largest value, at least 0.25.
	step := niceStep(math.Max(top, 0.25) / 5)
	d.XMax = math.Max(0.25, math.Ceil(top*1.05/step)*step)
	for _, r := range rows {
		d.Terms = append(d.Terms, r.Term)
		d.SignedB = append(d.SignedB, cleanNaN(r.SMD))
		d.SignedA = append(d.SignedA, cleanNaN(r.SMDWeighted))
		d.Before = append(d.Before, capAbs(r.SMD, d.XMax))
		d.After = append(d.After, capAbs(r.SMDWeighted, d.XMax))
	}
	return d, nil
}

func cleanNaN(v float64) float64 {
	if !finite(v) {
		return math.NaN()
	}
	return round(v, 4)
}

// capAbs is |v| rounded, ±Inf drawn at the axis end, NaN kept.
func capAbs(v, top float64) float64 {
	switch {
	case math.IsNaN(v):
		return v
	case math.IsInf(v, 0):
		return top
	}
	return round(math.Abs(v), 4)
}

// nullable turns NaN into nil for JSON.
func nullable(v []float64) []any {
	out := make([]any, len(v))
	for i, x := range v {
		if finite(x) {
			out[i] = x
		}
	}
	return out
}

// BalanceDots is a dot chart of |SMD| per covariate term before weighting
// (hollow) and after (filled), with the 0.1 reference line of Austin (2009).
// Terms are sorted by imbalance, largest at the top; at most 40 are drawn.
func BalanceDots(b *causal.BalanceSheet) (Chart, error) {
	d, err := balanceOf(b)
	if err != nil {
		return Chart{}, err
	}
	const title = "Covariate balance: |standardised mean difference|"
	height := max(240, min(980, 110+24*len(d.Terms)))
	sc := charts.NewScatter()
	sc.SetGlobalOptions(commonOptions(title, "item", true)...)
	names := make([]string, len(d.Terms))
	for i, t := range d.Terms {
		names[i] = shorten(t)
	}
	x := valueAxis("|SMD|", 0, round(d.XMax, 3))
	sc.SetGlobalOptions(charts.WithXAxisOpts(x),
		charts.WithYAxisOpts(opts.YAxis{Type: "category", Data: names, Inverse: opts.Bool(true),
			AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorInk, Interval: "0", Width: 170, Overflow: "truncate"},
			SplitLine: &opts.SplitLine{Show: opts.Bool(true), LineStyle: &opts.LineStyle{Color: ColorRule}}}),
		gridOpts(190, 32, 44, 56))
	points := func(v []float64) []opts.ScatterData {
		out := make([]opts.ScatterData, 0, len(v))
		for i, x := range v {
			if finite(x) {
				out = append(out, opts.ScatterData{Value: []any{x, i}})
			}
		}
		return out
	}
	sc.AddSeries("before weighting", points(d.Before),
		charts.WithScatterChartOpts(opts.ScatterChart{Symbol: "emptyCircle", SymbolSize: 10}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorBefore, BorderWidth: 2}),
		charts.WithMarkLineNameXAxisItemOpts(opts.MarkLineNameXAxisItem{Name: "|SMD| = 0.1", XAxis: smdReference}),
		charts.WithMarkLineStyleOpts(opts.MarkLineStyle{Symbol: []string{"none", "none"},
			LineStyle: &opts.LineStyle{Color: ColorBad, Type: "dashed", Width: 1},
			Label:     &opts.Label{Show: opts.Bool(true), Formatter: "0.1", Color: ColorBad, Position: "start"}}))
	if d.Weighted {
		sc.AddSeries("after "+d.Label, points(d.After),
			charts.WithScatterChartOpts(opts.ScatterChart{Symbol: "circle", SymbolSize: 10}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: colorAfter}))
	}
	option, err := optionJSON(sc, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"terms": d.Terms, "before": nullable(d.SignedB), "after": nullable(d.SignedA), "weighted": d.Weighted}, `
chart.setOption({tooltip: {formatter: function (p) {
  if (p.componentType !== "series") return "";
  var i = p.value[1];
  var s = "<b>" + esc(DATA.terms[i]) + "</b><br>SMD before weighting: " + num(DATA.before[i]);
  if (DATA.weighted) s += "<br>SMD after weighting: " + num(DATA.after[i]);
  return s;
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticBalance(d, ph) })
}
