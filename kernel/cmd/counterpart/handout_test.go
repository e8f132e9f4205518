package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// unusualNotebook has what real notebooks carry and a careless rewrite
// would lose or reorder: keys in an uncommon order, unknown top-level and
// cell fields, escaped characters, a "tags" key nested where it is not a
// cell tag, a solution tag among others, attachments, and compact and
// indented formatting mixed.
const unusualNotebook = `{
  "metadata": {"zeta": 1, "alpha": {"tags": ["solution"]}, "kernelspec": {"name": "counterpart", "display_name": "Go · counterpart", "language": "go"}},
  "nbformat_minor": 5,
  "x-extension": {"keep": [1, 2.50, "\u00e9\u2028"]},
  "cells": [
    {"source": ["# Title \u003cb\u003e\n"], "cell_type": "markdown", "metadata": {}, "id": "a1", "attachments": {"p.png": {"image/png": "iVBORw0KGgo="}}},
    {
     "cell_type": "code",
     "execution_count": 7,
     "id": "b2",
     "metadata": {"scrolled": true, "tags": ["parameters"]},
     "outputs": [{"output_type": "stream", "name": "stdout", "text": ["solution: 42\n"]}],
     "source": ["%%\nfmt.Println(42)"]
    },
    {"cell_type": "markdown", "id": "c3", "metadata": {"tags": ["exercise", "solution"], "extra": null}, "source": "The answer is 42."},
    {"cell_type":"code","id":"d4","metadata":{"tags":[]},"source":[],"outputs":[],"execution_count":null},
    {"cell_type": "code", "id": "e5", "metadata": {"tags": ["solution"]}, "source": ["%%\nanswer()"], "outputs": [{"output_type": "error", "ename": "x", "evalue": "y", "traceback": []}], "execution_count": 9},
    {"outputs": [{"data": {"text/plain": ["1"]}, "metadata": {}, "output_type": "execute_result", "execution_count": 3}], "metadata": {"custom": {"tags": "not a cell tag"}}, "execution_count": 3, "cell_type": "code", "id": "f6", "source": "x"}
  ],
  "nbformat": 4
}
`

func decodeAny(t *testing.T, b []byte) map[string]any {
	t.Helper()
	var v map[string]any
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, b)
	}
	return v
}

// expectedHandout is the JSON comparison: the input decoded, solution
// cells dropped, outputs emptied and counts nulled in the code cells.
func expectedHandout(t *testing.T, in []byte, keep bool) map[string]any {
	t.Helper()
	v := decodeAny(t, in)
	var cells []any
	for _, c := range v["cells"].([]any) {
		m := c.(map[string]any)
		md, _ := m["metadata"].(map[string]any)
		tags, _ := md["tags"].([]any)
		solution := false
		for _, tag := range tags {
			solution = solution || tag == "solution"
		}
		if solution {
			continue
		}
		if !keep {
			if _, ok := m["outputs"]; ok {
				m["outputs"] = []any{}
			}
			if _, ok := m["execution_count"]; ok {
				m["execution_count"] = nil
			}
		}
		cells = append(cells, m)
	}
	v["cells"] = cells
	return v
}

func TestHandoutRemovesSolutionsKeepsTheRest(t *testing.T) {
	real, err := os.ReadFile("../../testdata/failing.executed.ipynb")
	if err != nil {
		t.Fatal(err)
	}
	for name, in := range map[string][]byte{"unusual": []byte(unusualNotebook), "executed": real} {
		for _, keep := range []bool{false, true} {
			out, st, err := handout(in, keep)
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			got, want := decodeAny(t, out), expectedHandout(t, in, keep)
			if !reflect.DeepEqual(got, want) {
				t.Errorf("%s (keep %v): handout differs from the input minus solutions:\n%s", name, keep, out)
			}
			if st.kept+st.removed != st.cells {
				t.Errorf("%s: counts %+v", name, st)
			}
		}
	}
	out, st, err := handout([]byte(unusualNotebook), false)
	if err != nil {
		t.Fatal(err)
	}
	if st.cells != 6 || st.removed != 2 || st.kept != 4 || st.cleared != 3 {
		t.Errorf("counts %+v; want 6 cells, 2 removed, 4 kept, 3 cleared", st)
	}
	s := string(out)
	for _, gone := range []string{`"c3"`, `"e5"`, "The answer is 42", "solution: 42", `"execution_count": 7`} {
		if strings.Contains(s, gone) {
			t.Errorf("handout still holds %s", gone)
		}
	}
	// Byte for byte: escapes, key order, formatting and unknown fields as
	// written (the top-level "tags" under metadata.alpha is not a cell's).
	for _, kept := range []string{
		`"metadata": {"zeta": 1, "alpha": {"tags": ["solution"]}, "kernelspec"`,
		`"x-extension": {"keep": [1, 2.50, "\u00e9\u2028"]},`,
		`{"source": ["# Title \u003cb\u003e\n"], "cell_type": "markdown", "metadata": {}, "id": "a1", "attachments": {"p.png": {"image/png": "iVBORw0KGgo="}}},`,
		"{\n     \"cell_type\": \"code\",\n     \"execution_count\": null,\n     \"id\": \"b2\",",
		`"metadata": {"scrolled": true, "tags": ["parameters"]},` + "\n     \"outputs\": [],",
		`{"cell_type":"code","id":"d4","metadata":{"tags":[]},"source":[],"outputs":[],"execution_count":null},`,
		`{"outputs": [], "metadata": {"custom": {"tags": "not a cell tag"}}, "execution_count": null, "cell_type": "code", "id": "f6", "source": "x"}` + "\n  ],\n  \"nbformat\": 4\n}\n",
	} {
		if !strings.Contains(s, kept) {
			t.Errorf("handout lost the bytes %q:\n%s", kept, s)
		}
	}
	// Nothing to remove and outputs kept: the very same bytes.
	same, _, err := handout(real, true)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(same, real) {
		t.Error("with --keep-outputs and no solution cell the handout should equal the input byte for byte")
	}
	// Every cell a solution: an empty list.
	all := strings.NewReplacer(`"tags": ["parameters"]`, `"tags": ["solution"]`, `"tags":[]`, `"tags":["solution"]`,
		`{"source": ["# Title`, `{"metadata": {"tags": ["solution"]}, "source": ["# Title`, `"metadata": {}, "id": "a1"`, `"id": "a1"`,
		`"metadata": {"custom"`, `"metadata": {"tags": ["solution"], "custom"`).Replace(unusualNotebook)
	none, st, err := handout([]byte(all), false)
	if err != nil {
		t.Fatal(err)
	}
	if st.kept != 0 || !reflect.DeepEqual(decodeAny(t, none)["cells"], []any{}) {
		t.Errorf("all-solution notebook: %+v\n%s", st, none)
	}
}

func TestHandoutRefusesBadNotebooks(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{`{"cells": [], "nbformat": 3}`, "nbformat is 3"},
		{`[1, 2]`, "not a notebook"},
		{`{"nbformat": 4}`, `no "cells"`},
		{`{"nbformat": 4, "cells": {}}`, "not a JSON array"},
		{`{"nbformat": 4, "cells": [{"metadata": {"tags": "solution"}}]}`, "cell 1: metadata.tags is \"solution\""},
		{`{"nbformat": 4, "cells": [{"metadata": 5}]}`, "cell 1: metadata is not an object"},
		{`{"nbformat": 4, "cells": [1]}`, "cell 1: not a JSON object"},
		{`{"nbformat": 4, "cells": [`, "not valid JSON"},
	} {
		_, _, err := handout([]byte(c.in), false)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: error %v; want %q", c.in, err, c.want)
		}
	}
}

func TestHandoutCommand(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "lab.ipynb")
	if err := os.WriteFile(in, []byte(unusualNotebook), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "student.ipynb")
	r := runCmd(t, "handout", in, "--out", out)
	if r.code != 0 || !strings.Contains(r.stdout, "2 solution cells removed") {
		t.Fatalf("handout: exit %d\n%s%s", r.code, r.stdout, r.stderr)
	}
	got, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(decodeAny(t, got), expectedHandout(t, []byte(unusualNotebook), false)) {
		t.Errorf("written handout differs:\n%s", got)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 2 {
		t.Errorf("the folder holds %d files; a temporary file was left behind", len(entries))
	}
	if err := os.Symlink(in, filepath.Join(dir, "link.ipynb")); err != nil {
		t.Fatal(err)
	}
	if err := os.Link(in, filepath.Join(dir, "hard.ipynb")); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"handout", in, "--out", in}, "--out " + in + " is the input notebook"},
		{[]string{"handout", in, "--out", dir + "/./sub/../lab.ipynb"}, "is the input notebook"},
		{[]string{"handout", in, "--out", filepath.Join(dir, "link.ipynb")}, "the same file under another name"},
		{[]string{"handout", in, "--out", filepath.Join(dir, "hard.ipynb")}, "the same file under another name"},
		{[]string{"handout", in, "--out", dir}, "is a folder"},
		{[]string{"handout", in}, "missing --out"},
		{[]string{"handout", "--out", out}, "exactly one NOTEBOOK, got 0"},
		{[]string{"handout", in, in, "--out", out}, "exactly one NOTEBOOK, got 2"},
		{[]string{"handout", filepath.Join(dir, "none.ipynb"), "--out", out}, "reading NOTEBOOK"},
		{[]string{"handout", in, "--out", filepath.Join(dir, "no-such-dir", "s.ipynb")}, "--out " + filepath.Join(dir, "no-such-dir", "s.ipynb")},
		{[]string{"handout", in, "--out", out, "--keep"}, "flag provided but not defined: --keep"},
	} {
		r := runCmd(t, c.args...)
		if r.code != 1 || !strings.Contains(r.stderr, c.want) {
			t.Errorf("%q: exit %d, stderr %q; want exit 1 and %q", c.args, r.code, r.stderr, c.want)
		}
	}
	// The input was never touched.
	if b, _ := os.ReadFile(in); string(b) != unusualNotebook {
		t.Error("the input notebook changed")
	}
	// No solution cell: a warning, and the copy keeps every cell.
	plain := filepath.Join(dir, "plain.ipynb")
	os.WriteFile(plain, []byte(`{"cells": [{"cell_type": "markdown", "metadata": {}, "source": "hi"}], "metadata": {}, "nbformat": 4, "nbformat_minor": 5}`), 0o644)
	r = runCmd(t, "handout", plain, "--out", filepath.Join(dir, "plain-student.ipynb"), "--keep-outputs")
	if r.code != 0 || !strings.Contains(r.stderr, `no cell of`) || strings.Contains(r.stdout, "cleared") {
		t.Errorf("plain: exit %d\n%s%s", r.code, r.stdout, r.stderr)
	}
}
