package widgets

import (
	"errors"
	"fmt"
	"html/template"
	"regexp"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

// TestViewsEscapeHostileLabels renders every view of a study whose column
// name is an HTML element with a handler and one of whose levels closes a
// script element: neither may appear raw anywhere in the HTML (tables,
// attributes, option JSON, client code), while their escaped forms must (so
// the labels were shown, not dropped).
func TestViewsEscapeHostileLabels(t *testing.T) {
	r := resultsOf(t, hostileStudy(t), hostileColumn, "g", "b")
	if r.Audit.Err() != nil || r.Curve.Err() != nil {
		t.Fatalf("the extrapolation views must render here: %v / %v", r.Audit.Err(), r.Curve.Err())
	}
	var all strings.Builder
	for _, x := range r.all() {
		h := HTML(x)
		all.WriteString(h)
		for _, raw := range []string{hostileColumn, hostileLevel, "<script>alert", "onerror=alert(1)>"} {
			if strings.Contains(h, raw) {
				i := strings.Index(h, raw)
				t.Errorf("%T: raw %q in the HTML near %q", x, raw, h[max(0, i-80):min(len(h), i+80)])
			}
		}
		for _, m := range regexp.MustCompile(`(?s)<script>(.*?)</script>`).FindAllStringSubmatch(h, -1) {
			body := strings.ToLower(m[1])
			if strings.Contains(body, "<script") || strings.Contains(body, "<img") || strings.Contains(body, "<!--") {
				t.Errorf("%T: a script body holds markup: %.200q", x, m[1])
			}
		}
		if strings.Count(h, "<script>") != strings.Count(h, "</script>") {
			t.Errorf("%T: %d script tags opened, %d closed", x, strings.Count(h, "<script>"), strings.Count(h, "</script>"))
		}
	}
	page := all.String()
	for _, escaped := range []string{
		`&lt;img src=x onerror=alert(1)&gt;`,                   // in tables (html/template)
		`\u003cimg src=x onerror=alert(1)\u003e`,               // in option JSON and script data
		`&lt;/script&gt;&lt;script&gt;alert(1)&lt;/script&gt;`, // the level in a table
		`\u003c/script\u003e\u003cscript\u003ealert(1)`,        // the level in chart data
	} {
		if !strings.Contains(page, escaped) {
			t.Errorf("escaped form %q missing: was the label shown at all?", escaped)
		}
	}
}

// TestViewIDsUnique checks that element ids are unique across several views
// in one output (several charts per cell) and across repeated renders of the
// same result (a re-run cell).
func TestViewIDsUnique(t *testing.T) {
	r := waterResults(t)
	var all strings.Builder
	for _, x := range append(r.all(), r.Support, r.Support) {
		all.WriteString(HTML(x))
	}
	ids := regexp.MustCompile(`<\w+[^>]*?\sid="([^"]+)"`).FindAllStringSubmatch(all.String(), -1)
	if len(ids) < 20 {
		t.Fatalf("only %d ids found", len(ids))
	}
	seen := map[string]bool{}
	for _, m := range ids {
		if seen[m[1]] {
			t.Errorf("duplicate id %q", m[1])
		}
		seen[m[1]] = true
	}
	charts := strings.Count(all.String(), ChartMarker+`="1"`)
	if charts < 10 {
		t.Errorf("%d charts in the views, want at least 10", charts)
	}
}

// TestPayloadBoundedAtOneMillion builds every chart and view of a synthetic
// study of 1,000,000 rows: each chart, static picture included, stays within
// 100 KB, and so does each view without its charts.
func TestPayloadBoundedAtOneMillion(t *testing.T) {
	r := millionResults(t)
	const limit = 100 * 1024
	for _, b := range append(chartBuilders, curveBuilders...) {
		c, err := b.build(r)
		if err != nil {
			t.Fatalf("%s: %v", b.name, err)
		}
		h := c.HTML()
		t.Logf("%-20s chart %6d bytes (option %5d, picture %5d, script %5d)", b.name, len(h), len(c.Option), len(c.Fallback), len(c.Script))
		if len(h) > limit {
			t.Errorf("%s: %d bytes, limit %d", b.name, len(h), limit)
		}
		checkOption(t, b.name, c.Option)
	}
	for _, x := range r.all() {
		h := HTML(x)
		// Subtract the charts: what remains is headline, tables and notes.
		rest := regexp.MustCompile(`(?s)<div class="cp-figure".*?</script>`).ReplaceAllString(h, "")
		t.Logf("%-22T view %7d bytes, %6d without charts", x, len(h), len(rest))
		if len(rest) > limit {
			t.Errorf("%T: %d bytes of tables and text, limit %d", x, len(rest), limit)
		}
	}
}

func TestViewShowsErrorPanel(t *testing.T) {
	bad := causal.Load("missing.csv").Treat("t").Adjust("x")
	for _, x := range []any{bad.Propensity(), bad.Propensity().Support(), bad.Cells("x"), bad.Erosion(), bad.Balance(),
		bad.Propensity().Verdict(causal.VerdictOptions{}), bad.Propensity().Weights(causal.ATE), errors.New("plain <error>")} {
		h := HTML(x)
		if !strings.HasPrefix(h, `<div class="cp-error"`) {
			t.Errorf("%T: not an error panel: %.120q", x, h)
		}
		if strings.Contains(h, "goroutine") || strings.Contains(h, "<error>") {
			t.Errorf("%T: panel leaks a trace or raw markup: %q", x, h)
		}
		if s := View(x).String(); !strings.HasPrefix(s, "error: ") {
			t.Errorf("%T: text form %q", x, s)
		}
	}
	if !strings.Contains(HTML(bad.Balance()), "missing.csv") {
		t.Error("the panel should name the file that is missing")
	}
}

func TestViewPassesThroughOtherValues(t *testing.T) {
	if got := HTML("a <b>"); got != `<pre class="cp-text">a &lt;b&gt;</pre>` {
		t.Errorf("string: %q", got)
	}
	c := Chart{Title: "x", Option: []byte(`{"series":[]}`)}
	if got := HTML(c); !strings.Contains(got, ChartMarker) {
		t.Errorf("chart not passed through: %.100q", got)
	}
	if got := HTML(nil); !strings.Contains(got, "&lt;nil&gt;") {
		t.Errorf("nil: %q", got)
	}
}

func TestHeadlines(t *testing.T) {
	r := waterResults(t)
	cases := []struct {
		x    any
		want []string
	}{
		// Harbour households were never offered an audit (the scenario's design).
		{r.Scores, []string{"Positivity is violated", "district=harbour"}},
		{r.Support, []string{"outside the common-support band", "consider overlap weights"}},
		{r.Cells2, []string{"Positivity is violated on district × lot_m2", "empty arm"}},
		{r.Erosion, []string{"Adjusting for all 7 covariates leaves"}},
		{r.Balance, []string{"Before weighting", "|SMD| > 0.1"}},
		{r.Weighted, []string{"After ATE weights"}},
		// Large-lot pool homes nearly all audited: the ATT is withdrawn too.
		{r.Verdict, []string{"Positivity is violated", "The ATE is not supported; the data support ATO"}},
		{r.Weights, []string{"effective sample size"}},
		{r.Estimates, []string{"estimates the ATE at", "do not support the ATE"}},
		{r.Effect, []string{"IPW, normalised (Hájek) estimates the ATE at", "extrapolation"}},
		{r.Trimmed, []string{"Trimming keeps", "scores in [0.050, 0.950]", "not the original population"}},
		// Trimmed at 0.05: the kept units are judged with Extreme = 0.05.
		{r.TrimmedEs, []string{"for the trimmed population only"}},
		{r.Bootstrap, []string{"Bootstrap of IPW, normalised (Hájek), ATE (12 replicates, seed 5)"}},
		{r.Sweep, []string{"As α rises from 0.00 to 0.20", "optimal α of Crump et al. (2009)"}},
	}
	for _, c := range cases {
		h := Headline(c.x)
		for _, w := range c.want {
			if !strings.Contains(h, w) {
				t.Errorf("%T headline %q lacks %q", c.x, h, w)
			}
		}
		if !strings.HasPrefix(View(c.x).String(), h) {
			t.Errorf("%T: text form does not start with the headline", c.x)
		}
		if !strings.Contains(HTML(c.x), "cp-view") {
			t.Errorf("%T: no composed view", c.x)
		}
	}
}

func TestVerdictPanelCarriesCautions(t *testing.T) {
	r := waterResults(t)
	h := HTML(r.Verdict)
	for _, want := range []string{"cp-violated", "cannot verify unconfoundedness", "covariates measured",
		"local rules and licensed practice", "Remedy:", "not supported: ATE", "would drop"} {
		if !strings.Contains(h, want) {
			t.Errorf("verdict panel lacks %q", want)
		}
	}
	for _, reason := range r.Verdict.Reasons {
		if !strings.Contains(h, template.HTMLEscapeString(reason)) {
			t.Errorf("reason %q not shown", reason)
		}
	}
}

func ExampleView() {
	s := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Adjust("district", "income_band", "household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
	support := s.Propensity().Support()
	v := View(support)
	fmt.Println(Headline(support))
	fmt.Println(strings.Count(v.HTML(), ChartMarker), "charts")
	// Output:
	// 15.2% of units (32 treated, 575 control) lie outside the common-support band [0.040, 0.979]: estimates for them would rest on extrapolation; consider overlap weights (ATO) or trimming.
	// 2 charts
}

func ExampleHTML() {
	s := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Adjust("district", "income_band", "household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
	cells := s.Cells("district", "pool")
	h := HTML(cells)
	fmt.Println(Headline(cells))
	fmt.Println(strings.Contains(h, "violation: no treated units"))
	// Output:
	// Positivity is violated on district × pool: 1 of 10 cells lack an arm where random assignment would not leave one empty, holding 537 units (13.4%); no comparison exists for them (2 cells with an empty arm in all: 0 treated without controls, 552 controls without treated units).
	// true
}

func ExampleHeadline() {
	s := causal.Load("../testdata/water_audits.csv").Treat("audit").TreatedLevel("yes").
		Adjust("district", "income_band", "household_size", "lot_m2", "home_age", "pool", "last_summer_lpd")
	sc := s.Propensity()
	fmt.Println(Headline(sc.Verdict(causal.VerdictOptions{})))
	fmt.Println(Headline(s.Erosion()))
	// Output:
	// Positivity is violated: some units have no counterpart in the other arm (9 findings below). The ATE is not supported; the data support ATO.
	// Adjusting for all 7 covariates leaves 23.9% of units in cells with both arms (treated with controls 37.8%, controls with treated 19.0%); the largest loss comes with home_age (23.7 points).
}
