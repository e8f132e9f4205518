package widgets

import (
	"errors"
	"math"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// extrapData is an extrapolation curve ready to draw.
type extrapData struct {
	Covariate         string
	X, F1, F0         []float64
	Sup1, Sup0        []bool // grid point inside the fitting arm's data
	T, C              []causal.CurvePoint
	TTotal, CTotal    int
	NoTreated, NoCtrl []causal.Interval
	YMin, YMax        float64
	XMin, XMax        float64 // axis range on a nice step
	Held              []causal.HeldValue
}

// inAny reports whether x lies in one of the intervals.
func inAny(x float64, ivs []causal.Interval) bool {
	for _, iv := range ivs {
		if x >= iv.Lo && x <= iv.Hi {
			return true
		}
	}
	return false
}

func extrapOf(c *causal.ExtrapolationCurve) (extrapData, error) {
	if err := c.Err(); err != nil {
		return extrapData{}, err
	}
	if len(c.X) < 2 || len(c.F1) != len(c.X) || len(c.F0) != len(c.X) {
		return extrapData{}, errors.New("extrapolation curve has no grid")
	}
	d := extrapData{Covariate: c.Covariate, T: c.Treated, C: c.Control, TTotal: c.TreatedTotal, CTotal: c.ControlTotal,
		NoTreated: c.Unsupported1, NoCtrl: c.Unsupported0, Held: c.Held}
	lo, hi := math.Inf(1), math.Inf(-1)
	for i, x := range c.X {
		d.X = append(d.X, round(x, 6))
		d.F1 = append(d.F1, round(c.F1[i], 6))
		d.F0 = append(d.F0, round(c.F0[i], 6))
		d.Sup1 = append(d.Sup1, !inAny(x, c.Unsupported1))
		d.Sup0 = append(d.Sup0, !inAny(x, c.Unsupported0))
		lo, hi = math.Min(lo, math.Min(c.F1[i], c.F0[i])), math.Max(hi, math.Max(c.F1[i], c.F0[i]))
	}
	for _, pts := range [][]causal.CurvePoint{c.Treated, c.Control} {
		for _, p := range pts {
			lo, hi = math.Min(lo, p.Y), math.Max(hi, p.Y)
		}
	}
	step := niceStep((hi - lo) / 6)
	if hi == lo {
		step = 1
	}
	d.YMin, d.YMax = math.Floor(lo/step)*step, math.Ceil(hi/step)*step
	xlo, xhi := d.X[0], d.X[len(d.X)-1]
	xstep := niceStep((xhi - xlo) / 8)
	if xhi == xlo {
		xstep = 1
	}
	d.XMin, d.XMax = math.Floor(xlo/xstep)*xstep, math.Ceil(xhi/xstep)*xstep
	return d, nil
}

// splitLine returns the supported and the extrapolated parts of a fitted
// line as two series with gaps ("-"); each extrapolated run includes its
// neighbouring supported point so that the two parts join.
func splitLine(x, f []float64, sup []bool) (solid, dashed []opts.LineData) {
	for i := range x {
		pt := opts.LineData{Value: []float64{x[i], f[i]}}
		gap := opts.LineData{Value: []any{x[i], "-"}}
		if sup[i] {
			solid = append(solid, pt)
		} else {
			solid = append(solid, gap)
		}
		near := !sup[i] || (i > 0 && !sup[i-1]) || (i+1 < len(x) && !sup[i+1])
		if near {
			dashed = append(dashed, pt)
		} else {
			dashed = append(dashed, gap)
		}
	}
	return solid, dashed
}

// ExtrapolationPlot draws the fitted outcome lines f1 (fitted on the
// treated) and f0 (fitted on the controls) along one covariate, the other
// terms held fixed, over the observed outcomes of each arm (a bounded
// subsample). Where an arm has no units its line is dashed and the region is
// shaded: there the regression-adjusted estimate rests on extrapolation.
func ExtrapolationPlot(c *causal.ExtrapolationCurve) (Chart, error) {
	d, err := extrapOf(c)
	if err != nil {
		return Chart{}, err
	}
	title := "Outcome models along " + shorten(d.Covariate) + ": where each arm has data"
	const height = 420
	sc := charts.NewScatter()
	sc.SetGlobalOptions(commonOptions(title, "item", true)...)
	sc.SetGlobalOptions(
		charts.WithXAxisOpts(valueAxis(shorten(d.Covariate), round(d.XMin, 8), round(d.XMax, 8))),
		charts.WithYAxisOpts(yValueAxis("outcome", round(d.YMin, 8), round(d.YMax, 8), 56)),
		gridOpts(80, 32, 64, 56),
		charts.WithLegendOpts(opts.Legend{Show: opts.Bool(true), Top: "0", Left: "center", Width: "620",
			TextStyle: &opts.TextStyle{Color: ColorInk, FontSize: 12}}),
	)
	// Observed points as bare [x, y] pairs: the compact form of ECharts
	// data, which keeps several hundred points per arm small.
	points := func(ps []causal.CurvePoint) charts.SeriesOpts {
		out := make([][2]float64, len(ps))
		for i, p := range ps {
			out[i] = [2]float64{round(p.X, 4), round(p.Y, 4)}
		}
		return seriesSetData(out)
	}
	shade := func(label string, ivs []causal.Interval) charts.SeriesOpts {
		return charts.WithSeriesOpts(func(s *charts.SingleSeries) {
			if len(ivs) == 0 {
				return
			}
			if s.MarkAreas == nil {
				s.MarkAreas = &opts.MarkAreas{}
			}
			// Only the widest region carries the label, so that narrow
			// neighbouring regions do not print over each other.
			widest := 0
			for k, iv := range ivs {
				if iv.Hi-iv.Lo > ivs[widest].Hi-ivs[widest].Lo {
					widest = k
				}
			}
			for k, iv := range ivs {
				name := ""
				if k == widest {
					name = label
				}
				s.MarkAreas.Data = append(s.MarkAreas.Data, []any{
					map[string]any{"name": name, "xAxis": round(iv.Lo, 6)}, map[string]any{"xAxis": round(iv.Hi, 6)}})
			}
			s.MarkAreas.MarkAreaStyle = opts.MarkAreaStyle{ItemStyle: &opts.ItemStyle{Color: colorNoSupport},
				Label: &opts.Label{Show: opts.Bool(true), Color: ColorBad, FontSize: 11, Position: "insideTop"}}
		})
	}
	sc.AddSeries("treated units", nil, points(d.T),
		charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 5}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorTreated, Opacity: opts.Float(0.45)}),
		shade("no treated units", d.NoTreated))
	sc.AddSeries("control units", nil, points(d.C),
		charts.WithScatterChartOpts(opts.ScatterChart{SymbolSize: 5}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorControl, Opacity: opts.Float(0.45)}),
		shade("no controls", d.NoCtrl))
	lines := charts.NewLine()
	addFit := func(name, short string, f []float64, sup []bool, color string) {
		solid, dashed := splitLine(d.X, f, sup)
		lines.AddSeries(name, solid,
			charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false), ConnectNulls: opts.Bool(false)}),
			charts.WithLineStyleOpts(opts.LineStyle{Color: color, Width: 3}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: color}))
		hasDash := false
		for _, s := range sup {
			hasDash = hasDash || !s
		}
		if hasDash {
			lines.AddSeries(short+" extrapolated", dashed,
				charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false), ConnectNulls: opts.Bool(false)}),
				charts.WithLineStyleOpts(opts.LineStyle{Color: color, Width: 2, Type: "dashed"}),
				charts.WithItemStyleOpts(opts.ItemStyle{Color: color}))
		}
	}
	addFit("f1 (fitted on treated)", "f1", d.F1, d.Sup1, ColorTreated)
	addFit("f0 (fitted on controls)", "f0", d.F0, d.Sup0, ColorControl)
	sc.Overlap(lines)
	option, err := optionJSON(sc, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"covariate": d.Covariate, "tTotal": d.TTotal, "cTotal": d.CTotal}, `
chart.setOption({tooltip: {formatter: function (p) {
  if (!p.value || p.componentType !== "series") return "";
  var s = esc(p.seriesName) + "<br>" + esc(DATA.covariate) + ": " + num(p.value[0], 4) + "<br>";
  s += (p.seriesType === "line" ? "fitted outcome: " : "outcome: ") + num(p.value[1], 4);
  if (/extrapolated/.test(p.seriesName)) s += "<br><b style=\"color:#b91c1c\">no units of this arm here: extrapolation</b>";
  return s;
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticExtrapolation(d, ph) })
}
