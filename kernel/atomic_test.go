package kernel

import (
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// A write that fails leaves the earlier file as it was and no temporary
// file behind; one that succeeds replaces it whole.
func TestWriteFileAtomic(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.json")
	if err := WriteFileAtomic(path, []byte("first"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := WriteFileAtomic(path, []byte("second"), 0o600); err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(path); string(b) != "second" {
		t.Fatalf("content %q", b)
	}
	if fi, _ := os.Stat(path); fi.Mode().Perm() != 0o600 {
		t.Errorf("mode %v", fi.Mode())
	}
	// Failures: the target is a folder; its folder is missing; its folder
	// cannot be written (a file stands where the folder should be).
	sub := filepath.Join(dir, "sub")
	os.Mkdir(sub, 0o755)
	os.WriteFile(filepath.Join(sub, "keep"), []byte("x"), 0o644)
	for _, bad := range []string{sub, filepath.Join(dir, "missing", "out.json"), filepath.Join(path, "out.json")} {
		if err := WriteFileAtomic(bad, []byte("third"), 0o644); err == nil {
			t.Errorf("%s: no error", bad)
		}
	}
	// A staged file discarded, and one whose commit fails, leave the earlier file.
	st, err := StageFile(path, []byte("fourth"), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	st.Discard()
	if b, _ := os.ReadFile(path); string(b) != "second" {
		t.Fatalf("after a discarded stage: %q", b)
	}
	st, err = StageFile(path, []byte("fifth"), 0o644)
	if err != nil {
		t.Fatal(err)
	}
	os.Remove(path)
	os.Mkdir(path, 0o755) // the target became a non-empty folder: rename fails
	os.WriteFile(filepath.Join(path, "x"), nil, 0o644)
	if err := st.Commit(); err == nil {
		t.Error("commit over a non-empty folder succeeded")
	}
	os.RemoveAll(path)
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.HasSuffix(e.Name(), ".tmp") {
			t.Errorf("temporary file %s left behind", e.Name())
		}
	}
}

func TestSamePath(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	os.WriteFile(a, []byte("x"), 0o644)
	link := filepath.Join(dir, "l.csv")
	if err := os.Symlink(a, link); err != nil {
		t.Fatal(err)
	}
	hard := filepath.Join(dir, "h.csv")
	if err := os.Link(a, hard); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		x, y string
		same bool
	}{
		{a, filepath.Join(dir, ".", "sub", "..", "a.csv"), true}, {a, link, true}, {a, hard, true},
		{a, filepath.Join(dir, "b.csv"), false}, {a, "", false},
	} {
		if got := SamePath(c.x, c.y); got != c.same {
			t.Errorf("SamePath(%s, %s) = %v", c.x, c.y, got)
		}
	}
}

func TestTerminalSafe(t *testing.T) {
	for in, want := range map[string]string{
		"plain\tline\nnext":   "plain\tline\nnext",
		"a\x1b[31mred\x1b[0m": `a\x1b[31mred\x1b[0m`,
		"cr\roverwrite\x7f":   `cr\x0doverwrite\x7f`,
		"c1 \u009b2J é":       `c1 \x9b2J é`,
	} {
		if got := TerminalSafe(in); got != want {
			t.Errorf("TerminalSafe(%q) = %q, want %q", in, got, want)
		}
	}
}

// A link is followed, not replaced; a device or named pipe is written to,
// never replaced by a regular file.
func TestWriteFileAtomicLinksAndDevices(t *testing.T) {
	dir := t.TempDir()
	real := filepath.Join(dir, "real.json")
	os.WriteFile(real, []byte("old"), 0o644)
	link := filepath.Join(dir, "link.json")
	if err := os.Symlink(real, link); err != nil {
		t.Fatal(err)
	}
	if err := WriteFileAtomic(link, []byte("new"), 0o644); err != nil {
		t.Fatal(err)
	}
	if fi, _ := os.Lstat(link); fi.Mode()&os.ModeSymlink == 0 {
		t.Error("the link was replaced by a file")
	}
	if b, _ := os.ReadFile(real); string(b) != "new" {
		t.Errorf("the linked file holds %q", b)
	}
	fifo := filepath.Join(dir, "pipe")
	if err := syscall.Mkfifo(fifo, 0o644); err != nil {
		t.Skip("no named pipes here:", err)
	}
	got := make(chan string, 1)
	go func() {
		b, _ := os.ReadFile(fifo)
		got <- string(b)
	}()
	if err := WriteFileAtomic(fifo, []byte("through the pipe"), 0o644); err != nil {
		t.Fatal(err)
	}
	if s := <-got; s != "through the pipe" {
		t.Errorf("read %q from the pipe", s)
	}
	if fi, _ := os.Lstat(fifo); fi.Mode()&os.ModeNamedPipe == 0 {
		t.Error("the named pipe was replaced by a file")
	}
	if err := WriteFileAtomic(os.DevNull, []byte("discarded"), 0o644); err != nil {
		t.Fatal(err)
	}
	if fi, _ := os.Stat(os.DevNull); fi.Mode().IsRegular() {
		t.Fatal(os.DevNull + " became a regular file")
	}
}
