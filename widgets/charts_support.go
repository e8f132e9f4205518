package widgets

import (
	"errors"
	"fmt"
	"math"

	"github.com/counterpartlab/counterpart/causal"
	"github.com/go-echarts/go-echarts/v2/charts"
	"github.com/go-echarts/go-echarts/v2/opts"
)

// mirroredData is the score histogram by arm: equal-width bins over the
// observed score range, counts per arm, and the common-support band.
type mirroredData struct {
	Lo, Hi             []float64
	Treated, Control   []int
	NTreated, NControl int
	Width              float64
	HasBand            bool
	BandLo, BandHi     float64
	BandLabel          string
}

// maxScoreBins bounds the number of histogram bins whatever n is.
const maxScoreBins = 60

// scoreArms returns the scores and treatment of a support result.
func scoreArms(s *causal.Support) (e, t []float64, err error) {
	if err := s.Err(); err != nil {
		return nil, nil, err
	}
	if s.Scores == nil || s.Scores.Design == nil || len(s.Scores.E) == 0 {
		return nil, nil, errors.New("support has no scores: compute it with study.Propensity().Support()")
	}
	return s.Scores.E, s.Scores.Design.T, nil
}

// mirroredBins bins the scores of a support result (see binScores).
func mirroredBins(s *causal.Support) (mirroredData, error) {
	e, t, err := scoreArms(s)
	if err != nil {
		return mirroredData{}, err
	}
	return binScores(e, t, s.Band.Lo <= s.Band.Hi, s.Band.Lo, s.Band.Hi)
}

// binScores bins scores by arm on a nice grid spanning their range: about
// 40–60 bins of width 1, 2, 2.5 or 5 × 10^k.
func binScores(e, t []float64, hasBand bool, bandLo, bandHi float64) (mirroredData, error) {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range e {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	if !finite(lo) || !finite(hi) {
		return mirroredData{}, errors.New("the scores are not finite numbers; refit the propensity model")
	}
	span := hi - lo
	if span < 0.02 {
		span = 0.02
	}
	w := niceStep(span / 48)
	start := math.Floor(lo/w) * w
	nb := int(math.Floor((hi-start)/w)) + 1
	for nb > maxScoreBins {
		w = niceStep(w * 1.01)
		start = math.Floor(lo/w) * w
		nb = int(math.Floor((hi-start)/w)) + 1
	}
	h := mirroredData{Width: w, Treated: make([]int, nb), Control: make([]int, nb),
		HasBand: hasBand, BandLo: bandLo, BandHi: bandHi, BandLabel: "common support"}
	for b := 0; b < nb; b++ {
		h.Lo = append(h.Lo, round(start+float64(b)*w, 10))
		h.Hi = append(h.Hi, round(start+float64(b+1)*w, 10))
	}
	for i, v := range e {
		b := int((v - start) / w)
		b = max(0, min(nb-1, b))
		if t[i] == 1 {
			h.Treated[b]++
			h.NTreated++
		} else {
			h.Control[b]++
			h.NControl++
		}
	}
	return h, nil
}

// SupportHistogram is the mirrored histogram of propensity scores: treated
// counts above the axis, control counts below it (as negative bars; the axis
// and tooltip show absolute counts), with the common-support band shaded.
func SupportHistogram(s *causal.Support) (Chart, error) {
	h, err := mirroredBins(s)
	if err != nil {
		return Chart{}, err
	}
	return mirroredChart("Propensity scores by arm", h)
}

// mirroredChart draws binned scores by arm as a mirrored histogram with
// h's band shaded.
func mirroredChart(title string, h mirroredData) (Chart, error) {
	const height = 380
	bar := charts.NewBar()
	bar.SetGlobalOptions(commonOptions(title, "axis", true)...)
	bar.SetGlobalOptions(
		charts.WithXAxisOpts(valueAxis("propensity score", round(h.Lo[0], 8), round(h.Hi[len(h.Hi)-1], 8))),
		charts.WithYAxisOpts(yValueAxis("units (treated above, control below)", nil, nil, 56)),
		gridOpts(80, 32, 44, 56),
	)
	td := make([]opts.BarData, len(h.Lo))
	cd := make([]opts.BarData, len(h.Lo))
	for b := range h.Lo {
		mid := round((h.Lo[b]+h.Hi[b])/2, 8)
		td[b] = opts.BarData{Value: []float64{mid, float64(h.Treated[b])}}
		cd[b] = opts.BarData{Value: []float64{mid, -float64(h.Control[b])}}
	}
	treatedOpts := []charts.SeriesOpts{
		charts.WithBarChartOpts(opts.BarChart{Stack: "arms", BarCategoryGap: "8%"}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorTreated}),
	}
	if h.HasBand {
		treatedOpts = append(treatedOpts, markAreaX(h.BandLabel, h.BandLo, h.BandHi, colorBandFill))
	}
	bar.AddSeries(fmt.Sprintf("treated (n = %s)", formatCount(h.NTreated)), td, treatedOpts...)
	bar.AddSeries(fmt.Sprintf("control (n = %s)", formatCount(h.NControl)), cd,
		charts.WithBarChartOpts(opts.BarChart{Stack: "arms", BarCategoryGap: "8%"}),
		charts.WithItemStyleOpts(opts.ItemStyle{Color: ColorControl}))
	option, err := optionJSON(bar, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"lo": h.Lo, "hi": h.Hi}, `
chart.setOption({
  tooltip: {formatter: function (ps) {
    if (!ps || !ps.length) return "";
    var i = ps[0].dataIndex;
    var s = "score " + num(DATA.lo[i]) + " \u2013 " + num(DATA.hi[i]);
    for (var k = 0; k < ps.length; k++) {
      s += "<br>" + ps[k].marker + esc(ps[k].seriesName) + ": " + count(ps[k].value[1]) + " units";
    }
    return s;
  }},
  yAxis: [{axisLabel: {formatter: function (v) { return count(v); }}}]
});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticMirrored(h, ph) })
}

// densityData is a kernel density estimate per arm on a common grid.
type densityData struct {
	X, Treated, Control []float64
	HTreated, HControl  float64
	HasBand             bool
	BandLo, BandHi      float64
}

// densityGridPoints is the number of points each density curve carries.
const densityGridPoints = 161

// fineBins is the resolution of the binned density estimate on [0, 1].
const fineBins = 2000

// scoreDensity estimates the density of each arm's scores. See binnedKDE.
func scoreDensity(s *causal.Support) (densityData, error) {
	e, t, err := scoreArms(s)
	if err != nil {
		return densityData{}, err
	}
	var counts [2][]float64
	counts[0] = make([]float64, fineBins)
	counts[1] = make([]float64, fineBins)
	var n, sum, sum2 [2]float64
	lo, hi := math.Inf(1), math.Inf(-1)
	for i, v := range e {
		a := 0
		if t[i] == 1 {
			a = 1
		}
		v = math.Max(0, math.Min(1, v))
		b := min(fineBins-1, int(v*fineBins))
		counts[a][b]++
		n[a]++
		sum[a] += v
		sum2[a] += v * v
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	var h [2]float64
	for a := 0; a < 2; a++ {
		if n[a] == 0 {
			return densityData{}, errors.New("support: one arm has no scores")
		}
		mean := sum[a] / n[a]
		sd := math.Sqrt(math.Max(0, (sum2[a]-n[a]*mean*mean)/math.Max(1, n[a]-1)))
		h[a] = silvermanBandwidth(sd, binnedIQR(counts[a], n[a]), n[a])
	}
	pad := 3 * math.Max(h[0], h[1])
	x0, x1 := math.Max(0, lo-pad), math.Min(1, hi+pad)
	if x1-x0 < 0.02 {
		x0, x1 = math.Max(0, x0-0.01), math.Min(1, x1+0.01)
	}
	d := densityData{HTreated: h[1], HControl: h[0], HasBand: s.Band.Lo <= s.Band.Hi, BandLo: s.Band.Lo, BandHi: s.Band.Hi}
	d.X = make([]float64, densityGridPoints)
	for k := range d.X {
		d.X[k] = x0 + (x1-x0)*float64(k)/float64(densityGridPoints-1)
	}
	d.Control = binnedKDE(counts[0], n[0], h[0], d.X)
	d.Treated = binnedKDE(counts[1], n[1], h[1], d.X)
	return d, nil
}

// silvermanBandwidth is the rule of thumb h = 0.9·min(sd, IQR/1.34)·n^(−1/5)
// (Silverman 1986, Density Estimation for Statistics and Data Analysis,
// eq. 3.31), kept above two fine bins so that a score taking few values
// does not give spikes narrower than the binning.
func silvermanBandwidth(sd, iqr, n float64) float64 {
	spread := sd
	if iqr > 0 && iqr/1.34 < spread {
		spread = iqr / 1.34
	}
	if spread <= 0 {
		spread = math.Max(sd, 0.01)
	}
	h := 0.9 * spread * math.Pow(n, -0.2)
	return math.Max(h, 2.0/fineBins)
}

// binnedIQR is the interquartile range from fine-bin counts (bin centres).
func binnedIQR(counts []float64, n float64) float64 {
	q := func(p float64) float64 {
		target := p * n
		var c float64
		for b, v := range counts {
			c += v
			if c >= target {
				return (float64(b) + 0.5) / fineBins
			}
		}
		return 1
	}
	return q(0.75) - q(0.25)
}

// binnedKDE evaluates a Gaussian kernel density estimate of data binned into
// counts on [0, 1] at the points xs, reflecting the kernel at 0 and 1 so that
// no mass is lost outside the score range (the reflection method; Silverman
// 1986, §2.10). Binning the data first (Silverman 1982; Wand 1994) makes the
// cost independent of n: bins × points kernel evaluations.
func binnedKDE(counts []float64, n, h float64, xs []float64) []float64 {
	out := make([]float64, len(xs))
	norm := 1 / (n * h * math.Sqrt(2*math.Pi))
	reach := 5 * h
	nb := float64(len(counts))
	for k, x := range xs {
		var f float64
		for b, c := range counts {
			if c == 0 {
				continue
			}
			g := (float64(b) + 0.5) / nb
			for _, m := range [3]float64{g, -g, 2 - g} {
				u := x - m
				if u > reach || u < -reach {
					continue
				}
				u /= h
				f += c * math.Exp(-0.5*u*u)
			}
		}
		out[k] = f * norm
	}
	return out
}

// ScoreDensity overlays a kernel density estimate of each arm's propensity
// scores (Gaussian kernel, Silverman's bandwidth, computed in Go on a fixed
// grid of 161 points), with the common-support band shaded.
func ScoreDensity(s *causal.Support) (Chart, error) {
	d, err := scoreDensity(s)
	if err != nil {
		return Chart{}, err
	}
	const title = "Score density by arm"
	const height = 340
	ln := charts.NewLine()
	ln.SetGlobalOptions(commonOptions(title, "axis", true)...)
	ln.SetGlobalOptions(
		charts.WithXAxisOpts(valueAxis("propensity score", round(d.X[0], 6), round(d.X[len(d.X)-1], 6))),
		charts.WithYAxisOpts(yValueAxis("density", 0, nil, 44)),
		gridOpts(72, 32, 44, 56),
	)
	pairs := func(y []float64) []opts.LineData {
		out := make([]opts.LineData, len(d.X))
		for k := range d.X {
			out[k] = opts.LineData{Value: []float64{round(d.X[k], 5), round(y[k], 4)}}
		}
		return out
	}
	armOpts := func(color string) []charts.SeriesOpts {
		return []charts.SeriesOpts{
			charts.WithLineChartOpts(opts.LineChart{ShowSymbol: opts.Bool(false)}),
			charts.WithLineStyleOpts(opts.LineStyle{Color: color, Width: 2}),
			charts.WithItemStyleOpts(opts.ItemStyle{Color: color}),
			charts.WithAreaStyleOpts(opts.AreaStyle{Color: color, Opacity: opts.Float(0.14)}),
		}
	}
	to := armOpts(ColorTreated)
	if d.HasBand {
		to = append(to, markAreaX("common support", d.BandLo, d.BandHi, colorBandFill))
	}
	ln.AddSeries("treated", pairs(d.Treated), to...)
	ln.AddSeries("control", pairs(d.Control), armOpts(ColorControl)...)
	option, err := optionJSON(ln, nil)
	if err != nil {
		return Chart{}, err
	}
	script, err := scriptWith(map[string]any{"h": []float64{round(d.HTreated, 3), round(d.HControl, 3)}}, `
chart.setOption({tooltip: {formatter: function (ps) {
  if (!ps || !ps.length) return "";
  var s = "score " + num(ps[0].value[0]);
  for (var k = 0; k < ps.length; k++) {
    s += "<br>" + ps[k].marker + esc(ps[k].seriesName) + ": density " + num(ps[k].value[1]);
  }
  return s + "<br><span style=\"color:#64748b\">bandwidth " + num(DATA.h[0]) + " (treated), " + num(DATA.h[1]) + " (control)</span>";
}}});`)
	if err != nil {
		return Chart{}, err
	}
	return assemble(title, option, script, height, func(ph int) ([]byte, error) { return staticDensity(d, ph) })
}
