package widgets

import (
	"encoding/json"
	"errors"
	"fmt"
	"html/template"
	"math"
	"strings"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// sweepPoint is one trimming threshold of a sweep, summarised for the chart
// and the slider.
type sweepPoint struct {
	Alpha       float64 `json:"a"`
	Estimate    float64 `json:"e"`
	Lo          float64 `json:"lo"` // NaN when there is no interval
	Hi          float64 `json:"hi"`
	Kept        int     `json:"k"`
	KeptTreated int     `json:"kt"`
	KeptControl int     `json:"kc"`
	MaxSMD      float64 `json:"s"` // NaN when not computed
	Failed      string  `json:"-"` // why this α has no estimate
}

// sweepData is a trimming sweep ready to draw.
type sweepData struct {
	Title     string
	Estimand  string
	Estimator string
	SMDLabel  string // what the largest |SMD| refers to
	Total     int    // units before trimming
	Points    []sweepPoint
	Default   int // index of the α shown first
}

// maxSweepPoints bounds the thresholds carried by a sweep chart.
const maxSweepPoints = 201

// sweepJS is what the slider's client code receives: plain numbers, nulls
// for missing values.
func (d sweepData) scriptData() map[string]any {
	pts := make([]map[string]any, len(d.Points))
	for i, p := range d.Points {
		pts[i] = map[string]any{"a": round(p.Alpha, 6), "e": nullNum(p.Estimate), "lo": nullNum(p.Lo), "hi": nullNum(p.Hi),
			"k": p.Kept, "kt": p.KeptTreated, "kc": p.KeptControl, "s": nullNum(p.MaxSMD)}
	}
	return map[string]any{"points": pts, "total": d.Total}
}

func nullNum(v float64) any {
	if !finite(v) {
		return nil
	}
	return round(v, 6)
}

// sweepControlsTemplate is the slider and its read-outs. The slider starts
// disabled and the read-outs show the default α, so a reader without
// scripts sees a consistent state; the chart's script enables the slider.
var sweepControlsTemplate = template.Must(template.New("sweep").Parse(
	`<div class="cp-sweep" style="display:flex;flex-wrap:wrap;gap:0.4em 1.4em;align-items:center;font-size:0.88rem;color:` + ColorInk + `;` +
		`font-family:system-ui,-apple-system,'Segoe UI',Roboto,Arial,sans-serif;margin:0.2em 0 0.6em 0;max-width:720px;">` +
		`<label style="display:flex;align-items:center;gap:0.5em;">trimming threshold α ` +
		`<input class="cp-sweep-range" type="range" min="0" max="{{.Max}}" step="1" value="{{.Default}}" disabled aria-label="trimming threshold alpha" style="width:14em;"></label>` +
		`<span>α = <b data-cp-out="alpha">{{.Alpha}}</b></span>` +
		`<span>units kept: <b data-cp-out="kept">{{.Kept}}</b></span>` +
		`<span>largest |SMD| {{.SMDLabel}}: <b data-cp-out="smd">{{.SMD}}</b></span>` +
		`<span>estimate: <b data-cp-out="est">{{.Est}}</b></span>` +
		`</div>`))

// keptText is "2,676 of 4,000 (848 treated, 1,828 control)".
func keptText(p sweepPoint, total int) string {
	return fmt.Sprintf("%s of %s (%s treated, %s control)", formatCount(p.Kept), formatCount(total), formatCount(p.KeptTreated), formatCount(p.KeptControl))
}

func estimateText(p sweepPoint) string {
	if !finite(p.Estimate) {
		return "not estimated"
	}
	s := formatNumber(p.Estimate)
	if finite(p.Lo) && finite(p.Hi) {
		s += " [" + formatNumber(p.Lo) + ", " + formatNumber(p.Hi) + "]"
	}
	return s
}

func smdText(v float64) string {
	if !finite(v) {
		return "—"
	}
	return formatFixed(v, 3)
}

// sweepSlider is the client code of the slider: moving it moves the marker
// on the chart and rewrites the read-outs from the precomputed points, so it
// works in a saved notebook or an exported page with no kernel.
const sweepSlider = `
var input = root.querySelector("input.cp-sweep-range");
var out = {};
["alpha", "kept", "smd", "est"].forEach(function (k) { out[k] = root.querySelector("[data-cp-out=" + k + "]"); });
function fix(v, d) { return (v === null || v === undefined) ? "\u2014" : v.toFixed(d); }
function show(i) {
  var p = DATA.points[i];
  if (!p) return;
  if (out.alpha) out.alpha.textContent = fix(p.a, 3);
  if (out.kept) out.kept.textContent = count(p.k) + " of " + count(DATA.total) + " (" + count(p.kt) + " treated, " + count(p.kc) + " control)";
  if (out.smd) out.smd.textContent = fix(p.s, 3);
  if (out.est) out.est.textContent = p.e === null ? "not estimated" :
    num(p.e, 4) + (p.lo === null ? "" : " [" + num(p.lo, 4) + ", " + num(p.hi, 4) + "]");
  chart.setOption({series: [{id: "selected", data: p.e === null ? [] : [[i, p.e]]}]});
}
if (input) {
  input.disabled = false;
  input.addEventListener("input", function () { show(parseInt(input.value, 10)); });
  input.addEventListener("change", function () { show(parseInt(input.value, 10)); });
  show(parseInt(input.value, 10));
}
chart.setOption({tooltip: {formatter: function (ps) {
  if (!ps || !ps.length) return "";
  var i = ps[0].dataIndex, p = DATA.points[i];
  if (!p) return "";
  var s = "\u03b1 = " + fix(p.a, 3) + "<br>estimate: " + (p.e === null ? "not estimated" : num(p.e, 4));
  if (p.lo !== null) s += "<br>95% interval: " + num(p.lo, 4) + " to " + num(p.hi, 4);
  s += "<br>units kept: " + count(p.k) + " of " + count(DATA.total) + "<br>largest |SMD|: " + fix(p.s, 3);
  return s;
}}});
`

// sweepChart draws an estimate with its 95% band against the trimming
// threshold α, with a slider (see sweepSlider).
func sweepChart(d sweepData) (Chart, error) {
	if len(d.Points) == 0 {
		return Chart{}, errors.New("the trimming sweep has no thresholds")
	}
	if len(d.Points) > maxSweepPoints {
		return Chart{}, fmt.Errorf("the trimming sweep has %d thresholds; at most %d are drawn", len(d.Points), maxSweepPoints)
	}
	d.Default = max(0, min(len(d.Points)-1, d.Default))
	const height = 380
	ln := charts.NewLine()
	ln.SetGlobalOptions(commonOptions(d.Title, "axis", true)...)
	yLo, yHi := math.Inf(1), math.Inf(-1)
	for _, p := range d.Points {
		for _, v := range []float64{p.Estimate, p.Lo, p.Hi} {
			if finite(v) {
				yLo, yHi = math.Min(yLo, v), math.Max(yHi, v)
			}
		}
	}
	if !finite(yLo) {
		return Chart{}, errors.New("no threshold of the trimming sweep has an estimate")
	}
	step := niceStep((yHi - yLo) / 5)
	if yHi == yLo {
		step = math.Max(1, math.Abs(yHi)/10)
	}
	// α runs along a category axis (one category per threshold): ECharts
	// stacks the band's two series only over a category base axis.
	labels := make([]string, len(d.Points))
	for i, p := range d.Points {
		labels[i] = formatFixed(p.Alpha, 3)
	}
	ln.SetXAxis(labels)
	ln.SetGlobalOptions(
		charts.WithXAxisOpts(opts.XAxis{Type: "category", Name: "trimming threshold α (units with scores outside [α, 1 − α] dropped)",
			NameLocation: "middle", NameGap: 30, AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted},
			AxisLine: &opts.AxisLine{Show: opts.Bool(true), LineStyle: &opts.LineStyle{Color: ColorMuted}}}),
		charts.WithYAxisOpts(yValueAxis(d.Estimand+" estimate", round(math.Floor(yLo/step)*step, 8), round(math.Ceil(yHi/step)*step, 8), 56)),
		gridOpts(80, 32, 44, 60),
	)
	var est, lower, width []opts.LineData
	for _, p := range d.Points {
		if finite(p.Estimate) {
			est = append(est, opts.LineData{Value: round(p.Estimate, 6)})
		} else {
			est = append(est, opts.LineData{Value: "-"})
		}
		if finite(p.Lo) && finite(p.Hi) {
			lower = append(lower, opts.LineData{Value: round(p.Lo, 6)})
			width = append(width, opts.LineData{Value: round(p.Hi-p.Lo, 6)})
		} else {
			lower = append(lower, opts.LineData{Value: "-"})
			width = append(width, opts.LineData{Value: "-"})
		}
	}
	ln.AddSeries("95% interval", lower,
		charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false), Stack: "ci"}),
		charts.WithLineStyleOpts(opts.LineStyle{Opacity: opts.Float(0)}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorBefore}))
	ln.AddSeries("95% interval", width,
		charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false), Stack: "ci"}),
		charts.WithLineStyleOpts(opts.LineStyle{Opacity: opts.Float(0)}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorBefore}),
		charts.WithAreaStyleOpts(opts.AreaStyle{Color: colorBefore, Opacity: opts.Float(0.3)}))
	ln.AddSeries(d.Estimator, est,
		charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(len(d.Points) <= 40), SymbolSize: 5}),
		charts.WithLineStyleOpts(opts.LineStyle{Color: colorAfter, Width: 2}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorAfter}))
	def := d.Points[d.Default]
	var sel []opts.ScatterData
	if finite(def.Estimate) {
		sel = append(sel, opts.ScatterData{Value: []float64{float64(d.Default), round(def.Estimate, 6)}})
	}
	selected := charts.NewScatter()
	selected.AddSeries("selected α", sel, charts.WithSeriesId("selected"),
		charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 16, Symbol: "circle"}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorWarn, BorderColor: "#ffffff", BorderWidth: 2}))
	ln.Overlap(selected)
	option, err := optionJSON(ln, func(obj map[string]any) {
		// Stack the band whatever the sign of the bounds (ECharts' default
		// stacks positive and negative values apart), and leave the band out
		// of the legend twice.
		patchList(obj, "series", func(m map[string]any) {
			if m["stack"] == "ci" {
				m["stackStrategy"] = "all"
			}
		})
		patchList(obj, "xAxis", func(m map[string]any) { m["boundaryGap"] = false })
	})
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(d.scriptData(), sweepSlider)
	if err != nil {
		return Chart{}, err
	}
	var controls strings.Builder
	if err := sweepControlsTemplate.Execute(&controls, map[string]any{
		"Max": len(d.Points) - 1, "Default": d.Default, "Alpha": formatFixed(def.Alpha, 3),
		"Kept": keptText(def, d.Total), "SMD": smdText(def.MaxSMD), "SMDLabel": d.SMDLabel, "Est": estimateText(def),
	}); err != nil {
		return Chart{}, err
	}
	png, err := staticSweep(d, fallbackHeight(height))
	if err != nil {
		return Chart{}, err
	}
	return Chart{Title: d.Title, Option: option, Fallback: png, Width: chartWidthPixels, Height: height, Script: script,
		Controls: template.HTML(controls.String())}, nil
}

// TrimmingSweep draws a trimming sweep: the estimate with its 95% band
// against the trimming threshold α, the optimal α of Crump, Hotz, Imbens &
// Mitnik (2009) marked, and a slider under the chart that moves a marker
// along the curve and shows, for that α, the units kept and the largest
// |SMD| after weighting. Everything the slider shows is precomputed in the
// page, so it works in a saved notebook or an exported HTML file.
func TrimmingSweep(s *causal.Sweep) (Chart, error) {
	d, err := sweepOf(s)
	if err != nil {
		return Chart{}, err
	}
	c, err := sweepChart(d)
	if err != nil {
		return Chart{}, err
	}
	if opt := optimalIndex(s); opt >= 0 {
		// Mark the grid α nearest the optimal one.
		var obj map[string]any
		if err := json.Unmarshal(c.Option, &obj); err == nil {
			patchList(obj, "series", func(m map[string]any) {
				if m["name"] == d.Estimator {
					m["markLine"] = map[string]any{
						"symbol": []string{"none", "none"}, "silent": true,
						"lineStyle": map[string]any{"color": ColorMuted, "type": "dashed", "width": 1},
						"label":     map[string]any{"formatter": "optimal α ≈ " + formatFixed(s.Optimal, 3), "color": ColorMuted, "position": "end"},
						"data":      []any{map[string]any{"xAxis": opt}},
					}
				}
			})
			if b, err := json.Marshal(obj); err == nil {
				c.Option = b
			}
		}
	}
	return c, nil
}

// optimalIndex is the grid row nearest the optimal α, or −1 when trimming
// is not advised or the optimum lies outside the grid.
func optimalIndex(s *causal.Sweep) int {
	if s.Optimal <= 0 || len(s.Rows) == 0 || s.Optimal > s.Rows[len(s.Rows)-1].Alpha+1e-9 {
		return -1
	}
	best, gap := -1, math.Inf(1)
	for i, r := range s.Rows {
		if g := math.Abs(r.Alpha - s.Optimal); g < gap {
			best, gap = i, g
		}
	}
	return best
}

func sweepOf(s *causal.Sweep) (sweepData, error) {
	if err := s.Err(); err != nil {
		return sweepData{}, err
	}
	if len(s.Rows) == 0 {
		return sweepData{}, errors.New("the trimming sweep has no thresholds")
	}
	r0 := s.Rows[0]
	d := sweepData{
		Title:     "Trimming sweep: " + estimatorName(s.Estimator) + ", " + s.Estimand.String(),
		Estimand:  s.Estimand.String(),
		Estimator: estimatorName(s.Estimator),
		SMDLabel:  "after " + s.Estimand.String() + " weighting",
		Total:     r0.KeptTreated + r0.KeptControl + r0.DroppedTreated + r0.DroppedControl,
	}
	for _, r := range s.Rows {
		d.Points = append(d.Points, sweepPoint{Alpha: r.Alpha, Estimate: r.Value, Lo: r.CI95.Lo, Hi: r.CI95.Hi,
			Kept: r.KeptTreated + r.KeptControl, KeptTreated: r.KeptTreated, KeptControl: r.KeptControl, MaxSMD: r.MaxAbsSMD, Failed: r.Err})
	}
	if opt := optimalIndex(s); opt >= 0 && finite(d.Points[opt].Estimate) {
		d.Default = opt
	} else {
		for i, p := range d.Points {
			if finite(p.Estimate) {
				d.Default = i
				break
			}
		}
	}
	return d, nil
}
