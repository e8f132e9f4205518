package widgets

import (
	"errors"
	"fmt"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// maxHeatmapLevels bounds each axis of the positivity heatmap; beyond it the
// cells are shown as a table only (a heatmap of more levels is unreadable,
// and the payload must stay bounded).
const maxHeatmapLevels = 40

// heatCell is one non-empty cell of a two-covariate positivity table.
type heatCell struct {
	X, Y             int
	Treated, Control int
	Share            float64
	Violating, Thin  bool
}

type heatmapData struct {
	XName, YName     string
	XLabels, YLabels []string
	Cells            []heatCell
	Thin             int
}

// heatmapOf lays a two-covariate positivity table out on a grid.
func heatmapOf(c *causal.Cells) (heatmapData, error) {
	if err := c.Err(); err != nil {
		return heatmapData{}, err
	}
	if len(c.Columns) != 2 || len(c.Cuts) != 2 {
		return heatmapData{}, fmt.Errorf("a positivity heatmap needs exactly two covariates, this table has %d: see its table instead", len(c.Columns))
	}
	h := heatmapData{XName: c.Columns[0], YName: c.Columns[1], XLabels: c.Cuts[0].Labels, YLabels: c.Cuts[1].Labels, Thin: c.Options.Thin}
	if len(h.XLabels) > maxHeatmapLevels || len(h.YLabels) > maxHeatmapLevels {
		return heatmapData{}, fmt.Errorf("%q has %d and %q has %d levels: the heatmap draws at most %d per covariate; see the table",
			h.XName, len(h.XLabels), h.YName, len(h.YLabels), maxHeatmapLevels)
	}
	xi := map[string]int{}
	for i, l := range h.XLabels {
		xi[l] = i
	}
	yi := map[string]int{}
	for i, l := range h.YLabels {
		yi[l] = i
	}
	for _, r := range c.Rows {
		if len(r.Labels) != 2 {
			return heatmapData{}, errors.New("positivity cell without two labels")
		}
		x, okx := xi[r.Labels[0]]
		y, oky := yi[r.Labels[1]]
		if !okx || !oky {
			return heatmapData{}, fmt.Errorf("positivity cell %q × %q matches no level of the cuts", r.Labels[0], r.Labels[1])
		}
		n := r.Treated + r.Control
		share := 0.0
		if n > 0 {
			share = float64(r.Treated) / float64(n)
		}
		h.Cells = append(h.Cells, heatCell{X: x, Y: y, Treated: r.Treated, Control: r.Control, Share: share, Violating: r.Empty, Thin: r.Thin})
	}
	return h, nil
}

// heatItem is one heatmap datum with its own style and label.
type heatItem struct {
	Value     []float64   `json:"value"`
	ItemStyle *cellStyle  `json:"itemStyle,omitempty"`
	Label     *opts.Label `json:"label,omitempty"`
}

// cellStyle is a heatmap item style with a border type, which go-echarts'
// ItemStyle lacks.
type cellStyle struct {
	Color       string  `json:"color,omitempty"`
	BorderColor string  `json:"borderColor"`
	BorderWidth float64 `json:"borderWidth"`
	BorderType  string  `json:"borderType,omitempty"`
}

// CellsHeatmap draws a positivity table of two covariates as a heatmap:
// colour is the share of the cell's units that are treated (amber: all
// control, teal: all treated); a cell with an empty arm — a positivity
// violation — has a thick red border and says which arm is missing; a thin
// cell (an arm below the table's threshold) has a dashed border. Cells with
// no units at all stay blank.
func CellsHeatmap(c *causal.Cells) (Chart, error) {
	h, err := heatmapOf(c)
	if err != nil {
		return Chart{}, err
	}
	title := "Positivity cells: share treated"
	nx, ny := len(h.XLabels), len(h.YLabels)
	height := max(300, min(720, 120+30*ny))
	hm := charts.NewHeatMap()
	hm.SetGlobalOptions(commonOptions(title, "item", false)...)
	xLabels := make([]string, nx)
	for i, l := range h.XLabels {
		xLabels[i] = shorten(l)
	}
	yLabels := make([]string, ny)
	for i, l := range h.YLabels {
		yLabels[i] = shorten(l)
	}
	xAxis := opts.XAxis{Type: "category", Data: xLabels, Name: shorten(h.XName), NameLocation: "middle", NameGap: 34,
		SplitArea: &opts.SplitArea{Show: opts.Bool(true)},
		AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted, Interval: "0"}}
	chars := 0
	for _, l := range xLabels {
		chars += len([]rune(l))
	}
	// Rotate labels that would not fit side by side (about 7 px a character
	// across the 470 px of the plot).
	if nx > 6 || chars*7 > 440 {
		xAxis.AxisLabel.Rotate = 30
		xAxis.NameGap = 70
	}
	hm.SetGlobalOptions(
		charts.WithXAxisOpts(xAxis),
		charts.WithYAxisOpts(opts.YAxis{Type: "category", Data: yLabels, Name: shorten(h.YName), NameLocation: "middle", NameGap: 100,
			SplitArea: &opts.SplitArea{Show: opts.Bool(true)},
			AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted, Interval: "0", Width: 90, Overflow: "truncate"}}),
		gridOpts(130, 120, 24, xAxis.NameGap+26),
		charts.WithVisualMapOpts(opts.VisualMap{Type: "continuous", Min: 0, Max: 1, Dimension: "2", Calculable: opts.Bool(false),
			Orient: "vertical", Right: "8", Top: "middle", Text: []string{"all treated", "all control"},
			InRange: &opts.VisualMapInRange{Color: []string{ColorControl, colorCellMid, ColorTreated}}}),
	)
	labels := nx*ny <= 100
	items := make([]heatItem, 0, len(h.Cells))
	for _, cell := range h.Cells {
		it := heatItem{Value: []float64{float64(cell.X), float64(cell.Y), round(cell.Share, 4), float64(cell.Treated), float64(cell.Control)}}
		switch {
		case cell.Violating:
			it.ItemStyle = &cellStyle{BorderColor: ColorBad, BorderWidth: 3}
			missing := "no control"
			if cell.Treated == 0 {
				missing = "no treated"
			}
			it.Label = &opts.Label{Show: opts.Bool(labels), Formatter: missing, Color: ColorBad, FontWeight: "bold", FontSize: 11}
		case cell.Thin:
			it.ItemStyle = &cellStyle{BorderColor: ColorWarn, BorderWidth: 2, BorderType: "dashed"}
			it.Label = &opts.Label{Show: opts.Bool(labels), Formatter: "thin", Color: ColorWarn, FontSize: 11}
		default:
			it.ItemStyle = &cellStyle{BorderColor: "#ffffff", BorderWidth: 1}
		}
		items = append(items, it)
	}
	hm.AddSeries("cells", nil, seriesSetData(items),
		charts.WithEmphasisOpts(opts.Emphasis{ItemStyle: &opts.ItemStyle{BorderColor: ColorInk, BorderWidth: 2}}))
	option, err := optionJSON(hm, func(obj map[string]any) {
		// go-echarts types visualMap.dimension as a string; ECharts wants
		// the index of the value dimension (share treated) as a number.
		patchList(obj, "visualMap", func(m map[string]any) { m["dimension"] = 2; m["min"] = 0; m["max"] = 1 })
	})
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"x": h.XLabels, "y": h.YLabels, "xname": h.XName, "yname": h.YName, "thin": h.Thin}, `
chart.setOption({tooltip: {formatter: function (p) {
  var v = p.value, t = v[3], c = v[4];
  var s = esc(DATA.xname) + ": " + esc(DATA.x[v[0]]) + "<br>" + esc(DATA.yname) + ": " + esc(DATA.y[v[1]]) +
    "<br>treated: " + count(t) + ", control: " + count(c) + "<br>share treated: " + pct(v[2]);
  if (t === 0 || c === 0) s += "<br><b style=\"color:#b91c1c\">violation: no " + (t === 0 ? "treated units" : "controls") + " here</b>";
  else if (t < DATA.thin || c < DATA.thin) s += "<br><b style=\"color:#b45309\">thin: an arm has fewer than " + DATA.thin + " units</b>";
  return s;
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticHeatmap(h, ph) })
}
