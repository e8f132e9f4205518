package kernel

import (
	"fmt"
	"html/template"
	"io"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"sync"
	"time"

	"github.com/counterpartlab/counterpart/widgets"
	"github.com/janpfeifer/gonb/gonbui"
	"github.com/janpfeifer/gonb/gonbui/protocol"
)

// HTMLPageEnv names the environment variable that, outside a notebook, asks
// Show to also write everything it showed as one HTML page at that path.
const HTMLPageEnv = "COUNTERPART_HTML"

// IsNotebook reports whether the program runs as a GoNB notebook cell.
func IsNotebook() bool { return gonbui.IsNotebook }

var (
	showMu sync.Mutex
	// libraryShown is set once the ECharts library went out with a display in
	// this process (a notebook cell is one process); the kernel session as a
	// whole is tracked by a marker file (see librarySentInSession).
	libraryShown bool
	// pageParts collects, outside a notebook, what was shown, for HTMLPageEnv.
	pageParts []string
	// stdout, when set (by tests), replaces os.Stdout for the text form.
	stdout io.Writer
	// syncTimeout bounds the wait for GoNB to confirm it received a display.
	syncTimeout = 10 * time.Second
)

type htmler interface{ HTML() string }

// Show displays each value: an error as an error panel, a value with an
// HTML() string method as that HTML, a value with String() as preformatted
// text, anything else as fmt prints it. In a notebook all values go out as
// ONE display message carrying text/html and text/plain.
//
// The first display of a kernel session that holds a chart also carries the
// ECharts library (about 1 MB), so saved and exported notebooks draw offline;
// later charts wait for that copy (window.echarts) instead of repeating it.
// GoNB runs each cell as a new process, so the session is recognised by a
// marker file in GoNB's per-kernel build folder ($GONB_TMP_DIR, made anew at
// each kernel start and removed when the kernel stops): after a restart the
// first chart inlines the library again. When that folder is unknown or the
// marker cannot be written, every cell that shows a chart inlines it, as a
// cell of its own would need.
//
// One copy per session means the copy lives in one cell's output. Clearing
// that output, or re-running that cell, in the same session leaves the open
// page drawing (the library stays loaded in it), but a notebook saved then
// holds no copy: opened again, its charts show their static pictures (with a
// note) until a chart cell runs in a new kernel session — restart the kernel
// and run the cell, or run all cells. `counterpart run` always starts a fresh
// kernel, so its exports hold exactly one copy.
//
// Outside a notebook Show prints the text form to standard output and, when
// COUNTERPART_HTML is set to a path, (re)writes an HTML page there with
// everything shown so far by the process.
//
// Show never panics: a value whose methods panic is shown as an error panel.
func Show(xs ...any) {
	defer func() {
		if r := recover(); r != nil {
			// Rendering itself is guarded per value; this catches a failure
			// while sending, which leaves nothing better to do than say so.
			fmt.Fprintf(os.Stderr, "counterpart: showing output failed: %v\n", r)
		}
	}()
	if len(xs) == 0 {
		return
	}
	htmlParts := make([]string, 0, len(xs))
	textParts := make([]string, 0, len(xs))
	for _, x := range xs {
		h, t := render(x)
		htmlParts = append(htmlParts, h)
		textParts = append(textParts, t)
	}
	html := strings.Join(htmlParts, "\n")
	text := strings.Join(textParts, "\n")

	showMu.Lock()
	defer showMu.Unlock()
	if IsNotebook() {
		var b strings.Builder
		withLibrary, localLibrary := false, false
		if !libraryShown && strings.Contains(html, widgets.ChartMarker) && !librarySentInSession() {
			lib, local := libraryHTML()
			b.WriteString(lib)
			withLibrary, localLibrary = true, local
		}
		b.WriteString(widgets.Style())
		b.WriteString(`<div class="cp-output">`)
		b.WriteString(html)
		b.WriteString(`</div>`)
		gonbui.SendData(displayData(b.String(), text, html))
		if gonbui.Error() == nil {
			received := syncWithKernel()
			if withLibrary {
				libraryShown = true
				// Only a confirmed local copy spares later cells theirs: the
				// CDN loader must be repeated once the local copy exists.
				if received && localLibrary {
					markLibrarySent()
				}
			}
			return
		}
		// The pipe to GoNB broke: the text still reaches the cell through stdout.
	}
	w := stdout
	if w == nil {
		w = os.Stdout
	}
	fmt.Fprintln(w, text)
	if path := os.Getenv(HTMLPageEnv); path != "" {
		pageParts = append(pageParts, htmlParts...)
		if err := writePage(path, pageParts); err != nil {
			fmt.Fprintf(os.Stderr, "counterpart: %s=%s: %v\n", HTMLPageEnv, path, err)
		}
	}
}

// ErrorsMetadataKey is the key, in the metadata of a display that shows
// failed results (error panels), of their messages (a list of strings).
// `counterpart run` reads it to count the cell as failed.
const ErrorsMetadataKey = "counterpart/errors"

// displayData is the display message of a Show: page in text/html, text in
// text/plain, and, when shown (the values' HTML) holds error panels, their
// messages under ErrorsMetadataKey.
func displayData(page, text, shown string) *protocol.DisplayData {
	d := &protocol.DisplayData{Data: map[protocol.MIMEType]any{
		protocol.MIMETextHTML:  page,
		protocol.MIMETextPlain: text,
	}}
	if msgs := widgets.ErrorPanelMessages(shown); len(msgs) > 0 {
		d.Metadata = map[string]any{ErrorsMetadataKey: msgs}
	}
	return d
}

// syncWithKernel waits until GoNB has taken the messages sent so far, so that
// a cell ending right after Show does not lose its output; it gives up after
// syncTimeout. It reports whether GoNB confirmed.
func syncWithKernel() bool {
	done := make(chan struct{})
	go func() {
		defer close(done)
		gonbui.Sync()
	}()
	select {
	case <-done:
		return gonbui.Error() == nil
	case <-time.After(syncTimeout):
		return false
	}
}

// libraryMarkerName is the marker file, in the kernel session's folder, that
// says the ECharts library already went out in this session.
const libraryMarkerName = ".counterpart-echarts-" + EChartsVersion + "-sent"

// sessionDir returns the folder GoNB made for this kernel session: its build
// folder, $GONB_TMP_DIR, which GoNB creates at each kernel start (under a new
// random name) and removes when the kernel stops. It returns "" outside GoNB
// or when the folder is not there.
func sessionDir() string {
	dir := os.Getenv(protocol.GONB_TMP_DIR_ENV)
	if dir == "" || !filepath.IsAbs(dir) {
		return ""
	}
	if fi, err := os.Stat(dir); err != nil || !fi.IsDir() {
		return ""
	}
	return dir
}

// librarySentInSession reports whether an earlier cell of this kernel session
// already sent the local ECharts library.
func librarySentInSession() bool {
	dir := sessionDir()
	if dir == "" {
		return false
	}
	fi, err := os.Lstat(filepath.Join(dir, libraryMarkerName))
	return err == nil && fi.Mode().IsRegular()
}

// markLibrarySent leaves the session's marker. It is best effort: when the
// marker cannot be written, later cells inline the library again.
func markLibrarySent() {
	dir := sessionDir()
	if dir == "" {
		return
	}
	// Only the file's existence counts, so a partial write is harmless.
	note := []byte("ECharts " + EChartsVersion + " was sent to the notebook by a counterpart cell of this kernel session.\n")
	_ = os.WriteFile(filepath.Join(dir, libraryMarkerName), note, 0o600)
}

// render returns the HTML and text forms of one value, turning a panic in
// the value's own methods into an error panel.
func render(x any) (html, text string) {
	defer func() {
		if r := recover(); r != nil {
			err := fmt.Errorf("showing a %T failed: %v", x, r)
			html, text = widgets.ErrorPanel(err), widgets.ErrorText(err)
		}
	}()
	if fromCausal(x) {
		v := widgets.View(x)
		return v.HTML(), v.String()
	}
	switch v := x.(type) {
	case nil:
		return pre("<nil>"), "<nil>"
	case error:
		return widgets.ErrorPanel(v), widgets.ErrorText(v)
	case template.HTML:
		return string(v), "[html]"
	case htmler:
		h := v.HTML()
		if s, ok := x.(fmt.Stringer); ok {
			return h, s.String()
		}
		return h, fmt.Sprintf("[%T: open in a notebook to see it]", x)
	case fmt.Stringer:
		s := v.String()
		return pre(s), s
	case string:
		return pre(v), v
	default:
		s := fmt.Sprint(v)
		return pre(s), s
	}
}

func pre(s string) string {
	return `<pre class="cp-text">` + template.HTMLEscapeString(s) + `</pre>`
}

// writePage writes the page atomically (see WriteFileAtomic).
func writePage(path string, parts []string) error {
	js, err := EChartsJS()
	body := parts
	if err != nil {
		body = append([]string{cdnFallbackHTML(err)}, parts...)
		js = nil
	}
	title := "counterpart · " + filepath.Base(os.Args[0])
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	return WriteFileAtomic(path, []byte(widgets.Page(title, body, js)), 0o644)
}

// libraryHTML returns the ECharts library as a script element (local true),
// or, when the local copy is missing, the last-resort loader from a CDN with
// a visible note (local false).
func libraryHTML() (html string, local bool) {
	js, err := EChartsJS()
	if err != nil {
		return cdnFallbackHTML(err), false
	}
	return widgets.LibraryScript(js), true
}

// EChartsCDN is where charts load ECharts from when no local copy exists.
// It is the last resort: `counterpart setup` places a local copy.
const EChartsCDN = "https://cdn.jsdelivr.net/npm/echarts@" + EChartsVersion + "/dist/echarts.min.js"

func cdnFallbackHTML(cause error) string {
	return `<div class="cp-note">` + template.HTMLEscapeString(
		"Charts will load ECharts "+EChartsVersion+" from the internet, because the local copy is missing ("+
			widgets.ErrorMessage(cause)+"). Run `counterpart setup` so notebooks draw offline.") + `</div>` +
		// RequireJS pages would capture the bundle as an AMD module; hide define while it loads.
		`<script>(function(){if(window.echarts||window.__cpEChartsLoading)return;window.__cpEChartsLoading=true;` +
		`var s=document.createElement("script"),d=window.define;window.define=undefined;` +
		`s.onload=s.onerror=function(){window.define=d;};s.src=` + fmt.Sprintf("%q", EChartsCDN) +
		`;document.head.appendChild(s);})();</script>`
}

// fromCausal reports whether x is a result of package causal (its views live
// in widgets, which knows every result type).
func fromCausal(x any) bool {
	t := reflect.TypeOf(x)
	if t == nil {
		return false
	}
	for t.Kind() == reflect.Pointer {
		t = t.Elem()
	}
	return t.PkgPath() == "github.com/counterpartlab/counterpart/causal"
}
