package jupyter

import (
	"context"
	"encoding/base64"
	"encoding/json"
	"fmt"
	"html"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"time"

	"github.com/counterpartlab/counterpart/kernel"
	"github.com/counterpartlab/counterpart/widgets"
)

// RunOptions configures Run. Zero values choose the defaults.
type RunOptions struct {
	Notebook    string        // the .ipynb to execute
	HTML        string        // where to write the HTML export ("" = none)
	Executed    string        // where to keep the executed notebook ("" = temporary)
	KernelName  string        // default DefaultKernelName
	CellTimeout time.Duration // per cell; default 15 minutes (the first cell compiles the imports)
	Out         io.Writer     // progress lines; default os.Stdout
}

// CellError is a notebook cell that failed.
type CellError struct {
	Cell           int    // 1-based position among all cells of the notebook
	ExecutionCount int    // the "In [n]" number, 0 when the cell did not run
	Source         string // first line of the cell's source
	Message        string // what the kernel reported
}

// CellErrors is returned by Run when cells failed.
type CellErrors []CellError

func (ce CellErrors) Error() string {
	var b strings.Builder
	if len(ce) == 1 {
		b.WriteString("1 cell failed:")
	} else {
		fmt.Fprintf(&b, "%d cells failed:", len(ce))
	}
	for _, e := range ce {
		fmt.Fprintf(&b, "\ncell %d", e.Cell)
		if e.ExecutionCount > 0 {
			fmt.Fprintf(&b, " (In [%d])", e.ExecutionCount)
		}
		fmt.Fprintf(&b, " %q:\n    %s", e.Source, indent(e.Message))
	}
	return b.String()
}

func indent(s string) string { return strings.ReplaceAll(s, "\n", "\n    ") }

// RunResult tells what Run did.
type RunResult struct {
	Cells    int           // code cells executed
	Duration time.Duration // time spent executing
	HTML     string        // path of the HTML export, if asked
}

// Run executes a notebook headless with the counterpart kernel through
// `jupyter nbconvert --execute`, then exports it to HTML when asked. Every
// cell runs even after one fails; any cell error makes Run return CellErrors
// naming the cells (the HTML is still written, to look at).
func Run(ctx context.Context, o RunOptions) (*RunResult, error) {
	if o.Out == nil {
		o.Out = os.Stdout
	}
	if o.KernelName == "" {
		o.KernelName = DefaultKernelName
	}
	if o.CellTimeout <= 0 {
		o.CellTimeout = 15 * time.Minute
	}
	nb, err := filepath.Abs(o.Notebook)
	if err != nil {
		return nil, err
	}
	if !fileExists(nb) {
		return nil, fmt.Errorf("notebook %s not found", o.Notebook)
	}
	if err := checkOutputs(o); err != nil {
		return nil, err
	}
	jupyterCmd, err := findJupyter()
	if err != nil {
		return nil, err
	}
	if _, err := output(ctx, "", nil, jupyterCmd, "nbconvert", "--version"); err != nil {
		return nil, fmt.Errorf("jupyter nbconvert does not run (%s): %s", firstLine(err.Error()), aptJupyter)
	}
	if err := checkKernelInstalled(ctx, jupyterCmd, o.KernelName); err != nil {
		return nil, err
	}

	tmp, err := os.MkdirTemp("", "counterpart-run-")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(tmp)
	name := strings.TrimSuffix(filepath.Base(nb), filepath.Ext(nb))
	executed := filepath.Join(tmp, name+".ipynb")

	fmt.Fprintf(o.Out, "executing %s with kernel %q ...\n", o.Notebook, o.KernelName)
	t0 := time.Now()
	_, err = output(ctx, filepath.Dir(nb), nil, jupyterCmd, "nbconvert",
		"--to", "notebook", "--execute", "--allow-errors",
		"--ExecutePreprocessor.kernel_name="+o.KernelName,
		fmt.Sprintf("--ExecutePreprocessor.timeout=%d", int(o.CellTimeout.Seconds())),
		"--ExecutePreprocessor.startup_timeout=120",
		"--output-dir", tmp, "--output", name,
		nb)
	if err != nil {
		return nil, fmt.Errorf("executing %s failed: %w", o.Notebook, err)
	}
	res := &RunResult{Duration: time.Since(t0)}

	data, err := os.ReadFile(executed)
	if err != nil {
		return nil, fmt.Errorf("nbconvert wrote no executed notebook: %w", err)
	}
	cellErrs, codeCells, err := ScanNotebook(data)
	if err != nil {
		return nil, fmt.Errorf("reading the executed notebook: %w", err)
	}
	res.Cells = codeCells
	fmt.Fprintf(o.Out, "executed %d code cells in %s, %d failed\n", codeCells, res.Duration.Round(100*time.Millisecond), len(cellErrs))

	// Every output is staged beside its target first and put in place only
	// when all are ready and the run was not interrupted: earlier files are
	// replaced whole or not at all.
	var staged []*kernel.StagedFile
	defer func() {
		for _, st := range staged {
			st.Discard()
		}
	}()
	stage := func(flag, path string, data []byte) error {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			return fmt.Errorf("%s %s: %w", flag, path, err)
		}
		st, err := kernel.StageFile(path, data, 0o644)
		if err != nil {
			return fmt.Errorf("%s %s: %w", flag, path, err)
		}
		staged = append(staged, st)
		return nil
	}
	if o.Executed != "" {
		if err := stage("--executed", o.Executed, data); err != nil {
			return nil, err
		}
	}
	var notes []string
	if o.HTML != "" {
		var opts []string
		opts, notes = selfContainedExport(data)
		page, err := exportHTML(ctx, jupyterCmd, executed, opts)
		if err != nil {
			return nil, err
		}
		if res.HTML, err = filepath.Abs(o.HTML); err != nil {
			return nil, err
		}
		if err := stage("--html", res.HTML, page); err != nil {
			return nil, err
		}
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	for len(staged) > 0 {
		st := staged[0]
		if err := st.Commit(); err != nil {
			return nil, err
		}
		staged = staged[1:]
	}
	if res.HTML != "" {
		fmt.Fprintf(o.Out, "HTML written to %s\n", res.HTML)
		for _, n := range notes {
			fmt.Fprintf(o.Out, "note: %s\n", n)
		}
	}
	if len(cellErrs) > 0 {
		return res, cellErrs
	}
	return res, nil
}

func checkKernelInstalled(ctx context.Context, jupyterCmd, name string) error {
	out, err := output(ctx, "", nil, jupyterCmd, "kernelspec", "list", "--json")
	if err != nil {
		return fmt.Errorf("cannot list Jupyter kernels (%s): %s", firstLine(err.Error()), aptJupyter)
	}
	var list struct {
		Kernelspecs map[string]json.RawMessage `json:"kernelspecs"`
	}
	if err := json.Unmarshal(out, &list); err != nil {
		return fmt.Errorf("reading `jupyter kernelspec list --json`: %w", err)
	}
	if _, ok := list.Kernelspecs[name]; !ok {
		return fmt.Errorf("kernel %q is not installed: run `counterpart setup` first", name)
	}
	return nil
}

// requireJSPaths are where Debian's libjs-requirejs (a dependency of its
// jupyter-nbconvert) places RequireJS; nbconvert's HTML template links it.
var requireJSPaths = []string{"/usr/share/javascript/requirejs/require.min.js"}

const aptRequireJS = "apt-get install -y libjs-requirejs"

// noMathJaxURL replaces MathJax in an export without math: an empty script,
// so the page loads nothing from outside (the template's MathJax settings
// check window.MathJax and do nothing without it).
const noMathJaxURL = "data:text/javascript,//%20no%20math%20in%20this%20notebook"

// selfContainedExport returns nbconvert options that keep the HTML export
// free of references to files outside it, and notes on what could not be
// kept inside. nbconvert's HTML template links RequireJS and MathJax (to
// file:///usr/share/javascript on Debian, to a CDN elsewhere):
//   - RequireJS (26 kB) is inlined as a data: URL, so outputs that expect an
//     AMD loader find it as in the notebook;
//   - MathJax (a folder of files, loaded piecemeal) cannot be inlined; it is
//     left out when no markdown holds math, and linked as nbconvert does
//     otherwise.
func selfContainedExport(notebook []byte) (opts, notes []string) {
	found := false
	for _, p := range requireJSPaths {
		js, err := os.ReadFile(p)
		if err != nil || len(js) == 0 {
			continue
		}
		opts = append(opts, "--HTMLExporter.require_js_url=data:text/javascript;base64,"+base64.StdEncoding.EncodeToString(js))
		found = true
		break
	}
	if !found {
		notes = append(notes, "RequireJS not found at "+strings.Join(requireJSPaths, ", ")+
			", so the HTML links it where nbconvert's template says ("+aptRequireJS+" to inline it)")
	}
	if mayHoldMath(notebook) {
		notes = append(notes, "the notebook's markdown holds math, so the HTML links MathJax where nbconvert's template says; "+
			"math shows as TeX source where that is not reachable")
	} else {
		opts = append(opts, "--HTMLExporter.mathjax_url="+noMathJaxURL)
	}
	return opts, notes
}

// mayHoldMath reports whether a markdown cell or a markdown/LaTeX output of
// the notebook may hold math that MathJax would typeset: a LaTeX output,
// "$$", "\(", "\[", "\begin{", or two unescaped "$" in one text (one "$", as
// in a price, is not math). It errs towards true; an unreadable notebook
// counts as holding math.
func mayHoldMath(notebook []byte) bool {
	var nb struct {
		Cells []struct {
			CellType string          `json:"cell_type"`
			Source   json.RawMessage `json:"source"`
			Outputs  []struct {
				Data map[string]json.RawMessage `json:"data"`
			} `json:"outputs"`
		} `json:"cells"`
	}
	if err := json.Unmarshal(notebook, &nb); err != nil {
		return true
	}
	for _, c := range nb.Cells {
		if c.CellType == "markdown" && textHoldsMath(multiline(c.Source)) {
			return true
		}
		for _, o := range c.Outputs {
			if _, ok := o.Data["text/latex"]; ok {
				return true
			}
			if md, ok := o.Data["text/markdown"]; ok && textHoldsMath(multiline(md)) {
				return true
			}
		}
	}
	return false
}

func textHoldsMath(s string) bool {
	for _, d := range []string{"$$", `\(`, `\[`, `\begin{`} {
		if strings.Contains(s, d) {
			return true
		}
	}
	dollars := 0
	for i := 0; i < len(s); i++ {
		if s[i] == '$' && (i == 0 || s[i-1] != '\\') {
			dollars++
		}
	}
	return dollars >= 2
}

// exportHTML converts the executed notebook to HTML beside it (in Run's
// temporary folder), passing extra options to nbconvert, and returns the page.
func exportHTML(ctx context.Context, jupyterCmd, executed string, extra []string) ([]byte, error) {
	dir := filepath.Dir(executed)
	base := strings.TrimSuffix(filepath.Base(executed), filepath.Ext(executed)) + ".export"
	args := append([]string{"nbconvert", "--to", "html", "--output-dir", dir, "--output", base}, extra...)
	if _, err := output(ctx, dir, nil, jupyterCmd, append(args, executed)...); err != nil {
		return nil, fmt.Errorf("exporting HTML: %w", err)
	}
	return os.ReadFile(filepath.Join(dir, base+".html"))
}

// checkOutputs refuses an output on top of the notebook or of the other
// output, naming the flags.
func checkOutputs(o RunOptions) error {
	outs := []struct{ flag, path string }{{"--html", o.HTML}, {"--executed", o.Executed}}
	for i, a := range outs {
		if kernel.SamePath(a.path, o.Notebook) {
			return fmt.Errorf("%s %s is the notebook itself: choose another path, or the notebook would be overwritten", a.flag, a.path)
		}
		for _, b := range outs[i+1:] {
			if kernel.SamePath(a.path, b.path) {
				return fmt.Errorf("%s and %s are the same file %s: give each its own path", a.flag, b.flag, a.path)
			}
		}
	}
	return nil
}

type notebookJSON struct {
	Cells []struct {
		CellType       string          `json:"cell_type"`
		Source         json.RawMessage `json:"source"`
		ExecutionCount *int            `json:"execution_count"`
		Outputs        []struct {
			OutputType string                     `json:"output_type"`
			Name       string                     `json:"name"`
			Text       json.RawMessage            `json:"text"`
			Data       map[string]json.RawMessage `json:"data"`
			Metadata   map[string]json.RawMessage `json:"metadata"`
			EName      string                     `json:"ename"`
			EValue     string                     `json:"evalue"`
			Traceback  []string                   `json:"traceback"`
		} `json:"outputs"`
	} `json:"cells"`
}

// multiline decodes nbformat's "string or list of strings".
func multiline(raw json.RawMessage) string {
	if len(raw) == 0 {
		return ""
	}
	var s string
	if json.Unmarshal(raw, &s) == nil {
		return s
	}
	var parts []string
	if json.Unmarshal(raw, &parts) == nil {
		return strings.Join(parts, "")
	}
	return ""
}

var (
	ansi = regexp.MustCompile(`\x1b\[[0-9;]*[A-Za-z]`)
	// GoNB's HTML report of a compile error: an optional cell/line badge, the
	// file location, then the compiler's message.
	gonbErrLine = regexp.MustCompile(`(?:<span class="gonb-cell-line-info">([^<]*)</span>\s*)?<span class="gonb-err-location">[^<]*</span>([^<\n]*)`)
	// The last stderr line GoNB writes when the cell's program exits non-zero.
	exitLine = regexp.MustCompile(`^(exit status \d+|signal: [a-z ]+)$`)
)

// ScanNotebook finds the failed cells of an executed notebook. GoNB reports
// failures in two ways:
//   - a compile error: an HTML display (class gonb-err-location, holding the
//     compiler's messages) followed by an "error" output that only says the
//     build failed;
//   - a program that exits non-zero (a panic, log.Fatal, os.Exit(1)): no
//     "error" output at all, only the program's stderr followed by GoNB's
//     own stderr line "exit status N".
//
// A cell that showed an error panel (a failed result displayed by
// kernel.Show or a widgets view; see widgets.ErrorMarker) ran to the end but
// counts as failed too, with the panel's message.
//
// All count as failures; the message gathers the compiler's lines or the
// panic, with the cell and line GoNB attributes them to.
func ScanNotebook(data []byte) (CellErrors, int, error) {
	var nb notebookJSON
	if err := json.Unmarshal(data, &nb); err != nil {
		return nil, 0, err
	}
	var errs CellErrors
	code := 0
	for i, c := range nb.Cells {
		if c.CellType != "code" {
			continue
		}
		code++
		var stderr strings.Builder
		var compile, failure []string
		for _, out := range c.Outputs {
			switch out.OutputType {
			case "stream":
				if out.Name == "stderr" {
					stderr.WriteString(multiline(out.Text))
				}
			case "display_data", "execute_result":
				h := multiline(out.Data["text/html"])
				if strings.Contains(h, "gonb-err-location") {
					compile = append(compile, gonbCompileErrors(h)...)
				}
				for _, m := range shownErrors(out.Metadata, h) {
					failure = append(failure, "error panel: "+m)
				}
			case "error":
				msg := strings.TrimSpace(ansi.ReplaceAllString(out.EValue, ""))
				if msg == "" {
					msg = out.EName
				}
				if msg == "" && len(out.Traceback) > 0 {
					msg = strings.TrimSpace(ansi.ReplaceAllString(strings.Join(out.Traceback, "\n"), ""))
				}
				failure = append(failure, msg)
			}
		}
		errText := strings.TrimSpace(ansi.ReplaceAllString(stderr.String(), ""))
		exited := exitLine.MatchString(lastLine(errText))
		if len(failure) == 0 && len(compile) == 0 && !exited {
			continue
		}
		var msg []string
		msg = append(msg, compile...)
		if len(compile) == 0 {
			msg = append(msg, failure...)
		}
		if errText != "" {
			msg = append(msg, summarizeStderr(errText))
		}
		e := CellError{Cell: i + 1, Source: firstSourceLine(multiline(c.Source)), Message: strings.Join(msg, "\n")}
		if c.ExecutionCount != nil {
			e.ExecutionCount = *c.ExecutionCount
		}
		errs = append(errs, e)
	}
	return errs, code, nil
}

// shownErrors returns the messages of the error panels a display showed (a
// failed result shown with kernel.Show or a widgets view): those listed in
// its metadata under kernel.ErrorsMetadataKey, else those found in its HTML
// by widgets.ErrorMarker. Control characters are kept out of the terminal.
func shownErrors(meta map[string]json.RawMessage, h string) []string {
	var msgs []string
	if raw, ok := meta[kernel.ErrorsMetadataKey]; !ok || json.Unmarshal(raw, &msgs) != nil || len(msgs) == 0 {
		msgs = widgets.ErrorPanelMessages(h)
	}
	for i, m := range msgs {
		msgs[i] = kernel.TerminalSafe(m)
	}
	return msgs
}

// gonbCompileErrors turns GoNB's HTML compile-error report into lines like
// "Cell[2]: Line 2: undefined: x".
func gonbCompileErrors(h string) []string {
	var lines []string
	for _, m := range gonbErrLine.FindAllStringSubmatch(h, -1) {
		msg := strings.TrimSpace(html.UnescapeString(m[2]))
		if where := strings.TrimSpace(html.UnescapeString(m[1])); where != "" {
			msg = where + ": " + msg
		}
		lines = append(lines, msg)
	}
	if len(lines) == 0 {
		lines = append(lines, "compile error (see the cell's output)")
	}
	return lines
}

// summarizeStderr keeps what matters of a failed program's stderr: from a
// panic, its message and the first frame GoNB maps to a cell; otherwise the
// last lines.
func summarizeStderr(s string) string {
	lines := strings.Split(s, "\n")
	for i, l := range lines {
		if !strings.HasPrefix(l, "panic: ") {
			continue
		}
		keep := []string{l}
		for _, f := range lines[i+1:] {
			if strings.Contains(f, "[[ Cell [") {
				keep = append(keep, "at "+strings.TrimSpace(f))
				break
			}
		}
		if last := strings.TrimSpace(lines[len(lines)-1]); last != l {
			keep = append(keep, last)
		}
		return strings.Join(keep, "\n")
	}
	return tail(s, 20)
}

func lastLine(s string) string {
	s = strings.TrimSpace(s)
	if i := strings.LastIndexByte(s, '\n'); i >= 0 {
		s = s[i+1:]
	}
	return strings.TrimSpace(s)
}

func firstSourceLine(src string) string {
	for _, l := range strings.Split(src, "\n") {
		if l = strings.TrimSpace(l); l != "" && l != "%%" {
			if len(l) > 60 {
				l = l[:57] + "..."
			}
			return l
		}
	}
	return "empty cell"
}
