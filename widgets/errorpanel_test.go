package widgets

import (
	"errors"
	"strings"
	"testing"
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
