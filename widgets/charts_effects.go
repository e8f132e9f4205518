package widgets

import (
	"errors"
	"fmt"
	"math"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// estimatorName is the reader's name of an estimator (the id stays in JSON).
func estimatorName(e causal.Estimator) string {
	switch e {
	case causal.DifferenceInMeans:
		return "difference in means (unadjusted)"
	case causal.RegressionAdjustment:
		return "regression adjustment"
	case causal.IPW:
		return "IPW (Horvitz–Thompson)"
	case causal.IPWNormalized:
		return "IPW, normalised (Hájek)"
	case causal.AIPW:
		return "AIPW (doubly robust)"
	case causal.OverlapWeighted:
		return "overlap weights"
	case causal.NearestNeighbourMatching:
		return "nearest-neighbour matching (1:1, logit score)"
	case causal.Subclassification:
		return "subclassification (score quintiles)"
	}
	return e.String()
}

// estimatorShort is the estimator's name on a chart axis.
func estimatorShort(e causal.Estimator) string {
	switch e {
	case causal.DifferenceInMeans:
		return "difference in means"
	case causal.RegressionAdjustment:
		return "regression adjustment"
	case causal.IPW:
		return "IPW"
	case causal.IPWNormalized:
		return "IPW, normalised"
	case causal.AIPW:
		return "AIPW"
	case causal.OverlapWeighted:
		return "overlap weights"
	case causal.NearestNeighbourMatching:
		return "matching"
	case causal.Subclassification:
		return "subclassification"
	}
	return e.String()
}

// forestData is one row per estimate: value and 95% interval.
type forestData struct {
	Estimand  string
	Names     []string // full names (tooltips)
	Short     []string // axis labels
	Value     []float64
	Lo, Hi    []float64 // NaN when no interval
	SE        []float64
	Method    []string
	Supported []bool
	XMin      float64
	XMax      float64
}

func forestOf(es *causal.Estimates) (forestData, error) {
	if err := es.Err(); err != nil {
		return forestData{}, err
	}
	d := forestData{Estimand: es.Estimand.String()}
	lo, hi := 0.0, 0.0 // the axis always shows 0, "no effect"
	for _, e := range es.Items {
		if e.Err() != nil || !finite(e.Value) {
			continue
		}
		d.Names = append(d.Names, estimatorName(e.Estimator))
		d.Short = append(d.Short, estimatorShort(e.Estimator))
		d.Value = append(d.Value, round(e.Value, 6))
		d.SE = append(d.SE, round(e.SE, 6))
		d.Method = append(d.Method, e.SEMethod)
		d.Supported = append(d.Supported, e.Supported)
		l, h := e.CI95.Lo, e.CI95.Hi
		if !finite(l) || !finite(h) {
			l, h = math.NaN(), math.NaN()
		}
		d.Lo = append(d.Lo, round(l, 6))
		d.Hi = append(d.Hi, round(h, 6))
		for _, v := range []float64{e.Value, l, h} {
			if finite(v) {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
	}
	if len(d.Names) == 0 {
		return forestData{}, errors.New("no estimator produced a finite estimate: see the table for why")
	}
	step := niceStep((hi - lo) / 6)
	if hi == lo {
		step = 1
	}
	d.XMin = math.Floor(lo/step) * step
	d.XMax = math.Ceil(hi/step) * step
	if d.XMin == lo && lo < 0 {
		d.XMin -= step
	}
	if d.XMax == hi && hi > 0 {
		d.XMax += step
	}
	return d, nil
}

// forestItem is a scatter datum with its own style.
type forestItem struct {
	Value     []float64  `json:"value"`
	ItemStyle *cellStyle `json:"itemStyle,omitempty"`
	Symbol    string     `json:"symbol,omitempty"`
}

// EstimatesChart shows each estimator's estimate with its 95% interval on
// one axis (a forest plot), with a line at 0, no effect. Estimates the data
// do not support (see Verdict) are drawn hollow and red.
func EstimatesChart(es *causal.Estimates) (Chart, error) {
	d, err := forestOf(es)
	if err != nil {
		return Chart{}, err
	}
	title := "Estimates of the " + d.Estimand + " with 95% intervals"
	height := max(220, 110+44*len(d.Names))
	sc := charts.NewScatter()
	sc.SetGlobalOptions(commonOptions(title, "item", true)...)
	sc.SetGlobalOptions(
		charts.WithXAxisOpts(valueAxis("estimated effect ("+d.Estimand+")", round(d.XMin, 6), round(d.XMax, 6))),
		charts.WithYAxisOpts(opts.YAxis{Type: "category", Data: d.Short, Inverse: opts.Bool(true),
			AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorInk, Interval: "0", Width: 150, Overflow: "truncate"}}),
		gridOpts(170, 40, 44, 56),
	)
	var ci []opts.LineData
	items := make([]forestItem, len(d.Names))
	for i := range d.Names {
		if finite(d.Lo[i]) {
			if len(ci) > 0 {
				ci = append(ci, opts.LineData{Value: "-"})
			}
			ci = append(ci, opts.LineData{Value: []float64{d.Lo[i], float64(i)}}, opts.LineData{Value: []float64{d.Hi[i], float64(i)}})
		}
		items[i] = forestItem{Value: []float64{d.Value[i], float64(i)}}
		if !d.Supported[i] {
			items[i].Symbol = "emptyCircle"
			items[i].ItemStyle = &cellStyle{Color: ColorBad, BorderColor: ColorBad, BorderWidth: 2}
		}
	}
	sc.AddSeries("estimate", nil, seriesSetData(items),
		charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 12}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorAfter}),
		charts.WithMarkLineNameXAxisItemOpts(opts.MarkLineNameXAxisItem{Name: "no effect", XAxis: 0}),
		charts.WithMarkLineStyleOpts(opts.MarkLineStyle{Symbol: []string{"none", "none"},
			LineStyle: &opts.LineStyle{Color: ColorMuted, Type: "dashed", Width: 1},
			Label:     &opts.Label{Show: opts.Bool(true), Formatter: "no effect", Color: ColorMuted, Position: "start"}}))
	if len(ci) > 0 {
		line := charts.NewLine()
		line.AddSeries("95% interval", ci,
			charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false), ConnectNulls: opts.Bool(false)}),
			charts.WithLineStyleOpts(opts.LineStyle{Color: colorAfter, Width: 3}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: colorAfter}))
		sc.Overlap(line)
	}
	option, err := optionJSON(sc, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"names": d.Names, "value": d.Value, "lo": nullable(d.Lo), "hi": nullable(d.Hi),
		"se": nullable(d.SE), "method": d.Method, "supported": d.Supported, "estimand": d.Estimand}, `
chart.setOption({tooltip: {formatter: function (p) {
  var i = Math.round(p.value[1]);
  if (!(i >= 0 && i < DATA.names.length)) return "";
  var s = "<b>" + esc(DATA.names[i]) + "</b><br>" + esc(DATA.estimand) + " estimate: " + num(DATA.value[i], 4);
  if (DATA.lo[i] !== null) s += "<br>95% interval: " + num(DATA.lo[i], 4) + " to " + num(DATA.hi[i], 4);
  if (DATA.se[i] !== null) s += "<br>SE " + num(DATA.se[i], 4) + " (" + esc(DATA.method[i]) + ")";
  if (!DATA.supported[i]) s += "<br><b style=\"color:#b91c1c\">not supported by the data: an extrapolation</b>";
  return s;
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticForest(d, ph) })
}

// bootData is the histogram of bootstrap replicates.
type bootData struct {
	Lo, Hi     []float64
	Count      []int
	Estimate   float64
	PctLo      float64
	PctHi      float64
	Replicates int
	Name       string
	XMin, XMax float64 // axis range on a nice step
}

const bootBins = 30

func bootOf(b *causal.Bootstrap) (bootData, error) {
	if err := b.Err(); err != nil {
		return bootData{}, err
	}
	if len(b.Replicates) < 2 {
		return bootData{}, fmt.Errorf("bootstrap has %d successful replicates: too few to draw; run more", len(b.Replicates))
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range b.Replicates {
		if finite(v) {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
	}
	if !finite(lo) {
		return bootData{}, errors.New("bootstrap replicates are not finite numbers")
	}
	if hi == lo {
		lo, hi = lo-0.5, hi+0.5
	}
	d := bootData{Estimate: b.Estimate, PctLo: b.Percentile.Lo, PctHi: b.Percentile.Hi, Replicates: len(b.Replicates),
		Name: estimatorName(b.Estimator) + ", " + b.Estimand.String(), Count: make([]int, bootBins)}
	w := (hi - lo) / bootBins
	for k := 0; k < bootBins; k++ {
		d.Lo = append(d.Lo, round(lo+float64(k)*w, 6))
		d.Hi = append(d.Hi, round(lo+float64(k+1)*w, 6))
	}
	for _, v := range b.Replicates {
		if finite(v) {
			d.Count[min(bootBins-1, int((v-lo)/w))]++
		}
	}
	step := niceStep((hi - lo) / 6)
	d.XMin, d.XMax = math.Floor(lo/step)*step, math.Ceil(hi/step)*step
	return d, nil
}

// BootstrapHistogram shows the distribution of the bootstrap replicate
// estimates (30 bins), the full-sample estimate and the 95% percentile
// interval (Efron & Tibshirani 1993, ch. 13).
func BootstrapHistogram(b *causal.Bootstrap) (Chart, error) {
	d, err := bootOf(b)
	if err != nil {
		return Chart{}, err
	}
	title := "Bootstrap distribution: " + d.Name
	const height = 340
	bar := charts.NewBar()
	bar.SetGlobalOptions(commonOptions(title, "axis", true)...)
	bar.SetGlobalOptions(
		charts.WithXAxisOpts(valueAxis("replicate estimate", round(d.XMin, 8), round(d.XMax, 8))),
		charts.WithYAxisOpts(yValueAxis("replicates", 0, nil, 44)),
		gridOpts(72, 32, 44, 56))
	data := make([]opts.BarData, len(d.Count))
	for k := range d.Count {
		data[k] = opts.BarData{Value: []float64{round((d.Lo[k]+d.Hi[k])/2, 6), float64(d.Count[k])}}
	}
	so := []charts.SeriesOpts{
		charts.WithBarChartOpts(opts.BarChart{BarCategoryGap: "6%"}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorBefore}),
		charts.WithMarkLineNameXAxisItemOpts(opts.MarkLineNameXAxisItem{Name: "estimate", XAxis: round(d.Estimate, 6)}),
		charts.WithMarkLineStyleOpts(opts.MarkLineStyle{Symbol: []string{"none", "none"},
			LineStyle: &opts.LineStyle{Color: colorAfter, Width: 2},
			Label:     &opts.Label{Show: opts.Bool(true), Formatter: "estimate", Color: colorAfter, Position: "end"}}),
	}
	if finite(d.PctLo) && finite(d.PctHi) {
		so = append(so, markAreaX("95% percentile interval", d.PctLo, d.PctHi, colorBandFill),
			charts.WithSeriesOpts(func(s *charts.SingleSeries) { s.MarkAreas.MarkAreaStyle.Label.Position = "insideTopLeft" }))
	}
	bar.AddSeries(fmt.Sprintf("replicates (%s)", formatCount(d.Replicates)), data, so...)
	option, err := optionJSON(bar, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"lo": d.Lo, "hi": d.Hi}, `
chart.setOption({tooltip: {formatter: function (ps) {
  if (!ps || !ps.length) return "";
  var i = ps[0].dataIndex;
  return num(DATA.lo[i], 4) + " to " + num(DATA.hi[i], 4) + "<br>" + count(ps[0].value[1]) + " replicates";
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticBootstrap(d, ph) })
}

// TrimmedHistogram is the mirrored score histogram of the original units
// with the range the trimming keeps shaded.
func TrimmedHistogram(t *causal.Trimmed) (Chart, error) {
	if err := t.Err(); err != nil {
		return Chart{}, err
	}
	if t.Original == nil || t.Original.Design == nil {
		return Chart{}, errors.New("trimming result has no original scores")
	}
	lo, hi := t.Keep.Lo, t.Keep.Hi
	if t.Alpha == 0 {
		lo, hi = 0, 1
	}
	h, err := binScores(t.Original.E, t.Original.Design.T, true, math.Max(0, lo), math.Min(1, hi))
	if err != nil {
		return Chart{}, err
	}
	h.BandLabel = "kept"
	return mirroredChart("Propensity scores before trimming; kept range shaded", h)
}
