package jupyter

import (
	"archive/tar"
	"bytes"
	"compress/gzip"
	"context"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/counterpartlab/counterpart/kernel"
	"github.com/counterpartlab/counterpart/widgets"

	"golang.org/x/mod/module"
	modzip "golang.org/x/mod/zip"
)

// failing.executed.ipynb is kernel/testdata/failing.ipynb as executed by
// Jupyter with GoNB v0.11.1 (kept as produced by `counterpart run --executed`).
func TestScanNotebookFindsGoNBFailures(t *testing.T) {
	data, err := os.ReadFile("../testdata/failing.executed.ipynb")
	if err != nil {
		t.Fatal(err)
	}
	errs, code, err := ScanNotebook(data)
	if err != nil {
		t.Fatal(err)
	}
	if code != 6 {
		t.Fatalf("want 6 code cells, got %d", code)
	}
	if len(errs) != 4 {
		t.Fatalf("want 4 failed cells, got %d: %v", len(errs), errs)
	}
	want := []struct {
		cell, in int
		has      []string
	}{
		{3, 2, []string{"Cell[2]: Line 2: undefined: undefinedThing"}},                     // compile error: only GoNB's HTML has the words
		{4, 3, []string{"panic: assignment to entry in nil map", "[[ Cell [3] Line 3 ]]"}}, // panic: stderr only, no error output
		{5, 4, []string{"cannot open data.csv: no such file", "exit status 1"}},            // log.Fatal
		{6, 5, []string{"error panel: ", "no-such-data.csv"}},                              // exit 0, but kernel.Show showed a failed result
	}
	for i, w := range want {
		e := errs[i]
		if e.Cell != w.cell || e.ExecutionCount != w.in {
			t.Errorf("error %d: cell %d (In [%d]), want cell %d (In [%d])", i, e.Cell, e.ExecutionCount, w.cell, w.in)
		}
		for _, h := range w.has {
			if !strings.Contains(e.Message, h) {
				t.Errorf("cell %d message %q lacks %q", e.Cell, e.Message, h)
			}
		}
		if strings.Contains(e.Message, "goroutine 1 [running]") {
			t.Errorf("cell %d message carries the goroutine dump", e.Cell)
		}
	}
	msg := CellErrors(errs).Error()
	if !strings.HasPrefix(msg, "4 cells failed:") || !strings.Contains(msg, "cell 4 (In [3]) \"var counts map[string]int\":") {
		t.Fatalf("summary:\n%s", msg)
	}
}

func TestScanNotebookCleanAndStderrNoise(t *testing.T) {
	nb := `{"cells":[
 {"cell_type":"markdown","source":"# t"},
 {"cell_type":"code","execution_count":1,"source":["%%\n","log.Print(\"x\")"],"outputs":[
   {"output_type":"stream","name":"stderr","text":["2026/01/01 warning: exit status is logged\n"]}]},
 {"cell_type":"code","execution_count":2,"source":"","outputs":[
   {"output_type":"display_data","data":{"text/html":"<b>fine</b>"}}]}
]}`
	errs, code, err := ScanNotebook([]byte(nb))
	if err != nil || code != 2 || len(errs) != 0 {
		t.Fatalf("got %v, %d, %v; want no failures in 2 code cells", errs, code, err)
	}
	if _, _, err := ScanNotebook([]byte("{")); err == nil {
		t.Fatal("broken JSON must be an error")
	}
}

// A display that shows an error panel fails its cell: by the metadata
// kernel.Show adds, or by the panel's marker in HTML shown another way; a
// panel without the marker (a finding, a failed optional part) does not.
func TestScanNotebookErrorPanels(t *testing.T) {
	panel := widgets.ErrorPanel(errors.New("column \"dose\" not found\x1b[2J"))
	cell := func(n int, out map[string]any) map[string]any {
		return map[string]any{"cell_type": "code", "execution_count": n, "source": "%%\nkernel.Show(x)", "outputs": []any{out}}
	}
	nb := map[string]any{"cells": []any{
		cell(1, map[string]any{"output_type": "display_data", "data": map[string]any{"text/html": "<b>ok</b>"}, "metadata": map[string]any{kernel.ErrorsMetadataKey: []string{"from metadata"}}}),
		cell(2, map[string]any{"output_type": "display_data", "data": map[string]any{"text/html": []string{"<div>", panel, "</div>"}}}),
		cell(3, map[string]any{"output_type": "execute_result", "data": map[string]any{"text/html": widgets.PartFailedPanel("Bootstrap", "0 of 9 replicates succeeded")}}),
		cell(4, map[string]any{"output_type": "display_data", "data": map[string]any{"text/html": "<p>fine</p>"}, "metadata": map[string]any{}}),
	}}
	data, _ := json.Marshal(nb)
	errs, code, err := ScanNotebook(data)
	if err != nil || code != 4 {
		t.Fatalf("%v, %d code cells", err, code)
	}
	if len(errs) != 2 || errs[0].Cell != 1 || errs[1].Cell != 2 {
		t.Fatalf("failed cells %+v; want cells 1 and 2", errs)
	}
	if errs[0].Message != "error panel: from metadata" {
		t.Errorf("cell 1: %q", errs[0].Message)
	}
	if want := `error panel: column "dose" not found\x1b[2J`; errs[1].Message != want {
		t.Errorf("cell 2: %q, want %q (unescaped, control characters made visible)", errs[1].Message, want)
	}
}

// Outputs on top of the notebook, or on each other, are refused before
// anything runs.
func TestRunRefusesOutputOnInput(t *testing.T) {
	dir := t.TempDir()
	nb := filepath.Join(dir, "a.ipynb")
	if err := os.WriteFile(nb, []byte(`{"cells":[]}`), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		o    RunOptions
		want string
	}{
		{RunOptions{Notebook: nb, HTML: filepath.Join(dir, ".", "a.ipynb")}, "--html"},
		{RunOptions{Notebook: nb, Executed: nb}, "--executed"},
		{RunOptions{Notebook: nb, HTML: filepath.Join(dir, "o"), Executed: filepath.Join(dir, "x", "..", "o")}, "--html and --executed are the same file"},
	} {
		_, err := Run(context.Background(), c.o)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: %v; want an error naming %s", c.o, err, c.want)
		}
	}
	if b, _ := os.ReadFile(nb); string(b) != `{"cells":[]}` {
		t.Errorf("the notebook changed: %s", b)
	}
}

func writeTree(t *testing.T, root string, files map[string]string) {
	t.Helper()
	for name, content := range files {
		p := filepath.Join(root, filepath.FromSlash(name))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
	}
}

func TestPublishModuleMakesProxyLayout(t *testing.T) {
	repo, proxy := t.TempDir(), t.TempDir()
	writeTree(t, repo, map[string]string{
		"go.mod":            "module " + ModulePath + "\n\ngo 1.26\n",
		"a.go":              "package counterpart\n",
		"widgets/w.go":      "package widgets\n",
		".git/HEAD":         "ref: refs/heads/main\n",
		"nested/go.mod":     "module example.com/nested\n",
		"nested/n.go":       "package nested\n",
		"testdata/data.csv": "a,b\n1,2\n",
	})
	v1, did, err := publishModule(repo, proxy, false)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(v1, "v0.0.") || !strings.HasPrefix(did, "published") {
		t.Fatalf("version %q, did %q", v1, did)
	}
	if err := module.Check(ModulePath, v1); err != nil {
		t.Fatalf("version %s is not a valid module version: %v", v1, err)
	}
	vdir := filepath.Join(proxy, filepath.FromSlash(ModulePath), "@v")
	list, err := os.ReadFile(filepath.Join(vdir, "list"))
	if err != nil || strings.TrimSpace(string(list)) != v1 {
		t.Fatalf("list = %q, %v", list, err)
	}
	var info struct{ Version, Time string }
	data, _ := os.ReadFile(filepath.Join(vdir, v1+".info"))
	if err := json.Unmarshal(data, &info); err != nil || info.Version != v1 || info.Time == "" {
		t.Fatalf(".info = %s (%v)", data, err)
	}
	// The zip passes the module zip checks the go command applies.
	zipPath := filepath.Join(vdir, v1+".zip")
	cf, err := modzip.CheckZip(module.Version{Path: ModulePath, Version: v1}, zipPath)
	if err != nil {
		t.Fatalf("zip rejected: %v", err)
	}
	got := strings.Join(cf.Valid, " ")
	for _, want := range []string{"a.go", "go.mod", "widgets/w.go", "testdata/data.csv"} {
		if !strings.Contains(got, want) {
			t.Errorf("zip lacks %s (has %s)", want, got)
		}
	}
	for _, not := range []string{".git/HEAD", "nested/"} {
		if strings.Contains(got, not) {
			t.Errorf("zip must not hold %s (has %s)", not, got)
		}
	}

	// Unchanged checkout: same version, skipped.
	v2, did, err := publishModule(repo, proxy, false)
	if err != nil || v2 != v1 || !strings.HasPrefix(did, "skipped") {
		t.Fatalf("second run: %s, %q, %v; want %s skipped", v2, did, err, v1)
	}
	// A changed file: a newer version, and the old one is gone from the proxy.
	writeTree(t, repo, map[string]string{"a.go": "package counterpart\n\nconst X = 1\n"})
	v3, _, err := publishModule(repo, proxy, false)
	if err != nil {
		t.Fatal(err)
	}
	if v3 <= v1 || len(v3) != len(v1) {
		t.Fatalf("new version %s must sort after %s", v3, v1)
	}
	if fileExists(filepath.Join(vdir, v1+".zip")) {
		t.Fatal("old zip left in the proxy")
	}
	if list, _ := os.ReadFile(filepath.Join(vdir, "list")); strings.TrimSpace(string(list)) != v3 {
		t.Fatalf("list after change = %q", list)
	}
}

func TestExtractFromTgz(t *testing.T) {
	var buf bytes.Buffer
	gz := gzip.NewWriter(&buf)
	tw := tar.NewWriter(gz)
	for name, body := range map[string]string{
		"package/dist/echarts.min.js": "window.echarts={}",
		"package/LICENSE":             "Apache",
		"package/index.js":            "ignored",
	} {
		if err := tw.WriteHeader(&tar.Header{Name: name, Mode: 0o644, Size: int64(len(body)), Typeflag: tar.TypeReg}); err != nil {
			t.Fatal(err)
		}
		tw.Write([]byte(body))
	}
	tw.Close()
	gz.Close()
	p := filepath.Join(t.TempDir(), "e.tgz")
	os.WriteFile(p, buf.Bytes(), 0o644)
	got, err := extractFromTgz(p, map[string]string{"package/dist/echarts.min.js": "echarts.min.js", "package/LICENSE": "LICENSE", "package/NOTICE": "NOTICE"})
	if err != nil {
		t.Fatal(err)
	}
	if string(got["echarts.min.js"]) != "window.echarts={}" || string(got["LICENSE"]) != "Apache" || len(got) != 2 {
		t.Fatalf("got %v", got)
	}
	if _, err := extractFromTgz(p, map[string]string{"package/LICENSE": "LICENSE"}); err == nil || !strings.Contains(err.Error(), "echarts.min.js") {
		t.Fatalf("a package without the bundle must be an error naming it, got %v", err)
	}
}

func TestKernelSpecEnvironment(t *testing.T) {
	inst := &Installed{BinDir: "/c/bin", EChartsPath: "/c/echarts.min.js", ModuleVersion: "v0.0.1"}
	spec := kernelSpec(inst, DefaultDisplayName, "/c/proxy", "/m", "/go/bin")
	if strings.Join(spec.Argv, " ") != "/c/bin/gonb --kernel {connection_file}" {
		t.Fatalf("argv %v", spec.Argv)
	}
	want := map[string]string{
		"GOPROXY":             "file:///c/proxy,file:///m/cache/download",
		"GONOSUMDB":           ModulePath,
		"GOSUMDB":             "off",
		"GOFLAGS":             "-mod=mod",
		"GOTOOLCHAIN":         "local",
		"COUNTERPART_ECHARTS": "/c/echarts.min.js",
	}
	for k, v := range want {
		if spec.Env[k] != v {
			t.Errorf("env %s = %q, want %q", k, spec.Env[k], v)
		}
	}
	if !strings.HasPrefix(spec.Env["PATH"], "/c/bin:/go/bin") {
		t.Errorf("PATH must start with the tool folder (gonb runs goimports from PATH), got %q", spec.Env["PATH"])
	}
}

func TestFindModuleRoot(t *testing.T) {
	root, err := FindModuleRoot(".")
	if err != nil {
		t.Fatal(err)
	}
	if !fileExists(filepath.Join(root, "kernel", "jupyter", "setup.go")) {
		t.Fatalf("root %s is not this checkout", root)
	}
	other := t.TempDir()
	writeTree(t, other, map[string]string{"go.mod": "module example.com/other\n"})
	// Outside the checkout the source location of this binary is used.
	if r, err := FindModuleRoot(other); err != nil || r != root {
		t.Fatalf("from another module: %s, %v; want %s", r, err, root)
	}
}

func notebookWith(t *testing.T, cells ...map[string]any) []byte {
	t.Helper()
	data, err := json.Marshal(map[string]any{"cells": cells, "nbformat": 4, "nbformat_minor": 5, "metadata": map[string]any{}})
	if err != nil {
		t.Fatal(err)
	}
	return data
}

func markdown(src ...string) map[string]any {
	return map[string]any{"cell_type": "markdown", "source": src, "metadata": map[string]any{}}
}

func TestMayHoldMath(t *testing.T) {
	output := func(mime, text string) map[string]any {
		return map[string]any{"cell_type": "code", "source": "", "outputs": []any{
			map[string]any{"output_type": "display_data", "data": map[string]any{mime: text}}}}
	}
	cases := []struct {
		name string
		nb   []byte
		want bool
	}{
		{"a price is not math", notebookWith(t, markdown("earnings of **$1,794**"), markdown("## the $1,794 benchmark")), false},
		{"escaped dollars", notebookWith(t, markdown(`from \$5 to \$10`)), false},
		{"inline math", notebookWith(t, markdown("the score $e(x)$ is"), markdown("plain")), true},
		{"inline math across source lines", notebookWith(t, markdown("the score $e(x)\n", "= P(T=1|x)$")), true},
		{"display math", notebookWith(t, markdown("$$\\hat\\tau$$")), true},
		{"bracket math", notebookWith(t, markdown(`\[ a \]`)), true},
		{"environment", notebookWith(t, markdown(`\begin{align} a \end{align}`)), true},
		{"latex output", notebookWith(t, output("text/latex", "x")), true},
		{"markdown output with math", notebookWith(t, output("text/markdown", "$a$ and $b$")), true},
		{"html output with dollars", notebookWith(t, output("text/html", "$1 and $2")), false},
		{"code cell with dollars", notebookWith(t, map[string]any{"cell_type": "code", "source": "a := \"$x$\""}), false},
		{"unreadable notebook", []byte("{"), true},
	}
	for _, c := range cases {
		if got := mayHoldMath(c.nb); got != c.want {
			t.Errorf("%s: mayHoldMath = %v, want %v", c.name, got, c.want)
		}
	}
}

func TestSelfContainedExportOptions(t *testing.T) {
	old := requireJSPaths
	t.Cleanup(func() { requireJSPaths = old })
	js := filepath.Join(t.TempDir(), "require.min.js")
	if err := os.WriteFile(js, []byte("var requirejs;"), 0o644); err != nil {
		t.Fatal(err)
	}
	requireJSPaths = []string{filepath.Join(t.TempDir(), "absent.js"), js}

	opts, notes := selfContainedExport(notebookWith(t, markdown("no math, $5 only")))
	want := []string{
		"--HTMLExporter.require_js_url=data:text/javascript;base64,dmFyIHJlcXVpcmVqczs=", // base64 of "var requirejs;"
		"--HTMLExporter.mathjax_url=" + noMathJaxURL,
	}
	if strings.Join(opts, "\n") != strings.Join(want, "\n") || len(notes) != 0 {
		t.Fatalf("options %q, notes %q; want %q and no notes", opts, notes, want)
	}

	// Math keeps nbconvert's MathJax link; a missing RequireJS keeps its link too. Both are said.
	requireJSPaths = []string{filepath.Join(t.TempDir(), "absent.js")}
	opts, notes = selfContainedExport(notebookWith(t, markdown("$a$ and $b$")))
	if len(opts) != 0 || len(notes) != 2 || !strings.Contains(notes[0], "libjs-requirejs") || !strings.Contains(notes[1], "MathJax") {
		t.Fatalf("options %q, notes %q; want none and two notes", opts, notes)
	}
}
