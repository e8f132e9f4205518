package widgets

import (
	"regexp"
	"strings"
	"testing"
)

func TestPageSelfContained(t *testing.T) {
	chart := Chart{Title: "Overlap", Option: []byte(`{"series":[]}`), Fallback: tinyPNG(t)}.HTML()
	p := Page(hostile, []string{chart, ErrorPanel(errTest("bad row 3"))}, []byte(umdBundle))
	if !strings.HasPrefix(p, "<!DOCTYPE html>") || !strings.Contains(p, `<meta charset="utf-8">`) {
		t.Fatal("not a full document")
	}
	if strings.Contains(p, "<title></script>") || !strings.Contains(p, "<title>&lt;/script&gt;&lt;img src=x") {
		t.Fatalf("title not escaped:\n%s", p[:400])
	}
	// No external resource: no src/href pointing anywhere but data: URLs.
	for _, m := range regexp.MustCompile(`(?i)(src|href)\s*=\s*"([^"]*)"`).FindAllStringSubmatch(p, -1) {
		if !strings.HasPrefix(m[2], "data:") {
			t.Errorf("external reference %s=%q", m[1], m[2])
		}
	}
	if !strings.Contains(p, `data-cp-echarts="library"`) || !strings.Contains(p, Style()) {
		t.Fatal("library or stylesheet not inlined")
	}
	if strings.Index(p, `data-cp-echarts="library"`) > strings.Index(p, ChartMarker) {
		t.Fatal("library must come before the charts")
	}
	if !strings.Contains(p, "bad row 3") {
		t.Fatal("body fragment missing")
	}
}

func TestPageWithoutLibrary(t *testing.T) {
	p := Page("t", []string{"<p>x</p>"}, nil)
	if strings.Contains(p, "<script") {
		t.Fatal("no library given: page must carry no script")
	}
}

func TestStyleIsScoped(t *testing.T) {
	css := strings.TrimSuffix(strings.TrimPrefix(Style(), "<style>"), "</style>")
	for _, rule := range regexp.MustCompile(`(?m)^([^{]+)\{`).FindAllStringSubmatch(css, -1) {
		for _, sel := range strings.Split(rule[1], ",") {
			if !strings.Contains(sel, ".cp-") {
				t.Errorf("selector %q is not scoped to a cp- class", sel)
			}
		}
	}
}

type errTest string

func (e errTest) Error() string { return string(e) }
