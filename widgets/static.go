package widgets

// Static pictures of the charts, drawn with gonum.org/v1/plot. Each chart
// carries one as Chart.Fallback: it is what a reader sees where scripts do
// not run (an untrusted notebook, a repository viewer, a PDF export) and
// until the interactive chart has been drawn. The pictures are drawn from the
// same summarised data as the interactive option.

import (
	"bytes"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"sort"
	"strconv"

	"github.com/counterpartlab/counterpart/causal"
	xfont "golang.org/x/image/font"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// fallbackWidth is the width of the static pictures in pixels: the chart's
// own, so that the picture shows at its size, 1:1, sharp (fallbackHeight
// keeps the chart's height).
const fallbackWidth = chartWidthPixels

// fallbackDPI maps points to pixels: 72 points per inch at 96 pixels per inch.
const fallbackDPI = 96

var (
	inkRGB      = hexColor(ColorInk)
	mutedRGB    = hexColor(ColorMuted)
	ruleRGB     = hexColor(ColorRule)
	treatedRGB  = hexColor(ColorTreated)
	controlRGB  = hexColor(ColorControl)
	badRGB      = hexColor(ColorBad)
	warnRGB     = hexColor(ColorWarn)
	beforeRGB   = hexColor(colorBefore)
	afterRGB    = hexColor(colorAfter)
	cellMidRGB  = hexColor(colorCellMid)
	bandRGB     = color.NRGBA{100, 116, 139, 36}
	noSuppRGB   = color.NRGBA{185, 28, 28, 20}
	sansFont    = font.Font{Typeface: "Liberation", Variant: "Sans"}
	sansBold    = font.Font{Typeface: "Liberation", Variant: "Sans", Weight: xfont.WeightBold}
	thinLine    = vg.Points(0.75)
	normalLine  = vg.Points(1.5)
	referenceLS = draw.LineStyle{Color: badRGB, Width: vg.Points(1), Dashes: []vg.Length{vg.Points(4), vg.Points(3)}}
)

// hexColor parses "#rrggbb".
func hexColor(s string) color.NRGBA {
	if len(s) != 7 || s[0] != '#' {
		return color.NRGBA{0, 0, 0, 255}
	}
	v, err := strconv.ParseUint(s[1:], 16, 32)
	if err != nil {
		return color.NRGBA{0, 0, 0, 255}
	}
	return color.NRGBA{uint8(v >> 16), uint8(v >> 8), uint8(v), 255}
}

// withAlpha returns c with alpha a (0–255), premultiplication left to the renderer.
func withAlpha(c color.NRGBA, a uint8) color.NRGBA { c.A = a; return c }

// newPlot returns a plot in our style: sans-serif text, slate axes, no title
// (the notebook shows the title above the chart).
func newPlot(xLabel, yLabel string) *plot.Plot {
	p := plot.New()
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Label.TextStyle.Font = font.From(sansFont, 11)
		ax.Label.TextStyle.Color = inkRGB
		ax.Tick.Label.Font = font.From(sansFont, 9.5)
		ax.Tick.Label.Color = mutedRGB
		ax.Color = mutedRGB
		ax.Tick.Color = mutedRGB
		ax.Width = thinLine
		ax.Tick.Width = thinLine
		ax.Padding = vg.Points(2)
	}
	p.X.Label.Text = xLabel
	p.Y.Label.Text = yLabel
	p.Legend.TextStyle.Font = font.From(sansFont, 10)
	p.Legend.TextStyle.Color = inkRGB
	p.Legend.Top = true
	p.Legend.ThumbnailWidth = vg.Points(14)
	return p
}

// addGrid draws light grid lines behind what follows.
func addGrid(p *plot.Plot, vertical, horizontal bool) {
	g := plotter.NewGrid()
	g.Vertical.Color, g.Horizontal.Color = ruleRGB, ruleRGB
	g.Vertical.Width, g.Horizontal.Width = thinLine, thinLine
	if !vertical {
		g.Vertical.Color = nil
	}
	if !horizontal {
		g.Horizontal.Color = nil
	}
	p.Add(g)
}

// renderPNG draws p at fallbackWidth × h pixels and encodes it as a PNG
// (best compression: the picture travels inside every notebook output).
func renderPNG(p *plot.Plot, h int) ([]byte, error) {
	wPt := vg.Length(fallbackWidth) * vg.Inch / fallbackDPI
	hPt := vg.Length(h) * vg.Inch / fallbackDPI
	c := vgimg.NewWith(vgimg.UseWH(wPt, hPt), vgimg.UseDPI(fallbackDPI), vgimg.UseBackgroundColor(color.White))
	p.Draw(draw.New(c))
	var buf bytes.Buffer
	enc := png.Encoder{CompressionLevel: png.BestCompression}
	if err := enc.Encode(&buf, paletted(c.Image())); err != nil {
		return nil, fmt.Errorf("encoding the static picture: %w", err)
	}
	return buf.Bytes(), nil
}

// paletted converts a picture to at most 256 colours: the most frequent
// ones, every other pixel mapped to its nearest (color.Palette.Index). A
// chart has a few flat colours and their antialiased edges, so the picture
// looks the same and its PNG is a fraction of the size.
func paletted(img image.Image) image.Image {
	b := img.Bounds()
	freq := map[color.RGBA]int{}
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			freq[color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)]++
		}
	}
	type cf struct {
		c color.RGBA
		n int
	}
	all := make([]cf, 0, len(freq))
	for c, n := range freq {
		all = append(all, cf{c, n})
	}
	sort.Slice(all, func(i, j int) bool {
		if all[i].n != all[j].n {
			return all[i].n > all[j].n
		}
		a, c := all[i].c, all[j].c
		return uint32(a.R)<<24|uint32(a.G)<<16|uint32(a.B)<<8|uint32(a.A) < uint32(c.R)<<24|uint32(c.G)<<16|uint32(c.B)<<8|uint32(c.A)
	})
	if len(all) > 256 {
		all = all[:256]
	}
	pal := make(color.Palette, len(all))
	for i, e := range all {
		pal[i] = e.c
	}
	out := image.NewPaletted(b, pal)
	index := make(map[color.RGBA]uint8, len(freq))
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			c := color.RGBAModel.Convert(img.At(x, y)).(color.RGBA)
			k, ok := index[c]
			if !ok {
				k = uint8(pal.Index(c))
				index[c] = k
			}
			out.SetColorIndex(x, y, k)
		}
	}
	return out
}

// rect is an axis-aligned rectangle in data coordinates.
func rect(x0, x1, y0, y1 float64) plotter.XYs {
	return plotter.XYs{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}}
}

// filledRects is one polygon plotter holding every rectangle, filled with fill.
func filledRects(rs []plotter.XYs, fill color.Color, stroke color.Color) (*plotter.Polygon, error) {
	if len(rs) == 0 {
		rs = []plotter.XYs{rect(0, 0, 0, 0)}
	}
	xys := make([]plotter.XYer, len(rs))
	for i := range rs {
		xys[i] = rs[i]
	}
	pg, err := plotter.NewPolygon(xys...)
	if err != nil {
		return nil, err
	}
	pg.Color = fill
	pg.LineStyle.Width = 0
	if stroke != nil {
		pg.LineStyle = draw.LineStyle{Color: stroke, Width: vg.Points(0.5)}
	}
	return pg, nil
}

// line is a polyline plotter in the given colour, width and dash pattern.
func line(pts plotter.XYs, c color.Color, w vg.Length, dashes ...vg.Length) (*plotter.Line, error) {
	l, err := plotter.NewLine(pts)
	if err != nil {
		return nil, err
	}
	l.LineStyle = draw.LineStyle{Color: c, Width: w, Dashes: dashes}
	return l, nil
}

// absTicks labels a mirrored axis with absolute values.
type absTicks struct{}

func (absTicks) Ticks(lo, hi float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(lo, hi)
	for i := range ts {
		if ts[i].Label != "" {
			ts[i].Label = formatCount(int(math.Round(math.Abs(ts[i].Value))))
		}
	}
	return ts
}

// percentTicks labels a 0–1 axis as percentages.
type percentTicks struct{}

func (percentTicks) Ticks(lo, hi float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(lo, hi)
	for i := range ts {
		if ts[i].Label != "" {
			ts[i].Label = strconv.FormatFloat(100*ts[i].Value, 'f', -1, 64) + "%"
		}
	}
	return ts
}

// nominalTicks labels integer positions 0..n−1 with names (shortened).
func nominalTicks(names []string) plot.ConstantTicks {
	ts := make(plot.ConstantTicks, len(names))
	for i, n := range names {
		ts[i] = plot.Tick{Value: float64(i), Label: shorten(n)}
	}
	return ts
}

// staticMirrored draws the mirrored score histogram.
func staticMirrored(h mirroredData, height int) ([]byte, error) {
	p := newPlot("propensity score", "units (treated above, control below)")
	addGrid(p, false, true)
	maxT, maxC := 1.0, 1.0
	for i := range h.Lo {
		maxT = math.Max(maxT, float64(h.Treated[i]))
		maxC = math.Max(maxC, float64(h.Control[i]))
	}
	ylo, yhi := -maxC*1.08, maxT*1.08
	if h.HasBand {
		band, err := filledRects([]plotter.XYs{rect(h.BandLo, h.BandHi, ylo, yhi)}, bandRGB, nil)
		if err != nil {
			return nil, err
		}
		p.Add(band)
	}
	gap := 0.06 * h.Width
	var tr, cr []plotter.XYs
	for i := range h.Lo {
		if h.Treated[i] > 0 {
			tr = append(tr, rect(h.Lo[i]+gap/2, h.Hi[i]-gap/2, 0, float64(h.Treated[i])))
		}
		if h.Control[i] > 0 {
			cr = append(cr, rect(h.Lo[i]+gap/2, h.Hi[i]-gap/2, -float64(h.Control[i]), 0))
		}
	}
	tp, err := filledRects(tr, treatedRGB, nil)
	if err != nil {
		return nil, err
	}
	cp, err := filledRects(cr, controlRGB, nil)
	if err != nil {
		return nil, err
	}
	zero, err := line(plotter.XYs{{X: h.Lo[0], Y: 0}, {X: h.Hi[len(h.Hi)-1], Y: 0}}, inkRGB, thinLine)
	if err != nil {
		return nil, err
	}
	p.Add(tp, cp, zero)
	p.Legend.Add("treated", tp)
	p.Legend.Add("control", cp)
	if h.HasBand {
		band, _ := filledRects([]plotter.XYs{rect(0, 1, 0, 1)}, bandRGB, nil)
		p.Legend.Add(h.BandLabel, band)
	}
	p.X.Min, p.X.Max = h.Lo[0], h.Hi[len(h.Hi)-1]
	p.Y.Min, p.Y.Max = ylo, yhi
	p.Y.Tick.Marker = absTicks{}
	// Bottom right: where the control bars are usually shortest.
	p.Legend.Top, p.Legend.Left = false, false
	return renderPNG(p, height)
}

// staticDensity draws the score density overlay.
func staticDensity(d densityData, height int) ([]byte, error) {
	p := newPlot("propensity score", "density")
	addGrid(p, false, true)
	ymax := 0.0
	for i := range d.X {
		ymax = math.Max(ymax, math.Max(d.Treated[i], d.Control[i]))
	}
	if ymax <= 0 {
		ymax = 1
	}
	if d.HasBand {
		band, err := filledRects([]plotter.XYs{rect(d.BandLo, d.BandHi, 0, ymax*1.08)}, bandRGB, nil)
		if err != nil {
			return nil, err
		}
		p.Add(band)
	}
	for _, arm := range []struct {
		name string
		y    []float64
		c    color.NRGBA
	}{{"treated", d.Treated, treatedRGB}, {"control", d.Control, controlRGB}} {
		pts := make(plotter.XYs, len(d.X))
		area := make(plotter.XYs, 0, len(d.X)+2)
		area = append(area, plotter.XY{X: d.X[0], Y: 0})
		for i := range d.X {
			pts[i] = plotter.XY{X: d.X[i], Y: arm.y[i]}
			area = append(area, pts[i])
		}
		area = append(area, plotter.XY{X: d.X[len(d.X)-1], Y: 0})
		fill, err := filledRects([]plotter.XYs{area}, withAlpha(arm.c, 40), nil)
		if err != nil {
			return nil, err
		}
		l, err := line(pts, arm.c, normalLine)
		if err != nil {
			return nil, err
		}
		p.Add(fill, l)
		p.Legend.Add(arm.name, l)
	}
	p.X.Min, p.X.Max = d.X[0], d.X[len(d.X)-1]
	p.Y.Min, p.Y.Max = 0, ymax*1.08
	return renderPNG(p, height)
}

// cellColor interpolates amber (share treated 0) – pale slate (½) – teal (1).
func cellColor(share float64) color.NRGBA {
	mix := func(a, b color.NRGBA, t float64) color.NRGBA {
		f := func(x, y uint8) uint8 { return uint8(math.Round(float64(x) + t*(float64(y)-float64(x)))) }
		return color.NRGBA{f(a.R, b.R), f(a.G, b.G), f(a.B, b.B), 255}
	}
	share = math.Max(0, math.Min(1, share))
	if share < 0.5 {
		return mix(controlRGB, cellMidRGB, share/0.5)
	}
	return mix(cellMidRGB, treatedRGB, (share-0.5)/0.5)
}

// staticHeatmap draws the positivity cells of two covariates.
func staticHeatmap(h heatmapData, height int) ([]byte, error) {
	p := newPlot(shorten(h.XName), shorten(h.YName))
	nx, ny := len(h.XLabels), len(h.YLabels)
	for _, c := range h.Cells {
		x, y := float64(c.X), float64(c.Y)
		pg, err := filledRects([]plotter.XYs{rect(x-0.48, x+0.48, y-0.48, y+0.48)}, cellColor(c.Share), nil)
		if err != nil {
			return nil, err
		}
		p.Add(pg)
		if c.Violating || c.Thin {
			ls := draw.LineStyle{Color: badRGB, Width: vg.Points(2.2)}
			if !c.Violating {
				ls = draw.LineStyle{Color: warnRGB, Width: vg.Points(1.2), Dashes: []vg.Length{vg.Points(3), vg.Points(2)}}
			}
			border, err := line(plotter.XYs{{X: x - 0.44, Y: y - 0.44}, {X: x + 0.44, Y: y - 0.44}, {X: x + 0.44, Y: y + 0.44},
				{X: x - 0.44, Y: y + 0.44}, {X: x - 0.44, Y: y - 0.44}}, ls.Color, ls.Width, ls.Dashes...)
			if err != nil {
				return nil, err
			}
			p.Add(border)
		}
	}
	if nx*ny <= 100 {
		var pts plotter.XYs
		var labels []string
		for _, c := range h.Cells {
			pts = append(pts, plotter.XY{X: float64(c.X), Y: float64(c.Y)})
			labels = append(labels, formatCount(c.Treated)+" / "+formatCount(c.Control))
		}
		if len(pts) > 0 {
			lb, err := plotter.NewLabels(plotter.XYLabels{XYs: pts, Labels: labels})
			if err != nil {
				return nil, err
			}
			for i := range lb.TextStyle {
				lb.TextStyle[i].Font = font.From(sansFont, 8.5)
				lb.TextStyle[i].Color = inkRGB
				lb.TextStyle[i].XAlign = draw.XCenter
				lb.TextStyle[i].YAlign = draw.YCenter
				if h.Cells[i].Violating {
					lb.TextStyle[i].Font = font.From(sansBold, 8.5)
					lb.TextStyle[i].Color = badRGB
				}
			}
			p.Add(lb)
		}
	}
	p.X.Min, p.X.Max = -0.5, float64(nx)-0.5
	p.Y.Min, p.Y.Max = -0.5, float64(ny)-0.5
	p.X.Tick.Marker = nominalTicks(h.XLabels)
	p.Y.Tick.Marker = nominalTicks(h.YLabels)
	if nx > 6 {
		p.X.Tick.Label.Rotation = math.Pi / 6
		p.X.Tick.Label.XAlign = draw.XRight
		p.X.Tick.Label.YAlign = draw.YCenter
	}
	return renderPNG(p, height)
}

// staticErosion draws the erosion curve.
func staticErosion(e erosionData, height int) ([]byte, error) {
	p := newPlot("covariates adjusted for (added in this order)", "share of units")
	addGrid(p, false, true)
	series := []struct {
		name   string
		y      []float64
		c      color.NRGBA
		w      vg.Length
		dashes []vg.Length
	}{
		{"units in cells with both arms", e.Both, afterRGB, vg.Points(2.2), nil},
		{"treated with controls", e.TreatedCovered, treatedRGB, normalLine, []vg.Length{vg.Points(5), vg.Points(3)}},
		{"controls with treated", e.ControlCovered, controlRGB, normalLine, []vg.Length{vg.Points(2), vg.Points(2)}},
	}
	for _, s := range series {
		pts := make(plotter.XYs, len(s.y))
		for i, v := range s.y {
			pts[i] = plotter.XY{X: float64(i), Y: v}
		}
		l, err := line(pts, s.c, s.w, s.dashes...)
		if err != nil {
			return nil, err
		}
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: s.c, Radius: vg.Points(2.5), Shape: draw.CircleGlyph{}}
		p.Add(l, sc)
		p.Legend.Add(s.name, l)
	}
	p.Legend.Top = false
	p.Legend.Left = true
	p.X.Min, p.X.Max = -0.3, float64(len(e.Steps))-0.7
	p.Y.Min, p.Y.Max = 0, 1.02
	p.X.Tick.Marker = nominalTicks(e.Steps)
	p.Y.Tick.Marker = percentTicks{}
	if len(e.Steps) > 5 {
		p.X.Tick.Label.Rotation = math.Pi / 6
		p.X.Tick.Label.XAlign = draw.XRight
		p.X.Tick.Label.YAlign = draw.YCenter
	}
	return renderPNG(p, height)
}

// staticBalance draws the balance dot chart.
func staticBalance(b balanceData, height int) ([]byte, error) {
	p := newPlot("|standardised mean difference|", "")
	addGrid(p, true, false)
	n := len(b.Terms)
	// Terms run top-down: the first term at the top.
	yOf := func(i int) float64 { return float64(n - 1 - i) }
	var guide []plotter.XYs
	before := plotter.XYs{}
	after := plotter.XYs{}
	for i := range b.Terms {
		if finite(b.Before[i]) {
			before = append(before, plotter.XY{X: b.Before[i], Y: yOf(i)})
		}
		if b.Weighted && finite(b.After[i]) {
			after = append(after, plotter.XY{X: b.After[i], Y: yOf(i)})
			if finite(b.Before[i]) {
				guide = append(guide, plotter.XYs{{X: b.Before[i], Y: yOf(i)}, {X: b.After[i], Y: yOf(i)}})
			}
		}
	}
	for _, g := range guide {
		l, err := line(g, ruleRGB, vg.Points(2))
		if err != nil {
			return nil, err
		}
		p.Add(l)
	}
	ref, err := line(plotter.XYs{{X: smdReference, Y: -0.5}, {X: smdReference, Y: float64(n) - 0.5}}, referenceLS.Color, referenceLS.Width, referenceLS.Dashes...)
	if err != nil {
		return nil, err
	}
	p.Add(ref)
	if len(before) > 0 {
		s, err := plotter.NewScatter(before)
		if err != nil {
			return nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: beforeRGB, Radius: vg.Points(3.2), Shape: draw.RingGlyph{}}
		p.Add(s)
		p.Legend.Add("before weighting", s)
	}
	if len(after) > 0 {
		s, err := plotter.NewScatter(after)
		if err != nil {
			return nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: afterRGB, Radius: vg.Points(3.2), Shape: draw.CircleGlyph{}}
		p.Add(s)
		p.Legend.Add("after "+shorten(b.Label), s)
	}
	p.Legend.Add("|SMD| = 0.1", ref)
	// Bottom right: terms are sorted with the largest |SMD| at the top.
	p.Legend.Top, p.Legend.Left = false, false
	names := make([]string, n)
	for i, t := range b.Terms {
		names[n-1-i] = t
	}
	p.Y.Tick.Marker = nominalTicks(names)
	p.Y.Min, p.Y.Max = -0.6, float64(n)-0.4
	p.X.Min, p.X.Max = 0, b.XMax
	return renderPNG(p, height)
}

// staticCalibration draws the calibration plot.
func staticCalibration(c calibrationData, height int) ([]byte, error) {
	p := newPlot("mean propensity score in the bin", "share treated in the bin")
	addGrid(p, true, true)
	diag, err := line(plotter.XYs{{X: 0, Y: 0}, {X: 1, Y: 1}}, mutedRGB, thinLine, vg.Points(4), vg.Points(3))
	if err != nil {
		return nil, err
	}
	pts := make(plotter.XYs, len(c.Mean))
	for i := range c.Mean {
		pts[i] = plotter.XY{X: c.Mean[i], Y: c.Share[i]}
	}
	l, err := line(pts, afterRGB, thinLine)
	if err != nil {
		return nil, err
	}
	s, err := plotter.NewScatter(pts)
	if err != nil {
		return nil, err
	}
	s.GlyphStyle = draw.GlyphStyle{Color: afterRGB, Radius: vg.Points(3.5), Shape: draw.CircleGlyph{}}
	p.Add(diag, l, s)
	p.Legend.Add("score bins (equal counts)", s)
	p.Legend.Add("perfect calibration", diag)
	p.Legend.Top = true
	p.Legend.Left = true
	p.X.Min, p.X.Max = 0, 1
	p.Y.Min, p.Y.Max = 0, 1
	return renderPNG(p, height)
}

// staticForest draws estimates with their 95% intervals.
func staticForest(d forestData, height int) ([]byte, error) {
	p := newPlot("estimated effect ("+d.Estimand+")", "")
	addGrid(p, true, false)
	n := len(d.Names)
	yOf := func(i int) float64 { return float64(n - 1 - i) }
	zero, err := line(plotter.XYs{{X: 0, Y: -0.5}, {X: 0, Y: float64(n) - 0.5}}, mutedRGB, thinLine, vg.Points(4), vg.Points(3))
	if err != nil {
		return nil, err
	}
	p.Add(zero)
	var ok, bad plotter.XYs
	for i := range d.Names {
		if finite(d.Lo[i]) {
			l, err := line(plotter.XYs{{X: d.Lo[i], Y: yOf(i)}, {X: d.Hi[i], Y: yOf(i)}}, afterRGB, vg.Points(2.2))
			if err != nil {
				return nil, err
			}
			p.Add(l)
		}
		pt := plotter.XY{X: d.Value[i], Y: yOf(i)}
		if d.Supported[i] {
			ok = append(ok, pt)
		} else {
			bad = append(bad, pt)
		}
	}
	if len(ok) > 0 {
		s, err := plotter.NewScatter(ok)
		if err != nil {
			return nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: afterRGB, Radius: vg.Points(4), Shape: draw.CircleGlyph{}}
		p.Add(s)
		p.Legend.Add("estimate with 95% interval", s)
	}
	if len(bad) > 0 {
		s, err := plotter.NewScatter(bad)
		if err != nil {
			return nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: badRGB, Radius: vg.Points(4), Shape: draw.RingGlyph{}}
		p.Add(s)
		p.Legend.Add("not supported by the data", s)
	}
	names := make([]string, n)
	for i, nm := range d.Short {
		names[n-1-i] = nm
	}
	p.Y.Tick.Marker = nominalTicks(names)
	p.Y.Min, p.Y.Max = -0.6, float64(n)-0.4
	p.X.Min, p.X.Max = d.XMin, d.XMax
	return renderPNG(p, height)
}

// staticBootstrap draws the histogram of bootstrap replicates.
func staticBootstrap(d bootData, height int) ([]byte, error) {
	p := newPlot("replicate estimate", "replicates")
	addGrid(p, false, true)
	top := 1.0
	for _, c := range d.Count {
		top = math.Max(top, float64(c))
	}
	if finite(d.PctLo) && finite(d.PctHi) {
		band, err := filledRects([]plotter.XYs{rect(d.PctLo, d.PctHi, 0, top*1.08)}, bandRGB, nil)
		if err != nil {
			return nil, err
		}
		p.Add(band)
		p.Legend.Add("95% percentile interval", band)
	}
	var bars []plotter.XYs
	for k, c := range d.Count {
		if c > 0 {
			g := 0.03 * (d.Hi[k] - d.Lo[k])
			bars = append(bars, rect(d.Lo[k]+g, d.Hi[k]-g, 0, float64(c)))
		}
	}
	bp, err := filledRects(bars, beforeRGB, nil)
	if err != nil {
		return nil, err
	}
	est, err := line(plotter.XYs{{X: d.Estimate, Y: 0}, {X: d.Estimate, Y: top * 1.08}}, afterRGB, vg.Points(2))
	if err != nil {
		return nil, err
	}
	p.Add(bp, est)
	p.Legend.Add("replicates", bp)
	p.Legend.Add("full-sample estimate", est)
	p.X.Min, p.X.Max = d.XMin, d.XMax
	p.Y.Min, p.Y.Max = 0, top*1.08
	return renderPNG(p, height)
}

// staticSweep draws the estimate and its band against α, with the default
// α marked.
func staticSweep(d sweepData, height int) ([]byte, error) {
	p := newPlot("trimming threshold α", d.Estimand+" estimate")
	addGrid(p, true, true)
	// The band: one polygon per run of thresholds that have an interval.
	var runs []plotter.XYs
	var upper, lower plotter.XYs
	flush := func() {
		if len(upper) > 1 {
			ring := append(plotter.XYs{}, lower...)
			for i := len(upper) - 1; i >= 0; i-- {
				ring = append(ring, upper[i])
			}
			runs = append(runs, ring)
		}
		upper, lower = nil, nil
	}
	var est plotter.XYs
	var estRuns []plotter.XYs
	for _, pt := range d.Points {
		if finite(pt.Lo) && finite(pt.Hi) {
			lower = append(lower, plotter.XY{X: pt.Alpha, Y: pt.Lo})
			upper = append(upper, plotter.XY{X: pt.Alpha, Y: pt.Hi})
		} else {
			flush()
		}
		if finite(pt.Estimate) {
			est = append(est, plotter.XY{X: pt.Alpha, Y: pt.Estimate})
		} else if len(est) > 0 {
			estRuns = append(estRuns, est)
			est = nil
		}
	}
	flush()
	if len(est) > 0 {
		estRuns = append(estRuns, est)
	}
	if len(runs) > 0 {
		bp, err := filledRects(runs, withAlpha(beforeRGB, 90), nil)
		if err != nil {
			return nil, err
		}
		p.Add(bp)
		p.Legend.Add("95% interval", bp)
	}
	for i, r := range estRuns {
		l, err := line(r, afterRGB, normalLine)
		if err != nil {
			return nil, err
		}
		p.Add(l)
		if i == 0 {
			p.Legend.Add(shorten(d.Estimator), l)
		}
	}
	def := d.Points[max(0, min(len(d.Points)-1, d.Default))]
	if finite(def.Estimate) {
		s, err := plotter.NewScatter(plotter.XYs{{X: def.Alpha, Y: def.Estimate}})
		if err != nil {
			return nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: warnRGB, Radius: vg.Points(5), Shape: draw.CircleGlyph{}}
		p.Add(s)
		p.Legend.Add("selected α = "+formatFixed(def.Alpha, 3), s)
	}
	p.X.Min, p.X.Max = d.Points[0].Alpha, d.Points[len(d.Points)-1].Alpha
	return renderPNG(p, height)
}

// staticExtrapolation draws the fitted lines over the observed points,
// with the regions an arm lacks shaded and its line dashed there.
func staticExtrapolation(d extrapData, height int) ([]byte, error) {
	p := newPlot(shorten(d.Covariate), "outcome")
	addGrid(p, false, true)
	var shades []plotter.XYs
	for _, ivs := range [][]causal.Interval{d.NoTreated, d.NoCtrl} {
		for _, iv := range ivs {
			shades = append(shades, rect(iv.Lo, iv.Hi, d.YMin, d.YMax))
		}
	}
	if len(shades) > 0 {
		sp, err := filledRects(shades, noSuppRGB, nil)
		if err != nil {
			return nil, err
		}
		p.Add(sp)
		p.Legend.Add("an arm has no units", sp)
	}
	for _, arm := range []struct {
		name string
		pts  []causal.CurvePoint
		c    color.NRGBA
	}{{"treated units", d.T, treatedRGB}, {"control units", d.C, controlRGB}} {
		if len(arm.pts) == 0 {
			continue
		}
		xy := make(plotter.XYs, len(arm.pts))
		for i, q := range arm.pts {
			xy[i] = plotter.XY{X: q.X, Y: q.Y}
		}
		s, err := plotter.NewScatter(xy)
		if err != nil {
			return nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: withAlpha(arm.c, 110), Radius: vg.Points(1.6), Shape: draw.CircleGlyph{}}
		p.Add(s)
		p.Legend.Add(arm.name, s)
	}
	for _, fit := range []struct {
		name string
		f    []float64
		sup  []bool
		c    color.NRGBA
	}{{"f1 (fitted on treated)", d.F1, d.Sup1, treatedRGB}, {"f0 (fitted on controls)", d.F0, d.Sup0, controlRGB}} {
		// Runs of supported (solid) and unsupported (dashed) grid points,
		// each run sharing its end point with the next.
		start := 0
		first := true
		for i := 1; i <= len(d.X); i++ {
			if i < len(d.X) && fit.sup[i] == fit.sup[start] {
				continue
			}
			end := min(i, len(d.X)-1)
			pts := make(plotter.XYs, 0, end-start+1)
			for k := start; k <= end; k++ {
				pts = append(pts, plotter.XY{X: d.X[k], Y: fit.f[k]})
			}
			var dashes []vg.Length
			w := vg.Points(2.4)
			if !fit.sup[start] {
				dashes, w = []vg.Length{vg.Points(5), vg.Points(3)}, vg.Points(1.6)
			}
			if len(pts) > 1 {
				l, err := line(pts, fit.c, w, dashes...)
				if err != nil {
					return nil, err
				}
				p.Add(l)
				if first && fit.sup[start] {
					p.Legend.Add(fit.name, l)
					first = false
				}
			}
			start = i
		}
	}
	p.X.Min, p.X.Max = d.XMin, d.XMax
	p.Y.Min, p.Y.Max = d.YMin, d.YMax
	p.Legend.Left = true
	return renderPNG(p, height)
}
