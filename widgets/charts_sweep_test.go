package widgets

import (
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

// sliderHarness runs a chart's client code in node with a stand-in for the
// page: root.querySelector finds the slider and the read-outs of the chart's
// Controls (parsed from the HTML), and chart.setOption records its calls.
// It then moves the slider to each index in moves and prints, per move, the
// read-outs and the marker's data as JSON lines.
const sliderHarness = `
var window = {echarts: {format: {encodeHTML: function (s) { return String(s); }}}};
function el(attrs) { return {attrs: attrs, textContent: attrs.text || "", value: attrs.value, disabled: attrs.disabled,
  handlers: {}, addEventListener: function (t, f) { this.handlers[t] = f; }}; }
var nodes = CONTROLS.map(el);
var root = {querySelector: function (sel) {
  for (var i = 0; i < nodes.length; i++) if (nodes[i].attrs.sel === sel) return nodes[i];
  return null;
}};
var calls = [];
var chart = {setOption: function (o) { calls.push(o); }};
(function () {
SCRIPT
})();
var input = root.querySelector("input.cp-sweep-range");
function marker() {
  for (var i = calls.length - 1; i >= 0; i--) {
    var s = calls[i].series;
    if (s && s[0] && s[0].id === "selected") return s[0].data;
  }
  return null;
}
function state(i) {
  var o = {index: i, disabled: input.disabled, marker: marker()};
  ["alpha", "kept", "smd", "est"].forEach(function (k) { o[k] = root.querySelector("[data-cp-out=" + k + "]").textContent; });
  return o;
}
console.log(JSON.stringify(state(-1)));
MOVES.forEach(function (i) { input.value = String(i); input.handlers.input(); console.log(JSON.stringify(state(i))); });
`

type sliderState struct {
	Index    int         `json:"index"`
	Disabled bool        `json:"disabled"`
	Marker   [][]float64 `json:"marker"`
	Alpha    string      `json:"alpha"`
	Kept     string      `json:"kept"`
	SMD      string      `json:"smd"`
	Est      string      `json:"est"`
}

// runSlider executes the chart's script under sliderHarness.
func runSlider(t *testing.T, c Chart, moves []int) []sliderState {
	t.Helper()
	node, err := exec.LookPath("node")
	if err != nil {
		t.Skip("node not installed: the slider is exercised in Chromium by the kernel's end-to-end test")
	}
	controls := string(c.Controls)
	if !strings.Contains(controls, `class="cp-sweep-range"`) || !strings.Contains(controls, " disabled") {
		t.Fatalf("controls lack a disabled slider: %s", controls)
	}
	type node_ struct {
		Sel      string `json:"sel"`
		Text     string `json:"text"`
		Value    string `json:"value,omitempty"`
		Disabled bool   `json:"disabled,omitempty"`
	}
	v := regexp.MustCompile(`value="(\d+)"`).FindStringSubmatch(controls)
	if v == nil {
		t.Fatal("slider without a value")
	}
	nodes := []node_{{Sel: "input.cp-sweep-range", Value: v[1], Disabled: true}}
	for _, k := range []string{"alpha", "kept", "smd", "est"} {
		m := regexp.MustCompile(`data-cp-out="` + k + `">([^<]*)<`).FindStringSubmatch(controls)
		if m == nil {
			t.Fatalf("no read-out %q in the controls", k)
		}
		nodes = append(nodes, node_{Sel: "[data-cp-out=" + k + "]", Text: m[1]})
	}
	nj, _ := json.Marshal(nodes)
	mj, _ := json.Marshal(moves)
	prog := strings.NewReplacer("CONTROLS", string(nj), "MOVES", string(mj), "SCRIPT", c.Script).Replace(sliderHarness)
	f := filepath.Join(t.TempDir(), "slider.js")
	if err := os.WriteFile(f, []byte(prog), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(node, f).CombinedOutput()
	if err != nil {
		t.Fatalf("node: %v\n%s", err, out)
	}
	var states []sliderState
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		var s sliderState
		if err := json.Unmarshal([]byte(line), &s); err != nil {
			t.Fatalf("harness output %q: %v", line, err)
		}
		states = append(states, s)
	}
	return states
}

// checkSlider moves the slider over a sweep chart and compares what the
// page would show with the data the chart was built from.
func checkSlider(t *testing.T, c Chart, d sweepData) {
	t.Helper()
	moves := []int{0, len(d.Points) / 2, len(d.Points) - 1}
	states := runSlider(t, c, moves)
	if len(states) != len(moves)+1 {
		t.Fatalf("%d states for %d moves", len(states), len(moves))
	}
	if states[0].Disabled {
		t.Error("the script did not enable the slider")
	}
	for _, s := range states[1:] {
		p := d.Points[s.Index]
		if want := formatFixed(p.Alpha, 3); s.Alpha != want {
			t.Errorf("move %d: α read-out %q, want %q", s.Index, s.Alpha, want)
		}
		if want := keptText(p, d.Total); s.Kept != want {
			t.Errorf("move %d: kept %q, want %q", s.Index, s.Kept, want)
		}
		if want := smdText(p.MaxSMD); s.SMD != want {
			t.Errorf("move %d: largest |SMD| %q, want %q", s.Index, s.SMD, want)
		}
		if finite(p.Estimate) {
			if len(s.Marker) != 1 || s.Marker[0][0] != float64(s.Index) || s.Marker[0][1] != round(p.Estimate, 6) {
				t.Errorf("move %d: marker %v, want [[%d %g]]", s.Index, s.Marker, s.Index, p.Estimate)
			}
			if !strings.HasPrefix(s.Est, strings.SplitN(formatNumber(p.Estimate), ".", 2)[0]) {
				t.Errorf("move %d: estimate read-out %q for %g", s.Index, s.Est, p.Estimate)
			}
		} else if s.Est != "not estimated" || len(s.Marker) != 0 {
			t.Errorf("move %d: no estimate, but read-out %q and marker %v", s.Index, s.Est, s.Marker)
		}
	}
}

// sweepByTrimming builds sweep points directly: for each α, trim to
// [α, 1 − α], estimate with the estimator and measure the largest |SMD|
// among the kept units.
func sweepByTrimming(t *testing.T, sc *causal.Scores, est causal.Estimator, target causal.Estimand, alphas []float64) sweepData {
	t.Helper()
	d := sweepData{Title: "test sweep", Estimand: target.String(), Estimator: estimatorName(est), SMDLabel: "among the kept units", Total: sc.Design.N}
	for _, a := range alphas {
		tr := sc.Trim(causal.Symmetric(a))
		p := sweepPoint{Alpha: a, Estimate: math.NaN(), Lo: math.NaN(), Hi: math.NaN(), MaxSMD: math.NaN()}
		if tr.Err() == nil {
			p.Kept, p.KeptTreated, p.KeptControl = tr.KeptTreated+tr.KeptControl, tr.KeptTreated, tr.KeptControl
			if e := tr.Effect(est, target); e.Err() == nil {
				p.Estimate, p.Lo, p.Hi = e.Value, e.CI95.Lo, e.CI95.Hi
			}
			p.MaxSMD = tr.Balance().MaxAbsSMD()
		}
		d.Points = append(d.Points, p)
	}
	return d
}

func TestSweepChartSlider(t *testing.T) {
	sc := waterStudy().Propensity()
	var alphas []float64
	for a := 0.0; a <= 0.2001; a += 0.01 {
		alphas = append(alphas, a)
	}
	d := sweepByTrimming(t, sc, causal.IPWNormalized, causal.ATE, alphas)
	d.Default = 10
	c, err := sweepChart(d)
	if err != nil {
		t.Fatal(err)
	}
	checkOption(t, "sweep", c.Option)
	checkFallback(t, "sweep", c.Fallback)
	if !strings.Contains(string(c.Controls), "0.100") {
		t.Errorf("controls should show the default α 0.100 before any script runs: %s", c.Controls)
	}
	checkSlider(t, c, d)
}
