package kernel

import (
	"bytes"
	"encoding/gob"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"github.com/counterpartlab/counterpart/widgets"
	"github.com/janpfeifer/gonb/gonbui"
	"github.com/janpfeifer/gonb/gonbui/protocol"
)

type stringer string

func (s stringer) String() string { return string(s) }

type both struct{}

func (both) HTML() string   { return "<b>rich</b>" }
func (both) String() string { return "plain" }

type richOnly struct{}

func (richOnly) HTML() string { return "<i>only rich</i>" }

type panicky struct{}

func (panicky) HTML() string { panic("table has no rows") }

func chart(title string) widgets.Chart {
	return widgets.Chart{Title: title, Option: []byte(`{"series":[]}`)}
}

func fakeLibrary(t *testing.T) {
	t.Helper()
	p := filepath.Join(t.TempDir(), "echarts.min.js")
	if err := os.WriteFile(p, []byte("window.echarts={init:function(){}};"), 0o644); err != nil {
		t.Fatal(err)
	}
	t.Setenv(EChartsEnv, p)
}

func captureStdout(t *testing.T) *bytes.Buffer {
	t.Helper()
	var buf bytes.Buffer
	old := stdout
	stdout = &buf
	t.Cleanup(func() { stdout = old })
	return &buf
}

func TestRenderForms(t *testing.T) {
	cases := []struct {
		in             any
		html, text     string
		htmlNotContain string
	}{
		{errors.New("bad <col>"), "&lt;col&gt;", "error: bad <col>", "<col>"},
		{both{}, "<b>rich</b>", "plain", ""},
		{richOnly{}, "<i>only rich</i>", "[kernel.richOnly: open in a notebook to see it]", ""},
		{stringer("a < b"), `<pre class="cp-text">a &lt; b</pre>`, "a < b", ""},
		{"</script>", `<pre class="cp-text">&lt;/script&gt;</pre>`, "</script>", "</script>"},
		{42, `<pre class="cp-text">42</pre>`, "42", ""},
		{nil, "&lt;nil&gt;", "<nil>", ""},
		{panicky{}, "showing a kernel.panicky failed: table has no rows", "error: showing a kernel.panicky failed: table has no rows", ""},
	}
	for _, c := range cases {
		h, txt := render(c.in)
		if !strings.Contains(h, c.html) || !strings.HasPrefix(txt, c.text) {
			t.Errorf("render(%#v) = %q, %q; want html containing %q and text %q", c.in, h, txt, c.html, c.text)
		}
		if c.htmlNotContain != "" && strings.Contains(h, c.htmlNotContain) {
			t.Errorf("render(%#v) leaked %q: %s", c.in, c.htmlNotContain, h)
		}
	}
}

func TestShowOutsideNotebookPrintsText(t *testing.T) {
	out := captureStdout(t)
	t.Setenv(HTMLPageEnv, "")
	Show(stringer("first"), errors.New("second"), panicky{})
	got := out.String()
	for _, want := range []string{"first\n", "error: second\n", "error: showing a kernel.panicky failed"} {
		if !strings.Contains(got, want) {
			t.Errorf("stdout %q lacks %q", got, want)
		}
	}
}

func TestShowWritesHTMLPage(t *testing.T) {
	captureStdout(t)
	fakeLibrary(t)
	page := filepath.Join(t.TempDir(), "out.html")
	t.Setenv(HTMLPageEnv, page)
	pageParts = nil
	Show(chart("one"))
	Show(stringer("two <x>"))
	data, err := os.ReadFile(page)
	if err != nil {
		t.Fatal(err)
	}
	p := string(data)
	if !strings.HasPrefix(p, "<!DOCTYPE html>") || !strings.Contains(p, `data-cp-echarts="library"`) ||
		!strings.Contains(p, "window.echarts={init") || !strings.Contains(p, widgets.ChartMarker) || !strings.Contains(p, "two &lt;x&gt;") {
		t.Fatalf("page lacks library, chart or text:\n%.600s", p)
	}
	if strings.Contains(p, "https://") {
		t.Fatal("page with a local library must not refer to a CDN")
	}
}

func TestMissingLibraryFallsBackToCDNWithNote(t *testing.T) {
	t.Setenv(EChartsEnv, filepath.Join(t.TempDir(), "absent.js"))
	h, local := libraryHTML()
	if local {
		t.Fatal("libraryHTML reports a local copy although none exists")
	}
	if !strings.Contains(h, EChartsCDN) || !strings.Contains(h, "counterpart setup") || !strings.Contains(h, `class="cp-note"`) {
		t.Fatalf("want a CDN loader with a visible note, got %s", h)
	}
	if _, err := EChartsJS(); err == nil || !strings.Contains(err.Error(), "counterpart setup") {
		t.Fatalf("EChartsJS error should name the fix, got %v", err)
	}
}

func TestEChartsPathDefaultsToCache(t *testing.T) {
	cache := t.TempDir()
	t.Setenv("XDG_CACHE_HOME", cache)
	t.Setenv(EChartsEnv, "")
	p, err := EChartsPath()
	if err != nil {
		t.Fatal(err)
	}
	if want := filepath.Join(cache, "counterpart", "echarts", EChartsVersion, "echarts.min.js"); p != want {
		t.Fatalf("got %s, want %s", p, want)
	}
}

// fakeGoNB plays GoNB's side of the named pipes: it decodes what gonbui
// sends and acknowledges sync requests.
type fakeGoNB struct {
	mu   sync.Mutex
	msgs []protocol.DisplayData
}

func (f *fakeGoNB) displays() []protocol.DisplayData {
	f.mu.Lock()
	defer f.mu.Unlock()
	var out []protocol.DisplayData
	for _, m := range f.msgs {
		if _, sync := m.Data[protocol.MIMECommValue]; !sync {
			out = append(out, m)
		}
	}
	return out
}

func (f *fakeGoNB) reset() {
	f.mu.Lock()
	f.msgs = nil
	f.mu.Unlock()
}

var (
	fakeOnce   sync.Once
	fakeShared *fakeGoNB
	fakeErr    error
)

// startFakeGoNB returns the fake GoNB of this test process (gonbui opens its
// pipes once per process, as in a real cell), emptied, with the program in
// notebook mode for the rest of the test.
func startFakeGoNB(t *testing.T) *fakeGoNB {
	t.Helper()
	fakeOnce.Do(func() { fakeShared, fakeErr = newFakeGoNB() })
	if fakeErr != nil {
		t.Skipf("named pipes unavailable (%v): the notebook path is covered by the end-to-end test", fakeErr)
	}
	fakeShared.reset()
	gonbui.IsNotebook = true
	t.Cleanup(func() { gonbui.IsNotebook = false })
	return fakeShared
}

func newFakeGoNB() (*fakeGoNB, error) {
	dir, err := os.MkdirTemp("", "counterpart-fake-gonb-")
	if err != nil {
		return nil, err
	}
	toKernel, fromKernel := filepath.Join(dir, "pipe"), filepath.Join(dir, "pipe_back")
	for _, p := range []string{toKernel, fromKernel} {
		if err := syscall.Mkfifo(p, 0o600); err != nil {
			return nil, err
		}
	}
	// Read by gonbui when it first opens the pipes.
	os.Setenv(protocol.GONB_PIPE_ENV, toKernel)
	os.Setenv(protocol.GONB_PIPE_BACK_ENV, fromKernel)
	f := &fakeGoNB{}
	go func() {
		r, err := os.Open(toKernel)
		if err != nil {
			return
		}
		w, err := os.OpenFile(fromKernel, os.O_WRONLY, 0o600)
		if err != nil {
			return
		}
		dec, enc := gob.NewDecoder(r), gob.NewEncoder(w)
		for {
			var d protocol.DisplayData
			if err := dec.Decode(&d); err != nil {
				return
			}
			f.mu.Lock()
			f.msgs = append(f.msgs, d)
			f.mu.Unlock()
			if cv, ok := d.Data[protocol.MIMECommValue].(protocol.CommValue); ok && cv.Address == protocol.GonbuiSyncAddress {
				if err := enc.Encode(&protocol.CommValue{Address: protocol.GonbuiSyncAckAddress, Value: cv.Value}); err != nil {
					return
				}
			}
		}
	}()
	return f, nil
}

func TestNotebookDisplayContract(t *testing.T) {
	fakeLibrary(t)
	f := startFakeGoNB(t)
	libraryShown = false
	t.Setenv(protocol.GONB_TMP_DIR_ENV, "") // no session folder: the library goes out once per process
	syncTimeout = 5 * time.Second

	// One Show with two charts, an error and text: ONE display message with both MIME types.
	Show(chart("first"), chart("second"), errors.New("column \"x\" missing"), stringer("note"))
	msgs := f.displays()
	if len(msgs) != 1 {
		t.Fatalf("want 1 display message, got %d", len(msgs))
	}
	h, _ := msgs[0].Data[protocol.MIMETextHTML].(string)
	txt, _ := msgs[0].Data[protocol.MIMETextPlain].(string)
	if strings.Count(h, `data-cp-echarts="library"`) != 1 || strings.Count(h, `class="cp-chart"`) != 2 {
		t.Fatalf("want the library once and two charts in the html, got %d and %d",
			strings.Count(h, `data-cp-echarts="library"`), strings.Count(h, `class="cp-chart"`))
	}
	if strings.Index(h, `data-cp-echarts="library"`) > strings.Index(h, `class="cp-chart"`) {
		t.Fatal("library must precede the charts")
	}
	if !strings.Contains(h, "cp-error") || !strings.Contains(h, "column &#34;x&#34; missing") {
		t.Fatalf("error panel missing:\n%.400s", h)
	}
	if !strings.Contains(txt, "[chart] first") || !strings.Contains(txt, "error: column \"x\" missing") || !strings.Contains(txt, "note") {
		t.Fatalf("text/plain = %q", txt)
	}
	// The failed result is listed in the metadata, through GoNB's pipe, for `counterpart run`.
	if got, _ := msgs[0].Metadata[ErrorsMetadataKey].([]string); len(got) != 1 || got[0] != `column "x" missing` {
		t.Fatalf("metadata %s = %#v; want the error's message", ErrorsMetadataKey, msgs[0].Metadata[ErrorsMetadataKey])
	}

	// A second chart display in the same process does not repeat the library.
	f.reset()
	Show(chart("third"))
	msgs = f.displays()
	if len(msgs) != 1 {
		t.Fatalf("want 1 display message, got %d", len(msgs))
	}
	if _, ok := msgs[0].Metadata[ErrorsMetadataKey]; ok {
		t.Fatalf("a display without a failed result carries %s", ErrorsMetadataKey)
	}
	if h, _ := msgs[0].Data[protocol.MIMETextHTML].(string); strings.Contains(h, `data-cp-echarts`) || !strings.Contains(h, "cp-chart") {
		t.Fatal("library repeated, or chart missing, in the second display")
	}

	// Progress: in-place updates under one display id, removed at the end.
	f.reset()
	update, finish := Progress("bootstrap <1000>")
	for i := 1; i <= 50; i++ {
		update(i, 50)
	}
	finish()
	msgs = f.displays()
	if len(msgs) < 2 {
		t.Fatalf("want at least a first and a last update, got %d messages", len(msgs))
	}
	id := msgs[0].DisplayID
	if !strings.HasPrefix(id, "cp-progress-") {
		t.Fatalf("progress display id %q", id)
	}
	for _, m := range msgs {
		if m.DisplayID != id {
			t.Fatalf("progress used display ids %q and %q", id, m.DisplayID)
		}
	}
	first, _ := msgs[0].Data[protocol.MIMETextHTML].(string)
	if !strings.Contains(first, "bootstrap &lt;1000&gt;") || !strings.Contains(first, "1/50") {
		t.Fatalf("first update: %s", first)
	}
	if len(msgs) > 10 {
		t.Fatalf("50 quick updates should be throttled, got %d redraws", len(msgs))
	}
	beforeLast, _ := msgs[len(msgs)-2].Data[protocol.MIMETextHTML].(string)
	if !strings.Contains(beforeLast, "50/50") {
		t.Fatalf("the final count must be drawn before removal, got %s", beforeLast)
	}
	if last, _ := msgs[len(msgs)-1].Data[protocol.MIMETextHTML].(string); last != "" {
		t.Fatalf("finish must clear the bar, got %q", last)
	}
}

// libraryCopies counts the inlined ECharts library and the CDN loader in one
// display's HTML.
func libraryCopies(t *testing.T, f *fakeGoNB) (local, cdn int) {
	t.Helper()
	msgs := f.displays()
	if len(msgs) != 1 {
		t.Fatalf("want 1 display message, got %d", len(msgs))
	}
	f.reset()
	h, _ := msgs[0].Data[protocol.MIMETextHTML].(string)
	return strings.Count(h, `data-cp-echarts="library"`), strings.Count(h, EChartsCDN)
}

// newCell plays the start of a new cell: GoNB runs each cell as a new
// process, so the per-process flag starts unset.
func newCell() { libraryShown = false }

func TestLibraryOncePerKernelSession(t *testing.T) {
	fakeLibrary(t)
	f := startFakeGoNB(t)
	syncTimeout = 5 * time.Second
	session := t.TempDir()
	t.Setenv(protocol.GONB_TMP_DIR_ENV, session)
	marker := filepath.Join(session, libraryMarkerName)

	// A cell without charts neither sends the library nor marks the session.
	newCell()
	Show(stringer("text only"))
	if local, _ := libraryCopies(t, f); local != 0 {
		t.Fatal("a display without charts carried the library")
	}
	if _, err := os.Stat(marker); err == nil {
		t.Fatal("the session was marked although no library went out")
	}

	// The first chart of the session carries it and marks the session.
	newCell()
	Show(chart("first"))
	if local, _ := libraryCopies(t, f); local != 1 {
		t.Fatalf("first chart of the session: %d library copies, want 1", local)
	}
	if _, err := os.Stat(marker); err != nil {
		t.Fatalf("the session marker was not written: %v", err)
	}

	// Later cells of the same session do not repeat it.
	for i := 0; i < 3; i++ {
		newCell()
		Show(chart("later"))
		if local, _ := libraryCopies(t, f); local != 0 {
			t.Fatalf("cell %d of the same session repeated the library", i+2)
		}
	}

	// A restarted kernel has a new folder: its first chart carries it again.
	t.Setenv(protocol.GONB_TMP_DIR_ENV, t.TempDir())
	newCell()
	Show(chart("after restart"))
	if local, _ := libraryCopies(t, f); local != 1 {
		t.Fatalf("first chart after a restart: %d library copies, want 1", local)
	}
}

func TestLibraryInlinedWhenSessionCannotBeMarked(t *testing.T) {
	fakeLibrary(t)
	f := startFakeGoNB(t)
	syncTimeout = 5 * time.Second
	cases := map[string]func(t *testing.T) string{
		"no session folder": func(t *testing.T) string { return "" },
		"relative folder":   func(t *testing.T) string { return "gonb_tmp" },
		"folder missing":    func(t *testing.T) string { return filepath.Join(t.TempDir(), "gone") },
		"folder is a file":  func(t *testing.T) string { p := filepath.Join(t.TempDir(), "f"); os.WriteFile(p, nil, 0o600); return p },
		"marker path is blocked": func(t *testing.T) string {
			d := t.TempDir()
			os.Mkdir(filepath.Join(d, libraryMarkerName), 0o700)
			return d
		},
	}
	for name, dir := range cases {
		t.Run(name, func(t *testing.T) {
			t.Setenv(protocol.GONB_TMP_DIR_ENV, dir(t))
			for cell := 1; cell <= 2; cell++ {
				newCell()
				Show(chart("c"))
				if local, _ := libraryCopies(t, f); local != 1 {
					t.Fatalf("cell %d: %d library copies; without a usable marker every chart cell must inline it", cell, local)
				}
			}
		})
	}
}

func TestCDNLoaderDoesNotMarkSession(t *testing.T) {
	f := startFakeGoNB(t)
	syncTimeout = 5 * time.Second
	session := t.TempDir()
	t.Setenv(protocol.GONB_TMP_DIR_ENV, session)

	// No local library: the CDN loader goes out, and the session stays unmarked...
	t.Setenv(EChartsEnv, filepath.Join(t.TempDir(), "absent.js"))
	newCell()
	Show(chart("before setup"))
	if local, cdn := libraryCopies(t, f); local != 0 || cdn != 1 {
		t.Fatalf("without a local copy: %d local, %d CDN loaders; want 0 and 1", local, cdn)
	}
	if _, err := os.Stat(filepath.Join(session, libraryMarkerName)); err == nil {
		t.Fatal("the CDN loader marked the session")
	}
	// ...so once setup placed the library, the next chart cell inlines it.
	fakeLibrary(t)
	newCell()
	Show(chart("after setup"))
	if local, cdn := libraryCopies(t, f); local != 1 || cdn != 0 {
		t.Fatalf("after setup: %d local, %d CDN loaders; want 1 and 0", local, cdn)
	}
}

func TestOutsideNotebookIgnoresSessionMarker(t *testing.T) {
	captureStdout(t)
	fakeLibrary(t)
	session := t.TempDir()
	t.Setenv(protocol.GONB_TMP_DIR_ENV, session)
	if err := os.WriteFile(filepath.Join(session, libraryMarkerName), nil, 0o600); err != nil {
		t.Fatal(err)
	}
	page := filepath.Join(t.TempDir(), "out.html")
	t.Setenv(HTMLPageEnv, page)
	pageParts = nil
	libraryShown = false
	Show(chart("terminal"))
	data, err := os.ReadFile(page)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(data), `data-cp-echarts="library"`) {
		t.Fatal("the COUNTERPART_HTML page must always inline the library")
	}
}

func TestProgressTerminal(t *testing.T) {
	var buf bytes.Buffer
	oldOut, oldTerm, oldNow := progressOut, progressIsTerminal, now
	t.Cleanup(func() { progressOut, progressIsTerminal, now = oldOut, oldTerm, oldNow })
	progressOut = &buf
	progressIsTerminal = func() bool { return true }
	clock := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	now = func() time.Time { return clock }

	update, finish := Progress("fit")
	clock = clock.Add(time.Second)
	update(1, 4) // 1 s per step: 3 s left
	clock = clock.Add(time.Second)
	update(2, 4)
	clock = clock.Add(2 * time.Second)
	update(4, 4)
	finish()
	got := buf.String()
	for _, want := range []string{"\rfit [######                  ] 1/4  about 3s left", "2/4  about 2s left", "\rfit: 4/4 in 4s"} {
		if !strings.Contains(got, want) {
			t.Errorf("terminal output %q lacks %q", got, want)
		}
	}
	if !strings.HasSuffix(got, "\n") {
		t.Error("finish must end the line")
	}

	buf.Reset()
	progressIsTerminal = func() bool { return false }
	update, finish = Progress("quiet")
	update(1, 2)
	finish()
	if buf.Len() != 0 {
		t.Fatalf("not a terminal: want no output, got %q", buf.String())
	}
}

func ExampleShow() {
	// Outside a notebook Show prints the text form.
	Show(fmt.Errorf("column %q not found", "age"))
	// Output:
	// error: column "age" not found
	// hint: Check the column, row or setting named above, fix it, and run the cell again.
}

func ExampleProgress() {
	update, finish := Progress("bootstrap")
	defer finish()
	for i := 1; i <= 3; i++ {
		update(i, 3) // a live bar in a notebook; a terminal line on stderr otherwise
	}
	// Output:
}

func ExampleLoad() {
	s := Load("../testdata/nsw_dehejia_wahba.csv").Treat("treat").Adjust("age")
	d, err := s.Design()
	fmt.Println(err, d.N)
	// Output: <nil> 445
}
