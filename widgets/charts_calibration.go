package widgets

import (
	"errors"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// calibrationData is mean score against share treated per score bin.
type calibrationData struct {
	Mean, Share, Lo, Hi []float64
	N                   []int
}

func calibrationOf(s *causal.Scores) (calibrationData, error) {
	if err := s.Err(); err != nil {
		return calibrationData{}, err
	}
	if len(s.Calibration) == 0 {
		return calibrationData{}, errors.New("propensity model has no calibration bins")
	}
	var c calibrationData
	for _, b := range s.Calibration {
		c.Mean = append(c.Mean, round(b.MeanScore, 4))
		c.Share = append(c.Share, round(b.ShareTreated, 4))
		c.Lo = append(c.Lo, round(b.Lo, 4))
		c.Hi = append(c.Hi, round(b.Hi, 4))
		c.N = append(c.N, b.N)
	}
	return c, nil
}

// CalibrationPlot compares, per score decile (bins of equal count), the
// mean fitted score with the share of units actually treated. Points on the
// diagonal mean the model's scores are calibrated; a systematic bend means
// the model's form misses part of how treatment depends on the covariates.
func CalibrationPlot(s *causal.Scores) (Chart, error) {
	c, err := calibrationOf(s)
	if err != nil {
		return Chart{}, err
	}
	const title = "Calibration of the propensity model"
	const height = 400
	sc := charts.NewScatter()
	sc.SetGlobalOptions(commonOptions(title, "item", true)...)
	sc.SetGlobalOptions(
		charts.WithXAxisOpts(valueAxis("mean propensity score in the bin", 0, 1)),
		charts.WithYAxisOpts(yValueAxis("share treated in the bin", 0, 1, 44)),
		gridOpts(72, 240, 44, 60),
	)
	pts := make([]opts.ScatterData, len(c.Mean))
	for i := range c.Mean {
		pts[i] = opts.ScatterData{Value: []float64{c.Mean[i], c.Share[i]}, SymbolSize: 11}
	}
	sc.AddSeries("score bins (equal counts)", pts,
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorAfter}))
	diag := charts.NewLine()
	diag.AddSeries("perfect calibration", []opts.LineData{{Value: []float64{0, 0}}, {Value: []float64{1, 1}}},
		charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false)}),
		charts.WithLineStyleOpts(opts.LineStyle{Color: ColorMuted, Width: 1, Type: "dashed"}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorMuted}))
	sc.Overlap(diag)
	option, err := optionJSON(sc, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(c, `
chart.setOption({tooltip: {formatter: function (p) {
  if (p.seriesIndex !== 0) return "";
  var i = p.dataIndex;
  return "score bin " + (i + 1) + " of " + DATA.Mean.length + " (" + num(DATA.Lo[i]) + " \u2013 " + num(DATA.Hi[i]) + ")" +
    "<br>mean score: " + num(DATA.Mean[i]) + "<br>share treated: " + pct(DATA.Share[i]) + "<br>units: " + count(DATA.N[i]);
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticCalibration(c, ph) })
}
