package widgets

import (
	"bytes"
	"encoding/base64"
	"encoding/json"
	"image"
	"image/color"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

const hostile = `</script><img src=x onerror=alert(1)><!-- & "quote' ` + "\u2028\u2029"

func tinyPNG(t testing.TB) []byte {
	t.Helper()
	img := image.NewRGBA(image.Rect(0, 0, 3, 2))
	img.Set(1, 1, color.RGBA{15, 118, 110, 255})
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func hostileOption(t testing.TB) []byte {
	t.Helper()
	opt := map[string]any{
		"title":  map[string]any{"text": hostile},
		"xAxis":  map[string]any{"type": "category", "data": []string{hostile, "b"}},
		"yAxis":  map[string]any{},
		"series": []any{map[string]any{"type": "bar", "name": hostile, "data": []float64{1, 2}}},
	}
	b, err := json.Marshal(opt)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

var scriptRe = regexp.MustCompile(`(?s)<script>(.*?)</script>`)

// optionIn extracts the option literal from a chart fragment.
func optionIn(t *testing.T, fragment string) []byte {
	t.Helper()
	m := regexp.MustCompile(`(?s)option=(\{.*?\}), saveName=`).FindStringSubmatch(fragment)
	if m == nil {
		t.Fatalf("no option literal in %q", fragment)
	}
	return []byte(m[1])
}

func TestChartEscapesHostileTitleAndOption(t *testing.T) {
	opt := hostileOption(t)
	c := Chart{Title: hostile, Option: opt, Fallback: tinyPNG(t)}
	h := c.HTML()

	if strings.Contains(h, "cp-error") {
		t.Fatalf("valid chart rendered as an error panel:\n%s", h)
	}
	// Exactly one script element, closed once: the hostile "</script>" did not end it early.
	if n := strings.Count(strings.ToLower(h), "</script"); n != 1 {
		t.Fatalf("want exactly one </script, got %d in:\n%s", n, h)
	}
	if n := strings.Count(h, "<script"); n != 1 {
		t.Fatalf("want one <script, got %d", n)
	}
	// The only element img is the fallback; the hostile <img src=x> is text, not markup.
	if n := strings.Count(h, "<img"); n != 1 {
		t.Fatalf("want one <img (the fallback), got %d in:\n%s", n, h)
	}
	if strings.Contains(h, "<img src=x") || strings.Contains(h, "<!--") {
		t.Fatalf("hostile markup leaked:\n%s", h)
	}
	script := scriptRe.FindStringSubmatch(h)[1]
	if strings.ContainsAny(script, "\u2028\u2029") {
		t.Fatal("raw line separator reached the script")
	}
	// The option literal carries no <, > or & at all: the data's are \u escapes.
	if lit := optionIn(t, h); bytes.ContainsAny(lit, "<>&") || !bytes.Contains(lit, []byte(`\u003c/script\u003e\u003cimg src=x`)) {
		t.Fatalf("option literal not escaped: %s", lit)
	}
	// The title is escaped in the visible heading and attributes.
	if !strings.Contains(h, "&lt;/script&gt;&lt;img src=x onerror=alert(1)&gt;") {
		t.Fatalf("escaped title not found in:\n%s", h)
	}
	// The option survives intact: decoding the embedded literal gives the same value.
	var got, want any
	if err := json.Unmarshal(optionIn(t, h), &got); err != nil {
		t.Fatalf("embedded option is not JSON: %v", err)
	}
	if err := json.Unmarshal(opt, &want); err != nil {
		t.Fatal(err)
	}
	gb, _ := json.Marshal(got)
	wb, _ := json.Marshal(want)
	if !bytes.Equal(gb, wb) {
		t.Fatalf("option changed in embedding:\n got %s\nwant %s", gb, wb)
	}
}

func TestChartFallbackImage(t *testing.T) {
	pic := tinyPNG(t)
	h := Chart{Title: "Scores by arm", Option: []byte(`{"series":[]}`), Fallback: pic, Width: 500, Height: 300}.HTML()
	m := regexp.MustCompile(`<img class="cp-fallback" src="data:image/png;base64,([A-Za-z0-9+/=]+)" alt="Scores by arm"`).FindStringSubmatch(h)
	if m == nil {
		t.Fatalf("fallback <img> with alt text not found in:\n%s", h)
	}
	dec, err := base64.StdEncoding.DecodeString(m[1])
	if err != nil || !bytes.Equal(dec, pic) {
		t.Fatalf("fallback bytes differ from the PNG given (err %v)", err)
	}
	// The image sits inside the chart container, so it is what shows without scripts.
	if !regexp.MustCompile(`<div class="cp-chart" data-cp-chart="1" id="cp-[0-9a-z-]+"[^>]*max-width:500px;height:300px;[^>]*><img class="cp-fallback"`).MatchString(h) {
		t.Fatalf("fallback is not the first child of the sized container:\n%s", h)
	}
	if !strings.Contains(h, ChartMarker) {
		t.Fatal("chart marker missing")
	}
}

func TestChartWithoutFallbackSaysSo(t *testing.T) {
	h := Chart{Title: "t", Option: []byte(`{}`)}.HTML()
	if strings.Contains(h, "<img") || !strings.Contains(h, "no static picture") {
		t.Fatalf("want a note instead of an image:\n%s", h)
	}
}

func TestChartRejectsBadInput(t *testing.T) {
	cases := []struct {
		name string
		c    Chart
		want string
	}{
		{"not json", Chart{Title: "a", Option: []byte(`{series: [}`)}, "not valid JSON"},
		{"not object", Chart{Title: "a", Option: []byte(`[1,2]`)}, "must be a JSON object"},
		{"empty", Chart{Title: "a"}, "option is empty"},
		{"script breaks out", Chart{Title: "a", Option: []byte(`{}`), Script: `var s = "</SCRIPT><b>";`}, "chart script contains"},
		{"fallback not png", Chart{Title: "a", Option: []byte(`{}`), Fallback: []byte("GIF89a")}, "not a PNG"},
	}
	for _, tc := range cases {
		h := tc.c.HTML()
		if !strings.Contains(h, "cp-error") || !strings.Contains(h, tc.want) {
			t.Errorf("%s: want an error panel mentioning %q, got:\n%s", tc.name, tc.want, h)
		}
		if strings.Contains(h, "<script") {
			t.Errorf("%s: error panel must not carry a script", tc.name)
		}
	}
}

func TestChartIDsUnique(t *testing.T) {
	idRe := regexp.MustCompile(`<div class="cp-chart" data-cp-chart="1" id="([^"]+)"`)
	seen := make(map[string]bool, 10000)
	c := Chart{Title: "x", Option: []byte(`{"series":[]}`)}
	for i := 0; i < 10000; i++ {
		m := idRe.FindStringSubmatch(c.HTML())
		if m == nil {
			t.Fatal("no id")
		}
		if seen[m[1]] {
			t.Fatalf("id %q repeated after %d charts", m[1], i)
		}
		seen[m[1]] = true
	}
	// A new process draws a new random prefix; two draws must differ.
	if a, b := newIDPrefix(), newIDPrefix(); a == b || len(a) < 8 {
		t.Fatalf("prefixes %q and %q: want distinct random prefixes", a, b)
	}
}

func TestChartScriptAndControlsPlaced(t *testing.T) {
	data, err := ScriptJSON([]string{hostile})
	if err != nil {
		t.Fatal(err)
	}
	c := Chart{Title: "t", Option: []byte(`{}`), Script: "var labels = " + data + "; chart.setOption({title:{text:labels[0]}});",
		Controls: `<input type="range" class="cp-slider">`}
	h := c.HTML()
	if !strings.Contains(h, `<input type="range" class="cp-slider">`) {
		t.Fatal("controls missing")
	}
	if !strings.Contains(h, "function extra(chart, root){\nvar labels = ") {
		t.Fatalf("script not placed in extra(chart, root):\n%s", h)
	}
	if strings.Count(strings.ToLower(h), "</script") != 1 {
		t.Fatal("ScriptJSON let a </script through")
	}
}

func TestChartString(t *testing.T) {
	if s := (Chart{Title: "Overlap", Width: 300}).String(); s != "[chart] Overlap (300×400; open in a notebook or an HTML page to see it)" {
		t.Fatalf("got %q", s)
	}
}

func TestNeutralizeScriptText(t *testing.T) {
	in := `a="</Script>"; b=/<!--x/; c='</script'`
	out := neutralizeScriptText(in)
	if strings.Contains(strings.ToLower(out), "</script") || strings.Contains(out, "<!--") {
		t.Fatalf("got %q", out)
	}
	if out != `a="<\/Script>"; b=/\x3C!--x/; c='<\/script'` {
		t.Fatalf("got %q", out)
	}
}

// umdBundle has the shape of the ECharts UMD build (CommonJS, then AMD, then
// a browser global).
const umdBundle = `!function(t,e){"object"==typeof exports&&"undefined"!=typeof module?e(exports):"function"==typeof define&&define.amd?define(["exports"],e):e((t="undefined"!=typeof globalThis?globalThis:t||self).echarts={})}(this,(function(t){t.init=function(){return 1};t.version="test"}));
//# a trailing line comment, as bundles often end`

// TestLibraryScriptSetsGlobalUnderAMD runs the wrapped bundle in node with an
// AMD define and CommonJS-looking globals present, as a RequireJS page has,
// and checks window.echarts is set and a second copy is a no-op.
func TestLibraryScriptSetsGlobalUnderAMD(t *testing.T) {
	node, err := exec.LookPath("node")
	if err != nil {
		t.Skip("node not installed: the wrapper is checked in Chromium by the kernel end-to-end test instead")
	}
	lib := LibraryScript([]byte(umdBundle))
	m := regexp.MustCompile(`(?s)^<script data-cp-echarts="library">(.*)</script>$`).FindStringSubmatch(lib)
	if m == nil {
		t.Fatalf("unexpected wrapper:\n%s", lib)
	}
	prog := `
var window = globalThis; var self = globalThis;
var amdCalls = 0;
globalThis.define = function(){ amdCalls++; }; globalThis.define.amd = {};
` + m[1] + `
if (!window.echarts || window.echarts.init() !== 1) { console.log("FAIL: window.echarts not set"); process.exit(1); }
var first = window.echarts;
` + m[1] + `
if (window.echarts !== first) { console.log("FAIL: second copy replaced the library"); process.exit(1); }
if (amdCalls !== 0) { console.log("FAIL: bundle registered with AMD"); process.exit(1); }
console.log("OK");
`
	f := filepath.Join(t.TempDir(), "lib.js")
	if err := os.WriteFile(f, []byte(prog), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(node, f).CombinedOutput()
	if err != nil || !strings.Contains(string(out), "OK") {
		t.Fatalf("node: %v\n%s", err, out)
	}
	if LibraryScript(nil) != "" {
		t.Fatal("empty library must give no script")
	}
}

// TestChartBootScriptParses checks the generated client code is valid
// JavaScript (node parses it without running it).
func TestChartBootScriptParses(t *testing.T) {
	node, err := exec.LookPath("node")
	if err != nil {
		t.Skip("node not installed: the script is run in Chromium by the kernel end-to-end test instead")
	}
	h := Chart{Title: hostile, Option: hostileOption(t), Script: "chart.resize();"}.HTML()
	m := scriptRe.FindStringSubmatch(h)
	if m == nil {
		t.Fatal("no script")
	}
	f := filepath.Join(t.TempDir(), "chart.js")
	if err := os.WriteFile(f, []byte(m[1]), 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := exec.Command(node, "--check", f).CombinedOutput(); err != nil {
		t.Fatalf("generated script does not parse: %v\n%s\n%s", err, out, m[1])
	}
}
