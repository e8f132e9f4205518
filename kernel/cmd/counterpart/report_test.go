package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"
)

var binary string

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "counterpart-bin")
	if err != nil {
		panic(err)
	}
	binary = filepath.Join(dir, "counterpart")
	if out, err := exec.Command("go", "build", "-o", binary, ".").CombinedOutput(); err != nil {
		fmt.Fprintf(os.Stderr, "building the command: %v\n%s", err, out)
		os.Exit(1)
	}
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

type runResult struct {
	code           int
	stdout, stderr string
}

func runCmd(t *testing.T, args ...string) runResult {
	t.Helper()
	cmd := exec.Command(binary, args...)
	var o, e bytes.Buffer
	cmd.Stdout, cmd.Stderr = &o, &e
	err := cmd.Run()
	code := 0
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		code = ee.ExitCode()
	} else if err != nil {
		t.Fatal(err)
	}
	return runResult{code, o.String(), e.String()}
}

const nswData = "../../../testdata/nsw_dehejia_wahba.csv"
const nswCovs = "age,educ,black,hisp,married,nodegr,re74,re75"

func schema(t *testing.T) *jsonschema.Schema {
	t.Helper()
	c := jsonschema.NewCompiler()
	sch, err := c.Compile("../../../causal/report.schema.json")
	if err != nil {
		t.Fatal(err)
	}
	return sch
}

func validate(t *testing.T, path string) map[string]any {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if bytes.Contains(b, []byte("NaN")) || bytes.Contains(b, []byte("Infinity")) {
		t.Errorf("%s contains NaN or Infinity", path)
	}
	inst, err := jsonschema.UnmarshalJSON(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	if err := schema(t).Validate(inst); err != nil {
		t.Errorf("%s does not match causal/report.schema.json: %v", path, err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	return m
}

// Reference: R 4.2 (testdata/reference/nsw_reference.R, values in
// nsw_reference.json) and Dehejia & Wahba (1999): experimental $1,794.
func TestReportNSWMatchesReferences(t *testing.T) {
	dir := t.TempDir()
	js, page := filepath.Join(dir, "r.json"), filepath.Join(dir, "r.html")
	r := runCmd(t, "report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", nswCovs,
		"--json", js, "--html", page, "--fail-on", "violated")
	if r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	if !strings.Contains(r.stdout, "verdict: ADEQUATE") {
		t.Errorf("a randomised sample should not raise an alarm; summary:\n%s", r.stdout)
	}
	m := validate(t, js)
	var ref struct {
		GLM struct {
			Terms []string  `json:"terms"`
			Coef  []float64 `json:"coef"`
			SE    []float64 `json:"se"`
		} `json:"glm"`
		Estimates []struct {
			Estimator, Estimand string
			Value, SE           float64
		} `json:"estimates"`
	}
	b, _ := os.ReadFile("../../../testdata/reference/nsw_reference.json")
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	terms := m["propensity"].(map[string]any)["terms"].([]any)
	for j, tm := range terms {
		tt := tm.(map[string]any)
		if tt["term"] != ref.GLM.Terms[j] || !rel(tt["coef"].(float64), ref.GLM.Coef[j], 1e-6) || !rel(tt["se"].(float64), ref.GLM.SE[j], 1e-6) {
			t.Errorf("term %v: coef %v se %v; R: %s %v %v", tt["term"], tt["coef"], tt["se"], ref.GLM.Terms[j], ref.GLM.Coef[j], ref.GLM.SE[j])
		}
	}
	found := 0
	for _, e := range m["estimates"].([]any) {
		ee := e.(map[string]any)
		if ee["estimator"] == "difference_in_means" && math.Round(ee["value"].(float64)) != 1794 {
			t.Errorf("difference in means %v, published $1,794", ee["value"])
		}
		for _, rf := range ref.Estimates {
			if rf.Estimator == ee["estimator"] && rf.Estimand == ee["estimand"] {
				found++
				if !rel(ee["value"].(float64), rf.Value, 1e-6) || !rel(ee["se"].(float64), rf.SE, 1e-6) {
					t.Errorf("%s %s: %v (se %v); R %v (se %v)", rf.Estimator, rf.Estimand, ee["value"], ee["se"], rf.Value, rf.SE)
				}
			}
		}
	}
	if found < 5 {
		t.Errorf("only %d estimates matched to R references", found)
	}
	h, _ := os.ReadFile(page)
	if !bytes.Contains(h, []byte("data-cp-chart")) || !bytes.Contains(h, []byte("cannot verify unconfoundedness")) {
		t.Error("HTML lacks charts or cautions")
	}
}

func rel(a, b, tol float64) bool { return math.Abs(a-b) <= tol*math.Max(math.Abs(b), 1e-300) }

func writeCSV(t *testing.T, name, body string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestReportUsageAndDataErrors(t *testing.T) {
	bad := writeCSV(t, "bad.csv", "x,t,y\n1,0,3\n2,1,4\n3,0,5\nfour,1,6\n5,0,7\n6,1,8\n")
	one := writeCSV(t, "one.csv", "x,t,y\n1,1,3\n2,1,4\n3,1,5\n")
	cases := []struct {
		name string
		args []string
		want []string
	}{
		{"unknown column", []string{"--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", "agee,educ"}, []string{`unknown column "agee"`, `did you mean "age"`}},
		{"missing file", []string{"--data", "/no/such.csv", "--treatment", "t", "--outcome", "y", "--covariates", "x"}, []string{"--data /no/such.csv", "no such file"}},
		{"non-numeric", []string{"--data", bad, "--treatment", "t", "--outcome", "y", "--covariates", "x"}, []string{`covariate "x"`, `row 4 holds "four"`}},
		{"one-level treatment", []string{"--data", one, "--treatment", "t", "--outcome", "y", "--covariates", "x"}, []string{`treatment "t" has a single value`}},
		{"missing flags", []string{"--data", nswData}, []string{"missing --treatment, --outcome, --covariates"}},
		{"bad estimand", []string{"--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", "age", "--estimand", "ATX"}, []string{"--estimand", "ATE, ATT, ATC or ATO"}},
		{"bad trim", []string{"--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", "age", "--trim", "0.7"}, []string{"trim", "0 ≤ α < 0.5"}},
		{"bad gate", []string{"--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", "age", "--fail-on", "bad"}, []string{"--fail-on", "violated or limited"}},
	}
	for _, c := range cases {
		r := runCmd(t, append([]string{"report"}, c.args...)...)
		if r.code != 1 {
			t.Errorf("%s: exit %d, want 1 (stderr %q)", c.name, r.code, r.stderr)
		}
		for _, w := range c.want {
			if !strings.Contains(r.stderr, w) {
				t.Errorf("%s: stderr %q lacks %q", c.name, r.stderr, w)
			}
		}
		if strings.Contains(r.stderr, "goroutine ") || strings.Contains(r.stderr, "panic") {
			t.Errorf("%s: stack trace in %q", c.name, r.stderr)
		}
	}
	if r := runCmd(t, "report", "--help"); r.code != 0 || !strings.Contains(r.stdout, "example:") {
		t.Errorf("--help: exit %d, %q", r.code, r.stdout)
	}
}

// A data set where one level of a covariate determines treatment: the gate
// must trip (exit 3) and the report files must still be written.
func TestReportGateOnDeterministicAssignment(t *testing.T) {
	var b strings.Builder
	b.WriteString("x,site,t,y\n")
	for i := 0; i < 300; i++ {
		site := []string{"a", "b", "closed"}[i%3]
		t := (i / 3) % 2
		if site == "closed" {
			t = 0
		}
		fmt.Fprintf(&b, "%d,%s,%d,%g\n", i%17, site, t, float64(i%11)+2*float64(t))
	}
	data := writeCSV(t, "gate.csv", b.String())
	dir := t.TempDir()
	js, page := filepath.Join(dir, "g.json"), filepath.Join(dir, "g.html")
	r := runCmd(t, "report", "--data", data, "--treatment", "t", "--outcome", "y", "--covariates", "x,site", "--json", js, "--html", page, "--fail-on", "violated")
	if r.code != 3 {
		t.Fatalf("exit %d, want 3; stdout %s stderr %s", r.code, r.stdout, r.stderr)
	}
	if !strings.Contains(r.stderr, "graded violated") {
		t.Errorf("stderr %q", r.stderr)
	}
	m := validate(t, js)
	if m["verdict"].(map[string]any)["status"] != "violated" {
		t.Errorf("verdict %v", m["verdict"])
	}
	if _, err := os.Stat(page); err != nil {
		t.Error("HTML not written when the gate trips")
	}
	// limited gate trips on violated too; no gate: exit 0.
	if r := runCmd(t, "report", "--data", data, "--treatment", "t", "--outcome", "y", "--covariates", "x,site", "--fail-on", "limited"); r.code != 3 {
		t.Errorf("--fail-on limited: exit %d", r.code)
	}
	if r := runCmd(t, "report", "--data", data, "--treatment", "t", "--outcome", "y", "--covariates", "x,site"); r.code != 0 {
		t.Errorf("no gate: exit %d: %s", r.code, r.stderr)
	}
}

func TestReportEscapesHostileLabels(t *testing.T) {
	col := `<img src=x onerror=alert(1)>`
	lvl := `</script><script>alert(2)</script>`
	var b strings.Builder
	fmt.Fprintf(&b, "\"%s\",grp,t,y\n", col)
	for i := 0; i < 200; i++ {
		g := "plain"
		if i%2 == 0 {
			g = lvl
		}
		fmt.Fprintf(&b, "%d,\"%s\",%d,%d\n", i%13, strings.ReplaceAll(g, `"`, `""`), (i/2)%2, i%7)
	}
	data := writeCSV(t, "hostile.csv", b.String())
	page := filepath.Join(t.TempDir(), "h.html")
	r := runCmd(t, "report", "--data", data, "--treatment", "t", "--outcome", "y", "--covariates", col+",grp", "--html", page)
	if r.code != 0 {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	h, _ := os.ReadFile(page)
	for _, raw := range []string{col, lvl, "<script>alert(2)", "<img src=x"} {
		if bytes.Contains(h, []byte(raw)) {
			t.Errorf("raw %q reached the HTML", raw)
		}
	}
	if !bytes.Contains(h, []byte("&lt;img src=x onerror=alert(1)&gt;")) {
		t.Error("the hostile column name is not shown (escaped) at all")
	}
}

func TestReportSeededBootstrapIsReproducible(t *testing.T) {
	dir := t.TempDir()
	var outs [][]byte
	for k := 0; k < 2; k++ {
		js := filepath.Join(dir, fmt.Sprintf("b%d.json", k))
		r := runCmd(t, "report", "--data", nswData, "--treatment", "treat", "--outcome", "re78", "--covariates", nswCovs,
			"--estimand", "ATT", "--trim", "optimal", "--bootstrap", "60", "--seed", "11", "--json", js)
		if r.code != 0 {
			t.Fatalf("exit %d: %s", r.code, r.stderr)
		}
		m := validate(t, js)
		if m["bootstrap"] == nil || m["trimming"] == nil {
			t.Fatalf("bootstrap or trimming section missing")
		}
		b, _ := os.ReadFile(js)
		outs = append(outs, b)
	}
	if !bytes.Equal(outs[0], outs[1]) {
		t.Error("two seeded runs gave different JSON")
	}
}

// With --trim the gate judges the kept units (the population the estimates
// describe): the water scenario fails the gate as it is and passes it once
// trimmed to scores in [0.1, 0.9], with both verdicts in the JSON.
func TestReportGateJudgesTrimmedUnits(t *testing.T) {
	data := "../../../testdata/water_audits.csv"
	args := []string{"report", "--data", data, "--treatment", "audit", "--treated-level", "yes", "--outcome", "litres_per_day",
		"--covariates", "household_size,lot_m2,home_age,last_summer_lpd,pool,district,income_band", "--fail-on", "violated"}
	if r := runCmd(t, args...); r.code != 3 {
		t.Fatalf("untrimmed: exit %d, want 3 (harbour was never offered audits)", r.code)
	}
	js := filepath.Join(t.TempDir(), "t.json")
	r := runCmd(t, append(args, "--trim", "0.1", "--json", js)...)
	if r.code != 0 {
		t.Fatalf("trimmed: exit %d: %s\n%s", r.code, r.stderr, r.stdout)
	}
	m := validate(t, js)
	if m["verdict"].(map[string]any)["status"] != "violated" || m["verdict_trimmed"].(map[string]any)["status"] == "violated" {
		t.Errorf("verdicts: data %v, trimmed %v", m["verdict"], m["verdict_trimmed"])
	}
}

// A numeric covariate with one stray text field is refused with the flag that
// fixes it (--categorical), and --categorical makes the run go through.
func TestReportCategoricalFlag(t *testing.T) {
	var b strings.Builder
	b.WriteString("x,t,y\n")
	for i := 0; i < 200; i++ {
		x := fmt.Sprint(1 + i%7)
		if i == 7 {
			x = "0x1p3"
		}
		fmt.Fprintf(&b, "%s,%d,%d\n", x, i%2, i%5)
	}
	p := writeCSV(t, "stray.csv", b.String())
	args := []string{"report", "--data", p, "--treatment", "t", "--outcome", "y", "--covariates", "x"}
	r := runCmd(t, args...)
	if r.code != 1 || !strings.Contains(r.stderr, `--categorical "x"`) || strings.Contains(r.stderr, "AsCategory") {
		t.Errorf("stray text: exit %d, stderr %q; want 1 naming --categorical", r.code, r.stderr)
	}
	if r := runCmd(t, append(args, "--categorical", "x,")...); r.code != 1 || !strings.Contains(r.stderr, "--categorical") {
		t.Errorf("--categorical with an empty name: exit %d, stderr %q", r.code, r.stderr)
	}
	if r := runCmd(t, append(args, "--categorical", "x")...); r.code != 0 {
		t.Errorf("--categorical x: exit %d, stderr %q", r.code, r.stderr)
	}
}

// The gate judges the estimand --estimand names: on the water scenario the
// ATO is supported (exit 0 with --fail-on limited), the ATE is withdrawn by
// a violation (harbour; exit 3 with --fail-on violated). --cells and --bins
// choose the positivity cells; without any the JSON says why.
func TestReportGateJudgesEstimand(t *testing.T) {
	data := "../../../testdata/water_audits.csv"
	base := []string{"report", "--data", data, "--treatment", "audit", "--treated-level", "yes", "--outcome", "litres_per_day",
		"--covariates", "household_size,lot_m2,home_age,last_summer_lpd,pool,district,income_band"}
	if r := runCmd(t, append(base, "--estimand", "ATO", "--fail-on", "limited")...); r.code != 0 {
		t.Errorf("ATO --fail-on limited: exit %d: %s", r.code, r.stderr)
	}
	if r := runCmd(t, append(base, "--estimand", "ATE", "--fail-on", "violated")...); r.code != 3 || !strings.Contains(r.stderr, "the ATE is not supported") {
		t.Errorf("ATE --fail-on violated: exit %d: %s", r.code, r.stderr)
	}
	js := filepath.Join(t.TempDir(), "c.json")
	if r := runCmd(t, append(base, "--estimand", "ATC", "--cells", "lot_m2,pool", "--bins", "10", "--json", js)...); r.code != 0 {
		t.Fatalf("--cells: exit %d: %s", r.code, r.stderr)
	}
	m := validate(t, js)
	cols := m["cells"].(map[string]any)["columns"]
	if fmt.Sprint(cols) != "[lot_m2 pool]" {
		t.Errorf("cells columns %v", cols)
	}
	v := m["verdict"].(map[string]any)
	if v["target"] != "ATC" || v["estimands"].(map[string]any)["ATO"].(map[string]any)["status"] != "supported" {
		t.Errorf("verdict %v", v["estimands"])
	}
	js2 := filepath.Join(t.TempDir(), "n.json")
	if r := runCmd(t, "report", "--data", data, "--treatment", "audit", "--treated-level", "yes", "--outcome", "litres_per_day",
		"--covariates", "household_size,lot_m2", "--json", js2); r.code != 0 {
		t.Fatalf("no cells: exit %d: %s", r.code, r.stderr)
	}
	if m := validate(t, js2); m["cells"] != nil || !strings.Contains(fmt.Sprint(m["cells_absent"]), "--cells") {
		t.Errorf("cells %v, cells_absent %v", m["cells"], m["cells_absent"])
	}
	if r := runCmd(t, append(base, "--bins", "1")...); r.code != 1 || !strings.Contains(r.stderr, "--bins") {
		t.Errorf("--bins 1: exit %d: %s", r.code, r.stderr)
	}
}
