package kernel_test

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// notebookCell is the part of a notebook cell the lab checks read.
type notebookCell struct {
	Type     string          `json:"cell_type"`
	Source   json.RawMessage `json:"source"`
	Metadata struct {
		Tags []string `json:"tags"`
	} `json:"metadata"`
}

func (c notebookCell) text(t *testing.T) string {
	var lines []string
	if err := json.Unmarshal(c.Source, &lines); err == nil {
		return strings.Join(lines, "")
	}
	var s string
	if err := json.Unmarshal(c.Source, &s); err != nil {
		t.Fatalf("cell source is neither a string nor a list of strings: %s", c.Source)
	}
	return s
}

func (c notebookCell) solution() bool {
	for _, tag := range c.Metadata.Tags {
		if tag == "solution" {
			return true
		}
	}
	return false
}

// goProgram turns a notebook's Go cells into one program, as GoNB runs
// them: cells without %% hold declarations (imports, constants, functions)
// and stay at the top level; each %% cell becomes a function body, and main
// calls them in order. It also returns how many cells are solutions.
func goProgram(t *testing.T, cells []notebookCell) (src string, solutions int) {
	t.Helper()
	var decls, funcs, calls strings.Builder
	decls.WriteString("package main\n\n")
	for i, c := range cells {
		if c.solution() {
			solutions++
		}
		if c.Type != "code" {
			continue
		}
		s := c.text(t)
		body, isMain := strings.CutPrefix(s, "%%\n")
		if !isMain {
			if c.solution() {
				// A handout drops solution cells; a declaration there would
				// leave the student copy unable to compile.
				t.Errorf("cell %d is a solution but declares at the top level; make it a %%%% cell", i+1)
			}
			decls.WriteString(s + "\n\n")
			continue
		}
		fmt.Fprintf(&funcs, "func cell%d() {\n%s\n}\n\n", i+1, body)
		fmt.Fprintf(&calls, "\tfmt.Println(\"== cell %d\")\n\tcell%d()\n", i+1, i+1)
	}
	src = decls.String()
	src = strings.Replace(src, "import (", "import (\n\t\"fmt\"", 1)
	return src + funcs.String() + "func main() {\n" + calls.String() + "}\n", solutions
}

// TestLabNotebookCellsRun compiles the code cells of notebooks/lab.ipynb
// as one program and runs it outside a notebook (where kernel.Show prints
// the text faces and, with COUNTERPART_HTML, writes a page): every cell
// must compile and run without showing an error, and the page must hold
// the charts the lab draws. The end-to-end test executes the notebook and
// its handout on the real kernel.
func TestLabNotebookCellsRun(t *testing.T) {
	if testing.Short() {
		t.Skip("builds and runs the lab's cells (about 30 s); skipped with -short")
	}
	raw, err := os.ReadFile(filepath.Join("..", "notebooks", "lab.ipynb"))
	if err != nil {
		t.Fatal(err)
	}
	var nb struct {
		Cells []notebookCell `json:"cells"`
	}
	if err := json.Unmarshal(raw, &nb); err != nil {
		t.Fatalf("lab.ipynb is not valid JSON: %v", err)
	}
	src, solutions := goProgram(t, nb.Cells)
	if solutions < 3 {
		t.Errorf("the lab has %d solution cells; each of its three exercises needs one", solutions)
	}
	dir, err := os.MkdirTemp("testdata", ".labcells-")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { os.RemoveAll(dir) })
	if err := os.WriteFile(filepath.Join(dir, "main.go"), []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	page := filepath.Join(t.TempDir(), "lab.html")
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, "go", "run", "./"+filepath.ToSlash(dir))
	// Outside a notebook: without GoNB's variables (a test of Show may have
	// set them in this process), which would make the program wait for a kernel.
	var env []string
	for _, kv := range os.Environ() {
		if !strings.HasPrefix(kv, "GONB_") {
			env = append(env, kv)
		}
	}
	cmd.Env = append(env, "COUNTERPART_HTML="+page, "COUNTERPART_ECHARTS="+filepath.Join(t.TempDir(), "none.js"))
	out, err := cmd.CombinedOutput()
	t.Logf("output of the lab's cells:\n%s", out)
	if err != nil {
		t.Fatalf("the lab's cells do not compile or run: %v\nprogram:\n%s", err, src)
	}
	if strings.Contains(string(out), "error: ") {
		t.Errorf("a cell showed an error")
	}
	html, err := os.ReadFile(page)
	if err != nil {
		t.Fatal(err)
	}
	// Erosion 1, extrapolation 2 and the fitted lines 1, trimming 2.
	if n := strings.Count(string(html), `<div class="cp-chart" `); n != 6 {
		t.Errorf("the lab's page holds %d charts; want 6", n)
	}
	if strings.Contains(string(html), `class="cp-error"`) {
		t.Error("the lab's page shows an error panel")
	}

	// The student copy (solution cells left out, as counterpart handout
	// does) must compile on its own: no import or name only a solution used.
	var student []notebookCell
	for _, c := range nb.Cells {
		if !c.solution() {
			student = append(student, c)
		}
	}
	hsrc, _ := goProgram(t, student)
	hdir := filepath.Join(dir, "handout")
	if err := os.Mkdir(hdir, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(hdir, "main.go"), []byte(hsrc), 0o644); err != nil {
		t.Fatal(err)
	}
	vet := exec.CommandContext(ctx, "go", "vet", "./"+filepath.ToSlash(hdir))
	vet.Env = env
	if out, err := vet.CombinedOutput(); err != nil {
		t.Errorf("the student copy of the lab does not compile: %v\n%s", err, out)
	}
}
