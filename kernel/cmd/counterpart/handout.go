package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/counterpartlab/counterpart/kernel"
)

func init() { register(handoutCommand()) }

// solutionTag marks the cells a handout leaves out (Jupyter cell metadata
// "tags", the standard mechanism).
const solutionTag = "solution"

func handoutCommand() *command {
	c := &command{
		name:    "handout",
		summary: "make a student copy of a notebook: cells tagged \"solution\" removed, outputs cleared",
		usage:   "counterpart handout NOTEBOOK --out STUDENT.ipynb [--keep-outputs]",
		example: "counterpart handout notebooks/lab.ipynb --out lab-student.ipynb",
	}
	c.run = func(args []string) error {
		fs := newFlags(c)
		out := fs.String("out", "", "write the student copy to this file (required; never the input)")
		keep := fs.Bool("keep-outputs", false, "keep the outputs and execution counts of the cells that stay")
		pos, err := parse(c, fs, args)
		if err != nil {
			return err
		}
		if len(pos) != 1 {
			return fmt.Errorf("handout needs exactly one NOTEBOOK, got %d (see: counterpart handout --help)", len(pos))
		}
		if strings.TrimSpace(*out) == "" {
			return errors.New("missing --out STUDENT.ipynb: name the file for the student copy (see: counterpart handout --help)")
		}
		st, err := writeHandout(pos[0], *out, *keep)
		if err != nil {
			return err
		}
		fmt.Printf("wrote %s: %d of %d cells kept, %d solution cells removed", *out, st.kept, st.cells, st.removed)
		if !*keep {
			fmt.Printf(", outputs of %d code cells cleared", st.cleared)
		}
		fmt.Println()
		if st.removed == 0 {
			fmt.Fprintf(os.Stderr, "counterpart handout: no cell of %s is tagged %q, so the copy keeps every cell; tag answer cells in their metadata (\"tags\": [\"%s\"])\n", pos[0], solutionTag, solutionTag)
		}
		return nil
	}
	return c
}

// handoutStats counts what a handout did.
type handoutStats struct {
	cells, kept, removed, cleared int
}

// writeHandout reads the notebook at in and writes its handout to out,
// atomically, refusing to overwrite in.
func writeHandout(in, out string, keepOutputs bool) (handoutStats, error) {
	if err := sameFile(in, out); err != nil {
		return handoutStats{}, err
	}
	data, err := os.ReadFile(in)
	if err != nil {
		return handoutStats{}, fmt.Errorf("reading NOTEBOOK: %w", err)
	}
	res, st, err := handout(data, keepOutputs)
	if err != nil {
		return handoutStats{}, fmt.Errorf("%s: %w", in, err)
	}
	if err := kernel.WriteFileAtomic(out, res, 0o644); err != nil {
		return handoutStats{}, fmt.Errorf("--out %s: %w", out, err)
	}
	return st, nil
}

// sameFile refuses an --out that is the input, by path or as the same file
// (a link, another spelling of the path), or a folder.
func sameFile(in, out string) error {
	if kernel.SamePath(in, out) {
		return fmt.Errorf("--out %s is the input notebook (or the same file under another name); give another file for the student copy", out)
	}
	if fo, err := os.Stat(out); err == nil && fo.IsDir() {
		return fmt.Errorf("--out %s is a folder; give a file name such as %s", out, filepath.Join(out, "student.ipynb"))
	}
	return nil
}

// span is a byte range [start, end) of the input.
type span struct{ start, end int }

// member is one key of a JSON object with the span of its value.
type member struct {
	key string
	val span
}

// objectMembers lists the members of the JSON object data[at:], in order,
// with their values' spans in data, without decoding the values.
func objectMembers(data []byte, at int) ([]member, int, error) {
	dec := json.NewDecoder(bytes.NewReader(data[at:]))
	tok, err := dec.Token()
	if err != nil {
		return nil, 0, err
	}
	if d, ok := tok.(json.Delim); !ok || d != '{' {
		return nil, 0, errors.New("not a JSON object")
	}
	var ms []member
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, 0, err
		}
		key, _ := tok.(string)
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return nil, 0, err
		}
		end := at + int(dec.InputOffset())
		ms = append(ms, member{key, span{end - len(raw), end}})
	}
	if _, err := dec.Token(); err != nil {
		return nil, 0, err
	}
	return ms, at + int(dec.InputOffset()), nil
}

// arrayElements lists the spans of the elements of the JSON array data[s].
func arrayElements(data []byte, s span) ([]span, error) {
	dec := json.NewDecoder(bytes.NewReader(data[s.start:s.end]))
	tok, err := dec.Token()
	if err != nil {
		return nil, err
	}
	if d, ok := tok.(json.Delim); !ok || d != '[' {
		return nil, errors.New("not a JSON array")
	}
	var els []span
	for dec.More() {
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return nil, err
		}
		end := s.start + int(dec.InputOffset())
		els = append(els, span{end - len(raw), end})
	}
	return els, nil
}

// handout returns the notebook without its solution cells and, unless
// keepOutputs, with every "outputs" emptied and every "execution_count"
// null. Everything else — key order, formatting, metadata the command does
// not know — is copied byte for byte: the input is never decoded into
// structs and re-encoded, only cut and spliced at the spans found.
func handout(data []byte, keepOutputs bool) ([]byte, handoutStats, error) {
	var st handoutStats
	if !json.Valid(data) {
		return nil, st, errors.New("not valid JSON: is it a Jupyter notebook (.ipynb)?")
	}
	top, end, err := objectMembers(data, skipSpace(data, 0))
	if err != nil {
		return nil, st, fmt.Errorf("not a notebook: %w", err)
	}
	if rest := bytes.TrimSpace(data[end:]); len(rest) > 0 {
		return nil, st, errors.New("not a notebook: text after the top-level object")
	}
	var cells *span
	for _, m := range top {
		switch m.key {
		case "nbformat":
			var v int
			if err := json.Unmarshal(data[m.val.start:m.val.end], &v); err != nil || v != 4 {
				return nil, st, fmt.Errorf("nbformat is %s; handout reads nbformat 4 notebooks (convert with `jupyter nbconvert --to notebook`)", data[m.val.start:m.val.end])
			}
		case "cells":
			c := m.val
			cells = &c
		}
	}
	if cells == nil {
		return nil, st, errors.New("not a notebook: no \"cells\" list")
	}
	els, err := arrayElements(data, *cells)
	if err != nil {
		return nil, st, fmt.Errorf("\"cells\": %w", err)
	}
	st.cells = len(els)
	var body bytes.Buffer
	body.Write(data[:cells.start])
	body.WriteByte('[')
	keptAny := false
	for i, el := range els {
		cell, drop, cleared, err := handoutCell(data, el, keepOutputs)
		if err != nil {
			return nil, st, fmt.Errorf("cell %d: %w", i+1, err)
		}
		if drop {
			st.removed++
			continue
		}
		st.kept++
		if cleared {
			st.cleared++
		}
		// Keep the original separators: the space after '[' before the
		// first kept cell, and before each other kept cell the comma and
		// indentation that preceded it.
		if keptAny {
			body.Write(data[els[i-1].end:el.start])
		} else {
			body.Write(data[cells.start+1 : els[0].start])
		}
		body.Write(cell)
		keptAny = true
	}
	switch {
	case len(els) == 0:
		body.Write(data[cells.start+1 : cells.end-1])
	case keptAny:
		body.Write(data[els[len(els)-1].end : cells.end-1])
	}
	body.WriteByte(']')
	body.Write(data[cells.end:])
	out := body.Bytes()
	if !json.Valid(out) {
		return nil, st, errors.New("internal error: the handout is not valid JSON (please report this notebook)")
	}
	return out, st, nil
}

func skipSpace(data []byte, i int) int {
	for i < len(data) && (data[i] == ' ' || data[i] == '\t' || data[i] == '\n' || data[i] == '\r') {
		i++
	}
	return i
}

// handoutCell returns the cell's bytes (outputs cleared unless keepOutputs)
// and whether it is a solution cell.
func handoutCell(data []byte, el span, keepOutputs bool) (cell []byte, drop, cleared bool, err error) {
	ms, _, err := objectMembers(data[:el.end], el.start)
	if err != nil {
		return nil, false, false, err
	}
	type edit struct {
		at   span
		with string
	}
	var edits []edit
	for _, m := range ms {
		raw := data[m.val.start:m.val.end]
		switch m.key {
		case "metadata":
			var md struct {
				Tags json.RawMessage `json:"tags"`
			}
			if err := json.Unmarshal(raw, &md); err != nil {
				return nil, false, false, fmt.Errorf("metadata is not an object: %w", err)
			}
			if len(md.Tags) > 0 && string(md.Tags) != "null" {
				var tags []string
				if err := json.Unmarshal(md.Tags, &tags); err != nil {
					return nil, false, false, fmt.Errorf("metadata.tags is %s; it must be a list of strings", md.Tags)
				}
				for _, t := range tags {
					if t == solutionTag {
						drop = true
					}
				}
			}
		case "outputs":
			if !keepOutputs {
				edits = append(edits, edit{m.val, "[]"})
				cleared = true
			}
		case "execution_count":
			if !keepOutputs {
				edits = append(edits, edit{m.val, "null"})
			}
		}
	}
	if drop {
		return nil, true, false, nil
	}
	var b bytes.Buffer
	at := el.start
	for _, e := range edits {
		b.Write(data[at:e.at.start])
		b.WriteString(e.with)
		at = e.at.end
	}
	b.Write(data[at:el.end])
	return b.Bytes(), false, cleared, nil
}
