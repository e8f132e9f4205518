package widgets

import (
	"bytes"
	"encoding/json"
	"image/png"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

// builtChart is a chart builder applied to a result set.
type builtChart struct {
	name  string
	build func(r resultSet) (Chart, error)
}

// chartBuilders lists every chart of the core results.
var chartBuilders = []builtChart{
	{"SupportHistogram", func(r resultSet) (Chart, error) { return SupportHistogram(r.Support) }},
	{"ScoreDensity", func(r resultSet) (Chart, error) { return ScoreDensity(r.Support) }},
	{"CellsHeatmap", func(r resultSet) (Chart, error) { return CellsHeatmap(r.Cells2) }},
	{"ErosionCurve", func(r resultSet) (Chart, error) { return ErosionCurve(r.Erosion) }},
	{"BalanceDots", func(r resultSet) (Chart, error) { return BalanceDots(r.Balance) }},
	{"BalanceDotsWeighted", func(r resultSet) (Chart, error) { return BalanceDots(r.Weighted) }},
	{"CalibrationPlot", func(r resultSet) (Chart, error) { return CalibrationPlot(r.Scores) }},
	{"EstimatesChart", func(r resultSet) (Chart, error) { return EstimatesChart(r.Estimates) }},
	{"EstimatesChartTrimmed", func(r resultSet) (Chart, error) { return EstimatesChart(r.TrimmedEs) }},
	{"TrimmedHistogram", func(r resultSet) (Chart, error) { return TrimmedHistogram(r.Trimmed) }},
	{"BootstrapHistogram", func(r resultSet) (Chart, error) { return BootstrapHistogram(r.Bootstrap) }},
	{"TrimmingSweep", func(r resultSet) (Chart, error) { return TrimmingSweep(r.Sweep) }},
	{"MatchedPairs", func(r resultSet) (Chart, error) { return MatchedPairs(r.Matching) }},
	{"StrataCounts", func(r resultSet) (Chart, error) { return StrataCounts(r.Strata) }},
}

// curveBuilders need outcome models that can be fitted (not the water
// scenario, where no audit reaches the harbour district).
var curveBuilders = []builtChart{
	{"ExtrapolationPlot", func(r resultSet) (Chart, error) { return ExtrapolationPlot(r.Curve) }},
}

// checkOption decodes an option and checks that every series carries data.
func checkOption(t *testing.T, name string, option []byte) map[string]any {
	t.Helper()
	var obj map[string]any
	if err := json.Unmarshal(option, &obj); err != nil {
		t.Fatalf("%s: option is not valid JSON: %v", name, err)
	}
	series, ok := obj["series"].([]any)
	if !ok || len(series) == 0 {
		t.Fatalf("%s: option has no series", name)
	}
	for i, s := range series {
		m, _ := s.(map[string]any)
		data, _ := m["data"].([]any)
		if len(data) == 0 {
			t.Errorf("%s: series %d (%v) has no data", name, i, m["name"])
		}
	}
	tb, _ := obj["toolbox"].(map[string]any)
	feat, _ := tb["feature"].(map[string]any)
	if _, ok := feat["saveAsImage"]; !ok {
		t.Errorf("%s: no save-as-image button in the toolbox", name)
	}
	if _, ok := obj["tooltip"]; !ok {
		t.Errorf("%s: no tooltip", name)
	}
	return obj
}

// checkFallback decodes the static picture and checks it is a real drawing:
// 640 pixels wide, and not a single colour.
func checkFallback(t *testing.T, name string, pic []byte) {
	t.Helper()
	img, err := png.Decode(bytes.NewReader(pic))
	if err != nil {
		t.Fatalf("%s: fallback does not decode as PNG: %v", name, err)
	}
	b := img.Bounds()
	if b.Dx() != fallbackWidth || b.Dy() < 150 || b.Dy() > 1000 {
		t.Errorf("%s: fallback is %d×%d, want %d wide and a sensible height", name, b.Dx(), b.Dy(), fallbackWidth)
	}
	colours := map[[3]uint32]bool{}
	for y := b.Min.Y; y < b.Max.Y; y += 3 {
		for x := b.Min.X; x < b.Max.X; x += 3 {
			r, g, bl, _ := img.At(x, y).RGBA()
			colours[[3]uint32{r >> 8, g >> 8, bl >> 8}] = true
		}
	}
	if len(colours) < 8 {
		t.Errorf("%s: fallback has %d colours: nothing drawn", name, len(colours))
	}
}

func TestChartsOfWaterScenario(t *testing.T) {
	r := waterResults(t)
	for _, b := range chartBuilders {
		t.Run(b.name, func(t *testing.T) {
			c, err := b.build(r)
			if err != nil {
				t.Fatal(err)
			}
			checkOption(t, b.name, c.Option)
			checkFallback(t, b.name, c.Fallback)
			if c.Title == "" || c.Script == "" {
				t.Errorf("title %q, script %d bytes: both expected", c.Title, len(c.Script))
			}
			h := c.HTML()
			if strings.Contains(h, `class="cp-error"`) {
				t.Fatalf("chart embedded as an error panel:\n%.400s", h)
			}
		})
	}
}

// TestMirroredHistogramCounts checks the histogram against a direct count of
// the scores: every unit in exactly one bin of its arm, controls drawn below
// the axis, and the band shaded where the support result puts it.
func TestMirroredHistogramCounts(t *testing.T) {
	r := waterResults(t)
	h, err := mirroredBins(r.Support)
	if err != nil {
		t.Fatal(err)
	}
	var nt, nc int
	for b := range h.Lo {
		nt += h.Treated[b]
		nc += h.Control[b]
		if b > 0 && math.Abs(h.Lo[b]-h.Hi[b-1]) > 1e-9 {
			t.Fatalf("bins %d and %d do not abut: %g vs %g", b-1, b, h.Hi[b-1], h.Lo[b])
		}
	}
	if nt != r.Support.Treated || nc != r.Support.Control {
		t.Fatalf("binned %d treated, %d control; the study has %d and %d", nt, nc, r.Support.Treated, r.Support.Control)
	}
	if len(h.Lo) < 20 || len(h.Lo) > maxScoreBins {
		t.Errorf("%d bins, want 20 to %d", len(h.Lo), maxScoreBins)
	}
	// Direct count for one bin.
	b := len(h.Lo) / 2
	var want int
	for i, e := range r.Scores.E {
		if r.Scores.Design.T[i] == 0 && e >= h.Lo[b] && e < h.Hi[b] {
			want++
		}
	}
	if h.Control[b] != want {
		t.Errorf("bin %d [%g, %g): %d controls, direct count %d", b, h.Lo[b], h.Hi[b], h.Control[b], want)
	}
	c, err := SupportHistogram(r.Support)
	if err != nil {
		t.Fatal(err)
	}
	var opt struct {
		Series []struct {
			Data     []struct{ Value []float64 } `json:"data"`
			MarkArea *struct {
				Data [][]map[string]any `json:"data"`
			} `json:"markArea"`
		} `json:"series"`
	}
	if err := json.Unmarshal(c.Option, &opt); err != nil {
		t.Fatal(err)
	}
	if got := opt.Series[1].Data[b].Value[1]; got != -float64(h.Control[b]) {
		t.Errorf("control bar %d is %g, want %d below the axis", b, got, -h.Control[b])
	}
	if opt.Series[0].MarkArea == nil || len(opt.Series[0].MarkArea.Data) != 1 {
		t.Fatal("no common-support band")
	}
	band := opt.Series[0].MarkArea.Data[0]
	if lo := band[0]["xAxis"].(float64); math.Abs(lo-r.Support.Band.Lo) > 1e-5 {
		t.Errorf("band starts at %g, support says %g", lo, r.Support.Band.Lo)
	}
}

// TestBinnedKDEMatchesDirectSum checks the binned estimate against the
// Gaussian kernel density estimate computed directly from the data with the
// same reflection at 0 and 1 (Silverman 1986, §2.10), and that it integrates
// to one over [0, 1].
func TestBinnedKDEMatchesDirectSum(t *testing.T) {
	r := waterResults(t)
	e, tr := r.Scores.E, r.Scores.Design.T
	var xs []float64
	counts := make([]float64, fineBins)
	for i, v := range e {
		if tr[i] == 1 {
			xs = append(xs, v)
			counts[min(fineBins-1, int(v*fineBins))]++
		}
	}
	n := float64(len(xs))
	h := 0.03
	grid := []float64{0.05, 0.2, 0.4, 0.6, 0.8, 0.97}
	got := binnedKDE(counts, n, h, grid)
	for k, x := range grid {
		var f float64
		for _, v := range xs {
			for _, m := range []float64{v, -v, 2 - v} {
				u := (x - m) / h
				f += math.Exp(-0.5 * u * u)
			}
		}
		f /= n * h * math.Sqrt(2*math.Pi)
		if math.Abs(got[k]-f) > 0.01*f+1e-3 {
			t.Errorf("density at %g: binned %g, direct %g", x, got[k], f)
		}
	}
	// Integral over [0, 1] by the trapezoid rule on a fine grid.
	fine := make([]float64, 1001)
	for i := range fine {
		fine[i] = float64(i) / 1000
	}
	dens := binnedKDE(counts, n, h, fine)
	var area float64
	for i := 1; i < len(fine); i++ {
		area += (dens[i] + dens[i-1]) / 2 / 1000
	}
	if math.Abs(area-1) > 0.005 {
		t.Errorf("density integrates to %g over [0, 1], want 1", area)
	}
}

// TestSilvermanBandwidth checks the rule of thumb against its formula
// h = 0.9·min(sd, IQR/1.34)·n^(−1/5) (Silverman 1986, eq. 3.31) worked by
// hand: sd 0.2, IQR 0.268 (so IQR/1.34 = 0.2), n = 1e5 → 0.9·0.2·0.1 = 0.018.
func TestSilvermanBandwidth(t *testing.T) {
	if h := silvermanBandwidth(0.2, 0.268, 1e5); math.Abs(h-0.018) > 1e-9 {
		t.Errorf("h = %g, want 0.018", h)
	}
	// The smaller spread wins: IQR/1.34 = 0.1 < sd 0.2 → 0.009.
	if h := silvermanBandwidth(0.2, 0.134, 1e5); math.Abs(h-0.009) > 1e-9 {
		t.Errorf("h = %g, want 0.009", h)
	}
}

// TestHeatmapMarksViolations checks that every violating cell of the water
// scenario (harbour has no audits) carries the red border and its label, and
// that the colour value is the share treated.
func TestHeatmapMarksViolations(t *testing.T) {
	r := waterResults(t)
	c, err := CellsHeatmap(r.Cells2)
	if err != nil {
		t.Fatal(err)
	}
	var opt struct {
		XAxis  []struct{ Data []string } `json:"xAxis"`
		Series []struct {
			Data []struct {
				Value     []float64
				ItemStyle struct{ BorderColor string } `json:"itemStyle"`
				Label     struct{ Formatter string }   `json:"label"`
			} `json:"data"`
		} `json:"series"`
	}
	if err := json.Unmarshal(c.Option, &opt); err != nil {
		t.Fatal(err)
	}
	marked := 0
	for _, d := range opt.Series[0].Data {
		tr, co := d.Value[3], d.Value[4]
		if math.Abs(d.Value[2]-tr/(tr+co)) > 1e-4 {
			t.Errorf("cell share %g, counts %g/%g", d.Value[2], tr, co)
		}
		violating := tr == 0 || co == 0
		if violating != (d.ItemStyle.BorderColor == ColorBad) {
			t.Errorf("cell %v: violating %v but border %q", d.Value, violating, d.ItemStyle.BorderColor)
		}
		if violating {
			marked++
			if opt.XAxis[0].Data[int(d.Value[0])] != "harbour" || d.Label.Formatter != "no treated" {
				t.Errorf("violating cell %v in %q labelled %q", d.Value, opt.XAxis[0].Data[int(d.Value[0])], d.Label.Formatter)
			}
		}
	}
	if marked != r.Cells2.Violating || marked == 0 {
		t.Errorf("%d cells marked, the table has %d violating", marked, r.Cells2.Violating)
	}
	if _, err := CellsHeatmap(r.Cells3); err == nil {
		t.Error("a three-covariate table must not give a heatmap")
	}
}

// TestChartScriptsParse runs node's syntax check on every chart's client
// code as embedded in the page.
func TestChartScriptsParse(t *testing.T) {
	node, err := exec.LookPath("node")
	if err != nil {
		t.Skip("node not installed: the scripts run in Chromium in the kernel's end-to-end test")
	}
	r := resultsOf(t, hostileStudy(t), hostileColumn, "g", "b")
	dir := t.TempDir()
	re := regexp.MustCompile(`(?s)<script>(.*?)</script>`)
	for _, b := range append(chartBuilders, curveBuilders...) {
		c, err := b.build(r)
		if err != nil {
			t.Fatalf("%s: %v", b.name, err)
		}
		m := re.FindStringSubmatch(c.HTML())
		if m == nil {
			t.Fatalf("%s: no script", b.name)
		}
		f := filepath.Join(dir, b.name+".js")
		if err := os.WriteFile(f, []byte(m[1]), 0o644); err != nil {
			t.Fatal(err)
		}
		if out, err := exec.Command(node, "--check", f).CombinedOutput(); err != nil {
			t.Errorf("%s: script does not parse: %v\n%s", b.name, err, out)
		}
	}
}

func TestChartBuildersRefuseBrokenResults(t *testing.T) {
	bad := causal.Load("no-such-file.csv").Treat("t").Adjust("x")
	sc := bad.Propensity()
	checks := map[string]error{}
	_, checks["SupportHistogram"] = SupportHistogram(sc.Support())
	_, checks["ScoreDensity"] = ScoreDensity(sc.Support())
	_, checks["CellsHeatmap"] = CellsHeatmap(bad.Cells("x", "y"))
	_, checks["ErosionCurve"] = ErosionCurve(bad.Erosion())
	_, checks["BalanceDots"] = BalanceDots(bad.Balance())
	_, checks["CalibrationPlot"] = CalibrationPlot(sc)
	for name, err := range checks {
		if err == nil || !strings.Contains(err.Error(), "no-such-file.csv") {
			t.Errorf("%s: error %v should name the missing file", name, err)
		}
	}
}

// TestExtrapolationPlot draws the scenario made for it: arms 2.5 standard
// deviations apart, so each arm's outcome line runs, at the far ends, where
// the arm has no units. Those regions must be shaded and the lines dashed
// there, and the shaded regions must be the curve's own empty bins.
func TestExtrapolationPlot(t *testing.T) {
	s := extrapolationStudy(t, 2000)
	a := s.Propensity().Extrapolation(causal.ATE)
	if err := a.Err(); err != nil {
		t.Fatal(err)
	}
	cur := a.Curve("x")
	if err := cur.Err(); err != nil {
		t.Fatal(err)
	}
	if len(cur.Unsupported1) == 0 || len(cur.Unsupported0) == 0 {
		t.Fatalf("the scenario should leave each arm without units somewhere: %v %v", cur.Unsupported1, cur.Unsupported0)
	}
	c, err := ExtrapolationPlot(cur)
	if err != nil {
		t.Fatal(err)
	}
	obj := checkOption(t, "ExtrapolationPlot", c.Option)
	checkFallback(t, "ExtrapolationPlot", c.Fallback)
	var shaded, dashed int
	for _, sr := range obj["series"].([]any) {
		m := sr.(map[string]any)
		if ma, ok := m["markArea"].(map[string]any); ok {
			shaded += len(ma["data"].([]any))
		}
		if ls, ok := m["lineStyle"].(map[string]any); ok && ls["type"] == "dashed" {
			dashed++
			if !strings.Contains(m["name"].(string), "extrapolated") {
				t.Errorf("dashed series %q should say it is extrapolated", m["name"])
			}
		}
	}
	if want := len(cur.Unsupported1) + len(cur.Unsupported0); shaded != want {
		t.Errorf("%d shaded regions, the curve has %d without an arm", shaded, want)
	}
	if dashed != 2 {
		t.Errorf("%d dashed lines, want one per arm", dashed)
	}
	h := HTML(a)
	for _, want := range []string{"rests on extrapolation", "f1", "f0", "Where predictions leave"} {
		if !strings.Contains(h, want) {
			t.Errorf("audit view lacks %q", want)
		}
	}
	if !strings.Contains(Headline(cur), "no treated units on") {
		t.Errorf("curve headline %q", Headline(cur))
	}
}

// TestTrimmingSweepMatchesDirectTrimming checks the sweep chart against
// trimming and estimating directly at each α (Scores.Trim, Trimmed.Effect),
// and that the slider shows those numbers.
func TestTrimmingSweepMatchesDirectTrimming(t *testing.T) {
	sc := waterStudy().Propensity()
	alphas := []float64{0, 0.02, 0.05, 0.1, 0.15}
	sw := sc.Sweep(causal.IPWNormalized, causal.ATE, alphas...)
	if err := sw.Err(); err != nil {
		t.Fatal(err)
	}
	d, err := sweepOf(sw)
	if err != nil {
		t.Fatal(err)
	}
	direct := sweepByTrimming(t, sc, causal.IPWNormalized, causal.ATE, alphas)
	for i := range alphas {
		got, want := d.Points[i], direct.Points[i]
		if got.Kept != want.Kept || got.KeptTreated != want.KeptTreated || math.Abs(got.Estimate-want.Estimate) > 1e-9 {
			t.Errorf("α %g: sweep kept %d (%d treated), estimate %g; direct %d (%d), %g", alphas[i], got.Kept, got.KeptTreated, got.Estimate, want.Kept, want.KeptTreated, want.Estimate)
		}
	}
	c, err := TrimmingSweep(sw)
	if err != nil {
		t.Fatal(err)
	}
	checkOption(t, "TrimmingSweep", c.Option)
	if opt := optimalIndex(sw); opt >= 0 && !strings.Contains(string(c.Option), "optimal α") {
		t.Error("the optimal α is not marked")
	}
	checkSlider(t, c, d)
}
