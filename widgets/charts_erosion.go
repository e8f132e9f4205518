package widgets

import (
	"errors"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// erosionData is the erosion curve with its starting point (no covariates:
// one cell holding every unit, so both arms are present for everyone).
type erosionData struct {
	Steps                                []string // "(none)", "+ a", "+ b", …
	Added                                []string // covariate names ("" for the start)
	Both, TreatedCovered, ControlCovered []float64
	Cells, Violating                     []int
}

func erosionOf(e *causal.Erosion) (erosionData, error) {
	if err := e.Err(); err != nil {
		return erosionData{}, err
	}
	if len(e.Steps) == 0 {
		return erosionData{}, errors.New("erosion curve has no steps: name at least one covariate")
	}
	d := erosionData{Steps: []string{"(none)"}, Added: []string{""}, Both: []float64{1}, TreatedCovered: []float64{1},
		ControlCovered: []float64{1}, Cells: []int{1}, Violating: []int{0}}
	for _, s := range e.Steps {
		d.Steps = append(d.Steps, "+ "+s.Added)
		d.Added = append(d.Added, s.Added)
		d.Both = append(d.Both, round(s.ShareBoth, 4))
		d.TreatedCovered = append(d.TreatedCovered, round(s.TreatedCovered, 4))
		d.ControlCovered = append(d.ControlCovered, round(s.ControlCovered, 4))
		d.Cells = append(d.Cells, s.Cells)
		d.Violating = append(d.Violating, s.Violating)
	}
	return d, nil
}

// ErosionCurve shows how overlap shrinks as covariates are added: the share
// of units in cells where both arms are present, and the shares of treated
// units with controls (what the ATT needs) and of controls with treated units
// (what the ATC needs), against the covariates adjusted for so far.
func ErosionCurve(e *causal.Erosion) (Chart, error) {
	d, err := erosionOf(e)
	if err != nil {
		return Chart{}, err
	}
	const title = "Dimensional erosion of overlap"
	const height = 380
	ln := charts.NewLine()
	ln.SetGlobalOptions(commonOptions(title, "axis", true)...)
	labels := make([]string, len(d.Steps))
	for i, s := range d.Steps {
		labels[i] = shorten(s)
	}
	xAxis := opts.XAxis{Type: "category", Data: labels, Name: "covariates adjusted for (added in this order)",
		NameLocation: "middle", NameGap: 32, AxisLabel: &opts.AxisLabel{Show: opts.Bool(true), Color: ColorMuted, Interval: "0"}}
	if len(labels) > 5 {
		xAxis.AxisLabel.Rotate = 25
		xAxis.NameGap = 62
	}
	y := yValueAxis("share of units", 0, 100, 48)
	y.AxisLabel.Formatter = "{value}%"
	ln.SetGlobalOptions(charts.WithXAxisOpts(xAxis), charts.WithYAxisOpts(y),
		gridOpts(72, 32, 44, xAxis.NameGap+28))
	pcts := func(v []float64) []opts.LineData {
		out := make([]opts.LineData, len(v))
		for i, x := range v {
			out[i] = opts.LineData{Value: round(100*x, 4)}
		}
		return out
	}
	ln.SetXAxis(labels)
	ln.AddSeries("units in cells with both arms", pcts(d.Both),
		charts.WithLineStyleOpts(opts.LineStyle{Color: colorAfter, Width: 3}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: colorAfter}))
	ln.AddSeries("treated with controls (ATT)", pcts(d.TreatedCovered),
		charts.WithLineStyleOpts(opts.LineStyle{Color: ColorTreated, Width: 2, Type: "dashed"}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorTreated}))
	ln.AddSeries("controls with treated (ATC)", pcts(d.ControlCovered),
		charts.WithLineStyleOpts(opts.LineStyle{Color: ColorControl, Width: 2, Type: "dotted"}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorControl}))
	option, err := optionJSON(ln, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"added": d.Added, "cells": d.Cells, "violating": d.Violating}, `
chart.setOption({tooltip: {formatter: function (ps) {
  if (!ps || !ps.length) return "";
  var i = ps[0].dataIndex;
  var s = i === 0 ? "no covariates: every unit in one cell" : "step " + i + ": + " + esc(DATA.added[i]);
  s += "<br><span style=\"color:#64748b\">" + count(DATA.cells[i]) + " cells, " + count(DATA.violating[i]) + " with an empty arm</span>";
  for (var k = 0; k < ps.length; k++) s += "<br>" + ps[k].marker + esc(ps[k].seriesName) + ": " + num(ps[k].value, 3) + "%";
  return s;
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticErosion(d, ph) })
}
