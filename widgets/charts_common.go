package widgets

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// Chart colours beyond the shared palette of page.go. Treated and control
// keep ColorTreated and ColorControl everywhere; quantities that are not
// arms (before/after weighting, references) use slate tones so they are
// never mistaken for an arm.
const (
	colorBefore      = "#94a3b8"                // slate 400: before weighting
	colorAfter       = "#334155"                // slate 700: after weighting
	colorBandFill    = "rgba(100,116,139,0.14)" // common-support band
	colorNoSupport   = "rgba(185,28,28,0.07)"   // regions without support
	colorCellMid     = "#f1f5f9"                // heatmap: half treated
	chartFontFamily  = `system-ui, -apple-system, "Segoe UI", Roboto, Arial, sans-serif`
	smdReference     = 0.1 // |SMD| line (Austin 2009)
	maxLabelRunes    = 28  // axis labels longer than this are shortened
	chartWidthPixels = 720
)

// echartsChart is what every go-echarts chart type offers.
type echartsChart interface {
	Validate()
	JSON() map[string]interface{}
}

// commonOptions are the global options every chart shares: our palette, a
// white background, a save-as-image button and the legend on top. Each
// chart adds its one grid with gridOpts (go-echarts appends grids, and the
// axes use the first). trigger is the tooltip trigger ("axis"
// or "item").
func commonOptions(title, trigger string, legend bool) []charts.GlobalOpts {
	return []charts.GlobalOpts{
		charts.WithColorsOpts(opts.Colors{ColorTreated, ColorControl, colorAfter, colorBefore}),
		charts.WithInitializationOpts(opts.Initialization{BackgroundColor: "#ffffff"}),
		charts.WithToolboxOpts(opts.Toolbox{Show: opts.Bool(true), Right: "8", Top: "0",
			Feature: &opts.ToolBoxFeature{SaveAsImage: &opts.ToolBoxFeatureSaveAsImage{
				Show: opts.Bool(true), Type: "png", Title: "Save as PNG", Name: saveFileName(title)}}}),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(legend), Top: "0", Left: "center",
			TextStyle: &opts.TextStyle{Color: ColorInk, FontSize: 12}}),
		charts.WithTooltipOpts(opts.Tooltip{Show: opts.Bool(true), Trigger: trigger,
			BorderColor: ColorRule, BackgroundColor: "rgba(255,255,255,0.97)"}),
		charts.WithAnimation(false),
	}
}

// gridOpts places the plot area (margins in pixels).
func gridOpts(left, right, top, bottom int) charts.GlobalOpts {
	return charts.WithGridOpts(opts.Grid{Left: itoa(left), Right: itoa(right), Top: itoa(top), Bottom: itoa(bottom)})
}

// valueAxis is a value axis with our styling. name is the axis title.
func valueAxis(name string, lo, hi any) opts.XAxis {
	return opts.XAxis{Type: "value", Name: name, NameLocation: "middle", NameGap: 30, Min: lo, Max: hi,
		AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted},
		AxisLine:  &opts.AxisLine{Show: opts.Bool(true), OnZero: opts.Bool(false), LineStyle: &opts.LineStyle{Color: ColorMuted}},
		SplitLine: &opts.SplitLine{Show: opts.Bool(true), LineStyle: &opts.LineStyle{Color: ColorRule}}}
}

// yValueAxis is valueAxis for the vertical axis.
func yValueAxis(name string, lo, hi any, gap int) opts.YAxis {
	return opts.YAxis{Type: "value", Name: name, NameLocation: "middle", NameGap: gap, Min: lo, Max: hi,
		AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted},
		AxisLine:  &opts.AxisLine{Show: opts.Bool(true), OnZero: opts.Bool(false), LineStyle: &opts.LineStyle{Color: ColorMuted}},
		SplitLine: &opts.SplitLine{Show: opts.Bool(true), LineStyle: &opts.LineStyle{Color: ColorRule}}}
}

// optionJSON validates a go-echarts chart and serialises its option. It
// adds the global text style and, through edit (may be nil), what go-echarts
// has no field for. The result is plain JSON: no function markers.
func optionJSON(c echartsChart, edit func(map[string]any)) ([]byte, error) {
	c.Validate()
	obj := c.JSON()
	obj["textStyle"] = map[string]any{"fontFamily": chartFontFamily, "color": ColorInk}
	if edit != nil {
		edit(obj)
	}
	b, err := json.Marshal(obj)
	if err != nil {
		return nil, fmt.Errorf("encoding the chart option: %w", err)
	}
	if strings.Contains(string(b), `"__f__`) {
		return nil, errors.New("chart option holds a function marker; client code belongs in Chart.Script")
	}
	return b, nil
}

// patchList rewrites each object of the list obj[key] (a go-echarts value
// re-read as JSON) with edit, for the few fields go-echarts types wrongly.
func patchList(obj map[string]any, key string, edit func(map[string]any)) {
	v, ok := obj[key]
	if !ok {
		return
	}
	b, err := json.Marshal(v)
	if err != nil {
		return
	}
	var list []map[string]any
	if json.Unmarshal(b, &list) != nil {
		var one map[string]any
		if json.Unmarshal(b, &one) != nil {
			return
		}
		list = []map[string]any{one}
	}
	for _, m := range list {
		edit(m)
	}
	obj[key] = list
}

// seriesSetData replaces a series' data with items of our own type (for
// fields go-echarts' data types lack, such as a per-item style).
func seriesSetData(data any) charts.SeriesOpts {
	return charts.WithSeriesOpts(func(s *charts.SingleSeries) { s.Data = data })
}

// markAreaX shades [lo, hi] on the x axis with a label.
func markAreaX(label string, lo, hi float64, fill string) charts.SeriesOpts {
	return charts.WithSeriesOpts(func(s *charts.SingleSeries) {
		if s.MarkAreas == nil {
			s.MarkAreas = &opts.MarkAreas{}
		}
		s.MarkAreas.Data = append(s.MarkAreas.Data, []any{
			map[string]any{"name": label, "xAxis": round(lo, 6)},
			map[string]any{"xAxis": round(hi, 6)},
		})
		s.MarkAreas.MarkAreaStyle = opts.MarkAreaStyle{
			ItemStyle: &opts.ItemStyle{Color: fill},
			Label:     &opts.Label{Show: opts.Bool(true), Color: ColorMuted, FontSize: 11, Position: "insideTop"},
		}
	})
}

// round keeps d significant digits, so payloads carry no float noise.
func round(x float64, d int) float64 {
	if x == 0 || math.IsNaN(x) || math.IsInf(x, 0) {
		return x
	}
	v, err := strconv.ParseFloat(strconv.FormatFloat(x, 'g', d, 64), 64)
	if err != nil {
		return x
	}
	return v
}

// shorten cuts a label to maxLabelRunes runes, ending it with "…".
func shorten(s string) string {
	r := []rune(s)
	if len(r) <= maxLabelRunes {
		return s
	}
	return string(r[:maxLabelRunes-1]) + "…"
}

func itoa(n int) string { return strconv.Itoa(n) }

// finite reports whether x is a usable number.
func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// niceStep returns a step of 1, 2, 2.5 or 5 times a power of ten, at least raw.
func niceStep(raw float64) float64 {
	if raw <= 0 || !finite(raw) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if m*p >= raw*(1-1e-12) {
			return m * p
		}
	}
	return 10 * p
}

// fallbackHeight scales a chart height to the fallback picture's width.
func fallbackHeight(h int) int { return int(math.Round(float64(h) * fallbackWidth / chartWidthPixels)) }

// scriptWith returns client code that first binds DATA to the given value
// (encoded with ScriptJSON, so no string from the data can end the script)
// and then runs body. Helpers esc (HTML escaping through ECharts' own
// encoder) and num (a readable number) are defined for the body.
func scriptWith(data any, body string) (string, error) {
	js, err := ScriptJSON(data)
	if err != nil {
		return "", err
	}
	return "var DATA = " + js + ";\n" + scriptHelpers + body, nil
}

// scriptHelpers are shared by the charts' client code.
const scriptHelpers = `
var esc = (window.echarts && window.echarts.format && window.echarts.format.encodeHTML) || function (s) {
  return String(s).replace(/&/g, "&amp;").replace(/</g, "&lt;").replace(/>/g, "&gt;").replace(/"/g, "&quot;").replace(/'/g, "&#39;");
};
function num(v, digits) {
  if (v === null || v === undefined || typeof v !== "number" || !isFinite(v)) return "\u2014";
  if (digits === undefined) digits = 3;
  var a = Math.abs(v);
  if (a !== 0 && (a >= 1e6 || a < 1e-3)) return v.toExponential(2);
  var d = a >= 1000 ? 0 : Math.max(0, digits - 1 - Math.floor(Math.log10(a || 1)));
  return v.toLocaleString("en-US", {minimumFractionDigits: d, maximumFractionDigits: d});
}
function count(v) { return Math.abs(v).toLocaleString("en-US"); }
function pct(v) { return (v === null || v === undefined) ? "\u2014" : (100 * v).toFixed(1) + "%"; }
`

// assemble is the common end of a chart builder: the static picture, drawn
// by draw at the fallback height for the chart's height, and the Chart.
func assemble(title string, option []byte, script string, height int, draw func(h int) ([]byte, error)) (Chart, error) {
	png, err := draw(fallbackHeight(height))
	if err != nil {
		return Chart{}, err
	}
	return Chart{Title: title, Option: option, Fallback: png, Width: chartWidthPixels, Height: height, Script: script}, nil
}
