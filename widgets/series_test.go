package widgets

import (
	"bytes"
	"encoding/base64"
	"encoding/csv"
	"encoding/json"
	"html"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/causal"
)

type seriesBase struct {
	Dims int `json:"dims"`
}

type seriesRow struct {
	seriesBase
	Share   float64          `json:"share"`
	Truth   float64          `json:"true_share"`
	Label   string           `json:"label"`
	Missing *float64         `json:"missing"`
	Kind    causal.Estimand  `json:"estimand"`
	Skip    float64          `json:"-"`
	Nested  []float64        `json:"nested"`
	Named   uint8            // no tag: the field name
	hidden  float64          //nolint:unused // unexported: not a column
	Map     map[string]int   `json:"map,omitempty"`
	Flag    bool             `json:"flag"`
	Ptr     *causal.Estimand `json:"ptr"`
}

func seriesRows() []seriesRow {
	half := 0.5
	return []seriesRow{
		{seriesBase: seriesBase{1}, Share: 0.5, Truth: 0.5, Label: "one", Missing: &half, Kind: causal.ATE, Named: 7, Flag: true},
		{seriesBase: seriesBase{2}, Share: 0.26, Truth: 0.25, Label: "two", Kind: causal.ATT},
		{seriesBase: seriesBase{3}, Share: math.NaN(), Truth: 0.125, Label: "three", Kind: causal.ATO},
	}
}

func TestSeriesReadsStructFields(t *testing.T) {
	s := Series(seriesRows())
	if s.Err() != nil {
		t.Fatal(s.Err())
	}
	want := []string{"dims", "share", "true_share", "label", "missing", "estimand", "Named", "flag", "ptr"}
	if got := s.Names(); strings.Join(got, ",") != strings.Join(want, ",") {
		t.Fatalf("columns %v; want %v", got, want)
	}
	if s.Len() != 3 {
		t.Fatalf("%d rows; want 3", s.Len())
	}
	if len(s.leftOut) != 2 || !strings.Contains(s.leftOut[0], "nested") || !strings.Contains(s.leftOut[1], "map") {
		t.Errorf("left out %v; want nested and map", s.leftOut)
	}
	// The same rows through a pointer to the slice, and as pointers.
	rows := seriesRows()
	ptrs := []*seriesRow{&rows[0], &rows[1], &rows[2]}
	for _, other := range []*Sheet{Series(&rows), Series(ptrs)} {
		a, _ := json.Marshal(s)
		b, _ := json.Marshal(other)
		if !bytes.Equal(a, b) {
			t.Errorf("JSON differs:\n%s\n%s", a, b)
		}
	}
	var got struct {
		Rows    int `json:"rows"`
		Columns []struct {
			Name   string `json:"name"`
			Type   string `json:"type"`
			Values []any  `json:"values"`
		} `json:"columns"`
	}
	raw, err := json.Marshal(s)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(raw, &got); err != nil {
		t.Fatal(err)
	}
	types := map[string]string{}
	for _, c := range got.Columns {
		types[c.Name] = c.Type
	}
	for name, typ := range map[string]string{"dims": "integer", "share": "number", "label": "text", "missing": "number", "estimand": "text", "flag": "text", "Named": "integer"} {
		if types[name] != typ {
			t.Errorf("column %s has type %q; want %q", name, types[name], typ)
		}
	}
	if got.Columns[1].Values[2] != nil || got.Columns[4].Values[1] != nil {
		t.Errorf("NaN and nil pointers should be null in JSON: %s", raw)
	}
	if got.Columns[5].Values[1] != "ATT" || got.Columns[7].Values[0] != "true" {
		t.Errorf("String and bool values: %v %v", got.Columns[5].Values, got.Columns[7].Values)
	}
	text := s.String()
	for _, w := range []string{"dims", "true_share", "0.125", "three", "ATO", "—", "left out: nested"} {
		if !strings.Contains(text, w) {
			t.Errorf("String lacks %q:\n%s", w, text)
		}
	}
}

func TestSeriesReflectionErrors(t *testing.T) {
	type dup struct {
		A float64 // named by its field name
		B float64 `json:"A"`
	}
	type none struct {
		M map[string]int
	}
	var nilSlice *[]seriesRow
	cases := []struct {
		name, want string
		s          *Sheet
	}{
		{"nil", "rows is nil", Series(nil)},
		{"nil pointer", "nil *[]widgets.seriesRow", Series(nilSlice)},
		{"not a slice", "rows is a int", Series(3)},
		{"slice of numbers", "holds float64 values", Series([]float64{1, 2})},
		{"duplicate", `two fields are named "A"`, Series([]dup{{1, 2}})},
		{"no usable field", "no exported field", Series([]none{{}})},
		{"nil row", "row 1 is a nil pointer", Series([]*seriesRow{{}, nil})},
		{"odd columns", "3 arguments", Columns("a", []int{1}, "b")},
		{"name not a string", "argument 1 is a int", Columns(1, []int{1})},
		{"not a slice column", `column "a" is a int`, Columns("a", 1)},
		{"unsupported column", `column "a" holds map[string]int`, Columns("a", []map[string]int{{}})},
		{"unequal", `column "b" has 1 values but column "a" has 2`, Columns("a", []int{1, 2}, "b", []float64{1})},
		{"twice", `column "a" is given twice`, Columns("a", []int{1}, "a", []int{2})},
		{"empty", "no columns", Columns()},
	}
	for _, c := range cases {
		err := c.s.Err()
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v; want one containing %q", c.name, err, c.want)
			continue
		}
		// The error travels into every face.
		if !strings.Contains(c.s.HTML(), "cp-error") || !strings.Contains(c.s.Line("x", "y").HTML(), "cp-error") {
			t.Errorf("%s: HTML does not show the error panel", c.name)
		}
		if !strings.HasPrefix(c.s.String(), "error: ") {
			t.Errorf("%s: String %q", c.name, c.s.String())
		}
		if b, err := json.Marshal(c.s); err != nil || !strings.Contains(string(b), `"error"`) {
			t.Errorf("%s: JSON %s (%v)", c.name, b, err)
		}
	}
	s := Series(seriesRows())
	for _, c := range []struct {
		p    *Plot
		want string
	}{
		{s.Line("dims"), "name at least one column"},
		{s.Line("nope", "share"), `x column "nope" is not in the sheet; its columns are "dims", "share"`},
		{s.Line("dims", "nested"), `y column "nested" was left out`},
		{s.Line("dims", "label"), `y column "label" holds text`},
		{s.Scatter("dims", "a", "b", "c", "d", "e", "f", "g", "h", "i"), "at most 8"},
		{Columns("x", []float64{}, "y", []float64{}).Line("x", "y"), "no rows"},
		{Columns("x", make([]float64, 1501), "y", make([]float64, 1501), "z", make([]float64, 1501)).Line("x", "y", "z"), "3,002 values"},
		{s.Table("dims", "zzz").Line("dims", "share"), `table column "zzz"`},
	} {
		if err := c.p.Err(); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("plot error %v; want one containing %q", err, c.want)
		}
	}
}

func TestSeriesChart(t *testing.T) {
	s := Series(seriesRows()).Titled("Erosion by dimension")
	p := s.Line("dims", "share", "true_share").Percent().Axes("covariates", "share of units")
	c, err := p.Chart()
	if err != nil {
		t.Fatal(err)
	}
	obj := checkOption(t, "Line", c.Option)
	checkFallback(t, "Line", c.Fallback)
	series := obj["series"].([]any)
	if len(series) != 2 {
		t.Fatalf("%d series; want 2", len(series))
	}
	first := series[0].(map[string]any)["data"].([]any)
	// Percent: 0.5 is drawn as 50; the NaN of row 3 is a gap.
	if v := first[0].([]any); v[0] != 1.0 || v[1] != 50.0 {
		t.Errorf("first point %v; want [1 50]", v)
	}
	if v := first[2].([]any); v[1] != "-" {
		t.Errorf("missing value drawn as %v; want a gap", v)
	}
	// A text x gives a category axis; the scatter draws no line.
	cat, err := s.Scatter("label", "true_share").Chart()
	if err != nil {
		t.Fatal(err)
	}
	var co map[string]any
	_ = json.Unmarshal(cat.Option, &co)
	xa := co["xAxis"].([]any)[0].(map[string]any)
	if xa["type"] != "category" {
		t.Errorf("x axis of a text column is %v; want category", xa["type"])
	}
	checkFallback(t, "Scatter", cat.Fallback)
	if txt := p.String(); !strings.Contains(txt, "[line chart] Erosion by dimension") || !strings.Contains(txt, "true_share") {
		t.Errorf("String:\n%s", txt)
	}
	raw, err := json.Marshal(p)
	if err != nil {
		t.Fatal(err)
	}
	var j struct {
		Kind   string         `json:"kind"`
		X      map[string]any `json:"x"`
		Series []struct {
			Name   string `json:"name"`
			Values []any  `json:"values"`
		} `json:"series"`
	}
	if err := json.Unmarshal(raw, &j); err != nil {
		t.Fatal(err)
	}
	if j.Kind != "line" || j.X["name"] != "dims" || len(j.Series) != 2 || j.Series[0].Values[2] != nil || j.Series[1].Values[2] != 0.125 {
		t.Errorf("JSON %s", raw)
	}
}

const seriesHostile = "</script><img src=x onerror=\"document.title='pwned'\">\x1b[31m"

// Hostile column names, titles and text values are escaped in every face:
// no live markup in the HTML, no way out of the script element, no control
// characters in the terminal text, no formula in the CSV.
func TestSeriesEscapesHostileLabels(t *testing.T) {
	s := Columns(seriesHostile, []string{"=cmd|' /C calc'!A0", seriesHostile, "-2"}, "y"+seriesHostile, []float64{1, 2, 3}).Titled(seriesHostile)
	if s.Err() != nil {
		t.Fatal(s.Err())
	}
	for name, h := range map[string]string{"table": s.HTML(), "chart": s.Line(seriesHostile, "y"+seriesHostile).HTML()} {
		if strings.Contains(h, "<img src=x") || strings.Contains(h, "onerror=\"document") {
			t.Errorf("%s: hostile label became markup", name)
		}
		if strings.Count(strings.ToLower(h), "</script") != strings.Count(h, "\n})();\n</script>") {
			t.Errorf("%s: a script element is closed early", name)
		}
	}
	chartHTML := s.Line(seriesHostile, "y"+seriesHostile).HTML()
	scripts := regexp.MustCompile(`(?s)<script>(.*?)</script>`).FindAllStringSubmatch(chartHTML, -1)
	if len(scripts) != 1 || strings.Contains(strings.ToLower(scripts[0][1]), "<img") {
		t.Errorf("the chart's script holds unescaped markup: %d scripts", len(scripts))
	}
	for _, txt := range []string{s.String(), s.Line(seriesHostile, "y"+seriesHostile).String()} {
		if strings.ContainsAny(txt, "\x1b") {
			t.Errorf("terminal text carries a control character: %q", txt)
		}
		if !strings.Contains(txt, `\x1b[31m`) {
			t.Errorf("terminal text should show the escape visibly: %q", txt)
		}
	}
	m := regexp.MustCompile(`href="data:text/csv;charset=utf-8;base64,([^"]+)"`).FindStringSubmatch(s.HTML())
	if m == nil {
		t.Fatal("no CSV link")
	}
	raw, err := base64.StdEncoding.DecodeString(html.UnescapeString(m[1]))
	if err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != 4 || recs[0][0] != seriesHostile || recs[1][0] != "'=cmd|' /C calc'!A0" || recs[3][0] != "'-2" || recs[3][1] != "3" {
		t.Errorf("CSV records %q", recs)
	}
}

// The payload is bounded: a chart at the largest size it accepts stays
// under 100 KB of option, a long sheet shows 60 rows, and a CSV too large
// for a page is not embedded.
func TestSeriesPayloadBounded(t *testing.T) {
	n := maxPlotValues / 2
	x, y1, y2 := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range x {
		x[i] = -1.234567891e-5 * float64(i+1)
		y1[i] = -9.87654321e-7 * float64(i*7919%n+1)
		y2[i] = math.Sqrt(float64(i)) * -1234.56789
	}
	long := strings.Repeat("long column name ", 10)
	c, err := Columns(long+"x", x, long+"a", y1, long+"b", y2).Line(long+"x", long+"a", long+"b").Chart()
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Option) >= 100<<10 {
		t.Errorf("option of %d values is %d bytes; want < 100 KB", 2*n, len(c.Option))
	}
	if len(c.Script) >= 100<<10 {
		t.Errorf("script is %d bytes; want < 100 KB", len(c.Script))
	}
	t.Logf("option %d bytes, script %d bytes, picture %d bytes", len(c.Option), len(c.Script), len(c.Fallback))

	big := make([]float64, 200000)
	for i := range big {
		big[i] = float64(i) / 3
	}
	s := Columns("i", big, "v", big)
	h := s.HTML()
	if strings.Contains(h, "data:text/csv") || !strings.Contains(h, "Sheet.WriteCSV") {
		t.Error("a CSV over the bound is embedded or not explained")
	}
	if got := strings.Count(h, "<tr>"); got != maxTableRows+1 {
		t.Errorf("%d table rows; want %d and the header", got-1, maxTableRows)
	}
	if len(h) > 50<<10 {
		t.Errorf("the table of 200,000 rows is %d bytes of HTML", len(h))
	}
	small := Columns("i", big[:2000], "v", big[:2000]).HTML()
	if !strings.Contains(small, "data:text/csv") || len(small) > maxCSVBytes*4/3+50<<10 {
		t.Errorf("a 2,000-row CSV should be embedded within the bound (%d bytes)", len(small))
	}
}

func TestSeriesScriptParses(t *testing.T) {
	node, err := exec.LookPath("node")
	if err != nil {
		t.Skip("node not installed: the script runs in Chromium in the kernel's end-to-end test")
	}
	h := Series(seriesRows()).Line("label", "share").HTML()
	m := regexp.MustCompile(`(?s)<script>(.*?)</script>`).FindStringSubmatch(h)
	f := filepath.Join(t.TempDir(), "series.js")
	if err := os.WriteFile(f, []byte(m[1]), 0o644); err != nil {
		t.Fatal(err)
	}
	if out, err := exec.Command(node, "--check", f).CombinedOutput(); err != nil {
		t.Errorf("script does not parse: %v\n%s", err, out)
	}
}
