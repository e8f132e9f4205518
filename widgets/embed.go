package widgets

import (
	"bytes"
	"crypto/rand"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"html/template"
	"strconv"
	"strings"
	"sync/atomic"
)

// ChartMarker is an attribute present on every chart container written by
// Chart.HTML. The notebook layer looks for it to decide whether a display
// needs the ECharts library.
const ChartMarker = "data-cp-chart"

// ChartClass is the CSS class of every chart container. After the page's
// scripts ran, a drawn container carries ECharts' `_echarts_instance_`
// attribute; before that (or without JavaScript) it holds the fallback
// picture, an <img class="cp-fallback">.
const ChartClass = "cp-chart"

// Default chart size in CSS pixels, used when Width or Height is not positive.
const (
	DefaultChartWidth  = 720
	DefaultChartHeight = 400
)

// How long a chart waits for window.echarts before it gives up and keeps the
// static picture (polling every 50 ms).
const libraryWaitMillis = 20000

// Chart is one chart ready to embed in a notebook output or an HTML page.
//
// Option is an ECharts option as a JSON object (typically marshalled from a
// go-echarts option). It must be plain JSON: go-echarts' function markers
// ("__f__...") are not evaluated, because a string taken from the data could
// forge them. Formatter functions and other code belong in Script.
//
// Fallback is a PNG shown when scripts do not run (an untrusted notebook, a
// mail client, a static viewer) and until the library has loaded.
//
// Script is optional client code run once the chart is drawn. It is written by
// the chart builder, never taken from the data: it runs with the variables
// `chart` (the ECharts instance) and `root` (the element holding the chart and
// the Controls). Data it needs should be embedded with ScriptJSON.
//
// Controls is optional trusted HTML placed under the chart (a slider, buttons);
// Script can find it with root.querySelector.
type Chart struct {
	Title    string
	Option   []byte
	Fallback []byte
	Width    int
	Height   int
	Script   string
	Controls template.HTML
}

// String is the terminal form of a chart: its title and size.
func (c Chart) String() string {
	w, h := c.size()
	title := c.Title
	if title == "" {
		title = "untitled chart"
	}
	return fmt.Sprintf("[chart] %s (%d×%d; open in a notebook or an HTML page to see it)", title, w, h)
}

func (c Chart) size() (int, int) {
	w, h := c.Width, c.Height
	if w <= 0 {
		w = DefaultChartWidth
	}
	if h <= 0 {
		h = DefaultChartHeight
	}
	return w, h
}

var (
	idPrefix  = newIDPrefix()
	idCounter atomic.Uint64
)

// newIDPrefix returns random hex so that ids made by different processes
// (each notebook cell runs in a new process) do not collide in one page.
func newIDPrefix() string {
	b := make([]byte, 5)
	if _, err := rand.Read(b); err != nil {
		// crypto/rand does not fail on supported platforms; keep ids unique
		// within the process all the same.
		return "x"
	}
	return hex.EncodeToString(b)
}

// NewElementID returns an element id that is unique within the process and,
// with overwhelming probability, across processes.
func NewElementID() string {
	return "cp-" + idPrefix + "-" + strconv.FormatUint(idCounter.Add(1), 36)
}

// ScriptJSON encodes v as JSON safe to place inside a <script> element: the
// characters <, > and & and the line separators U+2028/U+2029 are written as
// \u escapes, so no string can close the script element.
func ScriptJSON(v any) (string, error) {
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(true)
	if err := enc.Encode(v); err != nil {
		return "", fmt.Errorf("encoding chart data for a script: %w", err)
	}
	return strings.TrimSpace(buf.String()), nil
}

// scriptSafeJSON validates raw as a JSON object and returns it compacted with
// <, >, &, U+2028 and U+2029 escaped.
func scriptSafeJSON(raw []byte) (string, error) {
	trimmed := bytes.TrimSpace(raw)
	if len(trimmed) == 0 {
		return "", errors.New("chart option is empty: build it with go-echarts or json.Marshal before embedding")
	}
	if !json.Valid(trimmed) {
		return "", errors.New("chart option is not valid JSON: build it with go-echarts or json.Marshal, not by hand")
	}
	if trimmed[0] != '{' {
		return "", errors.New("chart option must be a JSON object ({...}), as ECharts' setOption expects")
	}
	var compact bytes.Buffer
	if err := json.Compact(&compact, trimmed); err != nil {
		return "", fmt.Errorf("chart option: %w", err)
	}
	var out bytes.Buffer
	json.HTMLEscape(&out, compact.Bytes())
	return out.String(), nil
}

// checkScript refuses client code that could end the script element early.
func checkScript(s string) error {
	low := strings.ToLower(s)
	for _, bad := range []string{"</script", "<!--", "<script"} {
		if strings.Contains(low, bad) {
			return fmt.Errorf("chart script contains %q, which would break the page; pass data through ScriptJSON instead of pasting it into the script", bad)
		}
	}
	return nil
}

var pngSignature = []byte("\x89PNG\r\n\x1a\n")

var chartTemplate = template.Must(template.New("chart").Parse(
	`<div class="cp-figure" id="{{.ID}}-root">` +
		`{{if .Title}}<div class="cp-figure-title">{{.Title}}</div>{{end}}` +
		`<div class="cp-chart" ` + ChartMarker + `="1" id="{{.ID}}" role="img" aria-label="{{.Title}}" ` +
		`style="width:100%;max-width:{{.Width}}px;height:{{.Height}}px;">` +
		`{{if .Src}}<img class="cp-fallback" src="{{.Src}}" alt="{{.Alt}}" style="width:100%;height:100%;object-fit:contain;">` +
		`{{else}}<div class="cp-fallback-missing">{{.Alt}}: no static picture; it appears when scripts run.</div>{{end}}` +
		`</div>` +
		`<div class="cp-chart-note" hidden></div>` +
		`{{.Controls}}` +
		`</div>`))

type chartView struct {
	ID       string
	Title    string
	Alt      string
	Width    int
	Height   int
	Src      template.URL
	Controls template.HTML
}

// HTML returns the chart as an HTML fragment: a container with a unique id,
// the PNG fallback inside it, and a script that waits (up to 20 s) for
// window.echarts, draws the chart in place of the picture, follows size
// changes, and adds a save-as-image button when the option has no toolbox.
// A chart that cannot be embedded (invalid option, unsafe script) is shown as
// an error panel instead.
func (c Chart) HTML() string {
	option, err := scriptSafeJSON(c.Option)
	if err != nil {
		return ErrorPanel(fmt.Errorf("chart %q: %w", c.Title, err))
	}
	if err := checkScript(c.Script); err != nil {
		return ErrorPanel(fmt.Errorf("chart %q: %w", c.Title, err))
	}
	w, h := c.size()
	alt := c.Title
	if alt == "" {
		alt = "chart"
	}
	v := chartView{ID: NewElementID(), Title: c.Title, Alt: alt, Width: w, Height: h, Controls: c.Controls}
	if len(c.Fallback) > 0 {
		if !bytes.HasPrefix(c.Fallback, pngSignature) {
			return ErrorPanel(fmt.Errorf("chart %q: the fallback picture is not a PNG (render it with gonum/plot's vg.PNG or image/png)", c.Title))
		}
		v.Src = template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(c.Fallback))
	}
	var buf strings.Builder
	if err := chartTemplate.Execute(&buf, v); err != nil {
		return ErrorPanel(fmt.Errorf("chart %q: %w", c.Title, err))
	}
	saveName, err := ScriptJSON(saveFileName(c.Title))
	if err != nil {
		return ErrorPanel(fmt.Errorf("chart %q: %w", c.Title, err))
	}
	buf.WriteString("<script>\n(function(){\n")
	fmt.Fprintf(&buf, "var id=%q, option=%s, saveName=%s, waitMs=%d;\n", v.ID, option, saveName, libraryWaitMillis)
	buf.WriteString(chartBootJS)
	buf.WriteString("function extra(chart, root){\n")
	buf.WriteString(c.Script)
	buf.WriteString("\n}\nboot(extra);\n})();\n</script>")
	return buf.String()
}

// saveFileName makes a file name for the toolbox's save button from a title.
func saveFileName(title string) string {
	var b strings.Builder
	for _, r := range strings.ToLower(title) {
		if b.Len() >= 60 {
			break
		}
		switch {
		case r >= 'a' && r <= 'z', r >= '0' && r <= '9':
			b.WriteRune(r)
		case b.Len() > 0 && !strings.HasSuffix(b.String(), "-"):
			b.WriteByte('-')
		}
	}
	name := strings.Trim(b.String(), "-")
	if name == "" {
		name = "chart"
	}
	return name
}

// chartBootJS is the client code shared by every chart. It expects the
// variables id, option, saveName and waitMs, and defines boot(extra).
const chartBootJS = `
var el = document.getElementById(id), root = document.getElementById(id + "-root");
function note(msg) {
  if (!root) return;
  var n = root.querySelector(".cp-chart-note");
  if (n) { n.textContent = msg; n.hidden = false; }
}
function boot(extra) {
  if (!el) return;
  var waited = 0;
  (function attempt() {
    if (!window.echarts || typeof window.echarts.init !== "function") {
      waited += 50;
      if (waited > waitMs) {
        note("Interactive chart unavailable: the ECharts library did not load, so the static picture is shown. Restart the kernel and run the cell again (run \"counterpart setup\" first if the library is missing).");
        return;
      }
      setTimeout(attempt, 50);
      return;
    }
    if (!option.toolbox) {
      option.toolbox = {right: 8, top: 0, feature: {saveAsImage: {title: "Save as PNG", name: saveName, pixelRatio: 2}}};
    }
    var img = el.querySelector("img.cp-fallback"), missing = el.querySelector(".cp-fallback-missing"), chart;
    if (img) img.style.display = "none";
    if (missing) missing.style.display = "none";
    try {
      chart = window.echarts.init(el, null, {renderer: "canvas"});
      chart.setOption(option);
    } catch (e) {
      if (chart) { try { chart.dispose(); } catch (e2) {} }
      if (img) img.style.display = "";
      note("Interactive chart failed (" + (e && e.message ? e.message : e) + "); the static picture is shown.");
      if (window.console) console.warn("counterpart chart " + id + ": " + e);
      return;
    }
    if (img && img.parentNode) img.parentNode.removeChild(img);
    if (missing && missing.parentNode) missing.parentNode.removeChild(missing);
    var observer = null;
    function onResize() {
      if (!document.body || !document.body.contains(el)) {
        window.removeEventListener("resize", onResize);
        if (observer) observer.disconnect();
        chart.dispose();
        return;
      }
      chart.resize();
    }
    window.addEventListener("resize", onResize);
    if (window.ResizeObserver) {
      observer = new ResizeObserver(function () { onResize(); });
      observer.observe(el);
    }
    try {
      extra(chart, root);
    } catch (e) {
      note("Chart controls failed: " + (e && e.message ? e.message : e));
      if (window.console) console.error("counterpart chart " + id + " script: " + e);
    }
  })();
}
`

// LibraryScript wraps the ECharts UMD bundle in a script element that sets
// window.echarts whether or not RequireJS (or another AMD/CommonJS loader) is
// on the page: the bundle runs inside a function whose parameters shadow
// define, exports and module, so it takes its browser-global branch. It does
// nothing when window.echarts already exists, so a repeated copy (one per
// kernel session, or one per cell when the session cannot be told) costs only
// its size.
func LibraryScript(js []byte) string {
	if len(js) == 0 {
		return ""
	}
	var b strings.Builder
	b.Grow(len(js) + 256)
	b.WriteString("<script data-cp-echarts=\"library\">\n")
	b.WriteString("if (!window.echarts) { (function (define, exports, module) {\n")
	b.WriteString(neutralizeScriptText(string(js)))
	b.WriteString("\n}).call(window); }\n</script>")
	return b.String()
}

// neutralizeScriptText rewrites the two character sequences that can end or
// derail a script element ("</script", in any case, and "<!--") into
// equivalents that mean the same inside JavaScript strings, regular
// expressions and comments.
func neutralizeScriptText(s string) string {
	lower := []byte(s)
	for i, c := range lower {
		if 'A' <= c && c <= 'Z' {
			lower[i] = c + ('a' - 'A')
		}
	}
	var b strings.Builder
	b.Grow(len(s) + 16)
	last := 0
	for i := 0; i < len(lower); i++ {
		if lower[i] != '<' {
			continue
		}
		switch {
		case bytes.HasPrefix(lower[i:], []byte("</script")):
			b.WriteString(s[last:i])
			b.WriteString(`<\/`)
			last = i + 2
		case bytes.HasPrefix(lower[i:], []byte("<!--")):
			b.WriteString(s[last:i])
			b.WriteString(`\x3C!--`)
			last = i + 4
		}
	}
	b.WriteString(s[last:])
	return b.String()
}
