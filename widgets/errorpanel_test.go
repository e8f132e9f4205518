package widgets

import (
	"errors"
	"html/template"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

type hinted struct{ msg, hint string }

func (h hinted) Error() string { return h.msg }
func (h hinted) Hint() string  { return h.hint }

func TestErrorPanelEscapesAndKeepsLines(t *testing.T) {
	err := errors.New("column \"<b>age</b>\" has 3 missing values\nrows 4, 9, 17\ngoroutine 1 [running]:\nmain.main()")
	h := ErrorPanel(err)
	if strings.Contains(h, "<b>") || !strings.Contains(h, "&lt;b&gt;age&lt;/b&gt;") {
		t.Fatalf("message not escaped:\n%s", h)
	}
	if !strings.Contains(h, "values\nrows 4, 9, 17") {
		t.Fatalf("line break lost:\n%s", h)
	}
	if strings.Contains(h, "goroutine") || strings.Contains(h, "main.main") {
		t.Fatalf("stack trace shown:\n%s", h)
	}
	if !strings.Contains(h, `class="cp-hint"`) || !strings.Contains(h, defaultHint) {
		t.Fatalf("hint line missing:\n%s", h)
	}
}

func TestErrorPanelUsesOwnHint(t *testing.T) {
	h := ErrorPanel(hinted{"no treated units", "Pick a treated level with TreatedLevel(\"yes\")."})
	if !strings.Contains(h, "Pick a treated level with TreatedLevel(&#34;yes&#34;).") {
		t.Fatalf("own hint missing:\n%s", h)
	}
	if ErrorText(hinted{"a\nb", "do x"}) != "error: a\nb\nhint: do x" {
		t.Fatalf("text form: %q", ErrorText(hinted{"a\nb", "do x"}))
	}
}

func TestErrorPanelNil(t *testing.T) {
	if ErrorPanel(nil) != "" || ErrorText(nil) != "" {
		t.Fatal("nil error must render nothing")
	}
	if !strings.Contains(ErrorPanel(errors.New("  \n")), "carried no message") {
		t.Fatal("empty message must be replaced by a readable one")
	}
}

// An error panel carries ErrorMarker and its message can be read back (as
// `counterpart run` does); a failed optional part and a finding in the same
// style do not carry it.
func TestErrorPanelMarker(t *testing.T) {
	msg := "column \"a<b>\" & \x1b[31m missing\nsecond line"
	h := ErrorPanel(errors.New(msg)) + "<p>between</p>" + ErrorPanel(errors.New("two"))
	got := ErrorPanelMessages(h)
	if len(got) != 2 || got[0] != msg || got[1] != "two" {
		t.Fatalf("messages %q", got)
	}
	for name, h := range map[string]string{
		"part failed": PartFailedPanel("Bootstrap", "0 of 5 replicates succeeded"),
		"plain":       `<div class="cp-error" role="note"><div class="cp-error-title">Separation</div><div class="cp-error-msg">x</div></div>`,
		"escaped":     `<pre>` + template.HTMLEscapeString(`<div class="cp-error" `+ErrorMarker+`><div class="cp-error-msg">x</div>`) + `</pre>`,
	} {
		if strings.Contains(h, ErrorMarker+">") || len(ErrorPanelMessages(h)) != 0 {
			t.Errorf("%s: reads as a failed result: %s", name, h)
		}
	}
}

// A report whose bootstrap failed shows the rest and the failed section with
// why, and is not read as a failed result.
func TestReportPageShowsFailedBootstrap(t *testing.T) {
	s := causal.FromColumns([]string{"x", "t", "y"}, map[string][]float64{"x": {1, 2, 3, 4, 5, 6, 7, 8}, "t": {0, 0, 0, 1, 0, 0, 1, 0}, "y": {1, 3, 2, 5, 4, 6, 1, 1}}, nil).
		Treat("t").Outcome("y").Adjust("x")
	r, err := causal.BuildReport(s, causal.ReportOptions{Bootstrap: 20, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	page := ReportPage(r, nil)
	if !strings.Contains(page, "Bootstrap failed") || !strings.Contains(page, "outcome model for the treated arm") || !strings.Contains(page, "20 replicates, seed 1 (failed)") {
		t.Errorf("page lacks the failed bootstrap section")
	}
	if n := len(ErrorPanelMessages(page)); n != 0 {
		t.Errorf("page has %d marked error panels; the report was built", n)
	}
}
