package causal

import (
	"encoding/json"
	"fmt"
	"os"
	"runtime"
	"strconv"
	"strings"
	"testing"
)

// frameDump is a byte-exact description of a loaded frame: every column's
// kind, levels, codes, numbers (as shortest text) and read problem.
func frameDump(t *testing.T, f *Frame) []byte {
	t.Helper()
	type col struct {
		Name    string
		Kind    string
		Levels  []string `json:",omitempty"`
		Codes   []int32  `json:",omitempty"`
		Num     []string `json:",omitempty"`
		Missing int
		Err     string `json:",omitempty"`
	}
	var cols []col
	for _, name := range f.Names() {
		c, err := f.Column(name)
		if err != nil {
			t.Fatal(err)
		}
		o := col{Name: c.Name, Kind: c.Kind.String(), Levels: c.Levels, Codes: c.Codes, Missing: c.Missing}
		for _, v := range c.Num {
			o.Num = append(o.Num, strconv.FormatFloat(v, 'g', -1, 64))
		}
		if c.Err() != nil {
			o.Err = c.Err().Error()
		}
		cols = append(cols, o)
	}
	b, err := json.Marshal(struct {
		Rows int
		Cols []col
	}{f.Rows(), cols})
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// labelFile writes a file over 1 MiB with no quotes (so the parallel reader
// cuts it), in which the text column "code" holds number-like labels at the
// batch boundaries and one plainly textual label far from them.
func labelFile(t *testing.T, rows int) (string, map[int]string) {
	t.Helper()
	special := map[int]string{}
	for _, r := range []int{1, csvBatch - 1, csvBatch, csvBatch + 1, 2 * csvBatch, 2*csvBatch + 1, 3 * csvBatch, rows / 2, rows / 3, rows} {
		special[r] = ""
	}
	labels := []string{"007", "1.50", "0042", "NaN", "1e3", "-0", "+5", "Inf", ".5", "0x10"}
	k := 0
	for _, r := range []int{1, csvBatch - 1, csvBatch, csvBatch + 1, 2 * csvBatch, 2*csvBatch + 1, 3 * csvBatch, rows / 2, rows / 3, rows} {
		special[r] = labels[k%len(labels)]
		k++
	}
	special[rows-7] = "A12" // the only plainly textual label, late in the file
	var b strings.Builder
	b.WriteString("x,code,t,y,w1,w2\n")
	for i := 1; i <= rows; i++ {
		code := strconv.Itoa(i % 9) // numbers everywhere else
		if s, ok := special[i]; ok {
			code = s
		}
		fmt.Fprintf(&b, "%d.5,%s,%d,%d,%d.123456789,%d.987654321\n", i%101, code, i%2, i%13, i, i*7)
	}
	if b.Len() < 1<<20 {
		t.Fatalf("file is %d bytes: too small for the parallel reader", b.Len())
	}
	path := t.TempDir() + "/labels.csv"
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path, special
}

// TestKindDecidedOnceForFile: a column holding one text label is text in
// every row, whatever the batch and core count, and each level keeps the
// exact text of the file ("007" stays "007", "1.50" stays "1.50").
func TestKindDecidedOnceForFile(t *testing.T) {
	rows := 4*csvBatch + 123
	path, special := labelFile(t, rows)
	var first []byte
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 3, 8} {
		runtime.GOMAXPROCS(procs)
		f, err := ReadCSV(path)
		if err != nil {
			t.Fatal(err)
		}
		c, _ := f.Column("code")
		if c.Kind != Categorical {
			t.Fatalf("GOMAXPROCS %d: code is %v", procs, c.Kind)
		}
		for r, want := range special {
			if got := c.Levels[c.Codes[r-1]]; got != want {
				t.Errorf("GOMAXPROCS %d: row %d reads %q, want %q", procs, r, got, want)
			}
		}
		if got := c.Levels[c.Codes[1]]; got != "2" {
			t.Errorf("row 2 reads %q, want \"2\"", got)
		}
		x, _ := f.Column("x")
		if x.Kind != Numeric || x.Num[rows-1] != float64(rows%101)+0.5 {
			t.Errorf("x is %v, last %g", x.Kind, x.Num[rows-1])
		}
		d := frameDump(t, f)
		if first == nil {
			first = d
		} else if string(d) != string(first) {
			t.Errorf("GOMAXPROCS %d gives a different frame than GOMAXPROCS 1", procs)
		}
	}
}

// TestKindDecidedOnceSmallFile: the same on the one-reader path (a small
// file), with the text label in the second batch.
func TestKindDecidedOnceSmallFile(t *testing.T) {
	var b strings.Builder
	b.WriteString("code,t\n")
	for i := 1; i <= csvBatch+5; i++ {
		code := "007"
		if i == csvBatch+3 {
			code = "B"
		}
		fmt.Fprintf(&b, "%s,%d\n", code, i%2)
	}
	f, err := ParseCSV(strings.NewReader(b.String()))
	if err != nil {
		t.Fatal(err)
	}
	c, _ := f.Column("code")
	if c.Kind != Categorical || len(c.Levels) != 2 || c.Levels[0] != "007" || c.Levels[1] != "B" {
		t.Fatalf("code: %v levels %q", c.Kind, c.Levels)
	}
}
