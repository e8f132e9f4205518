package widgets

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Plot is a chart of a Sheet's columns: one or more numeric columns against
// a column x, drawn as lines with markers (Sheet.Line) or as points
// (Sheet.Scatter). A numeric x gives a value axis, a text x one category
// per row; rows are drawn in their order, and a missing value leaves a gap.
// It shows as an interactive chart with a static picture (HTML), as a text
// table of the drawn columns (String) and as JSON; an error (a column that
// is missing or not numeric, too many values) is shown in its place.
type Plot struct {
	sheet          *Sheet
	kind           string // "line" or "scatter"
	x              string
	ys             []string
	title          string
	xLabel, yLabel string
	percent        bool
	err            error
}

// Line draws the columns ys against x as lines with markers.
func (s *Sheet) Line(x string, ys ...string) *Plot { return s.plot("line", x, ys) }

// Scatter draws the columns ys against x as points.
func (s *Sheet) Scatter(x string, ys ...string) *Plot { return s.plot("scatter", x, ys) }

func (s *Sheet) plot(kind, x string, ys []string) *Plot {
	p := &Plot{sheet: s, kind: kind, x: x, ys: ys, err: s.Err()}
	if s != nil {
		p.title = s.title
	}
	if p.err != nil {
		return p
	}
	if len(ys) == 0 {
		p.err = fmt.Errorf("%s chart of %q: name at least one column to draw against it", kind, x)
		return p
	}
	if len(ys) > maxPlotSeries {
		p.err = fmt.Errorf("%s chart: %d columns to draw; at most %d fit one chart, draw the rest in another", kind, len(ys), maxPlotSeries)
		return p
	}
	if _, err := s.column(x, "x"); err != nil {
		p.err = err
		return p
	}
	for _, y := range ys {
		c, err := s.column(y, "y")
		if err != nil {
			p.err = err
			return p
		}
		if !c.isNum() {
			p.err = fmt.Errorf("y column %q holds text; a chart draws numeric columns (give it as x, or convert it to numbers)", y)
			return p
		}
	}
	if s.Len() == 0 {
		p.err = fmt.Errorf("%s chart of %q: the sheet has no rows", kind, x)
		return p
	}
	if v := s.Len() * len(ys); v > maxPlotValues {
		p.err = fmt.Errorf("%s chart: %s rows × %d columns = %s values, more than the %s a chart carries; summarise or bin the rows first",
			kind, formatCount(s.Len()), len(ys), formatCount(v), formatCount(maxPlotValues))
	}
	return p
}

func (p *Plot) copyWith(edit func(*Plot)) *Plot {
	if p == nil {
		return p
	}
	c := *p
	c.ys = append([]string{}, p.ys...)
	edit(&c)
	return &c
}

// Titled returns a copy of the plot with a title.
func (p *Plot) Titled(title string) *Plot { return p.copyWith(func(c *Plot) { c.title = title }) }

// Axes returns a copy of the plot with axis titles (by default the x
// column's name and, for one y column, its name).
func (p *Plot) Axes(xTitle, yTitle string) *Plot {
	return p.copyWith(func(c *Plot) { c.xLabel, c.yLabel = xTitle, yTitle })
}

// Percent returns a copy of the plot whose y values, shares from 0 to 1,
// are shown as percentages.
func (p *Plot) Percent() *Plot { return p.copyWith(func(c *Plot) { c.percent = true }) }

// Err is the plot's error, or nil.
func (p *Plot) Err() error {
	if p == nil {
		return errors.New("nil Plot: make one with Sheet.Line or Sheet.Scatter")
	}
	return p.err
}

// plotData is a plot's columns resolved and rounded, shared by the option,
// the static picture and the JSON.
type plotData struct {
	Kind, Title, XLabel, YLabel string
	XName                       string
	Category                    bool
	XNum                        []float64 // numeric x (NaN: missing)
	XText                       []string  // category labels (shortened)
	XFull                       []string  // x as shown in tooltips
	Names                       []string  // y column names
	Y                           [][]float64
	Percent                     bool
}

func (p *Plot) data() (plotData, error) {
	if err := p.Err(); err != nil {
		return plotData{}, err
	}
	s := p.sheet
	xc, err := s.column(p.x, "x")
	if err != nil {
		return plotData{}, err
	}
	d := plotData{Kind: p.kind, Title: p.title, XName: p.x, XLabel: p.xLabel, YLabel: p.yLabel, Category: !xc.isNum(), Percent: p.percent}
	if d.Title == "" {
		d.Title = strings.Join(p.ys, ", ") + " against " + p.x
	}
	if d.XLabel == "" {
		d.XLabel = p.x
	}
	if d.YLabel == "" && len(p.ys) == 1 {
		d.YLabel = p.ys[0]
	}
	n := s.Len()
	for i := 0; i < n; i++ {
		d.XFull = append(d.XFull, xc.cellText(i))
		if d.Category {
			d.XText = append(d.XText, shorten(xc.text[i]))
		} else {
			d.XNum = append(d.XNum, round(xc.num[i], 6))
		}
	}
	for _, y := range p.ys {
		c, err := s.column(y, "y")
		if err != nil {
			return plotData{}, err
		}
		vals := make([]float64, n)
		for i, v := range c.num {
			vals[i] = round(v, 6)
		}
		d.Names = append(d.Names, y)
		d.Y = append(d.Y, vals)
	}
	return d, nil
}

// Chart builds the interactive chart and its static picture.
func (p *Plot) Chart() (Chart, error) {
	d, err := p.data()
	if err != nil {
		return Chart{}, err
	}
	return seriesChart(d)
}

func seriesChart(d plotData) (Chart, error) {
	const height = 380
	scale := 1.0
	if d.Percent {
		scale = 100
	}
	ln := charts.NewLine()
	ln.SetGlobalOptions(commonOptions(d.Title, "axis", true)...)
	var xAxis opts.XAxis
	if d.Category {
		xAxis = opts.XAxis{Type: "category", Data: d.XText, Name: shorten(d.XLabel), NameLocation: "middle", NameGap: 30,
			AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted}}
		ln.SetXAxis(d.XText)
	} else {
		xAxis = valueAxis(shorten(d.XLabel), nil, nil)
		xAxis.Scale = opts.Bool(true)
	}
	y := yValueAxis(shorten(d.YLabel), nil, nil, 56)
	if d.Percent {
		y.AxisLabel.Formatter = "{value}%"
	}
	ln.SetGlobalOptions(charts.WithXAxisOpts(xAxis), charts.WithYAxisOpts(y), gridOpts(80, 32, 44, 56),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(len(d.Names) > 1), Top: "0", Left: "center", Width: "600",
			TextStyle: &opts.TextStyle{Color: ColorInk, FontSize: 12}}))
	for k, name := range d.Names {
		// Bare values or [x, y] pairs: the compact form of ECharts data.
		data := make([]any, len(d.Y[k]))
		for i, v := range d.Y[k] {
			var yv any = "-"
			if finite(v) {
				yv = round(scale*v, 6)
			}
			switch {
			case d.Category:
				data[i] = yv
			case !finite(d.XNum[i]):
				data[i] = [2]any{"-", "-"}
			default:
				data[i] = [2]any{d.XNum[i], yv}
			}
		}
		colour := seriesPalette[k%len(seriesPalette)]
		style := opts.LineStyle{Color: colour, Width: 2, Type: seriesDashes[k%len(seriesDashes)]}
		if d.Kind == "scatter" {
			style.Width, style.Opacity = 0, opts.Float(0)
		}
		ln.AddSeries(shorten(name), nil, seriesSetData(data),
			charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(true), SymbolSize: 6}),
			charts.WithLineStyleOpts(style),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: colour}))
	}
	option, err := optionJSON(ln, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"x": d.XName, "labels": d.XFull, "names": d.Names, "pct": d.Percent}, `
chart.setOption({tooltip: {formatter: function (ps) {
  if (!ps || !ps.length) return "";
  var i = ps[0].dataIndex;
  var s = esc(DATA.x) + ": " + esc(DATA.labels[i]);
  for (var k = 0; k < ps.length; k++) {
    var v = ps[k].value;
    if (Array.isArray(v)) v = v[1];
    s += "<br>" + ps[k].marker + esc(DATA.names[ps[k].seriesIndex]) + ": " + (typeof v === "number" ? num(v, 4) + (DATA.pct ? "%" : "") : "\u2014");
  }
  return s;
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(d.Title, option, script, height, func(ph int) ([]byte, error) { return staticSeries(d, ph) })
}

// staticSeries draws the plot's static picture.
func staticSeries(d plotData, height int) ([]byte, error) {
	p := newPlot(shorten(d.XLabel), shorten(d.YLabel))
	addGrid(p, false, true)
	xOf := func(i int) float64 {
		if d.Category {
			return float64(i)
		}
		return d.XNum[i]
	}
	ylo, yhi := math.Inf(1), math.Inf(-1)
	dashes := map[string][]vg.Length{"solid": nil, "dashed": {vg.Points(5), vg.Points(3)}, "dotted": {vg.Points(1.5), vg.Points(2)}}
	for k, name := range d.Names {
		c := hexColor(seriesPalette[k%len(seriesPalette)])
		// Runs of points without a gap.
		var runs []plotter.XYs
		var run plotter.XYs
		var all plotter.XYs
		for i, v := range d.Y[k] {
			x := xOf(i)
			if !finite(v) || !finite(x) {
				if len(run) > 0 {
					runs = append(runs, run)
				}
				run = nil
				continue
			}
			pt := plotter.XY{X: x, Y: v}
			run = append(run, pt)
			all = append(all, pt)
			ylo, yhi = math.Min(ylo, v), math.Max(yhi, v)
		}
		if len(run) > 0 {
			runs = append(runs, run)
		}
		var legend plot.Thumbnailer
		if d.Kind == "line" {
			for _, r := range runs {
				if len(r) < 2 {
					continue
				}
				l, err := line(r, c, normalLine, dashes[seriesDashes[k%len(seriesDashes)]]...)
				if err != nil {
					return nil, err
				}
				p.Add(l)
				legend = l
			}
		}
		if len(all) > 0 {
			sc, err := plotter.NewScatter(all)
			if err != nil {
				return nil, err
			}
			sc.GlyphStyle = draw.GlyphStyle{Color: c, Radius: vg.Points(2.5), Shape: draw.CircleGlyph{}}
			p.Add(sc)
			if legend == nil {
				legend = sc
			}
		}
		if legend != nil && len(d.Names) > 1 {
			p.Legend.Add(shorten(name), legend)
		}
	}
	if !finite(ylo) {
		return nil, errors.New("no value to draw: every y value is missing")
	}
	if d.Category {
		p.X.Tick.Marker = nominalTicks(d.XText)
		p.X.Min, p.X.Max = -0.3, float64(len(d.XText))-0.7
		if len(d.XText) > 6 {
			p.X.Tick.Label.Rotation = math.Pi / 6
			p.X.Tick.Label.XAlign = draw.XRight
			p.X.Tick.Label.YAlign = draw.YCenter
		}
	}
	if d.Percent {
		p.Y.Tick.Marker = percentTicks{}
	}
	// The value axis includes 0, as the interactive chart's does, with
	// headroom for the legend (top right).
	p.Y.Min, p.Y.Max = math.Min(0, ylo), math.Max(0, yhi)
	if p.Y.Min == p.Y.Max {
		p.Y.Max = p.Y.Min + 1
	}
	if len(d.Names) > 1 {
		p.Y.Max += 0.06 * float64(len(d.Names)) * (p.Y.Max - p.Y.Min)
	}
	if !d.Category {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, x := range d.XNum {
			if finite(x) {
				lo, hi = math.Min(lo, x), math.Max(hi, x)
			}
		}
		if pad := 0.02 * (hi - lo); finite(pad) && pad > 0 {
			p.X.Min, p.X.Max = lo-pad, hi+pad
		}
	}
	p.Legend.Left = false
	return renderPNG(p, height)
}

// HTML is the interactive chart with its static picture, or an error panel.
func (p *Plot) HTML() string {
	c, err := p.Chart()
	if err != nil {
		return ErrorPanel(fmt.Errorf("chart not drawn: %w", err))
	}
	return c.HTML()
}

// String is the plot's title and its drawn columns as a text table.
func (p *Plot) String() string {
	if err := p.Err(); err != nil {
		return ErrorText(err)
	}
	d, err := p.data()
	if err != nil {
		return ErrorText(err)
	}
	cols := append([]string{p.x}, p.ys...)
	t := p.sheet.Table(cols...).Titled("")
	return "[" + p.kind + " chart] " + terminalText(d.Title) + "\n" + t.String()
}

// MarshalJSON writes {"kind", "title", "x": {"name", "label", "values"},
// "y_label", "percent", "series": [{"name", "values"}]}; missing values are
// null. A plot with an error writes {"error": message}.
func (p *Plot) MarshalJSON() ([]byte, error) {
	d, err := p.data()
	if err != nil {
		return json.Marshal(map[string]string{"error": ErrorMessage(err)})
	}
	type series struct {
		Name   string `json:"name"`
		Values []any  `json:"values"`
	}
	nulls := func(v []float64) []any {
		out := make([]any, len(v))
		for i, x := range v {
			if finite(x) {
				out[i] = x
			}
		}
		return out
	}
	x := map[string]any{"name": d.XName, "label": d.XLabel}
	if d.Category {
		xc, _ := p.sheet.column(p.x, "x")
		x["values"] = xc.text
	} else {
		x["values"] = nulls(d.XNum)
	}
	out := map[string]any{"kind": d.Kind, "title": d.Title, "x": x, "y_label": d.YLabel, "percent": d.Percent}
	var ss []series
	for k, name := range d.Names {
		ss = append(ss, series{name, nulls(d.Y[k])})
	}
	out["series"] = ss
	return json.Marshal(out)
}
